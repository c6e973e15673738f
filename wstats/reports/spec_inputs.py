"""What a table spec or an analysis file reads: its data files, and the engine it runs on.

Shared by :mod:`wstats.reports.table_specs` and :mod:`wstats.cli.analysis_file`; *checker*
is their key-by-key checker (``doc``, ``base``, ``text``, ``fail``, ``RELATIVE_TO``).
"""

from __future__ import annotations

import glob
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from wstats.errors import did_you_mean

__all__ = ["ENGINES", "check_engine", "data_files"]

ENGINES = ("memory", "dask")
_ON_DASK = ("estimates", "nonresponse", "plot")  # entries the Dask engine runs


def data_files(checker: Any) -> list[Path]:
    """Return the data files ``data`` names: a path, a glob or a list (relative to the file)."""
    if "data" not in checker.doc:
        raise checker.fail("data", "missing; name the file, e.g. data = \"survey.xpt\"")
    value = checker.doc["data"]
    items = value if isinstance(value, list) else [value]
    out: list[Path] = []
    for i, item in enumerate(items):  # loop over the names given
        text = checker.text(item, "data" if len(items) == 1 else f"data[{i + 1}]")
        if any(c in text for c in "*?["):
            found = sorted(Path(p) for p in glob.glob(str(checker.base / text)))
            if not found:
                raise checker.fail("data", f"'{text}' matches no file in {checker.base}")
            out.extend(found)
            continue
        p = checker.base / text
        if not p.is_file():
            raise checker.fail("data", f"file {p} does not exist; paths are relative to "
                               f"{checker.RELATIVE_TO}")
        out.append(p)
    if not out:
        raise checker.fail("data", "the list names no file; give at least one")
    return out


def check_engine(checker: Any, jobs: Sequence[tuple[str, str]]) -> str:
    """Return the engine; the Dask engine runs [[estimates]], [[nonresponse]] and charts.

    *jobs* are (key, kind) of every entry.
    """
    engine = checker.text(checker.doc.get("engine", "memory"), "engine")
    if engine not in ENGINES:
        raise checker.fail("engine", f"'{engine}' is not one of {', '.join(ENGINES)}"
                           f"{did_you_mean(engine, ENGINES)}")
    other = [key for key, kind in jobs if kind not in _ON_DASK]
    if engine == "dask" and other:
        raise checker.fail("engine", f"engine 'dask' runs [[estimates]] and [[nonresponse]] "
                           f"entries only, not {other[0]}; run that entry in another "
                           "analysis file")
    return str(engine)
