"""Binding a design to data pooled from several files: the file of each row, rescaled
weights, checks that every file has the design's columns, replicate blocks.

The rules are in :mod:`wstats.design.pooling`; :func:`wstats.design.binding.bind` calls
:func:`pool_of` first (before any design column is checked row by row, so a design column
that one file lacks is named as such) and :meth:`Pool.rescale` once the weights are checked.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.design.pooling import (
    FILE_COLUMN,
    NOT_IN_FILE,
    PeriodFiles,
    file_df,
    pool_factors,
    pool_summary,
    replicate_blocks,
    warn_weight_sums,
)
from wstats.design.replicates import replicate_scale, resolve_replicate_columns
from wstats.errors import DesignError

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.decoding.columns import Dataset
    from wstats.design.bound import DeclaredDesign as Design

    Array = npt.NDArray[np.float64]
    Index = npt.NDArray[np.int64]
    Codes = npt.NDArray[np.signedinteger[Any]]
    #: (rows of one file, their stratum codes) -> that file's replicate factors
    Factors = Callable[[Array, Array, "Codes"], Array]

__all__ = ["Pool", "pool_of"]


@dataclass(frozen=True, eq=False)
class Pool:
    """The files of pooled data as binding needs them.

    Attributes
    ----------
    files : the pooled files.
    file_index : file 0..K-1 of every row of the data (all rows, before any are dropped).
    design : the declared design (its pool rule and whether PSUs are shared).
    """

    files: PeriodFiles
    file_index: Codes
    design: Design

    def rows(self, rows: Index | None) -> Codes:
        """Return the file of each row used."""
        return self.file_index if rows is None else self.file_index[rows]

    def factors(self, rows: Index | None) -> Array:
        """Return each file's weight factor from the rows used per file."""
        used = np.bincount(self.rows(rows).astype(np.int64), minlength=self.files.n_files)
        return pool_factors(self.design.pool, used.tolist())

    def rescale(self, w: Array, rows: Index | None) -> Array:
        """Return the weights times their file's factor (warning on unequal weight sums)."""
        files = self.rows(rows)
        warn_weight_sums(w, files, self.files)
        return np.asarray(w * self.factors(rows)[files], dtype=np.float64)

    def summary(self, rows: Index | None, psu: Codes, psu_stratum: Index,
                replicates: bool) -> dict[str, Any]:
        """Return the pooling as used, for the design summary (with each file's df when
        strata are per file and the variance is linearized)."""
        dfs = None
        if not (replicates or self.design.shared_psus):
            dfs = file_df(psu, psu_stratum, self.rows(rows), self.files.n_files)
        return pool_summary(self.files, self.design.pool, self.factors(rows),
                            self.design.shared_psus, dfs)

    def replicates(self, rep: Array, w: Array, rows: Index | None, stratum: Codes,
                   factors_of: Factors) -> tuple[Array, Array]:
        """Return the block replicate matrix and per-column coefficients (scale x factor).

        *rep* and *w* are the rescaled replicate and full-sample weights of the rows used.
        """
        d = self.design
        if d.replicate_center != "full":
            raise DesignError("replicates of pooled files are centred on the full-sample "
                              "estimate; drop --center-on-replicate-mean")
        files = self.rows(rows)
        n_rep = rep.shape[1]
        scale = replicate_scale(d.replicate_method or "", n_rep, d.fay_rho, d.replicate_scale)
        coef = np.empty((self.files.n_files, n_rep))
        for k in range(self.files.n_files):  # loop over files, not rows
            inside = files == k
            coef[k] = scale * factors_of(rep[inside], w[inside], stratum[inside])
        return replicate_blocks(rep, w, files, coef, self.files.n_files)


def pool_of(design: Design, data: Dataset) -> Pool | None:
    """Return the Pool of pooled *data* (None for one file), after checking its columns."""
    files = data.metadata.get("pool")
    if not isinstance(files, PeriodFiles) or FILE_COLUMN not in data.columns:
        return None
    index = (data.columns[FILE_COLUMN].values - 1).astype(np.int32)
    _check_every_file(design, data, index, files)
    return Pool(files, index, design)


def _check_every_file(design: Design, data: Dataset, index: Codes,
                      files: PeriodFiles) -> None:
    """Raise DesignError naming a design column that some file lacks."""
    if NOT_IN_FILE not in data.vocabulary.names:
        return
    code = data.vocabulary.code(NOT_IN_FILE)
    named = {design.weight: "weight", design.strata: "strata", design.psu: "psu",
             design.fpc: "fpc"}
    reps = [] if design.replicates is None else resolve_replicate_columns(
        design.replicates, list(data.columns), data.source or "the data")
    for name in [*(n for n in named if n), *reps]:
        if name not in data.columns:
            continue
        col = data.columns[name]
        absent = col.reasons == code
        if not absent.any():
            continue
        lacking = sorted({files.names[int(k)] for k in np.unique(index[absent])})
        having = [s for s in files.names if s not in lacking]
        if name in reps:
            raise DesignError(
                f"{', '.join(lacking)} has no replicate weight '{name}' but {', '.join(having)} "
                "has: replicate-weight files and strata/PSU files cannot be pooled; analyse "
                "them separately")
        raise DesignError(
            f"{named[name]} column '{name}' is not in {', '.join(lacking)} (it is in "
            f"{', '.join(having)}); every pooled file needs the design's columns")
