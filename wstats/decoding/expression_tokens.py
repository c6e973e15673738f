"""The tokens of our expression language: the tokenizer and the reasons it refuses text.

A character outside the grammar of :mod:`wstats.decoding.expression_syntax` is refused
here with a one-line :class:`~wstats.errors.ExpressionError` naming its column.
"""

from __future__ import annotations

import keyword
import re
from collections.abc import Callable
from dataclasses import dataclass

from wstats.errors import ExpressionError

__all__ = ["KEYWORDS", "Tok", "tokenize"]

KEYWORDS = frozenset({"and", "or", "not"})
_TOKEN = re.compile(
    r"(?P<ws>\s+)"
    r"|(?P<num>(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)"
    r"|(?P<name>[A-Za-z_][A-Za-z0-9_]*)"
    r"|(?P<qname>`[^`]*`)"
    r"|(?P<str>\"[^\"\\]*\"|'[^'\\]*')"
    r"|(?P<op>==|!=|<=|>=|[-+*/^(),<>])"
)
_FORBIDDEN = {
    ".": "attribute access is not allowed", "[": "indexing is not allowed",
    "]": "indexing is not allowed", "=": "assignment is not allowed (compare with ==)",
    "%": "'%' is not an operator here", "*": "'**' is not an operator (use ^)",
    "&": "use 'and'", "|": "use 'or'", "!": "use 'not' or '!='", ":": "':' is not allowed",
    "{": "braces are not allowed", "}": "braces are not allowed", "@": "'@' is not allowed",
    "#": "comments are not allowed", ";": "';' is not allowed", "\\": "'\\' is not allowed",
}
_PYTHON_WORDS = frozenset(w for w in keyword.kwlist if w.islower()) - KEYWORDS - {"if"}


@dataclass(frozen=True)
class Tok:
    """One token: its kind, its text and where it starts."""

    kind: str  # num, name, str, op, kw, end
    text: str
    col: int  # 1-based column
    quoted: bool = False  # a name written between backticks


def tokenize(text: str, fail: Callable[[int, str], ExpressionError]) -> list[Tok]:
    """Split *text* into tokens, rejecting any character outside the grammar."""
    toks: list[Tok] = []
    pos = 0
    while pos < len(text):
        m = _TOKEN.match(text, pos)
        if m is None or (m.lastgroup == "op" and text.startswith("**", pos)):
            raise fail(pos + 1, _refused(text, pos))
        kind = m.lastgroup or "ws"
        word = m.group()
        if kind == "qname":
            toks.append(_quoted(word, pos, fail))
        else:
            _check_word(text, m, fail)
        if kind not in ("ws", "qname"):
            toks.append(Tok("kw" if kind == "name" and word in KEYWORDS else kind, word,
                             pos + 1))
        pos = m.end()
    toks.append(Tok("end", "", len(text) + 1))
    return toks


def _refused(text: str, pos: int) -> str:
    """Say why the character at *pos* cannot start a token."""
    ch = text[pos]
    if ch in "\"'":
        return "unterminated or escaped text"
    if ch == "`":
        return "a name in backticks needs a closing backtick"
    if ch in _FORBIDDEN:
        return _FORBIDDEN[ch]
    if ch.isalpha() or ch.isdigit():
        return (f"character '{ch}' cannot be part of a plain name; write a name with such "
                "characters between backticks, e.g. `größe` > 3")
    return f"character '{ch}' is not part of the expression language"


def _quoted(word: str, pos: int, fail: Callable[[int, str], ExpressionError]) -> Tok:
    """Return the name token of a backtick-quoted name."""
    name = word[1:-1]
    if not name.strip():
        raise fail(pos + 1, "a name in backticks is empty")
    if name.startswith("__"):
        raise fail(pos + 1, f"names starting with '__' such as '{name}' are not allowed")
    return Tok("name", name, pos + 1, quoted=True)


def _check_word(text: str, m: re.Match[str], fail: Callable[[int, str], ExpressionError]
                ) -> None:
    """Refuse dunder names, Python words, and a number or name glued to what follows."""
    kind, word, pos = m.lastgroup, m.group(), m.start()
    if kind == "name" and word.startswith("__"):
        raise fail(pos + 1, f"names starting with '__' such as '{word}' are not allowed")
    if kind == "num" and m.end() < len(text) and (text[m.end()].isalpha()
                                                  or text[m.end()] in "._"):
        raise fail(m.end() + 1, f"unexpected '{text[m.end()]}' after the number '{word}'")
    if kind == "name" and word in _PYTHON_WORDS:
        raise fail(pos + 1, f"'{word}' is not part of the expression language")
    if kind == "name" and m.end() < len(text) and text[m.end()] in ".[":
        raise fail(m.end() + 1, _FORBIDDEN[text[m.end()]])
