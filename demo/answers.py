"""The answers of a person of the Tamarack Basin: every item, before the questionnaire's codes.

Each answer is a pure function of the person (:mod:`demo.population`) and of a counter-based
random stream, so any subset of persons can be generated alone and in any order.
"""

from __future__ import annotations

import numpy as np

from demo.population import Draw, Frame, age_group, person_frame

__all__ = ["person_items", "unit_code"]


def _sig(x: np.ndarray) -> np.ndarray:
    """Return the logistic function of *x*."""
    return np.asarray(1.0 / (1.0 + np.exp(-x)), dtype=np.float64)


def _nonresponse(raw: np.ndarray, u: np.ndarray, dk: object, ref: object, digits: int) -> None:
    """Replace answers by don't know (u < dk) or refused (dk <= u < dk + ref) codes in place."""
    dk_code, ref_code = {1: (7, 9), 2: (77, 99), 3: (777, 999)}[digits]
    dk_p = np.asarray(dk, dtype=np.float64)
    ref_p = np.asarray(ref, dtype=np.float64)
    asked = ~np.isnan(raw)
    raw[asked & (u < dk_p)] = dk_code
    raw[asked & (u >= dk_p) & (u < dk_p + ref_p)] = ref_code


def _cut(score: np.ndarray, cuts: list[float]) -> np.ndarray:
    """Return categories 1..len(cuts)+1, category 1 for the highest scores."""
    return (len(cuts) + 1 - np.searchsorted(np.array(cuts), score)).astype(np.float64)


def _yes(p: np.ndarray) -> np.ndarray:
    """Return a 1 = yes / 2 = no float code from a uniform-vs-probability comparison flag."""
    return np.where(p, 1.0, 2.0)


def _only(raw: np.ndarray, asked: np.ndarray) -> np.ndarray:
    """Blank *raw* where the respondent was not asked the item."""
    return np.where(asked, raw, np.nan)


def _pick(u: np.ndarray, probs: np.ndarray, group: np.ndarray) -> np.ndarray:
    """Return categories 1..k drawn with probabilities ``probs[group]`` (rows sum to 1)."""
    cum = np.cumsum(probs, axis=1)[group, :-1]
    return np.asarray(1.0 + (u[:, None] > cum).sum(axis=1), dtype=np.float64)


# rows: age groups 18-29 .. 75+; columns: categories in code order
_MARITAL_P = np.array(
    [
        [0.20, 0.22, 0.03, 0.00, 0.55],
        [0.52, 0.15, 0.10, 0.01, 0.22],
        [0.60, 0.08, 0.17, 0.04, 0.11],
        [0.58, 0.05, 0.16, 0.14, 0.07],
        [0.42, 0.03, 0.10, 0.40, 0.05],
    ]
)
# paid work, self-employed, seeking work, home/family, student, retired, unable, other
_EMPLOY_P = np.array(
    [
        [0.50, 0.03, 0.09, 0.06, 0.27, 0.00, 0.02, 0.03],
        [0.68, 0.09, 0.05, 0.09, 0.02, 0.00, 0.04, 0.03],
        [0.62, 0.11, 0.04, 0.07, 0.01, 0.06, 0.06, 0.03],
        [0.25, 0.08, 0.02, 0.05, 0.00, 0.53, 0.05, 0.02],
        [0.03, 0.02, 0.00, 0.02, 0.00, 0.88, 0.04, 0.01],
    ]
)


def _days(u: np.ndarray, p_none: np.ndarray, v: np.ndarray, top: int, none: int) -> np.ndarray:
    """Return a 1..top count (skewed by *v* in (0, 1)) or the *none* code with prob *p_none*."""
    n = 1 + np.floor(top * v ** 1.8).clip(0, top - 1)
    return np.where(u < p_none, float(none), n)


# The stream of each item's don't-know / refused draws. The numbers are fixed (they were once
# hashed from earlier item names) so that renaming an item never changes an answer. tc_now and
# ac_flu share a stream, as they always have.
_ANSWER_STREAMS = {
    "hs_rate": 66689, "hs_body": 89040, "hs_mood": 87862, "sl_hours": 87428, "ac_visit": 67061,
    "ac_teeth": 49267, "ac_place": 86467, "ac_cover": 66658, "ac_cost": 66224, "dx_bp": 48151,
    "dx_bptrt": 49701, "ac_lipid": 85723, "dx_lipid": 68270, "dx_sugar": 83739, "dx_asthm": 48926,
    "dx_joint": 69355, "dx_jpain": 87769, "dx_depr": 69138, "tc_ever": 88420, "tc_now": 72083,
    "tc_start": 64674, "tc_cigs": 88048, "tc_quit": 91458, "al_days": 88265, "al_amt": 87056,
    "al_heavy": 34325, "fd_fruit": 38231, "fd_veg": 14547, "fd_sweet": 22855, "fd_away": 84886,
    "pa_hday": 89102, "pa_hmin": 69014, "pa_mday": 88916, "pa_mmin": 68828, "pa_walk": 87645,
    "pa_sport": 69076, "pa_sit": 72114, "pa_scrn": 87583, "bd_hgt": 37518, "bd_mass": 38045,
    "dm_partn": 65697, "dm_work": 53576, "dm_qual": 23568, "dm_incbd": 48895, "dm_kids": 67805,
    "ac_flu": 72083, "ac_flumo": 71122, "so_alone": 82716, "fd_short": 67681, "so_home": 67557,
    "so_trip": 68456, "so_belt": 66906,
}


class _Gen:
    """Generate the raw codes of the core items for a set of persons."""

    def __init__(self, frame: Frame, pid: np.ndarray) -> None:
        self.p = person_frame(frame, pid)
        self.d = Draw(pid, frame.seed)
        self.old = (self.p["age"] - 45) / 20.0
        self.h = self.p["health"]
        self.out: dict[str, np.ndarray] = {}

    def u(self, stream: int) -> np.ndarray:
        """Return the person's uniforms for *stream*."""
        return self.d.u(stream)

    def put(self, name: str, raw: np.ndarray, dk: object, ref: object, digits: int | None) -> None:
        """Store *raw* as item *name*, with don't know / refused codes of the *digits* family."""
        raw = np.asarray(raw, dtype=np.float64).copy()
        if digits is not None:
            _nonresponse(raw, self.u(_ANSWER_STREAMS[name]), dk, ref, digits)
        self.out[name] = raw

    def health(self) -> None:
        """Self-rated health, unhealthy days, sleep, care access."""
        h, old, u = self.h, self.old, self.u
        self.put("hs_rate", _cut(h + 0.6 * self.d.z(10), [-1.7, -0.8, 0.2, 1.1]), 0.008, 0.004, 1)
        self.put("hs_body", _days(u(11), _sig(1.1 + 1.1 * h), u(12), 30, 88), 0.02, 0.008, 2)
        ment = _days(u(13), _sig(0.9 + 0.6 * h + 0.5 * old), u(14), 30, 88)
        self.put("hs_mood", ment, 0.018, 0.012 + 0.01 * (old > 0), 2)
        sleep = np.clip(np.rint(7.0 + 0.9 * self.d.z(15) + 0.25 * h), 3, 14)
        self.put("sl_hours", sleep, 0.012, 0.004, 2)
        for name, stream, shift in (("ac_visit", 16, 0.0), ("ac_teeth", 17, 0.5)):
            s = self.d.z(stream) + 0.5 * old - shift
            cat = _cut(s, [-1.9, -1.3, -0.8, -0.4])  # 1 = within a year ... 5 = never
            cat = np.where(cat == 5, 8.0, cat)
            self.put(name, cat, 0.015, 0.004, 1)
        self.put("ac_place", _yes(u(18) < _sig(1.2 + 0.6 * old + 0.2 * h)), 0.004, 0.002, 1)
        covered = u(19) < _sig(1.8 + 0.8 * old - 0.15 * self.p["urban"])
        self.put("ac_cover", _yes(covered), 0.006, 0.003, 1)
        self.put("ac_cost", _yes(u(20) < _sig(-2.0 - 0.5 * h + 1.2 * ~covered)), 0.004, 0.003, 1)

    def conditions(self) -> None:
        """Diagnosed conditions with their follow-ups."""
        h, old, u = self.h, self.old, self.u
        bp = np.where(u(21) < _sig(-1.3 + 1.1 * old - 0.4 * h), 1.0, 2.0)
        preg = (self.p["sex"] == 2) & (self.p["age"] < 45) & (u(22) < 0.04) & (bp == 2)
        self.put("dx_bp", np.where(preg, 3.0, bp), 0.006, 0.003, 1)
        treated = _yes(u(23) < _sig(0.4 + 0.9 * old))
        self.put("dx_bptrt", _only(treated, self.out["dx_bp"] == 1), 0.01, 0.004, 1)
        chk = _yes(u(24) < _sig(1.2 + 1.0 * old))
        self.put("ac_lipid", chk, 0.03, 0.004, 1)
        lipid_hi = _yes(u(25) < _sig(-0.9 + 0.8 * old - 0.3 * h))
        self.put("dx_lipid", _only(lipid_hi, self.out["ac_lipid"] == 1), 0.015, 0.004, 1)
        dia = np.where(u(26) < _sig(-2.6 + 0.9 * old - 0.5 * h), 1.0, 2.0)
        self.put("dx_sugar", np.where((dia == 2) & (u(27) < 0.05), 3.0, dia), 0.005, 0.002, 1)
        self.put("dx_asthm", _yes(u(28) < _sig(-2.0 - 0.3 * h)), 0.005, 0.002, 1)
        self.put("dx_joint", _yes(u(29) < _sig(-1.4 + 1.2 * old - 0.3 * h)), 0.008, 0.002, 1)
        pain = _cut(-(0.8 * h + self.d.z(30)), [-0.3, 0.9])  # 1 = a lot, 3 = not at all
        self.put("dx_jpain", _only(pain, self.out["dx_joint"] == 1), 0.01, 0.004, 1)
        self.put("dx_depr", _yes(u(31) < _sig(-1.6 - 0.5 * h - 0.3 * old)), 0.006, 0.01, 1)

    def tobacco(self) -> None:
        """The tobacco screener and the items only its qualifiers are asked."""
        u, old, age = self.u, self.old, self.p["age"]
        district_effect = np.array([0, -0.3, -0.1, 0.2, 0.35, 0.5])[self.p["district"] - 1]
        male = (self.p["sex"] == 1).astype(float)
        ever = u(40) < _sig(-1.0 + 0.4 * male + 0.25 * old - 0.25 * self.h + district_effect)
        self.put("tc_ever", _yes(ever), 0.004, 0.004, 1)
        asked = self.out["tc_ever"] == 1
        now = 4.0 - _cut(self.d.z(41) + 0.6 * old, [-0.4, -0.1])  # 1 every day ... 3 not at all
        self.put("tc_now", _only(now, asked), 0.004, 0.004, 1)
        start = np.minimum(np.clip(np.rint(17 + 3.5 * self.d.z(42) ** 2), 10, 70), age)
        self.put("tc_start", _only(start, asked), 0.06 + 0.04 * (old > 0.5), 0.01, 2)
        current = (self.out["tc_now"] == 1) | (self.out["tc_now"] == 2)
        cigs = np.clip(np.rint(np.exp(2.4 + 0.6 * self.d.z(44))), 1, 60)
        cigs = np.where(u(43) < 0.12, 88.0, cigs)  # 88: uses tobacco, but no cigarettes
        self.put("tc_cigs", _only(cigs, current), 0.03, 0.01, 2)
        self.put("tc_quit", _only(_yes(u(45) < 0.45), current), 0.01, 0.005, 1)

    def alcohol(self) -> None:
        """Drinking days and, for drinkers, amounts."""
        u = self.u
        p_none = _sig(-0.2 + 0.3 * self.old + 0.2 * (self.p["sex"] == 2))
        self.put("al_days", _days(u(50), p_none, u(51), 30, 88), 0.015, 0.01, 2)
        drank = self.out["al_days"] <= 30
        drinks = np.clip(np.rint(np.exp(0.7 + 0.5 * self.d.z(52) - 0.2 * self.old)), 1, 20)
        self.put("al_amt", _only(drinks, drank), 0.02, 0.01, 2)
        heavy = _days(u(53), _sig(0.6 + 0.8 * self.old), u(54), 20, 88)
        self.put("al_heavy", _only(heavy, drank), 0.02, 0.01, 2)

    def diet(self) -> None:
        """Frequencies coded with a unit digit: 1xx per day ... 4xx per year, 888 never."""
        for name, stream, mu, sd in (
            ("fd_fruit", 60, 5.4, 1.1),
            ("fd_veg", 62, 5.8, 0.9),
            ("fd_sweet", 64, 3.6, 1.8),
            ("fd_away", 66, 3.2, 1.2),
        ):
            rate = np.exp(mu + sd * self.d.z(stream) + 0.15 * self.h)
            rate = np.where(self.u(stream + 1) < 0.04, 0.0, rate)
            ref = 0.004 + 0.006 * (self.old > 1)
            self.put(name, unit_code(rate, self.u(stream + 2)), 0.025, ref, 3)

    def activity(self) -> None:
        """Physical activity days and minutes (888 = none), sitting and screen time."""
        u, h, old = self.u, self.h, self.old
        for name, mins, stream, base in (
            ("pa_hday", "pa_hmin", 70, -0.2),
            ("pa_mday", "pa_mmin", 73, 0.6),
        ):
            days = np.clip(np.ceil(7 * u(stream) ** (1.2 - 0.2 * h)), 1, 7)
            raw = np.where(u(stream + 1) < _sig(-(base + 0.5 * h - 0.6 * old)), 888.0, days)
            self.put(name, raw, 0.02, 0.004, 3)
            minutes = np.clip(5 * np.rint(np.exp(3.5 + 0.6 * self.d.z(stream + 2)) / 5), 5, 600)
            self.put(mins, _only(minutes, self.out[name] <= 7), 0.04, 0.004, 3)
        walk = np.clip(np.ceil(7 * u(76) ** 0.7), 1, 7)
        self.put("pa_walk", np.where(u(77) < 0.12 + 0.1 * (old > 1), 888.0, walk), 0.02, 0.004, 3)
        self.put("pa_sport", _yes(u(78) < _sig(1.0 + 0.7 * h - 0.3 * old)), 0.003, 0.002, 1)
        sit = np.clip(np.rint(6 + 2.5 * self.d.z(79) + 0.8 * old), 1, 20)
        self.put("pa_sit", sit, 0.04, 0.006, 2)
        screen = np.clip(np.rint(np.exp(1.0 + 0.6 * self.d.z(80) - 0.2 * old)), 1, 16)
        self.put("pa_scrn", np.where(u(81) < 0.05, 88.0, screen), 0.02, 0.005, 2)

    def body(self) -> None:
        """Self-reported height and weight; measured blood pressure and waist."""
        z, u, old = self.d.z, self.u, self.old
        female = self.p["sex"] == 2
        ht = np.rint(np.where(female, 163, 177) + 7 * z(90))
        mass_index = 26.5 + 1.2 * old - 1.8 * self.h + 3.5 * z(91)
        wt = np.clip(np.rint(mass_index * (ht / 100) ** 2), 35, 250)
        self.put("bd_hgt", ht, 0.01, 0.004, 3)
        self.put("bd_mass", wt, 0.01, 0.01 + 0.025 * female, 3)
        # measurement visit missed: more often far from the clinics (urban band) and when young
        missed = u(92) < 0.05 + 0.03 * (self.p["urban"] - 1) + 0.04 * (old < 0)
        systolic = np.rint(2 * (121 + 9 * old + 4 * (mass_index - 27) / 3.5 + 13 * z(93))) / 2
        systolic = systolic.clip(80, 250)
        self.put("mx_sys", np.where(missed, np.nan, systolic), 0, 0, None)
        diastolic = (np.rint(2 * (76 + 0.3 * (systolic - 121) + 7 * z(94))) / 2).clip(40, 140)
        self.put("mx_dia", np.where(missed, np.nan, diastolic), 0, 0, None)
        waist = np.round(np.where(female, 86, 96) + 2.4 * (mass_index - 27) + 6 * z(95), 1)
        waist = waist.clip(55, 180)
        self.put("mx_waist", np.where(missed | (u(96) < 0.03), np.nan, waist), 0, 0, None)

    def social(self) -> None:
        """Living arrangement, main activity, schooling, income, household, flu, wellbeing."""
        u, z, old, age = self.u, self.d.z, self.old, self.p["age"]
        grp = age_group(age) - 1
        self.put("dm_partn", _pick(u(100), _MARITAL_P, grp), 0.002, 0.01, 1)
        emp = _pick(u(102), _EMPLOY_P, grp)
        self.put("dm_work", emp, 0.003, 0.006, 2)
        qual = 7.0 - _cut(z(105) + 0.3 * self.h - 0.2 * old, [-1.2, -0.3, 0.4, 1.3, 1.9])
        self.put("dm_qual", qual, 0.0, 0.008, 1)
        score = z(106) + 0.3 * self.h + 0.2 * self.p["cz"]
        inc = 9.0 - _cut(score, [-1.4, -0.9, -0.4, 0.0, 0.5, 1.0, 1.6])
        self.put("dm_incbd", inc, 0.05 + 0.03 * (old > 1), 0.04 + 0.08 * (old > 0.7), 2)
        kids = np.clip(np.rint(np.exp(0.3 + 0.5 * z(107))), 1, 9)
        self.put("dm_kids", np.where(u(108) < _sig(-0.2 + 1.5 * old), 88.0, kids), 0.0, 0.01, 2)
        self.put("ac_flu", _yes(u(109) < _sig(-0.4 + 1.0 * old)), 0.01, 0.003, 1)
        month = np.clip(9 + np.floor(4 * u(110) ** 1.5), 9, 12)
        month = np.where(u(111) < 0.1, 1 + np.floor(8 * u(112)), month)
        self.put("ac_flumo", _only(month, self.out["ac_flu"] == 1), 0.08, 0.005, 2)
        alone = 6.0 - _cut(z(113) + 0.5 * self.h, [-1.8, -1.0, 0.0, 1.0])
        self.put("so_alone", alone, 0.01, 0.01, 1)
        self.put("fd_short", 4.0 - _cut(z(114) + 0.6 * self.h, [-2.0, -1.2]), 0.006, 0.01, 1)
        self.put("so_home", _cut(z(115) + 0.9 * old, [-1.8, -0.2]), 0.003, 0.006, 1)
        work = (self.out["dm_work"] == 1) | (self.out["dm_work"] == 2)
        minutes = np.clip(np.rint(np.exp(3.0 + 0.6 * z(116))), 1, 180)
        trip = np.where(u(117) < 0.15, 888.0, minutes)
        self.put("so_trip", _only(trip, work), 0.01, 0.006, 3)
        belt = _cut(z(118) + 0.4 * self.h, [-2.2, -1.7, -1.2, -0.8])  # 1 = always (high score)
        self.put("so_belt", np.where(u(119) < 0.015, 8.0, belt), 0.003, 0.002, 1)

    def interview(self) -> None:
        """Interview facts and household composition."""
        u = self.u
        mode = 1 + np.searchsorted(np.array([0.45, 0.85]), u(120) - 0.1 * self.old)
        self.out["iv_mode"] = mode.astype(float)
        self.out["iv_month"] = (1 + np.floor(12 * u(121))).astype(float)
        self.out["dm_adult"] = self.p["adults"].astype(float)


def unit_code(rate: np.ndarray, u: np.ndarray) -> np.ndarray:
    """Code a per-year rate as 1xx/day, 2xx/week, 3xx/month, 4xx/year (888 = never).

    The respondent reports in the finest natural unit, or (with probability 1/4) in the next
    coarser unit when the count still fits in two digits.
    """
    factors = np.array([365.0, 52.0, 12.0, 1.0])
    natural = np.searchsorted(-factors, -np.maximum(rate, 1.0), side="left").clip(0, 3)
    coarser = np.minimum(natural + 1, 3)
    fits = np.rint(rate / factors[coarser]) <= 99
    unit = np.where((u < 0.25) & fits, coarser, natural)
    count = np.clip(np.rint(rate / factors[unit]), 1, 99)
    return np.where(rate <= 0, 888.0, 100.0 * (unit + 1) + count)


def person_items(frame: Frame, pid: np.ndarray) -> dict[str, np.ndarray]:
    """Return the raw codes of every core item for persons *pid* (NaN = blank).

    Also returns the domain variables ``dm_age``, ``dm_age5``, ``dm_sex``, ``ar_dist``,
    ``ar_urban`` and ``dm_adult``.
    """
    g = _Gen(frame, pid)
    g.out.update(
        dm_age=g.p["age"].astype(float),
        dm_age5=age_group(g.p["age"]).astype(float),
        dm_sex=g.p["sex"].astype(float),
        ar_dist=g.p["district"].astype(float),
        ar_urban=g.p["urban"].astype(float),
    )
    for part in (g.interview, g.health, g.conditions, g.tobacco, g.alcohol, g.diet,
                 g.activity, g.body, g.social):
        part()
    return g.out
