"""What each TBCHS item means and how it is written down: labels, codes, codebook, files.

Every item is described once, in :data:`ITEMS`; the file labels, the value labels, the codebook
TOML and the demo's own decoder (used for the population truth) all come from that one table.
Names are at most 8 characters and variable labels at most 40, the limits of transport v5.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from demo.population import DISTRICTS, URBANICITY

__all__ = [
    "DESIGN",
    "FAMILY_CODES",
    "ITEMS",
    "Item",
    "analysis_text",
    "codebook_text",
    "column_labels",
    "decode",
    "value_labels",
    "write_demo",
    "write_files",
    "write_text",
]

FAMILY_CODES = {1: (7, 9), 2: (77, 99), 3: (777, 999)}
_FAMILY_NAMES = {1: "one-digit", 2: "two-digit", 3: "three-digit"}
DESIGN = {"weight": "FINALWT", "strata": "STRAT_ID", "psu": "CLUST_ID"}
_YN = {1: "Yes", 2: "No"}
_FREQ = {1: "Always", 2: "Nearly always", 3: "Sometimes", 4: "Seldom", 5: "Never"}
_SINCE = {1: "Within the past year", 2: "1 to 2 years ago", 3: "2 to 5 years ago",
          4: "5 or more years ago", 8: "Never"}


@dataclass(frozen=True)
class Item:
    """One column of the TBCHS file.

    Attributes
    ----------
    name, label : column name (<= 8 characters) and variable label (<= 40 characters).
    kind : continuous | count | categorical.
    digits : don't know / refused family: 1 (7/9), 2 (77/99), 3 (777/999); None = no codes.
    labels : labels of the valid answers (categorical items).
    valid : inclusive valid range of the answer (after unit conversion: the raw count).
    none : code meaning "none" (value 0), e.g. 88 or 888.
    na : code meaning "does not apply to me" (its own missing reason, ``not_applicable``).
    unit : True for 1xx/day 2xx/week 3xx/month 4xx/year frequencies (decoded per year).
    blank : reason of a blank: ``skipped`` (not asked) or ``not_measured``.
    universe : who is asked, in words.
    question : the question as asked.
    """

    name: str
    label: str
    kind: str
    digits: int | None = None
    labels: dict[int, str] = field(default_factory=dict)
    valid: tuple[float, float] | None = None
    none: int | None = None
    na: int | None = None
    unit: bool = False
    blank: str = "skipped"
    universe: str = "all respondents"
    question: str = ""


def _cat(name: str, label: str, labels: dict[int, str], question: str, digits: int | None = 1,
         universe: str = "all respondents", na: int | None = None) -> Item:
    """Return a categorical item with valid codes = its labels."""
    valid = (float(min(labels)), float(max(k for k in labels if k != 8 or na != 8)))
    return Item(name, label, "categorical", digits, labels, valid, na=na, universe=universe,
                question=question)


def _num(name: str, label: str, lo: float, hi: float, question: str, digits: int | None,
         none: int | None = None, universe: str = "all respondents", kind: str = "count",
         blank: str = "skipped", unit: bool = False) -> Item:
    """Return a count or continuous item."""
    return Item(name, label, kind, digits, {}, (lo, hi), none, None, unit, blank, universe,
                question)


_CURRENT = "TOB_NOW = 1 or 2 (uses tobacco every day or some days)"
ITEMS: tuple[Item, ...] = (
    _num("RESP_ID", "Respondent identifier", 1, 9_999_999, "", None, kind="continuous"),
    _num("STRAT_ID", "Design stratum", 1, 52, "", None, kind="categorical"),
    _num("CLUST_ID", "Cluster (PSU) within stratum", 1, 6, "", None, kind="categorical"),
    _num("BASEWT", "Base weight (inverse selection prob.)", 0, 1e9, "", None, kind="continuous"),
    _num("FINALWT", "Final weight, nonresponse adjusted", 0, 1e9, "", None, kind="continuous"),
    _cat("DISTRICT", "Health district of residence", DISTRICTS, "", None),
    _cat("URBAN", "Urbanicity band of the cluster", URBANICITY, "", None),
    _num("AGE_YRS", "Age in years", 18, 99, "How old are you?", None, kind="continuous"),
    _cat("AGE_GRP", "Age group", {1: "18-29", 2: "30-44", 3: "45-59", 4: "60-74", 5: "75+"},
         "", None),
    _cat("SEX", "Sex recorded at interview", {1: "Male", 2: "Female"}, "", None),
    _num("HH_ADULT", "Adults (18+) in the household", 1, 4, "How many adults live here?",
         None),
    _cat("INT_MODE", "Mode of interview", {1: "Telephone", 2: "Web", 3: "In person"}, "", None),
    _num("INT_MON", "Month of interview", 1, 12, "", None, kind="categorical"),
    _cat("GENHLTH", "Self-rated general health",
         {1: "Excellent", 2: "Very good", 3: "Good", 4: "Fair", 5: "Poor"},
         "All things considered, how would you rate your health these days?"),
    _num("PHYSDAYS", "Days body health not good, past 30", 1, 30,
         "Thinking of your body - illness and injury - on how many of the last 30 days was "
         "your health not good?", 2, none=88),
    _num("MENTDAYS", "Days mood/stress not good, past 30", 1, 30,
         "On how many of the last 30 days were your mood, worries or stress not good?", 2,
         none=88),
    _num("SLEEPHRS", "Hours of sleep in a usual night", 1, 24,
         "In a usual night, how many hours do you sleep?", 2),
    _cat("CHECKUP", "Last routine check-up", _SINCE,
         "When did you last see a health worker for a routine check-up?"),
    _cat("DENTAL", "Last visit to a dentist", _SINCE, "When did you last visit a dentist?"),
    _cat("HAS_CLIN", "Has a usual place of care", _YN,
         "Is there one clinic or health worker you usually go to when you are sick?"),
    _cat("INSURED", "Has health cover", _YN, "Do you have any health cover plan right now?"),
    _cat("COSTBAR", "Skipped care because of cost, 12 mo", _YN,
         "In the last 12 months, did you go without needed care because of the cost?"),
    _cat("BPHIGH", "Ever told blood pressure high",
         {1: "Yes", 2: "No", 3: "Only while pregnant"},
         "Has a health worker ever told you that your blood pressure was high?"),
    _cat("BPMEDS", "Takes blood pressure medicine now", _YN,
         "Do you take medicine for your blood pressure now?", universe="BPHIGH = 1"),
    _cat("CHOL_CHK", "Ever had cholesterol tested", _YN,
         "Have you ever had a blood test for cholesterol?"),
    _cat("CHOL_HI", "Ever told cholesterol high", _YN,
         "Were you told that your cholesterol was high?", universe="CHOL_CHK = 1"),
    _cat("DIABETES", "Ever told sugar diabetes",
         {1: "Yes", 2: "No", 3: "Borderline / pre-diabetes"},
         "Has a health worker ever told you that you have sugar diabetes?"),
    _cat("ASTHMA", "Ever told asthma", _YN, "Were you ever told that you have asthma?"),
    _cat("ARTHRIT", "Ever told arthritis or joint disease", _YN,
         "Were you ever told that you have arthritis or another joint disease?"),
    _cat("PAIN_LIM", "Joint pain limits daily activities",
         {1: "A lot", 2: "A little", 3: "Not at all"},
         "How much does joint pain limit what you do in a day?", universe="ARTHRIT = 1"),
    _cat("DEPRESS", "Ever told a depressive disorder", _YN,
         "Were you ever told that you have depression or a depressive disorder?"),
    _cat("TOB_EVER", "Ever used tobacco products daily", _YN,
         "Have you ever used tobacco products daily, for a month or longer?"),
    _cat("TOB_NOW", "Uses tobacco now",
         {1: "Every day", 2: "Some days", 3: "Not at all"},
         "Do you now use tobacco every day, some days, or not at all?",
         universe="TOB_EVER = 1"),
    _num("TOB_AGE", "Age first used tobacco daily", 5, 76,
         "How old were you when you first used tobacco daily?", 2, universe="TOB_EVER = 1"),
    _num("CIGS_DAY", "Cigarettes per day, usual day", 1, 76,
         "On a usual day, how many cigarettes do you smoke? (88 = none, other tobacco only)",
         2, none=88, universe=_CURRENT),
    _cat("TOB_QUIT", "Tried to quit tobacco, 12 mo", _YN,
         "In the last 12 months, did you stop for a day or longer to quit?", universe=_CURRENT),
    _num("ALC_DAYS", "Days with alcohol, past 30", 1, 30,
         "On how many of the last 30 days did you have at least one alcoholic drink?", 2,
         none=88),
    _num("ALC_DRNK", "Drinks on a drinking day", 1, 76,
         "On the days you drank, how many drinks did you have on average?", 2,
         universe="ALC_DAYS 1-30"),
    _num("BINGE", "Heavy-drinking occasions, past 30", 1, 76,
         "How many times in the last 30 days did you have 5 or more drinks in one go?", 2,
         none=88, universe="ALC_DAYS 1-30"),
    _num("FRUIT", "Fruit, how often (unit-coded)", 1, 99,
         "How often do you eat fruit? (number per day, week, month or year)", 3, none=888,
         unit=True),
    _num("VEG", "Vegetables, how often (unit-coded)", 1, 99,
         "How often do you eat vegetables or salad?", 3, none=888, unit=True),
    _num("SODA", "Sugary drinks, how often (unit-coded)", 1, 99,
         "How often do you drink soft drinks or other sugar-sweetened drinks?", 3, none=888,
         unit=True),
    _num("FASTFOOD", "Take-away meals, how often (unit-coded)", 1, 99,
         "How often do you eat a meal bought from a take-away or fast-food outlet?", 3,
         none=888, unit=True),
    _num("VIG_DAYS", "Days of vigorous activity, usual week", 1, 7,
         "In a usual week, on how many days do you do vigorous activity for 10 minutes or "
         "more?", 3, none=888),
    _num("VIG_MIN", "Minutes of vigorous activity per day", 1, 600,
         "On those days, how many minutes in total?", 3, universe="VIG_DAYS 1-7"),
    _num("MOD_DAYS", "Days of moderate activity, usual week", 1, 7,
         "In a usual week, on how many days do you do moderate activity for 10 minutes or "
         "more?", 3, none=888),
    _num("MOD_MIN", "Minutes of moderate activity per day", 1, 600,
         "On those days, how many minutes in total?", 3, universe="MOD_DAYS 1-7"),
    _num("WALK_DAY", "Days walked 10+ minutes, usual week", 1, 7,
         "In a usual week, on how many days do you walk for at least 10 minutes at a time?",
         3, none=888),
    _cat("EXERANY", "Any exercise outside work, 30 days", _YN,
         "Apart from your job, did you do any exercise or sport in the last 30 days?"),
    _num("SIT_HRS", "Hours sitting on a usual day", 1, 24,
         "On a usual day, how many hours do you spend sitting?", 2),
    _num("SCREEN_H", "Hours of leisure screen time per day", 1, 24,
         "On a usual day, how many hours of screen time do you have outside work?", 2,
         none=88),
    _num("HT_CM", "Height, self-reported (cm)", 100, 230,
         "How tall are you without shoes, in centimetres?", 3, kind="continuous"),
    _num("WT_KG", "Weight, self-reported (kg)", 25, 300,
         "How much do you weigh without shoes, in kilograms?", 3, kind="continuous"),
    _num("SYS_BP", "Systolic blood pressure, measured", 60, 260,
         "Mean of two systolic readings at the measurement visit (mmHg)", None,
         kind="continuous", blank="not_measured"),
    _num("DIA_BP", "Diastolic blood pressure, measured", 30, 160,
         "Mean of two diastolic readings at the measurement visit (mmHg)", None,
         kind="continuous", blank="not_measured"),
    _num("WAIST_CM", "Waist circumference, measured (cm)", 40, 200,
         "Waist circumference at the measurement visit (cm)", None, kind="continuous",
         blank="not_measured"),
    _cat("MARITAL", "Living arrangement / partnership",
         {1: "Married or civil union", 2: "Lives with a partner", 3: "Separated or divorced",
          4: "Widowed", 5: "Never married"},
         "Which of these best describes you now?"),
    _cat("EMPLOY", "Main activity last week",
         {1: "Paid work", 2: "Own business", 3: "Looking for work", 4: "Home or family care",
          5: "Studying", 6: "Retired", 7: "Unable to work", 8: "Something else"},
         "What was your main activity last week?", digits=2),
    _cat("EDUC", "Highest schooling completed",
         {1: "Primary or less", 2: "Some secondary", 3: "Secondary certificate",
          4: "Trade or college diploma", 5: "Bachelor degree", 6: "Postgraduate"},
         "What is the highest level of school or study you have completed?"),
    _cat("INCOME", "Household income band, last year",
         {1: "Under 15k", 2: "15k-25k", 3: "25k-35k", 4: "35k-50k", 5: "50k-75k",
          6: "75k-100k", 7: "100k-150k", 8: "150k or more"},
         "Which band was your household's income in last year, before tax?", digits=2),
    _num("HH_KIDS", "Children under 18 in household", 1, 20,
         "How many children under 18 live in your household?", 2, none=88),
    _cat("FLU_VAX", "Influenza vaccine, past 12 months", _YN,
         "In the last 12 months, have you had an influenza vaccination?"),
    _cat("FLU_MON", "Month of last influenza vaccine",
         {m: n for m, n in enumerate(("January", "February", "March", "April", "May", "June",
                                      "July", "August", "September", "October", "November",
                                      "December"), start=1)},
         "In which month did you have it?", digits=2, universe="FLU_VAX = 1"),
    _cat("ISOLATED", "How often feels isolated",
         {1: "Always", 2: "Usually", 3: "Sometimes", 4: "Rarely", 5: "Never"},
         "How often do you feel isolated?"),
    _cat("FOODINS", "Food ran out, no money for more",
         {1: "Often true", 2: "Sometimes true", 3: "Never true"},
         "In the last 12 months the food we bought ran out and we had no money to get more."),
    _cat("HOUSING", "Home owned or rented",
         {1: "Owned", 2: "Rented", 3: "Other arrangement"},
         "Is your home owned by someone in the household, rented, or something else?"),
    _num("COMMUTE", "Minutes of travel to work, one way", 1, 300,
         "How many minutes does it usually take you to get to work? (888 = works at home)",
         3, none=888, universe="EMPLOY = 1 or 2"),
    _cat("SEATBLT", "How often wears a seat belt",
         {**_FREQ, 8: "Never drives or rides in a car"},
         "How often do you wear a seat belt when you drive or ride in a car?", na=8),
)


def _special_labels(item: Item) -> dict[int, str]:
    """Return the labels of an item's special codes."""
    out: dict[int, str] = {}
    if item.none is not None:
        out[item.none] = "None" if not item.unit else "Never"
    if item.digits is not None:
        dk, ref = FAMILY_CODES[item.digits]
        out.update({dk: "Don't know / not sure", ref: "Refused"})
    return out


def value_labels(items: Sequence[Item]) -> dict[str, dict[int | float, str]]:
    """Return the value labels written to the .sav and .dta files (items that have any)."""
    out: dict[str, dict[int | float, str]] = {}
    for item in items:
        labels = {**item.labels, **_special_labels(item)}
        if item.name in ("STRAT_ID", "CLUST_ID", "INT_MON"):
            continue
        if labels:
            out[item.name] = {k: v for k, v in sorted(labels.items())}
    return out


def column_labels(items: Sequence[Item]) -> list[str | None]:
    """Return the variable labels in column order."""
    return [item.label for item in items]


def decode(item: Item, raw: np.ndarray) -> np.ndarray:
    """Return the decoded value of *raw* codes (NaN unless a valid answer), the demo's own way.

    Special codes, blanks and out-of-range values become NaN; the "none" code becomes 0;
    unit-coded frequencies become times per year (day 365, week 52, month 12, year 1).
    """
    raw = np.asarray(raw, dtype=np.float64)
    value = raw.copy()
    if item.unit:
        unit, count = np.divmod(raw, 100.0)
        factor = np.select([unit == 1, unit == 2, unit == 3, unit == 4], [365.0, 52.0, 12.0, 1.0],
                           np.nan)
        ok = (count >= 1) & (count <= 99)
        value = np.where(ok, count * factor, np.nan)
    elif item.valid is not None:
        lo, hi = item.valid
        ok = (raw >= lo) & (raw <= hi)
        if item.labels:
            ok &= np.isin(raw, [k for k in item.labels if k != item.na])
        value = np.where(ok, raw, np.nan)
    if item.none is not None:
        value = np.where(raw == item.none, 0.0, value)
    return value


def _toml(value: object) -> str:
    """Format a str, number, list or int-keyed dict as a TOML value."""
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{k} = {_toml(v)}" for k, v in value.items()) + " }"
    return str(value)


_HEADER = '''\
# Tamarack Basin Community Health Survey (TBCHS) - codebook of the demo files.
# TBCHS is fictional: survey, basin, districts and people are generated by code (demo/).
# Special codes: the "family" tables give each item its don't-know / refused codes by width
# (7/9 one-digit, 77/99 two-digit, 777/999 three-digit); 8/88/888 marked "= 0" mean "none";
# a blank (system missing) means the item was not asked (skip pattern) unless the variable
# says otherwise (measurements: not_measured). Unit-coded frequencies: first digit 1 = per
# day, 2 = per week, 3 = per month, 4 = per year, last two digits the count; decoded per year.

[survey]
name = "Tamarack Basin Community Health Survey (demo)"
population = 2400000

[design]
weight = "FINALWT"
strata = "STRAT_ID"
psu = "CLUST_ID"

[defaults]
blank = "skipped"

[reasons]
not_measured = "No reading: the respondent did not attend the measurement visit"
not_applicable = "The question does not apply to the respondent (e.g. never rides in a car)"
'''

_DERIVED = '''
[derived.BMI]
label = "Body mass index (self-reported)"
kind = "continuous"
expr = "WT_KG / (HT_CM / 100) ^ 2"
'''


def _families(items: Sequence[Item]) -> list[str]:
    """Return the ``[[family]]`` tables: one per code width, listing its variables."""
    out = []
    for digits, (dk, ref) in FAMILY_CODES.items():
        names = [item.name for item in items if item.digits == digits]
        if names:
            out += ["", "[[family]]", f"name = {_toml(_FAMILY_NAMES[digits])}",
                    f"match = {_toml(names)}",
                    f'codes = {{ {dk} = "dont_know", {ref} = "refused" }}']
    return out


def _variable(item: Item) -> list[str]:
    """Return the ``[variables.NAME]`` table of one item."""
    lines = ["", f"[variables.{item.name}]"]
    if item.question:
        lines.append(f"# Q: {item.question}")
    if item.universe != "all respondents":
        lines.append(f"# Asked of: {item.universe}; blank = not asked")
    lines += [f"label = {_toml(item.label)}", f"kind = {_toml(item.kind)}"]
    if item.valid is not None and not item.unit:
        lines.append(f"range = {_toml(list(item.valid))}")
    codes: dict[int, object] = {}
    if item.none is not None:
        codes[item.none] = 0
    if item.na is not None:
        codes[item.na] = "not_applicable"
    if codes:
        lines.append(f"codes = {_toml(codes)}")
    if item.blank != "skipped":
        lines.append(f"blank = {_toml(item.blank)}")
    if item.labels:
        lines.append(f"labels = {_toml(item.labels)}")
    if item.unit:
        lines += ["", f"[variables.{item.name}.unit_prefixed]", 'to = "year"']
    return lines


def codebook_text(items: Sequence[Item]) -> str:
    """Return the codebook TOML that decodes a TBCHS file with *items*."""
    lines = [_HEADER.rstrip("\n"), *_families(items)]
    for item in items:
        lines += _variable(item)
    return "\n".join(lines) + "\n" + _DERIVED


def _replace_into(path: Path, write: object) -> None:
    """Write a file through a temporary name in the same folder, then rename it into place."""
    fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}.", suffix=path.suffix, dir=path.parent)
    os.close(fd)
    try:
        write(tmp)  # type: ignore[operator]
        os.chmod(tmp, 0o644)  # mkstemp makes the file private; published data are readable
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def write_text(path: Path, text: str) -> None:
    """Write *text* atomically (through wstats' writer when it exists)."""
    try:
        from wstats.readers.output import atomic_write
    except ImportError:
        _replace_into(path, lambda tmp: Path(tmp).write_text(text, encoding="utf-8"))
    else:
        atomic_write(path, text, overwrite=True)


def write_files(frame: pd.DataFrame, items: Sequence[Item], outdir: Path,
                formats: Sequence[str]) -> dict[str, Path]:
    """Write the sample in each of *formats* (xpt, sav, dta) to *outdir*; return the paths."""
    import pyreadstat

    labels = column_labels(items)
    vlabels = value_labels(items)
    title = "TBCHS demo sample (fictional)"
    writers = {
        "xpt": lambda tmp: pyreadstat.write_xport(
            frame, tmp, file_label=title, column_labels=labels, table_name="TBCHS",
            file_format_version=5),
        "sav": lambda tmp: pyreadstat.write_sav(
            frame, tmp, file_label=title, column_labels=labels, variable_value_labels=vlabels),
        "dta": lambda tmp: pyreadstat.write_dta(
            frame, tmp, file_label=title, column_labels=labels, variable_value_labels=vlabels),
    }
    unknown = sorted(set(formats) - set(writers))
    if unknown:
        raise ValueError(f"unknown demo format(s) {unknown}; choose from xpt, sav, dta")
    paths = {}
    for fmt in formats:
        paths[fmt] = outdir / f"tbchs_sample.{fmt}"
        _replace_into(paths[fmt], writers[fmt])
    return paths


_ANALYSIS = '''\
# TBCHS demo analysis file - PLACEHOLDER.
# The analysis-file schema is defined by the reports work; the reports engineer replaces
# this content. For now it only points at the demo data and its codebook.

[data]
path = "tbchs_sample.xpt"

[design]
codebook = "tbchs_codebook.toml"
'''


def analysis_text() -> str:
    """Return the placeholder analysis file (packaged as ``demo/tbchs_analysis.toml``)."""
    packaged = Path(__file__).with_name("tbchs_analysis.toml")
    return packaged.read_text(encoding="utf-8") if packaged.exists() else _ANALYSIS


def write_demo(outdir: str | os.PathLike[str], rows: int | None = None,
               columns: int | None = None, formats: Sequence[str] = ("xpt", "sav", "dta"),
               seed: int | None = None) -> dict[str, Path]:
    """Draw a TBCHS sample and write it with its codebook and analysis file into *outdir*.

    Parameters
    ----------
    outdir : folder to write into (created if missing); existing demo files are replaced.
    rows, columns : sample size and total number of columns (see ``build_sample``).
    formats : any of ``xpt`` (transport v5), ``sav``, ``dta``.
    seed : sample seed (default ``SAMPLE_SEED``).

    Returns
    -------
    dict
        ``{"xpt": path, "sav": path, "dta": path, "codebook": path, "analysis": path}``
        (only the formats asked for).

    Examples
    --------
    >>> paths = write_demo(tmp_path, rows=500, formats=("sav",))  # doctest: +SKIP
    """
    from demo.sample import SAMPLE_SEED, build_sample, sample_items

    folder = Path(outdir)
    folder.mkdir(parents=True, exist_ok=True)
    items = sample_items(columns)
    frame = build_sample(rows, columns, SAMPLE_SEED if seed is None else seed)
    paths = write_files(frame, items, folder, tuple(formats))
    paths["codebook"] = folder / "tbchs_codebook.toml"
    write_text(paths["codebook"], codebook_text(items))
    paths["analysis"] = folder / "tbchs_analysis.toml"
    write_text(paths["analysis"], analysis_text())
    return paths
