"""Missing reasons read from a file's own value labels: one table of words, many languages.

A code the file declares missing (a user-missing value or range, a tagged missing value) is
named after its value label when the label says one recognisable thing: "Don't know" ->
``dont_know``, "Refusal" -> ``refused``, "Not applicable" -> ``not_applicable``, "No answer" ->
``missing``. A code the file does not declare missing but labels with nothing except such
words ("Don't know / Not sure", "(9) Refused") is taken as that reason too: the label is
the file's own statement of what the code means. A codebook entry for the code overrides
both.

The words are one plain table, :data:`LABEL_WORDS` (reason -> language -> phrases), so a
language or a phrase is added in one place. Matching ignores case, accents are kept, the
typographic apostrophe counts as ``'`` and each phrase must stand as whole words. A label
matching phrases of two reasons ("Refused / Don't know") says nothing recognisable, except
that ``missing`` gives way to a more specific reason ("Missing: not applicable").

Sources: the words are common practice in survey codebooks and questionnaires of several
countries (no single source); the German, French, Spanish and Dutch phrases are from memory.
"""

from __future__ import annotations

import re
from functools import lru_cache

__all__ = ["LABEL_WORDS", "REASON_DESCRIPTIONS", "label_reason", "only_reason_words"]

#: reason -> language (ISO 639-1) -> phrases, lower case. Extend freely.
LABEL_WORDS: dict[str, dict[str, tuple[str, ...]]] = {
    "dont_know": {
        "en": ("don't know", "dont know", "do not know", "dk", "not sure", "unsure",
               "can't say", "cannot say", "can't remember", "don't remember"),
        "de": ("weiß nicht", "weiss nicht", "keine ahnung"),
        "fr": ("ne sait pas", "ne sais pas", "nsp"),
        "es": ("no sabe", "no sé", "ns"),
        "nl": ("weet niet", "weet ik niet"),
    },
    "refused": {
        "en": ("refused", "refusal", "refuses", "rf", "declined", "declined to answer",
               "prefer not to say", "prefer not to answer"),
        "de": ("verweigert", "antwort verweigert"),
        "fr": ("refus", "refuse de répondre"),
        "es": ("rechaza", "se niega", "no quiere responder"),
        "nl": ("weigert", "geweigerd"),
    },
    "not_applicable": {
        "en": ("not applicable", "inapplicable", "n/a", "not eligible", "ineligible",
               "not asked", "legitimate skip", "valid skip", "skipped", "does not apply",
               "not in universe"),
        "de": ("trifft nicht zu", "nicht zutreffend", "entfällt", "nicht gefragt"),
        "fr": ("sans objet", "non concerné", "ne s'applique pas", "non applicable"),
        "es": ("no aplica", "no corresponde", "no procede"),
        "nl": ("niet van toepassing", "nvt", "n.v.t."),
    },
    "missing": {
        "en": ("no answer", "not ascertained", "missing", "no response", "not stated",
               "unknown", "nonresponse", "non-response"),
        "de": ("keine antwort", "keine angabe", "fehlend", "fehlender wert"),
        "fr": ("non réponse", "non-réponse", "pas de réponse", "non renseigné"),
        "es": ("sin respuesta", "no contesta", "no responde", "sin dato", "nc", "nr"),
        "nl": ("geen antwoord", "ontbrekend"),
    },
}

#: Descriptions for reasons that are not core reasons (a drafted codebook declares them).
REASON_DESCRIPTIONS: dict[str, str] = {
    "not_applicable": "Not applicable: outside the item's universe, like a skip",
}

# Words a label may hold besides reason phrases and still say only that reason.
_FILLER = re.compile(r"^[\s\d.,;:/()\[\]\-–—=|+*#'\"]*(?:(?:or|and|oder|und|ou|et|o|y|of|en)"
                     r"[\s\d.,;:/()\[\]\-–—=|+*#'\"]*)*$")


@lru_cache(maxsize=1)
def _patterns() -> tuple[tuple[str, re.Pattern[str]], ...]:
    """Compile one whole-word pattern per reason from :data:`LABEL_WORDS`."""
    out = []
    for reason, languages in LABEL_WORDS.items():
        phrases = sorted({p for words in languages.values() for p in words}, key=len,
                         reverse=True)
        body = "|".join(re.escape(p) for p in phrases)
        out.append((reason, re.compile(rf"(?<!\w)(?:{body})(?!\w)")))
    return tuple(out)


def _normal(label: str) -> str:
    """Lower-case a label and spell its apostrophes plainly."""
    return label.replace("’", "'").replace("`", "'").casefold()


def label_reason(label: str | None) -> str | None:
    """Return the reason a value label names, or None when it names none or several.

    Parameters
    ----------
    label : a value label from the file.

    Returns
    -------
    str or None
        ``dont_know``, ``refused``, ``not_applicable`` or ``missing`` (or a reason added to
        :data:`LABEL_WORDS`).

    Examples
    --------
    >>> label_reason("Don't know / Not sure"), label_reason("Refused / Don't know")
    ('dont_know', None)
    >>> label_reason("Missing: not applicable"), label_reason("Yes")
    ('not_applicable', None)
    """
    if not label:
        return None
    text = _normal(label)
    hits = {reason for reason, pat in _patterns() if pat.search(text)}
    if len(hits) > 1:
        hits.discard("missing")
    return hits.pop() if len(hits) == 1 else None


def only_reason_words(label: str | None) -> str | None:
    """Return the reason of a label made of nothing but reason words, else None.

    Used for codes the file labels but does not declare missing: "Don't know", "(7) Don't
    know / Not sure" and "Refused" qualify; "Don't know how to use it" does not.

    Examples
    --------
    >>> only_reason_words("(7) Don't know/Not sure"), only_reason_words("Not sure yet")
    ('dont_know', None)
    """
    reason = label_reason(label)
    if reason is None or label is None:
        return None
    rest = _normal(label)
    for _, pat in _patterns():
        rest = pat.sub(" ", rest)
    return reason if _FILLER.match(rest) else None
