"""Item nonresponse: why values are missing, by reason and domain, and what it could change.

:func:`nonresponse` breaks every item down by missing reason (unweighted counts, weighted shares)
and gives its item nonresponse rate among the respondents who were asked, with a design-based
standard error and interval. :func:`wstats.reports.bounds.bounds` gives worst-case (Manski-style)
intervals for the proportions of a categorical item if the don't-know and refused answers had been
given.

Both reuse the estimation engine rather than a second copy of the domain and variance code: they
build indicator columns (one per item, valid exactly on the rows that form the denominator) and
estimate proportions of them with :func:`wstats.estimation.estimate.estimate`, so the domains,
degrees of freedom, replicate weights and Korn-Graubard intervals are the same ones the estimates
use. Counts and weighted shares by reason are one ``bincount`` per item over the engine's own
domains (population row first, then the crossed by-cells).

Conventions (each changes numbers; see ``docs/nonresponse.md``):

- Asked = every row of the domain whose reason is not ``skipped`` (legitimate skip / not in
  the item's universe) nor another reason in ``not_asked`` (default
  :data:`~wstats.decoding.reasons.NOT_ASKED`: ``skipped`` and ``not_applicable``; a caller's list
  replaces it, ``skipped`` always stays). NCES Statistical Standards, Standard 1-3: item
  response rate = responses / (unit respondents - legitimate skips).
- Nonresponse = ``dont_know``, ``refused``, ``missing`` and every reason a codebook or file
  added (unless named in ``not_asked``); plus ``invalid`` when ``count_invalid`` (the
  default). With ``count_invalid=False`` an invalid answer counts as an answer (it is in the
  denominator, not in the numerator).
- Weighted with the design's final analysis weight (NCES uses base weights; say so when it
  matters). Rows the design drops (``drop_incomplete``) are not counted.
- Shares are weighted shares among ALL rows of the domain (skipped included); they sum to 1.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.columns import Dataset, DecodedColumn, require_dataset
from wstats.decoding.reasons import NOT_ASKED, VALID
from wstats.errors import EstimationError
from wstats.estimation.reliability import NONRESPONSE_RULES
from wstats.estimation.results import _plain
from wstats.readers.display import as_html, as_text

if TYPE_CHECKING:
    import numpy.typing as npt
    import pandas as pd

    from wstats.decoding.codebook import Codebook
    from wstats.design.declared import Design
    from wstats.estimation.results import EstimateTable

__all__ = ["NCES_MIN_RESPONSE", "NONRESPONSE_RULES", "NonresponseTable",
           "nonresponse", "nonresponse_reasons"]

#: NCES Statistical Standards, Standard 1-3: report (analyse) items whose response rate is
#: below this.
NCES_MIN_RESPONSE = 0.70
# Suffixes of the indicator columns; ':' cannot occur in a codebook or file variable name.
_RATE, _UNKNOWN = ":nonresponse", ":unknown"


@dataclass(frozen=True, eq=False)
class NonresponseTable:
    """Item nonresponse by reason, per variable and domain.

    Attributes
    ----------
    frame : one row per variable x domain (population first, then the by-cells), columns
        ``variable``, the by-variables (level shown; None on the population row), ``n_rows``
        (rows in the domain), ``asked`` (rows not ``skipped`` nor of another ``not_asked``
        reason), ``count_<reason>`` (unweighted
        rows per reason, every reason of the vocabulary), ``share_<reason>`` (weighted share
        among all domain rows; NaN in an empty domain), ``nonresponse_rate`` (weighted share
        of the asked rows that did not answer; NaN when none was asked), ``se``, ``ci_low``,
        ``ci_high`` (design-based, Korn-Graubard at ``level``), ``df``, ``flags`` (tuple of
        ids of :data:`NONRESPONSE_RULES`).
    by : the by-variables, in the order given.
    reasons : every reason name of the vocabulary, in code order.
    level : confidence level of the intervals.
    design : the design summary (``BoundDesign.summary()``).
    settings : the definition used (``nonresponse_reasons``, ``count_invalid``,
        ``denominator``, ``weight``, ``proportion_ci``, ``level``, ``definition``, ``title``).
    """

    frame: pd.DataFrame
    by: tuple[str, ...] = ()
    reasons: tuple[str, ...] = ()
    level: float = 0.95
    design: Mapping[str, Any] = field(default_factory=dict)
    settings: Mapping[str, Any] = field(default_factory=dict)

    def __repr__(self) -> str:
        """Show the table as the terminal does, with its design line."""
        return as_text(self, f"NonresponseTable({len(self.frame)} rows; variables "
                             f"{sorted(set(self.frame['variable']))})")

    def _repr_html_(self) -> str | None:
        """Show the table as the ``--format html`` renderer does (notebooks)."""
        return as_html(self)

    def showing_shares(self) -> NonresponseTable:
        """Return the same table set to display weighted shares instead of row counts."""
        import dataclasses

        return dataclasses.replace(self, settings={**self.settings, "display": "shares"})

    def to_pandas(self) -> pd.DataFrame:
        """Return a copy of the frame."""
        return self.frame.copy()

    def records(self) -> list[dict[str, Any]]:
        """Return JSON-ready rows: ``variable``, ``group``, counts and shares by reason, rate.

        Returns
        -------
        list of dict
            Keys ``variable``, ``group`` (by-variable -> level, None for the population),
            ``n_rows``, ``asked``, ``counts`` {reason: n}, ``weighted_shares`` {reason: share},
            ``nonresponse_rate``, ``response_rate``, ``se``, ``ci_low``, ``ci_high``, ``df``,
            ``flags``. NaN becomes None, an infinite df the string ``"inf"``.
        """
        out: list[dict[str, Any]] = []
        for row in self.frame.to_dict(orient="records"):
            group = {b: _plain(row[b]) for b in self.by}
            rate = _plain(row["nonresponse_rate"])
            df = _plain(row["df"])
            out.append({
                "variable": row["variable"],
                "group": None if all(v is None for v in group.values()) else group,
                "n_rows": int(row["n_rows"]),
                "asked": int(row["asked"]),
                "counts": {r: int(row[f"count_{r}"]) for r in self.reasons},
                "weighted_shares": {r: _plain(row[f"share_{r}"]) for r in self.reasons},
                "nonresponse_rate": rate,
                "response_rate": None if rate is None else 1.0 - rate,
                "se": _plain(row["se"]),
                "ci_low": _plain(row["ci_low"]),
                "ci_high": _plain(row["ci_high"]),
                "df": "inf" if isinstance(df, float) and np.isinf(df) else df,
                "flags": list(row["flags"]),
            })
        return out


def nonresponse_reasons(data: Dataset, count_invalid: bool = True,
                        not_asked: Sequence[str] = NOT_ASKED) -> tuple[str, ...]:
    """Return the reasons counted as item nonresponse for *data*'s vocabulary.

    Parameters
    ----------
    data : the dataset (its vocabulary may hold reasons a codebook or file added).
    count_invalid : count ``invalid`` (out-of-range) answers as nonresponse.
    not_asked : reasons meaning the item was not asked (out of the denominator).

    Returns
    -------
    tuple of str
        Every reason except ``valid`` and the *not_asked* ones (and ``invalid`` unless
        counted).

    Examples
    --------
    >>> nonresponse_reasons(Dataset.from_arrays({"x": [1.0]}), count_invalid=False)
    ('dont_know', 'refused', 'missing')
    """
    drop = {"valid", *not_asked} | (set() if count_invalid else {"invalid"})
    return tuple(r for r in data.vocabulary.names if r not in drop)


def nonresponse(
    data: Dataset | str | Path | Sequence[str | Path],
    design: Design,
    variables: Sequence[str],
    *,
    by: Sequence[str] = (),
    where: str | None = None,
    level: float = 0.95,
    count_invalid: bool = True,
    sort_worst: bool = False,
    not_asked: Sequence[str] = NOT_ASKED,
    engine: str = "memory",
    codebook: Codebook | str | Path | None = None,
    scheduler: str | None = None,
) -> NonresponseTable:
    """Count missing values by reason and estimate item nonresponse rates.

    Parameters
    ----------
    data : decoded dataset, or the data files (several are pooled; read with *codebook*).
    design : the sample design (weights, strata, PSUs or replicates).
    variables : items to break down.
    by : variables whose crossed levels form domains (the population row comes first).
    where : condition (codebook expression language) defining the population domain.
    level : confidence level of the rate's interval.
    count_invalid : count ``invalid`` answers as nonresponse (default) or as answers.
    sort_worst : order the variables by their population nonresponse rate, highest first
        (domains stay under their variable).
    not_asked : reasons that mean the item was not asked (out of its universe): left out of
        the denominator like ``skipped``, which is always among them. Default: ``skipped``
        and ``not_applicable``; a list given replaces it (``("skipped",)`` counts
        ``not_applicable`` as nonresponse).
    engine : ``memory`` (default), or ``dask``: *data* are then the data files (a path, a
        glob, a folder or a list), read with *codebook* partition by partition on a Dask
        cluster (*scheduler*: a running one; None: a local cluster for the call).

    Returns
    -------
    NonresponseTable

    Raises
    ------
    ColumnError, EstimationError, DesignError
        For an unknown variable, a bad level or condition, or an unusable design.

    Examples
    --------
    >>> from wstats.design.declared import Design
    >>> ds = Dataset.from_arrays({"y": [1.0, float("nan"), 3.0, 4.0], "w": [1.0] * 4})
    >>> t = nonresponse(ds, Design("w"), ["y"])
    >>> float(t.frame["nonresponse_rate"][0])
    0.25
    """
    if not isinstance(data, Dataset | str | Path | list | tuple):
        require_dataset(data, "nonresponse")  # e.g. a pandas frame: say how to wrap it
    from wstats.estimation.estimate import estimate
    from wstats.estimation.reliability import STANDARDS

    if engine == "dask":
        return _on_dask(data, design, variables, by=by, where=where, level=level,
                        count_invalid=count_invalid, sort_worst=sort_worst,
                        not_asked=not_asked, codebook=codebook, scheduler=scheduler)
    if engine != "memory":
        raise EstimationError(f"engine '{engine}' is not one of memory, dask")
    if not isinstance(data, Dataset):
        from wstats.estimation.estimate import _read_files

        data = _read_files(data, design, [*variables, *by], where, codebook)
    names = _check_variables(data, variables)
    # a default reason the data never met is left out; a name the caller gave must exist
    skip = tuple(r for r in dict.fromkeys(("skipped", *not_asked))
                 if r in data.vocabulary or r not in NOT_ASKED)
    counted = nonresponse_reasons(data, count_invalid, skip)
    codes = np.array([data.vocabulary.code(r) for r in counted], dtype=np.int8)
    skip_codes = np.array([data.vocabulary.code(r) for r in skip], dtype=np.int8)
    extra = {f"{v}{_RATE}": _rate_column(data[v], codes, skip_codes) for v in names}
    aug = _augmented(data, extra)
    est = estimate(aug, design, list(extra), statistics="proportion", by=by, where=where,
                   level=level, reliability=STANDARDS["none"])
    sums = _reason_sums(data, design, names, by, where)
    frame = _assemble(est, sums, data.vocabulary.names, by, skip_codes)
    if sort_worst:
        frame = _worst_first(frame, names)
    settings = _settings(counted, skip, count_invalid, est, design)
    return NonresponseTable(frame, tuple(by), data.vocabulary.names, est.level, est.design,
                            settings)


def _on_dask(data: Dataset | str | Path | Sequence[str | Path], design: Design,
             variables: Sequence[str], *, by: Sequence[str], where: str | None, level: float,
             count_invalid: bool, sort_worst: bool, not_asked: Sequence[str],
             codebook: Codebook | str | Path | None, scheduler: str | None
             ) -> NonresponseTable:
    """Return the table from parts summed on the Dask engine (the same assembly)."""
    from wstats.reports.nonresponse_dask import dask_parts

    if isinstance(data, Dataset):
        raise EstimationError("engine 'dask' reads the data files itself; give their paths "
                              "(and codebook=...), not a Dataset")
    names = list(dict.fromkeys(variables))
    skip = tuple(dict.fromkeys(("skipped", *not_asked)))
    parts = dask_parts(data, design, names, _RATE, by=by, where=where, level=level,
                       count_invalid=count_invalid, skip=skip, codebook=codebook,
                       scheduler=scheduler)
    frame = _assemble(parts.est, parts.sums, parts.reasons, by, parts.skip_codes)
    if sort_worst:
        frame = _worst_first(frame, names)
    settings = {**_settings(parts.counted, parts.skip, count_invalid, parts.est, design),
                "engine": "dask"}
    return NonresponseTable(frame, tuple(by), parts.reasons, parts.est.level,
                            parts.est.design, settings)


def _check_variables(data: Dataset, variables: Sequence[str]) -> list[str]:
    """Return the variable names after checking they are in *data* (ColumnError otherwise)."""
    names = list(dict.fromkeys(variables))
    if not names:
        raise EstimationError("no variables given; name at least one item")
    for v in names:
        data[v]  # raises ColumnError with a suggestion
    return names


def _indicator(col: DecodedColumn, name: str, ones: npt.NDArray[np.bool_],
               valid: npt.NDArray[np.bool_], labels: dict[float, str]) -> DecodedColumn:
    """Return a binary column: 1.0 where *ones*, 0.0 elsewhere, valid only where *valid*."""
    values = np.where(valid, ones.astype(np.float64), np.nan)
    reasons = np.where(valid, VALID, col.reasons).astype(np.int8)
    return DecodedColumn(name, values, reasons, col.vocabulary, kind="binary",
                         value_labels=labels)


def _rate_column(col: DecodedColumn, counted: npt.NDArray[np.int8],
                 skip: npt.NDArray[np.int8]) -> DecodedColumn:
    """Return the nonresponse indicator of one item: valid where asked, 1 = did not answer."""
    r = col.reasons
    return _indicator(col, f"{col.name}{_RATE}", np.isin(r, counted), ~np.isin(r, skip),
                      {0.0: "answered", 1.0: "nonresponse"})


def _reason_sums(data: Dataset, design: Design, names: list[str], by: Sequence[str],
                 where: str | None) -> dict[str, tuple[npt.NDArray[np.int64],
                                                       npt.NDArray[np.float64]]]:
    """Return per item the (domains x reasons) row counts and sums of weights.

    The domains are the estimation engine's own (same rows, same order as its estimates):
    row 0 the population, then the crossed by-cells.
    """
    from wstats.estimation.domain_setup import build_domains as _domains

    bound = design.bind(data)
    domains, _ = _domains(data, bound, list(by), where)
    k, w = len(data.vocabulary), bound.weights
    inside, in_cell = domains.inside, domains.cell >= 0
    size = (domains.n_cells + 1) * k
    out: dict[str, tuple[npt.NDArray[np.int64], npt.NDArray[np.float64]]] = {}
    for v in names:  # loop over variables; rows and domains are one bincount
        r = bound.column(data[v]).reasons.astype(np.int64)
        key = np.concatenate([r[inside], (domains.cell[in_cell] + 1) * k + r[in_cell]])
        wts = np.concatenate([w[inside], w[in_cell]])
        counts = np.bincount(key, minlength=size).reshape(-1, k).astype(np.int64)
        weighted = np.bincount(key, wts, size).reshape(-1, k).astype(np.float64)
        out[v] = (counts, weighted)
    return out


def _augmented(data: Dataset, extra: Mapping[str, DecodedColumn]) -> Dataset:
    """Return *data* with the indicator columns added (the original columns are shared)."""
    return replace(data, columns={**data.columns, **extra})


def _rows(est: EstimateTable, variable: str, level: str | None = None) -> pd.DataFrame:
    """Return the estimate rows of *variable* (and *level*), in domain order."""
    f = est.frame
    mask = f["variable"] == variable
    if level is not None:
        mask &= f["level"] == level
    return f.loc[mask].reset_index(drop=True)


def _assemble(est: EstimateTable, sums: Mapping[str, tuple[npt.NDArray[np.int64],
                                                           npt.NDArray[np.float64]]],
              reason_names: Sequence[str], by: Sequence[str],
              skip: npt.NDArray[np.int8]) -> pd.DataFrame:
    """Return the nonresponse frame: counts, shares and the rate, a block per variable."""
    import pandas as pd

    blocks = []
    for v, (counts, weighted) in sums.items():
        rate = _rows(est, f"{v}{_RATE}", "nonresponse")
        out: dict[str, Any] = {"variable": [v] * len(rate)}
        out.update({b: rate[b].to_numpy() for b in by})
        out["n_rows"] = counts.sum(axis=1)
        out["asked"] = out["n_rows"] - counts[:, skip].sum(axis=1)
        out.update({f"count_{r}": counts[:, i] for i, r in enumerate(reason_names)})
        total = weighted.sum(axis=1, keepdims=True)
        with np.errstate(divide="ignore", invalid="ignore"):
            share = np.where(total > 0, weighted / total, np.nan)
        out.update({f"share_{r}": share[:, i] for i, r in enumerate(reason_names)})
        out["nonresponse_rate"] = rate["estimate"].to_numpy(dtype=np.float64)
        for c in ("se", "ci_low", "ci_high", "df"):
            out[c] = rate[c].to_numpy(dtype=np.float64)
        out["flags"] = _flags(out["nonresponse_rate"], out["asked"])
        blocks.append(pd.DataFrame(out))
    return pd.concat(blocks, ignore_index=True)


def _flags(rate: npt.NDArray[np.float64], asked: npt.NDArray[np.int64]) -> list[tuple[str, ...]]:
    """Return per row the ids of NONRESPONSE_RULES that fire."""
    low = np.nan_to_num(1.0 - rate, nan=1.0) < NCES_MIN_RESPONSE
    none = asked == 0
    return [("response<70%",) if a else ("none-asked",) if b else ()
            for a, b in zip(low.tolist(), none.tolist(), strict=True)]


def _worst_first(frame: pd.DataFrame, names: list[str]) -> pd.DataFrame:
    """Return *frame* with variable blocks ordered by the population rate, highest first."""
    first = frame.groupby("variable", sort=False)["nonresponse_rate"].first()
    keyed = sorted(names, key=lambda v: (np.isnan(first[v]), -np.nan_to_num(first[v])))
    order = {v: i for i, v in enumerate(keyed)}
    rank = frame["variable"].map(order)
    return frame.iloc[np.argsort(rank.to_numpy(), kind="stable")].reset_index(drop=True)


def _settings(counted: tuple[str, ...], skip: tuple[str, ...], count_invalid: bool,
              est: EstimateTable, design: Design) -> dict[str, Any]:
    """Return the settings record: which reasons were counted, denominator and weight."""
    listed = ", ".join(counted)
    skipped = ", ".join(f"'{r}'" for r in skip)
    definition = (f"Item nonresponse rate: weighted share of the rows asked (all but {skipped}) "
                  f"whose reason is {listed}; weight {design.weight}; Korn-Graubard "
                  f"{est.level:.0%} interval.")
    return {"nonresponse_reasons": list(counted), "count_invalid": count_invalid,
            "not_asked": list(skip), "denominator": f"asked (not {', '.join(skip)})",
            "weight": design.weight,
            "proportion_ci": "korn-graubard", "level": est.level, "df_rule":
            est.settings.get("df_rule"), "df_range": est.settings.get("df_range"),
            "where": est.settings.get("where"), "definition": definition,
            "title": "Item nonresponse", "threshold": NCES_MIN_RESPONSE}


