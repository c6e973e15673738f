"""Setting up the domains of an estimate: names checked, by-cells built.

Domains: the population domain is every row where ``where`` is valid and non-zero (all rows
without ``where``); the by-cells are the full product of the levels of the ``by`` variables in
label order (codebook/file value labels, then unlabelled observed values). Shared by
:func:`wstats.estimate` and the covariance engine's callers (comparisons, age adjustment).
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.reasons import VALID
from wstats.errors import EstimationError, WstatsWarning, did_you_mean
from wstats.estimation.domains import Domains, empty_where_note, no_cell
from wstats.estimation.levels import category_levels, level_index

if TYPE_CHECKING:
    from collections.abc import Sequence

    import numpy.typing as npt

    from wstats.decoding.columns import Dataset, DecodedColumn
    from wstats.design.bound import BoundDesign

    Index = npt.NDArray[np.int64]
    Bool = npt.NDArray[np.bool_]

__all__ = ["MAX_CELLS", "build_domains", "check_names", "cross", "levels_of"]

MAX_CELLS = 10_000  # crossed by-cells allowed in one call


def check_names(data: Dataset, names: Sequence[str]) -> None:
    """Raise EstimationError naming the first variable that is not in *data*."""
    for name in names:
        if name not in data.columns:
            where = f" in {data.source}" if data.source else " in the data"
            raise EstimationError(
                f"variable '{name}' is not{where}{did_you_mean(name, data.columns)}"
            )


def build_domains(data: Dataset, bound: BoundDesign, by: list[str], where: str | None
             ) -> tuple[Domains, list[tuple[list[Any], list[Any]]]]:
    """Return the domain membership and, per by-variable, its (values, display values)."""
    inside: Bool = np.broadcast_to(np.True_, (bound.n_rows,))  # read-only, no memory per row
    if where is not None:
        from wstats.decoding.expressions import parse_expression

        expr = parse_expression(where, list(data.columns), "where")
        values, reasons = expr.evaluate(data.columns, data.vocabulary, data.n_rows)
        ok = (reasons == VALID) & (np.nan_to_num(values, nan=0.0) != 0)
        inside = ok if bound.rows is None else ok[bound.rows]
        if not inside.any():  # a legitimate, empty answer: say so (and why, if we can)
            warnings.warn(empty_where_note(where, expr, data), WstatsWarning, stacklevel=3)
    parts = [levels_of(bound.column(data.columns[name])) for name in by]
    levels = [lv for _, lv in parts]
    return cross(inside, [c for c, _ in parts], levels, by), levels


def levels_of(col: DecodedColumn) -> tuple[Index, tuple[list[Any], list[Any]]]:
    """Return a by-variable's level code per row (-1: none) and its (values, display values)."""
    lv, labels = category_levels(col)
    display = [lab if v in col.value_labels else _plain(v)
               for v, lab in zip(lv, labels, strict=True)]
    return level_index(col, lv, col.valid), (lv, display)


def cross(inside: Bool, codes: list[Index], levels: list[tuple[list[Any], list[Any]]],
          by: Sequence[str]) -> Domains:
    """Return the domains of the by-variables' levels crossed (both engines use it)."""
    sizes = [len(v) for v, _ in levels]
    if int(np.prod(sizes)) > MAX_CELLS:
        raise EstimationError(
            f"the by-variables {', '.join(by)} cross into {int(np.prod(sizes))} cells (limit "
            f"{MAX_CELLS}); group a continuous by-variable into classes first"
        )
    if any(s == 0 for s in sizes):
        return Domains(inside, no_cell(len(inside)), 0)
    return Domains.build(inside, codes, sizes)


def _plain(v: Any) -> Any:
    """Return an integral float as int (a level shown as 3, not 3.0), else the value."""
    if isinstance(v, float) and v.is_integer():
        return int(v)
    return v

