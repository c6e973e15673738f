"""``wstats demo``: write the fictional demo survey, run its analysis file, show the results."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

from wstats.errors import OutputError

__all__ = ["run_demo"]


def run_demo(folder: Path, *, overwrite: bool = False, rows: int | None = None,
             columns: int | None = None, show: Callable[[Any], None] = print,
             periods: int = 0) -> list[Path]:
    """Write the demo files into *folder*, run ``tbchs_analysis.toml``, show what came out.

    Parameters
    ----------
    folder : where the demo survey and the outputs go; a folder that already holds files is
        refused unless *overwrite*.
    overwrite : write into a non-empty folder, replacing earlier demo files.
    rows, columns : sample size and padded column count (default about 60,000 x 68).
    show : called with each renderable (rich objects or text) to display.
    periods : also write this many independent periods of the survey (``period1.xpt``, ...)
        for pooling (``wstats estimate 'period*.xpt' ... --by _file``).

    Returns
    -------
    list of Path
        The survey files written and every output of the analysis file.
    """
    from demo import write_demo
    from wstats.cli.analysis import execute_analysis

    _check_folder(folder, overwrite)
    written = write_demo(folder, rows=rows, columns=columns)
    outputs, results = execute_analysis(folder / "tbchs_analysis.toml", overwrite=True)
    survey = [Path(p) for p in written.values()]
    n = next((t.design.get("n_rows") for (k, _), t in results.items() if k == "estimates"), None)
    show(f"wstats demo: a fictional survey{f' of {n:,} respondents' if n else ''}, written "
         f"as {', '.join(p.suffix for p in survey if p.suffix != '.toml')} with its codebook "
         "and analysis file, then analysed. A first look:\n")
    _tour(results, show)
    show(_where(folder, survey, outputs))
    pooled: list[Path] = []
    if periods > 0:
        from demo.periods import write_periods

        pooled = write_periods(folder, periods=periods, rows=rows)
        names = [p.name for p in pooled if p.suffix == ".xpt"]
        # two lines of at most 80 characters for the default folder, still one command
        show(f"\nAlso {len(names)} periods of the survey to pool ({', '.join(names)}):\n"
             f"  wstats estimate '{folder / 'period*.xpt'}' sl_hours --by _file \\\n"
             f"    --codebook {folder / 'tbchs_codebook.toml'}")
    return sorted({*survey, *outputs, *pooled})


def _check_folder(folder: Path, overwrite: bool) -> None:
    """Refuse a non-empty folder without *overwrite*, and a path that is a file."""
    if folder.exists() and not folder.is_dir():
        raise OutputError(f"demo folder '{folder}' is a file; choose a folder name")
    if folder.is_dir() and any(folder.iterdir()) and not overwrite:
        raise OutputError(f"demo folder '{folder}' already holds files; choose an empty folder "
                          "or pass --overwrite")
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"cannot create demo folder '{folder}': {exc.strerror}") from exc


def _tour(results: dict[tuple[str, str], Any], show: Callable[[Any], None]) -> None:
    """Show one short estimate block and the nonresponse table of the demo's analysis."""
    from wstats.render import ESTIMATE_RENDERERS, NONRESPONSE_RENDERERS

    for (kind, _), obj in results.items():
        if kind == "estimates":
            show(ESTIMATE_RENDERERS["terminal"](_one_block(obj)))
            break
    for (kind, _), obj in results.items():
        if kind == "nonresponse":
            show("")
            show(NONRESPONSE_RENDERERS["terminal"](obj))
            break


def _one_block(table: Any) -> Any:
    """Return the first variable of an estimate table whose block is short (a mean by domain)."""
    from wstats.estimation.results import EstimateTable

    frame = table.frame
    sizes = frame.groupby(["variable", "statistic"], sort=False).size()
    short = [key for key, size in sizes.items() if size <= 8] or list(sizes.index)
    variable, statistic = short[0]
    rows = frame[(frame["variable"] == variable) & (frame["statistic"] == statistic)]
    return EstimateTable.from_frame(rows.reset_index(drop=True), by=table.by,
                                    level=table.level, design=table.design,
                                    settings=table.settings)


def _where(folder: Path, survey: list[Path], outputs: list[Path]) -> str:
    """Return where the survey and every output went, one line per file name (stem)."""
    groups: dict[str, list[str]] = {}
    for p in [*survey, *sorted(outputs)]:
        groups.setdefault(p.stem, []).append(p.suffix)
    width = max(len(stem.split("_", 1)[-1]) for stem in groups) + 1
    lines = [f"\nIn {folder}/ (every output carries its provenance):"]
    lines += [f"  {stem.split('_', 1)[-1]:<{width}} {stem}{', '.join(sfx)}"
              for stem, sfx in groups.items()]
    lines.append(f"Re-run it all with: wstats run {folder / 'tbchs_analysis.toml'} --overwrite")
    return "\n".join(lines)
