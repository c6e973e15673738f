"""Standard populations for direct age adjustment (REFERENCES §15).

The age-adjusted value of a domain is theta_adj = sum_a c_a theta_a over the age groups a,
c_a = P_a / sum_b P_b with P the standard population renormalised over the groups analysed;
its variance is c'Vc with the full covariance of the age-specific estimates (their domains
share PSUs: the sum of c_a^2 v_a is right only for independent groups).

Built-in standards (name: groups, source):

- ``us2000-11``: the year-2000 U.S. standard population in 11 age groups, <1 to 85+, with
  the weights printed by Anderson & Rosenberg (1998), Age standardization of death rates:
  implementation of the year 2000 standard, NVSR 47(3), Table I. The 75-84 weight is printed
  0.044842, rounded up so that the printed weights total 1 (the quotient is 0.044841); the
  printed weights are used.
- ``us2000-adults18``: 18-44 / 45-64 / 65+ of the same population (thousands 108,150 /
  60,991 / 34,710; the 18-24 count of 26,258 thousand is from memory), as in Klein &
  Schoenborn (2001), Age adjustment using the 2000 projected U.S. population, Healthy People
  2010 Statistical Notes No. 20, NCHS.
- ``us2000-adults20``: 20-39 / 40-59 / 60+ (thousands 77,670 / 72,816 / 45,364 of 195,850),
  the grouping NCHS data briefs use for adult prevalence (the 20-39 count as the NHANES
  tutorial prints it; the other two from memory).

A standard file (TOML) gives any other: ``name = "..."``, ``source = "..."`` and a
``[population]`` table whose keys are the age variable's codes as strings and whose values
are population counts or shares (``"1" = 77670``). A built-in standard is matched to the age
variable's levels by the groups' names when the labels are those names, else in ascending
order of the numeric codes (the number of levels must equal the number of groups).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.errors import EstimationError, UsageError, did_you_mean

if TYPE_CHECKING:
    import numpy.typing as npt

    Array = npt.NDArray[np.float64]

__all__ = ["STANDARDS", "Standard", "adjustment_weights", "load_standard",
           "standard_from_mapping"]


@dataclass(frozen=True)
class Standard:
    """A standard population.

    Attributes
    ----------
    name : short name shown as "age-adjusted (standard NAME)".
    source : where the numbers come from.
    groups : the age groups' labels (built-ins) or the age variable's codes (a file).
    population : counts or shares of the groups, in the order of *groups*.
    by_code : True when *groups* are codes of the age variable (a file), False when the
        groups are matched to the variable's levels in order (built-ins).
    """

    name: str
    source: str
    groups: tuple[str, ...]
    population: tuple[float, ...]
    by_code: bool = False

    @property
    def shares(self) -> Array:
        """The groups' shares of the standard population (summing to 1)."""
        p = np.asarray(self.population, dtype=np.float64)
        return np.asarray(p / p.sum())


_AR1998 = ("Anderson & Rosenberg (1998), Age standardization of death rates: implementation "
           "of the year 2000 standard, NVSR 47(3), Table I")
_KS2001 = ("Klein & Schoenborn (2001), Age adjustment using the 2000 projected U.S. "
           "population, Healthy People 2010 Statistical Notes No. 20, NCHS")

#: built-in standards by name
STANDARDS: dict[str, Standard] = {
    "us2000-11": Standard(
        "us2000-11", _AR1998 + " (printed weights; 75-84 printed 0.044842)",
        ("<1", "1-4", "5-14", "15-24", "25-34", "35-44", "45-54", "55-64", "65-74", "75-84",
         "85+"),
        (0.013818, 0.055317, 0.145565, 0.138646, 0.135573, 0.162613, 0.134834, 0.087247,
         0.066037, 0.044842, 0.015508)),
    "us2000-adults18": Standard(
        "us2000-adults18", _KS2001 + "; counts (thousands) from " + _AR1998,
        ("18-44", "45-64", "65+"), (108_150.0, 60_991.0, 34_710.0)),
    "us2000-adults20": Standard(
        "us2000-adults20", _KS2001 + "; grouping of NCHS adult prevalence briefs",
        ("20-39", "40-59", "60+"), (77_670.0, 72_816.0, 45_364.0)),
}


def load_standard(spec: str) -> Standard:
    """Return the built-in standard named *spec*, or the standard of the TOML file *spec*."""
    if spec in STANDARDS:
        return STANDARDS[spec]
    if not spec.endswith(".toml"):
        raise UsageError(
            f"standard population '{spec}' is not one of {', '.join(STANDARDS)}"
            f"{did_you_mean(spec, STANDARDS)}; or give a .toml standard file")
    return _read_file(Path(spec))


def _read_file(path: Path) -> Standard:
    """Read and check a standard file (one-line errors naming the file)."""
    import tomllib

    try:
        with path.open("rb") as fh:
            doc = tomllib.load(fh)
    except FileNotFoundError:
        raise UsageError(f"standard file {path} does not exist; check the path") from None
    except (OSError, tomllib.TOMLDecodeError) as exc:
        raise UsageError(f"standard file {path} cannot be read: {exc}") from exc
    return standard_from_mapping(doc, f"standard file {path}")


#: the keys of a standard file (or of an inline standard in a table spec)
_KEYS = ("name", "source", "population")


def standard_from_mapping(doc: Mapping[str, Any], origin: str) -> Standard:
    """Return the standard a parsed TOML table describes (a file, or inline in a spec).

    *origin* starts the one-line message of a mistake (e.g. ``standard file x.toml``).
    """
    unknown = [k for k in doc if k not in _KEYS]
    if unknown:
        raise UsageError(f"{origin}: unknown key '{unknown[0]}'; the keys are "
                         f"{', '.join(_KEYS)}{did_you_mean(unknown[0], _KEYS)}")
    pop = doc.get("population")
    name, source = doc.get("name"), doc.get("source")
    if not isinstance(name, str) or not isinstance(source, str) or not name:
        raise UsageError(f"{origin}: give name = \"...\" and source = \"...\"")
    if not isinstance(pop, dict) or not pop:
        raise UsageError(f"{origin}: give a [population] table, e.g. \"1\" = 77670")
    values = list(pop.values())
    if not all(isinstance(v, int | float) and not isinstance(v, bool) and v > 0
               for v in values):
        raise UsageError(f"{origin}: every population value must be a positive count or share")
    return Standard(name, source, tuple(str(k) for k in pop), tuple(float(v) for v in values),
                    by_code=True)


def adjustment_weights(standard: Standard, codes: Sequence[Any], labels: Sequence[str],
                       age_name: str) -> Array:
    """Return the weight c_a of each level of the age variable (0: not in the standard).

    *codes*/*labels*: the age variable's levels. A file's groups are its codes; a built-in
    standard's groups are matched by name, else in ascending code order (:func:`_in_age_order`).
    The weights of the groups found
    are renormalised to sum to 1.
    """
    if standard.by_code:
        keys = [_code_text(c) for c in codes]
        missing = [g for g in standard.groups if g not in keys]
        if missing:
            raise EstimationError(
                f"standard '{standard.name}' has group '{missing[0]}', which is not a code of "
                f"{age_name} (codes: {_listed(keys)}); fix the [population] keys")
        share = dict(zip(standard.groups, standard.shares.tolist(), strict=True))
        c = np.array([share.get(k, 0.0) for k in keys])
    else:
        if len(codes) != len(standard.groups):
            raise EstimationError(
                f"standard '{standard.name}' has {len(standard.groups)} age groups "
                f"({', '.join(standard.groups)}) but {age_name} has {len(codes)} levels "
                f"({_listed(list(map(str, labels)))}); group the ages into these classes (a "
                f"categorical [derived] variable) or give a standard file for {age_name}'s codes")
        c = _in_age_order(standard, codes, labels, age_name)
    return np.asarray(c / c.sum())


def _in_age_order(standard: Standard, codes: Sequence[Any], labels: Sequence[str],
                  age_name: str) -> Array:
    """Return a built-in standard's shares per level: by group name, else by code order.

    Levels are listed in the codebook's label order, which need not be age order; numeric
    codes are taken in ascending order (age groups are coded youngest first). Text levels
    must carry the groups' names, as text has no age order ("5-14" sorts after "15-24").
    """
    shares = standard.shares
    names = [str(x).strip() for x in labels]
    if sorted(names) == sorted(standard.groups):
        return np.array([shares[standard.groups.index(n)] for n in names])
    if not all(isinstance(v, int | float) for v in codes):
        raise EstimationError(
            f"{age_name} has text levels ({_listed(names)}) that cannot be put in age order; "
            f"label them as the groups of standard '{standard.name}' "
            f"({', '.join(standard.groups)}) or code them with numbers, youngest first")
    out = np.empty(len(codes))
    out[np.argsort(np.asarray(codes, dtype=np.float64), kind="stable")] = shares
    return out


def _listed(items: Sequence[str], most: int = 12) -> str:
    """Return *items* joined by commas, the middle elided when there are more than *most*."""
    if len(items) <= most:
        return ", ".join(items)
    return ", ".join([*items[: most - 2], "...", *items[-1:]])


def _code_text(code: Any) -> str:
    """Return a level code as a standard file writes it: ``3`` for 3.0."""
    if isinstance(code, float) and code.is_integer():
        return str(int(code))
    return str(code)
