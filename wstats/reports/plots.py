"""Charts of estimates and of missing reasons (optional: needs the ``plot`` extra, matplotlib).

matplotlib is imported only when a chart is drawn, onto an explicit Agg canvas, so importing
wstats never touches a display or the global pyplot state. Output is deterministic: the SVG
id salt and the metadata date are fixed, so drawing the same table twice gives the same bytes.
"""

from __future__ import annotations

import io
import math
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

from wstats.errors import UsageError

if TYPE_CHECKING:
    import pandas as pd
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from wstats.estimation.results import EstimateTable
    from wstats.reports.nonresponse import NonresponseTable

__all__ = [
    "PLOT_FORMATS",
    "PLOT_KINDS",
    "plot_domains",
    "plot_format",
    "plot_reasons",
    "render_domains",
    "render_reasons",
]

#: file extension -> matplotlib output format
PLOT_FORMATS: dict[str, str] = {".png": "png", ".svg": "svg"}
#: kind name (as used in an analysis file) -> what it draws
PLOT_KINDS: dict[str, str] = {
    "domains": "dot-and-interval chart of estimates across domains",
    "reasons": "stacked bar of the weighted share of each missing reason per variable",
}
_INSTALL = "install the plot extra: pip install 'wstats[plot]'"
# Fixed colours per core reason so the same reason looks the same in every chart.
_REASON_COLOURS: dict[str, str] = {
    "valid": "#4c72b0", "skipped": "#c7c7c7", "dont_know": "#dd8452", "refused": "#c44e52",
    "invalid": "#8172b3", "missing": "#937860",
}
_EXTRA_COLOURS = ("#55a868", "#da8bc3", "#8c8c8c", "#ccb974", "#64b5cd", "#2f4b7c")


def plot_format(path: str | Path) -> str:
    """Return the image format for *path* from its extension; UsageError if not .png/.svg."""
    suffix = Path(path).suffix.lower()
    if suffix not in PLOT_FORMATS:
        allowed = ", ".join(PLOT_FORMATS)
        raise UsageError(f"chart file '{path}' must end in one of {allowed} (got '{suffix}')")
    return PLOT_FORMATS[suffix]


def render_domains(table: EstimateTable, fmt: str = "svg",
                   provenance: Mapping[str, Any] | None = None) -> bytes:
    """Draw estimates with their confidence intervals across domains; return the image bytes.

    Parameters
    ----------
    table : EstimateTable
        Result of :func:`wstats.estimate`; one panel per variable x statistic x level.
    fmt : {"png", "svg"}
        Image format.
    provenance : the provenance record, kept in the image's metadata (SVG description,
        PNG text chunk) as ``key: value`` lines, without its time stamp.

    Returns
    -------
    bytes
        The encoded image.

    Examples
    --------
    >>> render_domains(table, "svg")[:5]  # doctest: +SKIP
    b'<?xml'
    """
    frame = table.frame
    series = _series(frame)
    if not series:
        raise UsageError("nothing to plot: the estimate table has no rows")
    fig = _figure(width=7.0, height=1.0 + 0.32 * len(frame) + 0.45 * len(series))
    grid = fig.add_gridspec(len(series), 1, height_ratios=[len(r) for _, r in series])
    for i, (title, rows) in enumerate(series):
        _domain_panel(fig.add_subplot(grid[i, 0]), title, rows, table.by)
    fig.supxlabel(f"estimate with {table.level:.0%} confidence interval", fontsize=9)
    return _encode(fig, fmt, provenance)


def render_reasons(table: NonresponseTable, fmt: str = "svg",
                   provenance: Mapping[str, Any] | None = None) -> bytes:
    """Draw one stacked bar per variable (x domain) of the weighted share of each reason.

    Parameters
    ----------
    table : NonresponseTable
        Result of :func:`wstats.nonresponse`.
    fmt : {"png", "svg"}
        Image format.
    provenance : the provenance record, kept in the image's metadata (SVG description,
        PNG text chunk) as ``key: value`` lines, without its time stamp.

    Returns
    -------
    bytes
        The encoded image.
    """
    frame = table.frame
    if frame.empty:
        raise UsageError("nothing to plot: the nonresponse table has no rows")
    shown = [r for r in table.reasons if float(frame[f"share_{r}"].fillna(0).sum()) > 0]
    labels = [_row_label(row, table.by) for row in _records(frame)]
    fig = _figure(width=7.5, height=1.4 + 0.32 * len(frame))
    ax = fig.add_subplot(1, 1, 1)
    ypos = list(range(len(frame)))[::-1]
    left = [0.0] * len(frame)
    for k, reason in enumerate(shown):
        width = [float(x) if not _isnan(x) else 0.0 for x in frame[f"share_{reason}"]]
        ax.barh(ypos, width, left=left, color=_colour(reason, k), label=reason, height=0.7)
        left = [a + b for a, b in zip(left, width, strict=True)]
    ax.set_yticks(ypos, labels, fontsize=8)
    ax.set_ylim(-0.6, len(frame) - 0.4)
    ax.set_xlim(0.0, 1.0)
    ax.set_xlabel("weighted share of rows", fontsize=9)
    fig.legend(loc="outside lower center", ncol=min(len(shown), 6), fontsize=8, frameon=False)
    return _encode(fig, fmt, provenance)


def plot_domains(table: EstimateTable, path: str | Path, *, overwrite: bool = False,
                 provenance: Mapping[str, Any] | None = None) -> Path:
    """Write :func:`render_domains` to *path* (``.png`` or ``.svg``); return the path.

    Parameters
    ----------
    table : EstimateTable
        Estimates to draw.
    path : str or Path
        Output file; the extension chooses the format.
    overwrite : bool
        Replace an existing file (otherwise OutputError).
    provenance : the record to keep in the image's metadata (see :func:`render_domains`).

    Returns
    -------
    Path
        The file written.
    """
    return _write(render_domains(table, plot_format(path), provenance), path, overwrite)


def plot_reasons(table: NonresponseTable, path: str | Path, *, overwrite: bool = False,
                 provenance: Mapping[str, Any] | None = None) -> Path:
    """Write :func:`render_reasons` to *path* (``.png`` or ``.svg``); return the path.

    Parameters
    ----------
    table : NonresponseTable
        Reason counts and shares to draw.
    path : str or Path
        Output file; the extension chooses the format.
    overwrite : bool
        Replace an existing file (otherwise OutputError).
    provenance : the record to keep in the image's metadata (see :func:`render_domains`).

    Returns
    -------
    Path
        The file written.
    """
    return _write(render_reasons(table, plot_format(path), provenance), path, overwrite)


def _write(data: bytes, path: str | Path, overwrite: bool) -> Path:
    """Write *data* atomically to *path*."""
    from wstats.readers.output import atomic_write

    atomic_write(path, data, overwrite)
    return Path(path)


def _figure(width: float, height: float) -> Figure:
    """Return a new Figure on its own Agg canvas (no pyplot, no global backend switch)."""
    try:
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure
    except ImportError as exc:
        raise UsageError(f"charts need matplotlib, which is not installed; {_INSTALL}") from exc
    fig = Figure(figsize=(width, min(height, 60.0)), dpi=100, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def _encode(fig: Figure, fmt: str, provenance: Mapping[str, Any] | None = None) -> bytes:
    """Return the figure encoded as *fmt*, with fixed salt and no date so bytes reproduce."""
    import matplotlib

    from wstats.reports.provenance import provenance_text

    if fmt not in PLOT_FORMATS.values():
        raise UsageError(f"unknown chart format '{fmt}'; use one of: png, svg")
    metadata: dict[str, Any] = {"Date": None} if fmt == "svg" else {}
    if provenance:  # without its time: an image's bytes (PNG chunk checksums) must reproduce
        kept = {k: v for k, v in provenance.items() if k != "created_utc"}
        metadata["Description"] = provenance_text(kept)
    buf = io.BytesIO()
    with matplotlib.rc_context({"svg.hashsalt": "wstats", "svg.fonttype": "path"}):
        fig.savefig(buf, format=fmt, metadata=metadata)
    return buf.getvalue()


def _series(frame: pd.DataFrame) -> list[tuple[str, list[dict[str, Any]]]]:
    """Split the tidy rows into panels keyed by variable, statistic, level and p (first-seen)."""
    panels: dict[str, list[dict[str, Any]]] = {}
    for row in _records(frame):
        title = f"{row['variable']} — {row['statistic']}"
        if row.get("level") is not None and not _isnan(row.get("level")):
            title += f": {row['level']}"
        if row.get("statistic") == "quantile" and not _isnan(row.get("p")):
            title += f" (p = {row['p']:g})"
        panels.setdefault(title, []).append(row)
    return list(panels.items())


def _domain_panel(ax: Axes, title: str, rows: list[dict[str, Any]], by: Sequence[str]) -> None:
    """Draw one panel: a dot per domain with a horizontal line for its interval."""
    ypos = list(range(len(rows)))[::-1]
    labels: list[str] = []
    for y, row in zip(ypos, rows, strict=True):
        label = _row_label(row, by, first=False)
        if row.get("suppress") or _isnan(row.get("estimate")):
            labels.append(f"{label} (not shown)")
            continue
        labels.append(label)
        low, high = row["ci_low"], row["ci_high"]
        if not (_isnan(low) or _isnan(high)):
            ax.plot([low, high], [y, y], color="#4c72b0", linewidth=1.5)
        ax.plot([row["estimate"]], [y], "o", color="#1f3b63", markersize=4.5)
    ax.set_yticks(ypos, labels, fontsize=8)
    ax.set_ylim(-0.6, len(rows) - 0.4)
    ax.set_title(title, fontsize=9, loc="left")
    ax.tick_params(axis="x", labelsize=8)
    ax.grid(axis="x", color="#e5e5e5", linewidth=0.6)


def _row_label(row: Mapping[str, Any], by: Sequence[str], first: bool = True) -> str:
    """Return 'VAR | by=level, ...' ('all' for the population row; VAR alone without by)."""
    parts = [f"{b}={row[b]}" for b in by if not _isnan(row.get(b))]
    domain = ", ".join(parts) if parts else "all"
    if not first:
        return domain
    return f"{row['variable']} | {domain}" if by else str(row["variable"])


def _records(frame: pd.DataFrame) -> list[dict[str, Any]]:
    """Return the rows of *frame* as dicts keyed by column name."""
    return [{str(k): v for k, v in r.items()} for r in frame.to_dict(orient="records")]


def _colour(reason: str, k: int) -> str:
    """Return the fixed colour of a core reason, or a palette colour for an added one."""
    return _REASON_COLOURS.get(reason, _EXTRA_COLOURS[k % len(_EXTRA_COLOURS)])


def _isnan(x: Any) -> bool:
    """Return True for None and float NaN."""
    return x is None or (isinstance(x, float) and math.isnan(x))
