"""Provenance: what produced an output (tool, inputs with checksums, design, command, time).

Every written output carries this record so that a number in a report can be traced to the
exact file, codebook and command that made it. Apart from ``created_utc`` the record is
byte-identical across runs on the same inputs: keys are sorted at every level and floats are
rounded to 12 significant digits before they are stored.
"""

from __future__ import annotations

import math
import sys
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

__all__ = ["normalize", "provenance", "provenance_lines", "provenance_text", "sha256_file"]

_CHUNK = 1 << 20


def provenance(
    inputs: Sequence[Path | str],
    codebook: Path | str | None,
    design_summary: Mapping[str, Any] | None,
    command: str | Sequence[str],
    time: bool | str = True,
) -> dict[str, Any]:
    """Describe how an output was produced.

    Parameters
    ----------
    inputs : data files read (name, size in bytes and SHA-256 are recorded; not the folder).
    codebook : codebook file applied, or None.
    design_summary : ``BoundDesign.summary()`` (or any mapping describing the design).
    command : the command line (a string, or its words) or the analysis/spec file used.
    time : True to record the current UTC time, False to record none (``created_utc`` is
        null; for reproducible outputs and tests), or a fixed ISO string to record.

    Returns
    -------
    dict
        Keys (sorted): ``codebook`` ({name, sha256} or None), ``command``, ``created_utc``,
        ``design``, ``environment`` ({python, numpy, pandas}), ``inputs`` (list of {name,
        bytes, sha256}), ``tool`` ("wstats"), ``version``.

    Examples
    --------
    >>> p = provenance([], None, {"weight": "WT"}, "wstats estimate x.csv", time=False)
    >>> p["design"], p["created_utc"]
    ({'weight': 'WT'}, None)
    """
    record: dict[str, Any] = {
        "tool": "wstats",
        "version": _version(),
        "environment": _environment(),
        "inputs": [_file_facts(Path(p)) for p in inputs],
        "codebook": None if codebook is None else _codebook_facts(Path(codebook)),
        "design": dict(design_summary or {}),
        "command": _command_text(command),
        "created_utc": _timestamp(time),
    }
    return dict(normalize(record))


def provenance_lines(record: Mapping[str, Any] | None) -> list[str]:
    """Return ``key: value`` lines (sorted, dotted keys, JSON values) for comment headers."""
    import json

    lines: list[str] = []

    def walk(prefix: str, value: Any) -> None:
        if isinstance(value, dict) and value:
            for k, v in value.items():
                walk(f"{prefix}.{k}" if prefix else k, v)
        else:
            lines.append(f"{prefix}: {json.dumps(value, ensure_ascii=False)}")

    walk("", normalize(dict(record or {})))
    return lines


def provenance_text(record: Mapping[str, Any] | None) -> str:
    """Return the record as text: a ``wstats provenance`` line, then its key: value lines."""
    return "\n".join(["wstats provenance", *provenance_lines(record)])


def normalize(value: Any) -> Any:
    """Return *value* as plain JSON-ready data: sorted dict keys, rounded floats, no numpy."""
    if isinstance(value, Mapping):
        return {str(k): normalize(value[k]) for k in sorted(value, key=str)}
    if isinstance(value, (list, tuple)):
        return [normalize(v) for v in value]
    if isinstance(value, Path):
        return value.as_posix()
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):
        value = value.item()
    if isinstance(value, bool) or value is None or isinstance(value, (int, str)):
        return value
    if isinstance(value, float):
        if math.isnan(value):
            return None
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return float(f"{value:.12g}")
    return str(value)


def sha256_file(path: Path) -> str:
    """Return the hex SHA-256 of a file, read in chunks."""
    try:
        from wstats.readers.output import sha256_of  # the readers' shared helper, when present
    except ImportError:
        return _sha256_chunked(path)
    return str(sha256_of(path))


def _sha256_chunked(path: Path) -> str:
    """Return the hex SHA-256 of a file read in 1 MiB chunks."""
    import hashlib

    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(_CHUNK), b""):
            h.update(block)
    return h.hexdigest()


def _file_facts(path: Path) -> dict[str, Any]:
    """Return name, size and checksum of an input file (nulls if it cannot be read)."""
    try:
        return {"name": path.name, "bytes": path.stat().st_size, "sha256": sha256_file(path)}
    except OSError:
        # Provenance describes, it does not validate: a vanished input is recorded as such.
        return {"name": path.name, "bytes": None, "sha256": None}


def _codebook_facts(path: Path) -> dict[str, Any]:
    """Return name and checksum of the codebook."""
    facts = _file_facts(path)
    return {"name": facts["name"], "sha256": facts["sha256"]}


def _command_text(command: str | Sequence[str]) -> str:
    """Return the command as one shell-quoted line."""
    if isinstance(command, str):
        return command
    import shlex

    return shlex.join(str(c) for c in command)


def _timestamp(time: bool | str) -> str | None:
    """Return the current UTC time in ISO form, a fixed string, or None."""
    if isinstance(time, str):
        return time
    if not time:
        return None
    from datetime import UTC, datetime

    return datetime.now(UTC).replace(microsecond=0).isoformat().replace("+00:00", "Z")


def _version() -> str:
    """Return the wstats version (package attribute first, installed metadata second)."""
    try:
        import wstats

        return str(wstats.__version__)
    except (ImportError, AttributeError):
        return _dist_version("wstats")


def _environment() -> dict[str, str]:
    """Return the Python and numeric library versions (pandas: "not used" if not imported).

    The versions come from the imported modules: looking them up in the installed packages'
    metadata took 30 ms, a twentieth of a quick run.
    """
    import platform

    import numpy

    pandas = sys.modules.get("pandas")
    return {"python": platform.python_version(), "numpy": str(numpy.__version__),
            "pandas": str(getattr(pandas, "__version__", "unknown")) if pandas else "not used"}


def _dist_version(name: str) -> str:
    """Return an installed distribution's version, or 'unknown'."""
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version(name)
    except PackageNotFoundError:
        return "unknown"
