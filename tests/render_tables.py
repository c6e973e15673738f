"""Hand-built result tables for the renderer tests (plain frames with the agreed schemas).

The numbers are invented for layout checks; they are not estimates of anything.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from wstats.estimation.results import ESTIMATE_COLUMNS, EstimateTable

DESIGN = {"weight": "wt_final", "strata": "ds_strat", "psu": "ds_psu", "fpc": None,
          "n_strata": 12, "n_psu": 36, "df": 24, "singleton": "fail",
          "variance_method": "linearization", "replicate_method": None, "n_replicates": 0,
          "n_rows": 1500, "dropped_rows": 0, "zero_weights": 0}
SETTINGS = {"proportion_ci": "korn-graubard", "standard": "nchs-2017",
            "labels": {"SLEEP_HRS": "Hours of sleep", "SMOKER": "Current smoker"}}


def _row(variable: str, statistic: str, group: str | None, estimate: float, se: float,
         lo: float, hi: float, n: int, reasons: dict[str, int], flags: tuple[str, ...] = (),
         suppress: bool = False, level: str | None = None, p: float = math.nan) -> dict[str, Any]:
    return {"variable": variable, "statistic": statistic, "level": level, "p": p,
            "dm_sex": group, "estimate": estimate, "se": se, "ci_low": lo, "ci_high": hi,
            "df": 24.0, "cv": se / abs(estimate) if estimate else math.nan, "deff": 1.4,
            "deff_weight": 1.2, "n_eff": n / 1.4, "n": n, "weighted_n": n * 1500.5,
            "reasons": reasons, "flags": flags, "suppress": suppress}


def estimate_table() -> EstimateTable:
    """Return a small table: a mean by sex, a proportion with a flag and a suppression."""
    rows = [
        _row("SLEEP_HRS", "mean", None, 7.0125, 0.0525, 6.904, 7.121, 1402,
             {"dont_know": 41, "refused": 12, "skipped": 45}),
        _row("SLEEP_HRS", "mean", "Male", 6.875, 0.0815, 6.707, 7.043, 690,
             {"dont_know": 20, "refused": 5}),
        _row("SLEEP_HRS", "mean", "Female", 7.145, 0.0705, 7.0, 7.29, 712,
             {"dont_know": 21, "refused": 7, "skipped": 45}),
        _row("SMOKER", "proportion", None, 0.3115, 0.0145, 0.2841, 0.3412, 1480,
             {"refused": 20}, level="Yes"),
        _row("SMOKER", "proportion", "Male", 0.04, 0.031, 0.005, 0.3, 25,
             {"refused": 3}, flags=("neff<30", "kg-width>=0.30"), suppress=True, level="Yes"),
        _row("SMOKER", "proportion", "Female", 0.2875, 0.061, 0.17, 0.43, 40,
             {}, flags=("df<8",), level="Yes"),
        _row("dm_incbd", "quantile", None, 52125.0, 2150.0, 47900.0, 56400.0, 1300,
             {"dont_know": 150, "refused": 50}, p=0.5),
        _row("dm_incbd", "total", None, 916927110.0, 58169381.0, 796868000.0, 1036986000.0,
             1300, {"dont_know": 150, "refused": 50}),
    ]
    frame = pd.DataFrame(rows)
    order = [*ESTIMATE_COLUMNS[:4], "dm_sex", *ESTIMATE_COLUMNS[4:]]
    return EstimateTable.from_frame(frame[order], by=("dm_sex",), level=0.95, design=DESIGN,
                         settings=SETTINGS)


@dataclass(frozen=True, eq=False)
class FakeNonresponse:
    """A stand-in with the NonresponseTable contract (frame, by, reasons, ... records())."""

    frame: pd.DataFrame
    by: tuple[str, ...] = ("dm_sex",)
    reasons: tuple[str, ...] = ("valid", "skipped", "dont_know", "refused", "invalid",
                                "missing")
    level: float = 0.95
    design: dict[str, Any] = field(default_factory=lambda: dict(DESIGN))
    settings: dict[str, Any] = field(default_factory=dict)

    def records(self) -> list[dict[str, Any]]:
        out = []
        for r in self.frame.to_dict(orient="records"):
            group = None if r["dm_sex"] is None else {"dm_sex": r["dm_sex"]}
            out.append({"variable": r["variable"], "group": group, "asked": r["asked"],
                        "counts": {x: r[f"count_{x}"] for x in self.reasons},
                        "weighted_shares": {x: r[f"share_{x}"] for x in self.reasons},
                        "nonresponse_rate": r["nonresponse_rate"], "se": r["se"],
                        "ci_low": r["ci_low"], "ci_high": r["ci_high"],
                        "flags": list(r["flags"])})
        return out


def nonresponse_table() -> FakeNonresponse:
    """Return a two-domain nonresponse table for one variable."""
    counts = {"valid": [1402, 690], "skipped": [45, 0], "dont_know": [41, 20],
              "refused": [12, 5], "invalid": [0, 0], "missing": [0, 0]}
    frame = pd.DataFrame({"variable": ["SLEEP_HRS"] * 2, "dm_sex": [None, "Male"],
                          "n_rows": [1500, 715], "asked": [1455, 715]})
    for name, c in counts.items():
        frame[f"count_{name}"] = c
    for name, c in counts.items():
        frame[f"share_{name}"] = [c[0] / 1500, c[1] / 715]
    frame["nonresponse_rate"] = [0.0364, 0.035]
    frame["se"] = [0.0051, 0.0072]
    frame["ci_low"] = [0.0262, 0.0212]
    frame["ci_high"] = [0.0489, 0.0529]
    frame["df"] = [24.0, 24.0]
    frame["flags"] = [(), ("df<8",)]
    return FakeNonresponse(frame)


#: A fixed provenance record, so golden files do not depend on the machine or the day.
PROVENANCE: dict[str, Any] = {
    "codebook": {"name": "demo_codebook.toml", "sha256": "0" * 64},
    "command": "wstats estimate demo.csv SLEEP_HRS SMOKER --by dm_sex",
    "created_utc": None,
    "design": {"weight": "wt_final", "n_strata": 12, "n_psu": 36, "df": 24},
    "environment": {"python": "3.x", "numpy": "x", "pandas": "x"},
    "inputs": [{"name": "demo.csv", "bytes": 1234, "sha256": "f" * 64}],
    "tool": "wstats",
    "version": "test",
}
