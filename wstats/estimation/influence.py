"""Influences of the usual statistics of one variable, for :mod:`.covariance`.

Means, proportions of every level, totals and ratios per domain, with the conventions
of :mod:`wstats.estimation.statistics` (a row counts when its value is valid; rows outside a
domain or not valid add zero; the full design is kept), so the covariance's diagonal is the
variance the estimate table reports. Value columns are made tile by tile (no array per level
per row) under linearization.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.errors import EstimationError
from wstats.estimation.covariance import Influence, ratio_influence, total_influence
from wstats.estimation.levels import category_levels, level_index
from wstats.estimation.sums import WeightedSums

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.decoding.columns import Dataset, DecodedColumn
    from wstats.design.bound import BoundDesign
    from wstats.design.declared import Design

    Index = npt.NDArray[np.int64]

__all__ = ["DomainSums", "domain_sums", "indicator_influence", "level_codes", "mean_influence",
           "proportion_influence", "ratio_of_influence", "total_of_influence"]


@dataclass(frozen=True, eq=False)
class DomainSums:
    """A bound design, its weighted-sums engine over the by-cells, and the cells' levels.

    Attributes
    ----------
    bound : the design bound to the data.
    sums : weighted sums by (PSU, domain); domain 0 is the population, 1.. the by-cells.
    levels : per by-variable, its level values and the labels shown.
    """

    bound: BoundDesign
    sums: WeightedSums
    levels: list[tuple[list[Any], list[Any]]]

    def column(self, data: Dataset, name: str) -> DecodedColumn:
        """Return the column *name* restricted to the rows the design uses."""
        return self.bound.column(data.columns[name])


def domain_sums(data: Dataset, design: Design, by: Sequence[str], where: str | None = None
                ) -> DomainSums:
    """Bind *design* and build the weighted sums over the crossed levels of *by*.

    Domains as :func:`wstats.estimate` makes them (population first, then the by-cells in
    row-major order of the levels), so a cell's domain number is its cell number + 1.
    """
    from wstats.estimation.domain_setup import build_domains, check_names

    check_names(data, list(by))
    bound = design.bind(data)
    domains, levels = build_domains(data, bound, list(by), where)
    return DomainSums(bound, WeightedSums(bound, domains), levels)


def _numbers(col: DecodedColumn, statistic: str) -> npt.NDArray[np.float64]:
    """Return the values of a number column (NaN where not valid); text is an error."""
    if col.values.dtype.kind != "f":
        raise EstimationError(
            f"variable '{col.name}' holds text; a {statistic} needs numbers (compare its "
            "levels as a categorical variable)")
    return np.asarray(col.values, dtype=np.float64)


def mean_influence(sums: WeightedSums, col: DecodedColumn) -> Influence:
    """Return the influence of the domain means of *col* (one column)."""
    values = _numbers(col, "mean")

    def parts(rows: Any) -> list[Any]:
        v = values[rows]
        ok = ~np.isnan(v)
        return [np.where(ok, v, 0.0), ok]

    return ratio_influence(sums, parts, 1)


def total_of_influence(sums: WeightedSums, col: DecodedColumn) -> Influence:
    """Return the influence of the domain totals of *col* over its valid rows."""
    values = _numbers(col, "total")
    return total_influence(sums, lambda rows: [np.nan_to_num(values[rows], nan=0.0)], 1)


def ratio_of_influence(sums: WeightedSums, num: DecodedColumn, den: DecodedColumn
                       ) -> Influence:
    """Return the influence of the domain ratios sum w y / sum w x (both valid)."""
    y, x = _numbers(num, "ratio"), _numbers(den, "ratio")

    def parts(rows: Any) -> list[Any]:
        yr, xr = y[rows], x[rows]
        both = ~(np.isnan(yr) | np.isnan(xr))
        return [np.where(both, yr, 0.0), np.where(both, xr, 0.0)]

    return ratio_influence(sums, parts, 1)


def level_codes(col: DecodedColumn) -> tuple[list[Any], list[str], Index]:
    """Return the levels of a categorical column, their labels and each row's level (-1)."""
    values, labels = category_levels(col)
    return values, labels, level_index(col, values, col.valid)


def indicator_influence(sums: WeightedSums, code: Index, n_codes: int, among: Any = None
                        ) -> Influence:
    """Return the influence of the shares of codes 0..n_codes-1 among rows with a code >= 0.

    *among* (a boolean array or None) further restricts the rows that count.
    """
    def parts(rows: Any) -> list[Any]:
        c = code[rows]
        if among is not None:
            c = np.where(among[rows], c, -1)
        return [*(c == j for j in range(n_codes)), c >= 0]  # loop over codes only

    return ratio_influence(sums, parts, n_codes)


def proportion_influence(sums: WeightedSums, col: DecodedColumn
                         ) -> tuple[list[str], Influence]:
    """Return the level labels of *col* and the influence of their domain proportions."""
    _, labels, code = level_codes(col)
    return labels, indicator_influence(sums, code, len(labels))
