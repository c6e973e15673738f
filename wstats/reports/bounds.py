"""Sensitivity bounds: how far the answers that are missing could move a proportion.

:func:`bounds` reuses the estimation engine through the same indicator columns as
:mod:`wstats.reports.nonresponse`; :func:`bounds_records` gives its rows as JSON-ready dicts.
"""

from __future__ import annotations

from collections.abc import Sequence
from functools import lru_cache
from typing import TYPE_CHECKING, Any

import numpy as np

from wstats.decoding.columns import Dataset, DecodedColumn, require_dataset
from wstats.decoding.reasons import VALID
from wstats.estimation.results import _plain
from wstats.estimation.statistics import check_statistic
from wstats.readers.display import as_html, as_text
from wstats.reports.nonresponse import _UNKNOWN, _augmented, _check_variables, _indicator, _rows

if TYPE_CHECKING:
    import numpy.typing as npt
    import pandas as pd

    from wstats.design.declared import Design
    from wstats.estimation.reliability import ReliabilityStandard
    from wstats.estimation.results import EstimateTable

__all__ = ["bounds", "bounds_records"]

def bounds(
    data: Dataset,
    design: Design,
    variables: str | Sequence[str],
    *,
    by: Sequence[str] = (),
    where: str | None = None,
    level: float = 0.95,
    reasons: Sequence[str] = ("dont_know", "refused"),
    reliability: ReliabilityStandard | None = None,
    categorical: Sequence[str] = (),
) -> pd.DataFrame:
    """Worst-case bounds for the proportions of a categorical item under item nonresponse.

    For each level L and domain, with weighted sums over the domain's valid rows (W_valid),
    the rows with level L (W_L) and the rows whose reason is in *reasons* (W_unk, respondents
    who were asked but did not say): ``lower = W_L / (W_valid + W_unk)`` (none of them has L),
    ``upper = (W_L + W_unk) / (W_valid + W_unk)`` (all of them have L). Any value the
    non-respondents could have given lies in [lower, upper]; it always holds the estimate
    among valid answers. The bounds describe identification only (no sampling error); the
    valid-case estimate comes with its usual interval. Manski (1989), J. Human Resources
    24:343-360; Manski (2003), *Partial Identification of Probability Distributions*, ch. 1
    (both from memory).

    Parameters
    ----------
    data : decoded dataset.
    design : the sample design.
    variables : one categorical item or several (categorical, binary or text by their kind,
        fully value-labelled, or named in *categorical*); a continuous or count variable is
        refused, as for a proportion in :func:`wstats.estimate`.
    by : domain variables (the population row comes first in each variable's block).
    where : condition defining the population domain.
    level : confidence level of the valid-case interval.
    reasons : reasons whose rows could have held any level (default don't know and refused).
    reliability : the reliability standard, as for :func:`wstats.estimate` (None: the
        default); a valid-case estimate it suppresses is suppressed here too, with its bounds.
    categorical : variables to treat as categorical whatever their kind.

    Returns
    -------
    pandas.DataFrame
        Columns ``variable``, ``level``, the by-variables, ``estimate``, ``se``, ``ci_low``,
        ``ci_high`` (valid-case), ``lower``, ``upper``, ``unknown_share`` (W_unk / (W_valid +
        W_unk) = upper - lower), ``n_valid``, ``n_unknown``, ``flags`` and ``suppress`` (the
        valid-case estimate's reliability rules). ``frame.attrs`` holds ``by``, ``reasons``,
        ``level``, ``design`` and ``settings``. See :func:`bounds_records` for JSON.

    Examples
    --------
    >>> from wstats.design.declared import Design
    >>> ds = Dataset.from_arrays({"y": [1.0, 1.0, 2.0, float("nan")], "w": [1.0] * 4})
    >>> b = bounds(ds, Design("w"), "y", reasons=["missing"])
    >>> [round(x, 2) for x in b.loc[0, ["estimate", "lower", "upper"]]]
    [0.67, 0.5, 0.75]
    """
    require_dataset(data, "bounds")
    from wstats.estimation.estimate import estimate

    names = _check_variables(data, [variables] if isinstance(variables, str) else variables)
    for v in names:  # one proportion per distinct value of a count is never what was meant
        check_statistic("proportion", data[v], categorical)
    codes = np.array([data.vocabulary.code(r) for r in reasons], dtype=np.int8)
    extra = {f"{v}{_UNKNOWN}": _unknown_column(data[v], codes) for v in names}
    aug = _augmented(data, extra)
    est = estimate(aug, design, [*names, *extra], statistics="proportion", by=by, where=where,
                   categorical=names, level=level, reliability=reliability)
    frame = _shown(_bounds_frame(est, names, list(by)))
    frame.attrs.update({"by": list(by), "reasons": list(reasons), "level": est.level,
                        "design": dict(est.design), "settings": dict(est.settings)})
    return frame


def bounds_records(frame: pd.DataFrame) -> list[dict[str, Any]]:
    """Return the rows of a :func:`bounds` frame as JSON-ready dicts (by-columns -> ``group``).

    Parameters
    ----------
    frame : the frame :func:`bounds` returned.

    Returns
    -------
    list of dict
        One dict per row; NaN becomes None.
    """
    by = list(frame.attrs.get("by", ()))
    out: list[dict[str, Any]] = []
    for row in frame.to_dict(orient="records"):
        group = {b: _plain(row.pop(b)) for b in by}
        rec: dict[str, Any] = {str(k): _plain(v) for k, v in row.items()}
        rec["group"] = None if all(v is None for v in group.values()) else group
        out.append(rec)
    return out


def _unknown_column(col: DecodedColumn, unknown: npt.NDArray[np.int8]) -> DecodedColumn:
    """Return the indicator of the *unknown* reasons among valid-or-unknown rows."""
    ones = np.isin(col.reasons, unknown)
    return _indicator(col, f"{col.name}{_UNKNOWN}", ones, ones | (col.reasons == VALID),
                      {0.0: "valid", 1.0: "unknown"})


def _bounds_frame(est: EstimateTable, names: list[str], by: list[str]) -> pd.DataFrame:
    """Return the bounds rows of every variable from the valid-case and unknown estimates."""
    import pandas as pd

    blocks = []
    for v in names:
        cat = _rows(est, v)
        unk = _rows(est, f"{v}{_UNKNOWN}", "unknown")
        n_levels = len(cat) // max(len(unk), 1)
        w_valid = cat["weighted_n"].to_numpy(dtype=np.float64)
        w_level = np.nan_to_num(cat["estimate"].to_numpy(dtype=np.float64)) * w_valid
        u = np.repeat(np.nan_to_num(unk["estimate"].to_numpy(dtype=np.float64)), n_levels)
        w_all = np.repeat(unk["weighted_n"].to_numpy(dtype=np.float64), n_levels)
        w_unk = u * w_all
        with np.errstate(divide="ignore", invalid="ignore"):
            lower = np.where(w_all > 0, w_level / w_all, np.nan)
            upper = np.where(w_all > 0, (w_level + w_unk) / w_all, np.nan)
        block = cat[["variable", "level", *by, "estimate", "se", "ci_low", "ci_high"]].copy()
        block["lower"], block["upper"] = lower, upper
        block["unknown_share"] = np.where(w_all > 0, u, np.nan)
        block["n_valid"] = cat["n"].to_numpy()
        block["n_unknown"] = np.repeat(unk["n"].to_numpy(), n_levels) - cat["n"].to_numpy()
        block["flags"], block["suppress"] = cat["flags"].to_numpy(), cat["suppress"].to_numpy()
        blocks.append(block)
    return pd.concat(blocks, ignore_index=True)


def _shown(frame: pd.DataFrame) -> pd.DataFrame:
    """Return *frame* as a frame that shows itself as the bounds table (same data)."""
    shown = _bounds_type()(frame)
    shown.attrs.update(frame.attrs)
    return shown


@lru_cache(maxsize=1)
def _bounds_type() -> type[pd.DataFrame]:
    """Make the frame type of :func:`bounds` (pandas is imported only when bounds are made).

    A pandas frame whose ``repr`` is the terminal bounds table with its design line and whose
    notebook view is that table; a slice or copy of it is a plain frame again.
    """
    import pandas as pd

    class BoundsFrame(pd.DataFrame):
        """The frame :func:`bounds` returns; it shows itself as the bounds table."""

        @property
        def _constructor(self) -> type[pd.DataFrame]:
            return pd.DataFrame

        def __repr__(self) -> str:
            return as_text(self, pd.DataFrame(self).__repr__())

        def _repr_html_(self) -> str | None:
            return as_html(self)

    return BoundsFrame
