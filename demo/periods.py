"""Several periods of the TBCHS demo survey, for pooling and change between periods.

Each period is an independent sample of the same fictional population (sample seeds
``seed``, ``seed + 1``, ...), written as ``period1.xpt``, ``period2.xpt``, ... beside the
codebook. Stratum and cluster codes repeat from period to period, as they do in real annual
files: an analysis must key them by file (wstats does by default).
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path

__all__ = ["write_periods"]


def write_periods(outdir: str | os.PathLike[str], periods: int = 3, rows: int | None = None,
                  formats: Sequence[str] = ("xpt",), seed: int | None = None
                  ) -> list[Path]:
    """Write *periods* independent TBCHS samples into *outdir*; return the data files.

    Parameters
    ----------
    outdir : folder to write into (created if missing).
    periods : number of periods (files).
    rows : respondents per period (default: the demo's default).
    formats : any of ``xpt``, ``sav``, ``dta`` (one file per period and format).
    seed : sample seed of the first period (default ``SAMPLE_SEED + 1``: the periods are
        other samples than the one ``write_demo`` writes).

    Examples
    --------
    >>> files = write_periods(tmp_path, periods=2, rows=800)  # doctest: +SKIP
    """
    from demo.sample import SAMPLE_SEED, build_sample, sample_items
    from demo.write import codebook_text, write_files, write_text

    folder = Path(outdir)
    folder.mkdir(parents=True, exist_ok=True)
    items = sample_items(None)
    first = SAMPLE_SEED + 1 if seed is None else seed
    out: list[Path] = []
    for k in range(periods):  # loop over periods (files), not rows
        frame = build_sample(rows, None, first + k)
        written = write_files(frame, items, folder, tuple(formats))
        for fmt, path in written.items():
            target = folder / f"period{k + 1}.{fmt}"
            path.replace(target)
            out.append(target)
    write_text(folder / "tbchs_codebook.toml", codebook_text(items))
    return out
