"""Helpers for tests that analyse in-memory TBCHS demo samples with wstats.

A demo sample (:func:`demo.build_sample`) is a pandas DataFrame of raw codes whose ``attrs``
carry the variable and value labels a published file would carry; :func:`raw_table` turns it
into the :class:`RawTable` a reader would return, so the codebook can decode it without a file.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

import demo
from wstats import load_codebook
from wstats.readers.raw import RawColumn, RawTable

if TYPE_CHECKING:
    import pandas as pd

    from wstats import Codebook

__all__ = ["demo_codebook", "raw_table"]


def demo_codebook() -> Codebook:
    """Load the packaged TBCHS codebook."""
    return load_codebook(Path(demo.__file__).with_name("tbchs_codebook.toml"))


def raw_table(frame: pd.DataFrame, columns: Sequence[str] | None = None) -> RawTable:
    """Return *frame* (a demo sample) as a reader would: float codes with the file's labels."""
    names = list(frame.columns) if columns is None else list(columns)
    var_labels = frame.attrs.get("column_labels", {})
    val_labels = frame.attrs.get("value_labels", {})
    cols = {
        name: RawColumn(
            name,
            frame[name].to_numpy(dtype=np.float64),
            var_labels.get(name),
            {float(code): text for code, text in val_labels.get(name, {}).items()},
        )
        for name in names
    }
    return RawTable("<demo sample>", "sav", "test", len(frame), cols, list(frame.columns))
