"""Statistics as parameter dataclasses, called with data: Mean, Total, Proportion, Ratio, Quantile.

Each statistic holds only its settings (checked in ``__post_init__``), keeps no state, and is
called with a :class:`Context` (the bound design, the weighted sums, the columns) and variable
names; it returns a :class:`Piece`: one row per domain (x level), as arrays.

Conventions (each changes numbers):

- Rows count for a variable when its reason is ``valid``; other rows of the domain have u = 0
  (they are not dropped, so the full design is kept). A total is the total over valid rows.
- deff = v_design / v_SRS with the with-replacement SRS variance of the same n valid rows:
  mean s^2/n, total N^2 s^2/n, ratio s_e^2/(n xbar^2), proportion p(1-p)/n, where
  s^2 = n/(n-1) * sum w (y - ybar)^2 / sum w (the weighted estimate of the population
  variance), e = y - R x, N = sum of weights of valid rows. Quantiles: deff of the proportion
  below the quantile, p(1-p)/n with p the quantile's probability.
- n_eff = n/deff; for proportions p(1-p)/v capped at n (n when p is 0 or 1 or v is 0).
- deff_weight = n sum w^2 / (sum w)^2 over valid domain rows (Kish 1965).
- Quantiles: lower step quantile Q(p) = min{y : F(y) >= p}; Woodruff (1952) interval centred
  on p: [p -/+ t_df SE(F(Q(p)))] clipped to [0, 1] and mapped back through Q;
  SE = (Q(p_U) - Q(p_L)) / (2 t_df).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.reasons import VALID
from wstats.errors import EstimationError, did_you_mean
from wstats.estimation.intervals import PROPORTION_INTERVALS, effective_n, t_quantile, wald_t
from wstats.estimation.levels import category_levels, distinct_values, level_index
from wstats.estimation.quantiles import domain_quantiles
from wstats.estimation.variance import domain_df, ratio_estimate, total_estimate

if TYPE_CHECKING:
    import numpy.typing as npt

    from wstats.decoding.columns import DecodedColumn
    from wstats.decoding.reasons import Reasons
    from wstats.design.bound import BoundDesign
    from wstats.estimation.sums import WeightedSums

    Array = npt.NDArray[np.float64]
    Index = npt.NDArray[np.int64]

__all__ = ["STATISTICS", "Context", "Mean", "Piece", "Proportion", "Quantile", "Ratio", "Total",
           "add_intervals", "check_statistic", "is_categorical"]


@dataclass(frozen=True, eq=False)
class Context:
    """What a statistic is called with.

    Attributes
    ----------
    sums : the weighted-sums engine (design + domains).
    columns : decoded columns restricted to the rows the design uses.
    vocabulary : the reason vocabulary of the columns.
    level : confidence level.
    per_domain_df : count only strata/PSUs with domain members for the df.
    """

    sums: WeightedSums
    columns: Mapping[str, DecodedColumn]
    vocabulary: Reasons
    level: float
    per_domain_df: bool = False

    @property
    def design(self) -> BoundDesign:
        """The bound design."""
        return self.sums.design

    def numeric(self, name: str, statistic: str) -> DecodedColumn:
        """Return the column *name*, which must hold numbers for *statistic*."""
        col = self.columns[name]
        if col.values.dtype.kind != "f":
            raise EstimationError(
                f"variable '{name}' holds text; a {statistic} needs numbers (use a proportion)"
            )
        return col


@dataclass(frozen=True, eq=False)
class Piece:
    """Result rows of one statistic for one variable: K = domains x levels rows, as arrays."""

    variable: str
    statistic: str
    level: list[str | None]
    p: float
    domain: Index
    estimate: Array
    se: Array
    ci_low: Array
    ci_high: Array
    df: Array
    deff: Array
    deff_weight: Array
    n_eff: Array
    n: Array
    weighted_n: Array
    reasons: Index
    interval: str = "wald-t"


@dataclass(frozen=True)
class _Moments:
    """Per-domain facts about the valid rows of a variable (arrays of shape (D,))."""

    n: Array
    weighted_n: Array
    deff_weight: Array
    df: Array
    reasons: Index


def _moments(ctx: Context, valid: npt.NDArray[np.bool_], col: DecodedColumn) -> _Moments:
    """Return n, weighted n, Kish deff_w, df and reason counts per domain."""
    c = ctx.sums.valid_counts(valid)
    n, wn, w2 = c[:, 0], c[:, 1], c[:, 2]
    with np.errstate(divide="ignore", invalid="ignore"):
        kish = np.where(wn > 0, n * w2 / (wn * wn), np.nan)
    df = np.full(len(n), ctx.design.df)
    if ctx.per_domain_df and not ctx.design.uses_replicates:
        df = domain_df(ctx.sums.pair_counts(valid.astype(np.float64)), ctx.sums)[:, 0]
    counts = ctx.sums.reason_counts(col, len(ctx.vocabulary))
    return _Moments(n, wn, kish, df, counts)


def _weighted_s2(ctx: Context, e: Array, valid: npt.NDArray[np.bool_], centre: Array,
                 m: _Moments) -> Array:
    """Return s^2 = n/(n-1) sum w (e - centre_d)^2 / sum w per domain.

    One pass for all domains: sum w (e - c)^2 - W_d (centre_d - c)^2 with c the population
    centre, which keeps the cancellation small.
    """
    c = centre[0] if np.isfinite(centre[0]) else 0.0
    dev = np.where(valid, e - c, 0.0)
    q = ctx.sums.domain_totals(ctx.sums.pair_sums(dev * dev))[:, 0]  # the matrix holds w
    with np.errstate(divide="ignore", invalid="ignore"):
        ss = np.maximum(q - m.weighted_n * (centre - c) ** 2, 0.0)
        return np.asarray(m.n / (m.n - 1.0) * ss / m.weighted_n)


def _piece(var: str, stat: str, ctx: Context, m: _Moments, est: Array, var_: Array,
           v_srs: Array, ci: tuple[Array, Array] | None = None, p: float = np.nan) -> Piece:
    """Assemble the per-domain rows of a one-level statistic."""
    se = np.sqrt(np.maximum(var_, 0.0))
    empty = m.n == 0
    est = np.where(empty, np.nan, est)
    se = np.where(empty, np.nan, se)
    nan = np.full(len(est), np.nan)
    low, high = ci if ci is not None else (nan, nan)  # Wald limits: one call for all rows
    with np.errstate(divide="ignore", invalid="ignore"):
        deff = np.where(v_srs > 0, var_ / v_srs, np.nan)
        n_eff = np.where(deff > 0, m.n / deff, np.nan)
    nd = len(est)
    return Piece(var, stat, [None] * nd, p, np.arange(nd), est, se, low, high, m.df, deff,
                 m.deff_weight, n_eff, m.n, m.weighted_n, m.reasons,
                 "wald-t" if ci is None else "woodruff")


def _prepare(ctx: Context, variable: str, stat: str
             ) -> tuple[npt.NDArray[np.bool_], Array, _Moments]:
    """Return the validity mask, the values (0 where not valid) and the domain moments."""
    col = ctx.numeric(variable, stat)
    valid = col.valid
    return valid, np.where(valid, col.values, 0.0), _moments(ctx, valid, col)


@dataclass(frozen=True)
class Mean:
    """Weighted mean (a ratio of the total to the weighted count of valid rows), Wald-t CI."""

    name = "mean"

    def __call__(self, ctx: Context, variable: str) -> Piece:
        """Return the domain means of *variable*."""
        valid, y, m = _prepare(ctx, variable, self.name)
        est, var, _ = ratio_estimate(ctx.sums, y, valid)
        s2 = _weighted_s2(ctx, y, valid, est[:, 0], m)
        return _piece(variable, self.name, ctx, m, est[:, 0], var[:, 0], s2 / m.n)


@dataclass(frozen=True)
class Total:
    """Weighted total over valid rows, Wald-t CI."""

    name = "total"

    def __call__(self, ctx: Context, variable: str) -> Piece:
        """Return the domain totals of *variable*."""
        valid, y, m = _prepare(ctx, variable, self.name)
        est, var = total_estimate(ctx.sums, y)
        with np.errstate(divide="ignore", invalid="ignore"):
            mean = est[:, 0] / m.weighted_n
        s2 = _weighted_s2(ctx, y, valid, mean, m)
        v_srs = m.weighted_n**2 * s2 / m.n
        return _piece(variable, self.name, ctx, m, est[:, 0], var[:, 0], v_srs)


@dataclass(frozen=True)
class Ratio:
    """Ratio of two totals R = t_y / t_x over rows where both are valid, Wald-t CI."""

    name = "ratio"

    def __call__(self, ctx: Context, numerator: str, denominator: str) -> Piece:
        """Return the domain ratios of *numerator* to *denominator*."""
        cy, cx = ctx.numeric(numerator, "ratio"), ctx.numeric(denominator, "ratio")
        reasons = ctx.vocabulary.combine(cy.reasons, cx.reasons)
        both = reasons == VALID
        y, x = np.where(both, cy.values, 0.0), np.where(both, cx.values, 0.0)
        est, var, den = ratio_estimate(ctx.sums, y, x)
        m = _moments(ctx, both, cy.replace(values=np.where(both, 0.0, np.nan), reasons=reasons))
        # e = y - R_d x needs the domain's own R: population rows and cell rows separately
        r_cell = est[ctx.sums.domains.cell + 1, 0]
        zero = np.zeros(len(est))
        s2_pop = _weighted_s2(ctx, y - est[0, 0] * x, both, zero, m)
        s2_cell = _weighted_s2(ctx, y - r_cell * x, both, zero, m)
        s2 = np.concatenate([s2_pop[:1], s2_cell[1:]])
        with np.errstate(divide="ignore", invalid="ignore"):
            xbar = den[:, 0] / m.weighted_n
            v_srs = s2 / (m.n * xbar * xbar)
        return _piece(f"{numerator}/{denominator}", self.name, ctx, m, est[:, 0], var[:, 0], v_srs)


@dataclass(frozen=True)
class Proportion:
    """Proportion of every level of a categorical variable; interval from PROPORTION_INTERVALS."""

    ci: str = "korn-graubard"
    name = "proportion"

    def __post_init__(self) -> None:
        """Check the interval method."""
        if self.ci not in PROPORTION_INTERVALS:
            raise EstimationError(
                f"proportion interval '{self.ci}' is not one of "
                f"{', '.join(PROPORTION_INTERVALS)}{did_you_mean(self.ci, PROPORTION_INTERVALS)}"
            )

    def __call__(self, ctx: Context, variable: str) -> Piece:
        """Return, per domain, the proportion of each level of *variable*."""
        col = ctx.columns[variable]
        valid = col.valid
        values, labels = category_levels(col)
        index = level_index(col, values, valid)
        ind = (index[:, None] == np.arange(len(values))[None, :]).astype(np.float64)
        est, var, _ = ratio_estimate(ctx.sums, ind, valid)
        m = _moments(ctx, valid, col)
        nd, nl = est.shape
        p, n = est.ravel(), _per_level(m.n, nl)
        empty = n == 0
        p = np.where(empty, np.nan, p)
        se = np.where(empty, np.nan, np.sqrt(np.maximum(var.ravel(), 0.0)))
        df = _per_level(m.df, nl)
        nan = np.full(len(p), np.nan)  # limits filled for all rows at once (add_intervals)
        with np.errstate(divide="ignore", invalid="ignore"):
            deff = np.where(p * (1 - p) > 0, var.ravel() / (p * (1 - p) / n), np.nan)
        return Piece(variable, self.name, list(labels) * nd, np.nan, np.repeat(np.arange(nd), nl),
                     p, se, nan, nan.copy(), df, deff,
                     _per_level(m.deff_weight, nl), effective_n(p, se, n), n,
                     _per_level(m.weighted_n, nl),
                     np.repeat(m.reasons, nl, axis=0), self.ci)


def _per_level(a: Array, levels: int) -> Array:
    """Repeat per-domain values for each level: (D,) -> (D * levels,)."""
    return np.repeat(a, levels)


@dataclass(frozen=True)
class Quantile:
    """Lower weighted quantile at probability p with a Woodruff (1952) interval."""

    p: float = 0.5
    name = "quantile"

    def __post_init__(self) -> None:
        """Check the probability."""
        if not (isinstance(self.p, int | float) and 0.0 <= float(self.p) <= 1.0):
            raise EstimationError(f"quantile probability {self.p!r} is outside [0, 1]; use 0.5")

    def __call__(self, ctx: Context, variable: str) -> Piece:
        """Return the domain quantiles of *variable* with Woodruff intervals."""
        col = ctx.numeric(variable, "quantile")
        valid = col.valid
        y, w, doms = np.where(valid, col.values, np.nan), ctx.design.weights, ctx.sums.domains
        m = _moments(ctx, valid, col)
        nd = doms.n_domains
        q = domain_quantiles(y, w, doms, valid, np.full((nd, 1), float(self.p)))[:, 0]
        below_cell = valid & (y <= q[doms.cell + 1])
        below_pop = valid & (y <= q[0])
        f, var, _ = ratio_estimate(ctx.sums, np.column_stack([below_cell, below_pop]).astype(
            np.float64), valid)
        var_f = np.r_[var[:1, 1], var[1:, 0]]
        se_f = np.sqrt(np.maximum(var_f, 0.0))
        t = _t(m.df, ctx.level)
        bounds = np.column_stack([np.clip(self.p - t * se_f, 0.0, 1.0),
                                  np.clip(self.p + t * se_f, 0.0, 1.0)])
        lim = domain_quantiles(y, w, doms, valid, bounds)
        v_srs = self.p * (1.0 - self.p) / m.n
        se = (lim[:, 1] - lim[:, 0]) / (2.0 * t)
        out = _piece(variable, self.name, ctx, m, q, var_f, v_srs, (lim[:, 0], lim[:, 1]), self.p)
        return _with_se(out, np.where(m.n > 0, se, np.nan))


def _t(df: Array, level: float) -> Array:
    """Return t_{df} critical values, one quantile call per distinct df (usually one)."""
    uniq, inverse = np.unique(df, return_inverse=True)
    return np.asarray(t_quantile(uniq, level))[inverse.ravel()]


def add_intervals(est: Array, se: Array, n: Array, df: Array, methods: Sequence[str],
                  low: Array, high: Array, level: float) -> None:
    """Fill *low*/*high* in place for rows whose method is Wald-t or a proportion interval.

    One vectorised call per method over all rows of a table (the quantile functions behind
    the intervals are costly per call, cheap per element).
    """
    m = np.asarray(methods, dtype=object)
    for name in set(m.tolist()) - {"woodruff"}:
        rows = np.flatnonzero(m == name)
        if name == "wald-t":
            lo, hi = wald_t(est[rows], se[rows], df[rows], level)
        else:
            lo, hi = PROPORTION_INTERVALS[name](est[rows], se[rows], n[rows], df[rows], level)
        low[rows], high[rows] = lo, hi


def _with_se(piece: Piece, se: Array) -> Piece:
    """Return *piece* with the standard error replaced (quantiles: Woodruff SE)."""
    from dataclasses import replace

    return replace(piece, se=se)


def is_categorical(col: DecodedColumn, forced: Sequence[str] = ()) -> bool:
    """Return True for categorical/binary/text kinds, names in *forced*, or fully labelled data."""
    if col.name in forced or col.kind in ("categorical", "binary", "text"):
        return True
    if not col.value_labels or col.values.dtype.kind != "f":
        return False
    seen = distinct_values(col.values[col.valid])
    return bool(len(seen)) and all(float(v) in col.value_labels for v in seen)


def check_statistic(statistic: str, col: DecodedColumn, forced: Sequence[str] = ()) -> None:
    """Refuse a statistic that does not suit the variable's kind (one owner of this rule).

    A proportion of a continuous variable would be one proportion per distinct value (82 ages
    give 82 rows), never what was meant. (A mean of a text column is refused where the
    numbers are read, in ``Context.numeric``.)
    """
    if statistic == "proportion" and not is_categorical(col, forced):
        raise EstimationError(
            f"a proportion of '{col.name}' needs a categorical variable, but it is {col.kind}; "
            f"estimate its mean or quantiles, or treat it as categorical (--categorical "
            f"{col.name}, or kind = \"categorical\" in the codebook)")


#: statistic name -> class (Ratio is called with two variables).
STATISTICS: dict[str, type[Any]] = {
    "mean": Mean, "total": Total, "proportion": Proportion, "ratio": Ratio, "quantile": Quantile,
}
