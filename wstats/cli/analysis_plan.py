"""A checked analysis file as data: the outputs to write and the jobs that make them."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

__all__ = ["Analysis", "Job", "Output"]

@dataclass(frozen=True)
class Output:
    """One file to write: its path (resolved), format, and the key that asked for it."""

    path: Path
    fmt: str
    key: str


@dataclass(frozen=True)
class Job:
    """One ``[[estimates]]``/``[[nonresponse]]``/``[[bounds]]``/``[[table]]``/``[methods]``/
    ``[[plot]]`` entry, checked; ``options`` holds its keys with defaults applied."""

    kind: str
    key: str
    name: str
    options: Mapping[str, Any]
    outputs: tuple[Output, ...]


@dataclass(frozen=True)
class Analysis:
    """A checked analysis file; paths are resolved against the file's folder.

    Attributes
    ----------
    source : the analysis file.
    data : the survey data file (the first of several).
    codebook : the codebook file, or None.
    design : design settings given in the file (``Design`` field -> value); the codebook's
        ``[design]`` lies underneath.
    jobs : every output-producing entry: estimates, nonresponse, bounds, table, methods,
        plot (the order they are computed and written in), each kind in file order.
    files, engine : the pooled data files (``data`` names several; else ()); the engine.
    """

    source: Path
    data: Path
    codebook: Path | None
    design: Mapping[str, Any]
    jobs: tuple[Job, ...] = field(default_factory=tuple)
    files: tuple[Path, ...] = ()
    engine: str = "memory"

    @property
    def data_files(self) -> tuple[Path, ...]:
        """Return every data file: the one named, or the pooled files."""
        return self.files or (self.data,)

    def outputs(self) -> list[Output]:
        """Return every output of every job, in order."""
        return [o for job in self.jobs for o in job.outputs]
