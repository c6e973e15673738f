"""Per-variable parts of the summed engine: category levels and replicate variances.

Used by :mod:`wstats.estimation.dask_engine` on the total of every partition's sums.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.columns import DecodedColumn
from wstats.decoding.reasons import Reasons
from wstats.estimation.from_sums import level_matrix
from wstats.estimation.levels import category_levels
from wstats.estimation.summed_design import cells_of, domain_sums, replicate_theta_variance

if TYPE_CHECKING:
    import numpy.typing as npt
    import pandas as pd

    from wstats.design.declared import Design
    from wstats.design.pooling import PeriodFiles
    from wstats.estimation.from_sums import Summed
    from wstats.estimation.partition_sums import PartSums, Request

    Array = npt.NDArray[np.float64]
    Index = npt.NDArray[np.int64]

__all__ = ["Replicates", "categorical_parts", "replicate_parts"]


def categorical_parts(s: Summed, total: PartSums, name: str, j: int
                      ) -> tuple[list[Any], list[str], Array, list[Any]]:
    """Return the levels, their labels, the (groups x levels) sums of w and the observed."""
    levels = total.levels[j]
    text = total.kinds.get(name, ("categorical", False))[1]
    observed = sorted({*levels["value"].tolist()}) if len(levels) else []
    labels = total.labels.get(name, {})
    if text:
        col = DecodedColumn.of_codes(name, np.asarray(observed, dtype=object),
                                     np.zeros(len(observed), np.int8), Reasons(), kind="text")
        values, shown = category_levels(col)
    else:
        col = DecodedColumn.of_codes(name, np.zeros(0), np.zeros(0, np.int8), Reasons(),
                                     kind="categorical", value_labels=labels)
        values, shown = category_levels(col, np.asarray(observed, dtype=np.float64))
    return values, shown, level_matrix(s, levels, values, col), observed


@dataclass(frozen=True, eq=False)
class Replicates:
    """Replicate sums by file, replicate and domain; variances of the statistics."""

    frame: pd.DataFrame
    file: Index
    inside: npt.NDArray[np.bool_]
    cell: Index
    s: Summed
    design: Design
    files: PeriodFiles | None
    n_rep: int

    def by_file(self, columns: Sequence[str]) -> Array:
        """Return (files, R, D) sums of the replicate columns (times each file's factor)."""
        d = self.s.sums.domains
        k_files = 1 if self.files is None else self.files.n_files
        lam = self._lam()
        out = np.zeros((k_files, len(columns), d.n_domains))
        block = self.frame[list(columns)].fillna(0.0).to_numpy(float) if columns else None
        for k in range(k_files):  # loop over files, not rows
            mask = self.file == k
            if block is not None:
                out[k] = lam[k] * domain_sums(block[mask], self.inside[mask], self.cell[mask],
                                              d.n_cells).T
        return out

    def _lam(self) -> Array:
        """Return each file's pool factor."""
        k_files = 1 if self.files is None else self.files.n_files
        lam = np.ones(k_files)
        file = self.s.frame["_file"].to_numpy(np.int64)
        lam[file] = self.s.lam
        return lam

    def full(self, values: Array) -> Array:
        """Return full-sample sums (files, D, ...) of per-group *values* (already scaled)."""
        d = self.s.sums.domains
        file = self.s.frame["_file"].to_numpy(np.int64)
        k_files = 1 if self.files is None else self.files.n_files
        return np.stack([domain_sums(values[file == k], d.inside[file == k], d.cell[file == k],
                                     d.n_cells) for k in range(k_files)])

    def mean_or_total(self, j: int, stat: str) -> Array:
        """Return the replicate variance (D,) of variable j's mean or total."""
        f = self.s.frame
        num = self.by_file([f"R{r}y{j}" for r in range(self.n_rep)])[..., None]
        y = f[f"y{j}"].to_numpy(float) * self.s.lam
        w = f[f"w{j}"].to_numpy(float) * self.s.lam
        fy, fw = self.full(y[:, None]), self.full(w[:, None])
        if stat == "total":
            theta = fy.sum(axis=0)
            return replicate_theta_variance(num, None, theta, (fy, None), self.file,
                                            self.design, self.files, self._lam())[:, 0]
        den = self.by_file([f"R{r}w{j}" for r in range(self.n_rep)])[..., None]
        with np.errstate(divide="ignore", invalid="ignore"):
            theta = fy.sum(axis=0) / fw.sum(axis=0)
        return replicate_theta_variance(num, den, theta, (fy, fw), self.file, self.design,
                                        self.files, self._lam())[:, 0]

    def ratio(self, key: str) -> Array:
        """Return the replicate variance (D,) of a ratio (its sums under *key*)."""
        f = self.s.frame
        num = self.by_file([f"R{r}y{key}" for r in range(self.n_rep)])[..., None]
        den = self.by_file([f"R{r}x{key}" for r in range(self.n_rep)])[..., None]
        fy = self.full((f[f"y{key}"].to_numpy(float) * self.s.lam)[:, None])
        fx = self.full((f[f"x{key}"].to_numpy(float) * self.s.lam)[:, None])
        with np.errstate(divide="ignore", invalid="ignore"):
            theta = fy.sum(axis=0) / fx.sum(axis=0)
        return replicate_theta_variance(num, den, theta, (fy, fx), self.file, self.design,
                                        self.files, self._lam())[:, 0]

    def proportion(self, j: int, values: list[Any], matrix: Array) -> Array:
        """Return the replicate variances (D, L) of variable j's level proportions."""
        f = self.s.frame
        names = [[f"R{r}l{j}:{v!r}" for r in range(self.n_rep)] for v in values]
        for group in names:
            for c in group:
                if c not in self.frame.columns:
                    self.frame[c] = 0.0
        num = np.stack([self.by_file(group) for group in names], axis=-1)
        den = self.by_file([f"R{r}w{j}" for r in range(self.n_rep)])[..., None]
        fl = self.full(matrix)
        fw = self.full((f[f"w{j}"].to_numpy(float) * self.s.lam)[:, None])
        with np.errstate(divide="ignore", invalid="ignore"):
            theta = fl.sum(axis=0) / fw.sum(axis=0)
        return replicate_theta_variance(num, den, theta, (fl, fw), self.file, self.design,
                                        self.files, self._lam())


def replicate_parts(s: Summed, total: PartSums, req: Request, design: Design,
                    files: PeriodFiles | None, by: Sequence[str]) -> Replicates:
    """Return the replicate sums of the total, with each row's file and domain."""
    frame = total.reps
    assert frame is not None
    text = {n: k[1] for n, k in total.kinds.items()}
    cell = cells_of(frame, by, s.by_levels, s.sums.domains, text, total.labels)
    return Replicates(frame.copy(), frame["_file"].to_numpy(np.int64),
                      frame["_in"].to_numpy(dtype=bool), cell, s, design, files,
                      len(req.replicates))
