"""Direct age adjustment of domain means and proportions (REFERENCES §15).

Each domain's estimate becomes theta_adj = sum_a c_a theta_a over the levels a of the age
variable, with c from a standard population renormalised over the groups analysed
(:mod:`wstats.estimation.standards`), and variance c'Vc from the full covariance of the
age-specific estimates (:mod:`wstats.estimation.covariance`; the age cells of one domain
share PSUs). An age group without a valid value in a domain makes the adjusted value
undefined: an error naming the domain and the group. An age group whose estimate has SE 0
(a 0 % or 100 % cell) is flagged: the variance of the adjusted value is understated.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.errors import EstimationError, UsageError
from wstats.estimation.covariance import Covariance

if TYPE_CHECKING:
    import numpy.typing as npt

    Array = npt.NDArray[np.float64]

__all__ = ["AGE_FLAG", "AGE_FLAGS", "Adjusted", "adjust_cells", "check_age_roles",
           "check_standard_covers", "unit_label"]

#: flag of an adjusted value with a 0 % / 100 % (SE 0) age cell
AGE_FLAG = "age-cell-0-or-100"
#: flag id -> (description, source), as the reliability rules
AGE_FLAGS: dict[str, tuple[str, str]] = {
    AGE_FLAG: ("an age group's estimate is 0% or 100% (SE 0): the variance of the "
               "age-adjusted value is understated", "REFERENCES §15; Klein & Schoenborn 2001"),
}


@dataclass(frozen=True)
class Adjusted:
    """Age-adjusted values of U units (domains, or domain x level) and their covariance.

    Attributes
    ----------
    covariance : the U adjusted values and their U x U covariance.
    degenerate : (U,) True where an age cell with a positive weight has SE 0.
    empty : (U,) True where the unit has no valid value in any age group (its value NaN).
    """

    covariance: Covariance
    degenerate: npt.NDArray[np.bool_]
    empty: npt.NDArray[np.bool_]


def check_age_roles(age: str, by: Sequence[str], variables: Sequence[str],
                    by_role: str = "a by-variable", var_role: str = "estimated") -> None:
    """Refuse an age variable that also forms the groups or is itself analysed.

    Adjusting over the levels of the variable that defines a domain leaves one age group per
    domain (the other cells empty); standardising a variable over itself has no meaning.
    """
    if age in by:
        raise UsageError(f"variable '{age}' is both {by_role} and the age variable; "
                         "adjust over another variable or drop it from the groups")
    if age in variables:
        raise UsageError(f"variable '{age}' is both {var_role} and the age variable; "
                         "drop it from the variables")


def check_standard_covers(weights: Array, age_code: npt.NDArray[np.int64], inside: Any,
                          age_labels: Sequence[str], age_name: str, standard: str) -> None:
    """Refuse an age group with rows in the population that the standard gives no share.

    *age_code*: each row's age level (-1 unknown); *inside*: the population domain. Such rows
    would be left out of the adjusted value in silence.
    """
    rows = (age_code >= 0) & np.asarray(inside, dtype=bool)
    present = np.bincount(age_code[rows], minlength=len(weights)) > 0
    lost = np.flatnonzero(present & ~(weights > 0))
    if len(lost):
        raise EstimationError(
            f"age group '{age_labels[int(lost[0])]}' of {age_name} has respondents but no "
            f"share in standard '{standard}'; add it to the standard's [population] or leave "
            f"its rows out with a where condition (e.g. {age_name} != ...)")


def adjust_cells(cov: Covariance, weights: Array, unit_name: Callable[[int], str],
                 age_labels: Sequence[str], age_name: str, variable: str) -> Adjusted:
    """Return the adjusted values of units whose age-cell estimates *cov* holds unit-major.

    *cov* has U x A estimates ordered (unit, age); *weights* the A weights (0 for an age
    group the standard leaves out). A unit with some but not all weighted age cells empty
    raises EstimationError naming the unit (``unit_name(u)``) and the age group.
    """
    a = len(weights)
    est = cov.estimate.reshape(-1, a)
    used = weights > 0
    missing = np.isnan(est) & used[None, :]
    empty = np.asarray(missing[:, used].all(axis=1), dtype=bool)
    partial = np.argwhere(missing & ~empty[:, None])
    if len(partial):
        u, g = int(partial[0][0]), int(partial[0][1])
        raise EstimationError(
            f"age group '{age_labels[g]}' of {age_name} has no respondent with a valid "
            f"{variable} in {unit_name(u)}: the age-adjusted value is undefined there; group "
            "the ages more coarsely or leave that domain out")
    var = np.diag(cov.matrix).reshape(-1, a)
    degenerate = np.asarray(((var <= 0) & used[None, :]).any(axis=1) & ~empty, dtype=bool)
    # an unused (weight 0) age cell may be NaN: a zero coefficient does not carry it
    out = cov.transform(np.kron(np.eye(est.shape[0]), weights[None, :]))
    return Adjusted(out, degenerate, empty)


def unit_label(by: Sequence[str], levels: Sequence[tuple[Sequence[Any], Sequence[Any]]]
               ) -> Callable[[int], str]:
    """Return a function naming by-cell *u* (0 = the whole population) for messages."""
    sizes = [max(len(v), 1) for v, _ in levels]

    def name(u: int) -> str:
        if u == 0 or not by:
            return "the whole population"
        idx = np.unravel_index(u - 1, sizes)
        return "domain " + ", ".join(f"{b} = {levels[k][1][int(idx[k])]}"
                                     for k, b in enumerate(by))

    return name
