"""``wstats demo``: write the fictional demo survey, run its analysis file, show the results."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

from wstats.errors import OutputError

__all__ = ["run_demo"]


def run_demo(folder: Path, *, overwrite: bool = False, rows: int | None = None,
             columns: int | None = None, show: Callable[[Any], None] = print) -> list[Path]:
    """Write the demo files into *folder*, run ``tbchs_analysis.toml``, show what came out.

    Parameters
    ----------
    folder : where the demo survey and the outputs go; a folder that already holds files is
        refused unless *overwrite*.
    overwrite : write into a non-empty folder, replacing earlier demo files.
    rows, columns : sample size and padded column count (default about 60,000 x 68).
    show : called with each renderable (rich objects or text) to display.

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
    _show(results, show)
    files = sorted({*map(Path, written.values()), *outputs})
    show(f"\nWrote {len(files)} files into {folder}/: "
         + ", ".join(p.name for p in files)
         + f"\nRe-run the analysis with: wstats run {folder / 'tbchs_analysis.toml'} "
         "--overwrite")
    return files


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


def _show(results: dict[tuple[str, str], Any], show: Callable[[Any], None]) -> None:
    """Display estimates, nonresponse, publication table and methods text, in that order."""
    from wstats.render import ESTIMATE_RENDERERS, NONRESPONSE_RENDERERS, TABLE_RENDERERS

    registries = {"estimates": ESTIMATE_RENDERERS, "nonresponse": NONRESPONSE_RENDERERS,
                  "table": TABLE_RENDERERS}
    for kind in ("estimates", "nonresponse", "table", "methods"):
        for (k, _name), obj in results.items():
            if k != kind:
                continue
            if kind == "methods":
                show("\nMethods\n" + str(obj))
            else:
                show(registries[kind]["terminal"](obj))
