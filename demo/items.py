"""The TBCHS items: what each column means and how its answers are coded.

Every item is described once, in :data:`ITEMS`; the file labels, the value labels, the codebook
TOML (:mod:`demo.write`) and the demo's own decoder (used for the population truth) all come
from that one table. Names are at most 8 characters and variable labels at most 40, the limits
of transport v5.

Names are our own: lower case, a topic prefix and a short stem. ``id_`` identifier, ``ds_``
design (stratum, PSU), ``wt_`` weights, ``iv_`` interview, ``ar_`` area of residence, ``dm_``
demographics and household, ``hs_`` general health, ``sl_`` sleep, ``ac_`` care access and
prevention, ``dx_`` diagnosed conditions, ``tc_`` tobacco, ``al_`` alcohol, ``fd_`` food,
``pa_`` physical activity, ``bd_`` body (self-reported), ``mx_`` measured at the visit,
``so_`` social and daily life, ``px_`` padding items.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from demo.population import DISTRICTS, URBANICITY

__all__ = [
    "DESIGN",
    "FAMILY_CODES",
    "ITEMS",
    "Item",
    "column_labels",
    "decode",
    "value_labels",
]

FAMILY_CODES = {1: (7, 9), 2: (77, 99), 3: (777, 999)}
DESIGN = {"weight": "wt_final", "strata": "ds_strat", "psu": "ds_psu"}
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


_CURRENT = "tc_now = 1 or 2 (uses tobacco every day or some days)"
ITEMS: tuple[Item, ...] = (
    _num("id_resp", "Respondent identifier", 1, 9_999_999, "", None, kind="continuous"),
    _num("ds_strat", "Design stratum", 1, 52, "", None, kind="categorical"),
    _num("ds_psu", "Cluster (PSU) within stratum", 1, 6, "", None, kind="categorical"),
    _num("wt_base", "Base weight (inverse selection prob.)", 0, 1e9, "", None, kind="continuous"),
    _num("wt_final", "Final weight, nonresponse adjusted", 0, 1e9, "", None, kind="continuous"),
    _cat("ar_dist", "Health district of residence", DISTRICTS, "", None),
    _cat("ar_urban", "Urbanicity band of the cluster", URBANICITY, "", None),
    _num("dm_age", "Age in years", 18, 99, "How old are you?", None, kind="continuous"),
    _cat("dm_age5", "Age group", {1: "18-29", 2: "30-44", 3: "45-59", 4: "60-74", 5: "75+"},
         "", None),
    _cat("dm_sex", "Sex recorded at interview", {1: "Male", 2: "Female"}, "", None),
    _num("dm_adult", "Adults (18+) in the household", 1, 4, "How many adults live here?",
         None),
    _cat("iv_mode", "Mode of interview", {1: "Telephone", 2: "Web", 3: "In person"}, "", None),
    _num("iv_month", "Month of interview", 1, 12, "", None, kind="categorical"),
    _cat("hs_rate", "Self-rated general health",
         {1: "Excellent", 2: "Very good", 3: "Good", 4: "Fair", 5: "Poor"},
         "All things considered, how would you rate your health these days?"),
    _num("hs_body", "Days body health not good, past 30", 1, 30,
         "Thinking of your body - illness and injury - on how many of the last 30 days was "
         "your health not good?", 2, none=88),
    _num("hs_mood", "Days mood/stress not good, past 30", 1, 30,
         "On how many of the last 30 days were your mood, worries or stress not good?", 2,
         none=88),
    _num("sl_hours", "Hours of sleep in a usual night", 1, 24,
         "In a usual night, how many hours do you sleep?", 2),
    _cat("ac_visit", "Last routine check-up", _SINCE,
         "When did you last see a health worker for a routine check-up?"),
    _cat("ac_teeth", "Last visit to a dentist", _SINCE, "When did you last visit a dentist?"),
    _cat("ac_place", "Has a usual place of care", _YN,
         "Is there one clinic or health worker you usually go to when you are sick?"),
    _cat("ac_cover", "Has health cover", _YN, "Do you have any health cover plan right now?"),
    _cat("ac_cost", "Skipped care because of cost, 12 mo", _YN,
         "In the last 12 months, did you go without needed care because of the cost?"),
    _cat("dx_bp", "Ever told blood pressure high",
         {1: "Yes", 2: "No", 3: "Only while pregnant"},
         "Has a health worker ever told you that your blood pressure was high?"),
    _cat("dx_bptrt", "Takes blood pressure medicine now", _YN,
         "Do you take medicine for your blood pressure now?", universe="dx_bp = 1"),
    _cat("ac_lipid", "Ever had cholesterol tested", _YN,
         "Have you ever had a blood test for cholesterol?"),
    _cat("dx_lipid", "Ever told cholesterol high", _YN,
         "Were you told that your cholesterol was high?", universe="ac_lipid = 1"),
    _cat("dx_sugar", "Ever told sugar diabetes",
         {1: "Yes", 2: "No", 3: "Borderline / pre-diabetes"},
         "Has a health worker ever told you that you have sugar diabetes?"),
    _cat("dx_asthm", "Ever told asthma", _YN, "Were you ever told that you have asthma?"),
    _cat("dx_joint", "Ever told arthritis or joint disease", _YN,
         "Were you ever told that you have arthritis or another joint disease?"),
    _cat("dx_jpain", "Joint pain limits daily activities",
         {1: "A lot", 2: "A little", 3: "Not at all"},
         "How much does joint pain limit what you do in a day?", universe="dx_joint = 1"),
    _cat("dx_depr", "Ever told a depressive disorder", _YN,
         "Were you ever told that you have depression or a depressive disorder?"),
    _cat("tc_ever", "Ever used tobacco products daily", _YN,
         "Have you ever used tobacco products daily, for a month or longer?"),
    _cat("tc_now", "Uses tobacco now",
         {1: "Every day", 2: "Some days", 3: "Not at all"},
         "Do you now use tobacco every day, some days, or not at all?",
         universe="tc_ever = 1"),
    _num("tc_start", "Age first used tobacco daily", 5, 76,
         "How old were you when you first used tobacco daily?", 2, universe="tc_ever = 1"),
    _num("tc_cigs", "Cigarettes per day, usual day", 1, 76,
         "On a usual day, how many cigarettes do you smoke? (88 = none, other tobacco only)",
         2, none=88, universe=_CURRENT),
    _cat("tc_quit", "Tried to quit tobacco, 12 mo", _YN,
         "In the last 12 months, did you stop for a day or longer to quit?", universe=_CURRENT),
    _num("al_days", "Days with alcohol, past 30", 1, 30,
         "On how many of the last 30 days did you have at least one alcoholic drink?", 2,
         none=88),
    _num("al_amt", "Drinks on a drinking day", 1, 76,
         "On the days you drank, how many drinks did you have on average?", 2,
         universe="al_days 1-30"),
    _num("al_heavy", "Heavy-drinking occasions, past 30", 1, 76,
         "How many times in the last 30 days did you have 5 or more drinks in one go?", 2,
         none=88, universe="al_days 1-30"),
    _num("fd_fruit", "Fruit, how often (unit-coded)", 1, 99,
         "How often do you eat fruit? (number per day, week, month or year)", 3, none=888,
         unit=True),
    _num("fd_veg", "Vegetables, how often (unit-coded)", 1, 99,
         "How often do you eat vegetables or salad?", 3, none=888, unit=True),
    _num("fd_sweet", "Sugary drinks, how often (unit-coded)", 1, 99,
         "How often do you drink soft drinks or other sugar-sweetened drinks?", 3, none=888,
         unit=True),
    _num("fd_away", "Take-away meals, how often (unit-coded)", 1, 99,
         "How often do you eat a meal bought from a take-away or fast-food outlet?", 3,
         none=888, unit=True),
    _num("pa_hday", "Days of vigorous activity, usual week", 1, 7,
         "In a usual week, on how many days do you do vigorous activity for 10 minutes or "
         "more?", 3, none=888),
    _num("pa_hmin", "Minutes of vigorous activity per day", 1, 600,
         "On those days, how many minutes in total?", 3, universe="pa_hday 1-7"),
    _num("pa_mday", "Days of moderate activity, usual week", 1, 7,
         "In a usual week, on how many days do you do moderate activity for 10 minutes or "
         "more?", 3, none=888),
    _num("pa_mmin", "Minutes of moderate activity per day", 1, 600,
         "On those days, how many minutes in total?", 3, universe="pa_mday 1-7"),
    _num("pa_walk", "Days walked 10+ minutes, usual week", 1, 7,
         "In a usual week, on how many days do you walk for at least 10 minutes at a time?",
         3, none=888),
    _cat("pa_sport", "Any exercise outside work, 30 days", _YN,
         "Apart from your job, did you do any exercise or sport in the last 30 days?"),
    _num("pa_sit", "Hours sitting on a usual day", 1, 24,
         "On a usual day, how many hours do you spend sitting?", 2),
    _num("pa_scrn", "Hours of leisure screen time per day", 1, 24,
         "On a usual day, how many hours of screen time do you have outside work?", 2,
         none=88),
    _num("bd_hgt", "Height, self-reported (cm)", 100, 230,
         "How tall are you without shoes, in centimetres?", 3, kind="continuous"),
    _num("bd_mass", "Weight, self-reported (kg)", 25, 300,
         "How much do you weigh without shoes, in kilograms?", 3, kind="continuous"),
    _num("mx_sys", "Systolic blood pressure, measured", 60, 260,
         "Mean of two systolic readings at the measurement visit (mmHg)", None,
         kind="continuous", blank="not_measured"),
    _num("mx_dia", "Diastolic blood pressure, measured", 30, 160,
         "Mean of two diastolic readings at the measurement visit (mmHg)", None,
         kind="continuous", blank="not_measured"),
    _num("mx_waist", "Waist circumference, measured (cm)", 40, 200,
         "Waist circumference at the measurement visit (cm)", None, kind="continuous",
         blank="not_measured"),
    _cat("dm_partn", "Living arrangement / partnership",
         {1: "Married or civil union", 2: "Lives with a partner", 3: "Separated or divorced",
          4: "Widowed", 5: "Never married"},
         "Which of these best describes you now?"),
    _cat("dm_work", "Main activity last week",
         {1: "Paid work", 2: "Own business", 3: "Looking for work", 4: "Home or family care",
          5: "Studying", 6: "Retired", 7: "Unable to work", 8: "Something else"},
         "What was your main activity last week?", digits=2),
    _cat("dm_qual", "Highest schooling completed",
         {1: "Primary or less", 2: "Some secondary", 3: "Secondary certificate",
          4: "Trade or college diploma", 5: "Bachelor degree", 6: "Postgraduate"},
         "What is the highest level of school or study you have completed?"),
    _cat("dm_incbd", "Household income band, last year",
         {1: "Under 15k", 2: "15k-25k", 3: "25k-35k", 4: "35k-50k", 5: "50k-75k",
          6: "75k-100k", 7: "100k-150k", 8: "150k or more"},
         "Which band was your household's income in last year, before tax?", digits=2),
    _num("dm_kids", "Children under 18 in household", 1, 20,
         "How many children under 18 live in your household?", 2, none=88),
    _cat("ac_flu", "Influenza vaccine, past 12 months", _YN,
         "In the last 12 months, have you had an influenza vaccination?"),
    _cat("ac_flumo", "Month of last influenza vaccine",
         {m: n for m, n in enumerate(("January", "February", "March", "April", "May", "June",
                                      "July", "August", "September", "October", "November",
                                      "December"), start=1)},
         "In which month did you have it?", digits=2, universe="ac_flu = 1"),
    _cat("so_alone", "How often feels isolated",
         {1: "Always", 2: "Usually", 3: "Sometimes", 4: "Rarely", 5: "Never"},
         "How often do you feel isolated?"),
    _cat("fd_short", "Food ran out, no money for more",
         {1: "Often true", 2: "Sometimes true", 3: "Never true"},
         "In the last 12 months the food we bought ran out and we had no money to get more."),
    _cat("so_home", "Home owned or rented",
         {1: "Owned", 2: "Rented", 3: "Other arrangement"},
         "Is your home owned by someone in the household, rented, or something else?"),
    _num("so_trip", "Minutes of travel to work, one way", 1, 300,
         "How many minutes does it usually take you to get to work? (888 = works at home)",
         3, none=888, universe="dm_work = 1 or 2"),
    _cat("so_belt", "How often wears a seat belt",
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
        if item.name in ("ds_strat", "ds_psu", "iv_month"):
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
