"""One-way margins of a crossed table: ``--by A B --margins`` adds the rows of A alone and B alone.

A margin row holds its own by-variable's level and None (shown as "All") in the others, so the
tidy schema does not change. Within each variable x statistic block the rows come in this
order: the whole population, the margins of each by-variable in ``by`` order, the crossed cells.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.estimation.results import EstimateTable

    Columns = Mapping[str, npt.NDArray[Any]]

__all__ = ["with_margins"]


def with_margins(crossed: EstimateTable, one_way: Sequence[EstimateTable]) -> EstimateTable:
    """Return *crossed* with the level rows of each one-way table in *one_way* added.

    Parameters
    ----------
    crossed : the table by every by-variable, crossed.
    one_way : one table per by-variable of *crossed*, in the same order, each by that
        variable alone (same variables, statistics and options).

    Returns
    -------
    EstimateTable
        The rows of both, ordered as the module says; design and settings of *crossed*.
    """
    from wstats.estimation.results import EstimateTable

    by = list(crossed.by)
    keeps = [np.asarray([v is not None for v in t.columns[b]], dtype=bool)
             for b, t in zip(by, one_way, strict=True)]
    parts: list[tuple[Columns, npt.NDArray[np.bool_] | None]] = [(crossed.columns, None)]
    parts += [(t.columns, k) for t, k in zip(one_way, keeps, strict=True)]
    columns = {name: _stack([_take(cols, name, keep) for cols, keep in parts])
               for name in crossed.columns}
    kind = np.concatenate([_kinds(crossed.columns, by)]
                          + [np.full(int(k.sum()), j + 1) for j, k in enumerate(keeps)])
    block = _blocks(columns)
    order = np.lexsort((np.arange(len(kind)), kind, block))
    out = {name: col[order] for name, col in columns.items()}
    return EstimateTable(out, crossed.by, crossed.level, dict(crossed.design),
                         {**crossed.settings, "margins": True})


def _take(cols: Columns, name: str, keep: npt.NDArray[np.bool_] | None
          ) -> npt.NDArray[Any]:
    """Return column *name* (all None when a one-way table lacks it), rows *keep* only."""
    n = len(next(iter(cols.values())))
    col = cols[name] if name in cols else np.full(n, None, dtype=object)
    return col if keep is None else col[keep]


def _stack(arrays: list[npt.NDArray[Any]]) -> npt.NDArray[Any]:
    """Return the arrays end to end, as objects when their types differ."""
    kinds = {a.dtype.kind for a in arrays}
    if len(kinds) > 1 or "O" in kinds:
        from wstats.estimation.results import object_column

        return object_column([x for a in arrays for x in a.tolist()])
    return np.concatenate(arrays)


def _kinds(cols: Columns, by: list[str]) -> npt.NDArray[np.int64]:
    """Return 0 for the population rows of the crossed table, len(by) + 1 for its cells."""
    population = np.asarray([v is None for v in cols[by[0]]], dtype=bool)
    return np.where(population, 0, len(by) + 1).astype(np.int64)


def _blocks(cols: Columns) -> npt.NDArray[np.int64]:
    """Return each row's variable x statistic (x p) block, numbered by first appearance."""
    keys: dict[tuple[str, str, str], int] = {}
    out = []
    for v, s, p in zip(cols["variable"].tolist(), cols["statistic"].tolist(),
                       cols["p"].tolist(), strict=True):
        key = (str(v), str(s), "" if p is None or (isinstance(p, float) and math.isnan(p))
               else repr(float(p)))
        out.append(keys.setdefault(key, len(keys)))
    return np.asarray(out, dtype=np.int64)
