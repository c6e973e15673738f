"""Provenance records: checksums, reproducibility, normalisation."""

from __future__ import annotations

import hashlib
import json
import re
from pathlib import Path

from wstats.reports.provenance import normalize, provenance


def test_records_name_size_and_sha256(tmp_path: Path) -> None:
    data = tmp_path / "survey.csv"
    data.write_bytes(b"a,b\n1,2\n" * 1000)
    cb = tmp_path / "cb.toml"
    cb.write_text("[survey]\nname = 'x'\n")
    p = provenance([data], cb, {"weight": "W", "df": 24.0}, ["wstats", "estimate", "a b"],
                   time=False)
    # checksum against hashlib directly (Python standard library)
    assert p["inputs"] == [{"bytes": 8000, "name": "survey.csv",
                            "sha256": hashlib.sha256(data.read_bytes()).hexdigest()}]
    assert p["codebook"] == {"name": "cb.toml",
                             "sha256": hashlib.sha256(cb.read_bytes()).hexdigest()}
    assert p["command"] == "wstats estimate 'a b'"
    assert p["created_utc"] is None
    assert list(p) == sorted(p)


def test_reproducible_apart_from_time(tmp_path: Path) -> None:
    f = tmp_path / "d.csv"
    f.write_text("x\n1\n")
    design = {"weight": "W", "n_psu": 36, "df": 1 / 3, "fpc": None}
    a = json.dumps(provenance([f], None, design, "cmd", time=False))
    b = json.dumps(provenance([f], None, dict(reversed(design.items())), "cmd", time=False))
    assert a == b
    stamped = provenance([f], None, design, "cmd")
    assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ", stamped["created_utc"])
    assert provenance([f], None, design, "cmd", time="2024-01-01T00:00:00Z")[
        "created_utc"] == "2024-01-01T00:00:00Z"


def test_missing_input_is_recorded_not_raised(tmp_path: Path) -> None:
    p = provenance([tmp_path / "gone.xpt"], None, None, "cmd", time=False)
    assert p["inputs"] == [{"bytes": None, "name": "gone.xpt", "sha256": None}]


def test_normalize_rounds_floats_and_sorts() -> None:
    import numpy as np

    out = normalize({"b": np.float64(0.1 + 0.2), "a": [np.int64(3), float("inf"),
                                                      float("nan")]})
    assert list(out) == ["a", "b"]
    assert out == {"a": [3, "inf", None], "b": 0.3}
    assert type(out["a"][0]) is int


def test_version_is_the_package_version() -> None:
    import wstats

    assert provenance([], None, None, "", time=False)["version"] == wstats.__version__
