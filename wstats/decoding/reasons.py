"""Missing reasons as a type: a fixed core vocabulary plus reasons a codebook or file adds.

A reason is stored per row as an ``int8`` code. Codes 0-5 are the core vocabulary and never
change; added reasons get codes from 6 upwards in the order they are registered, so one
:class:`Reasons` vocabulary is shared by every column of a dataset.

Precedence (used when a derived value combines inputs that are not all valid) is, strongest
first: ``refused > dont_know > (added reasons, in registration order) > invalid > missing >
skipped > valid``. The rationale: an explicit refusal or don't-know by the respondent is the
most informative statement about why the value is absent; ``skipped`` is weakest because a
derived value of a skipped item with a non-skipped input is not a legitimate skip any more.
"""

from __future__ import annotations

import re
from collections.abc import Iterator, Mapping

import numpy as np

from wstats.errors import CodebookError

__all__ = [
    "CORE_REASONS",
    "DONT_KNOW",
    "INVALID",
    "MISSING",
    "REFUSED",
    "SKIPPED",
    "VALID",
    "Reasons",
]

VALID, SKIPPED, DONT_KNOW, REFUSED, INVALID, MISSING = 0, 1, 2, 3, 4, 5
CORE_REASONS: tuple[str, ...] = ("valid", "skipped", "dont_know", "refused", "invalid", "missing")
_NAME = re.compile(r"^[a-z][a-z0-9_]{0,39}$")
_MAX_CODES = 127


class Reasons(Mapping[str, int]):
    """An ordered vocabulary of reason names -> int8 codes; the core six come first.

    Examples
    --------
    >>> r = Reasons()
    >>> r.add("not_eligible")
    6
    >>> r.name(3)
    'refused'
    """

    def __init__(self, extra: tuple[str, ...] | list[str] = ()) -> None:
        self._codes: dict[str, int] = {name: i for i, name in enumerate(CORE_REASONS)}
        for name in extra:
            self.add(name)

    def add(self, name: str) -> int:
        """Register *name* (if new) and return its code."""
        if name in self._codes:
            return self._codes[name]
        if not _NAME.match(name):
            raise CodebookError(
                f"reason name '{name}' is not allowed; use lower-case letters, digits and _ "
                "starting with a letter (e.g. 'not_eligible')"
            )
        if len(self._codes) >= _MAX_CODES:
            raise CodebookError(f"too many distinct reasons (more than {_MAX_CODES})")
        self._codes[name] = len(self._codes)
        return self._codes[name]

    def code(self, name: str) -> int:
        """Return the code of *name*; raise CodebookError naming the known reasons if unknown."""
        try:
            return self._codes[name]
        except KeyError:
            known = ", ".join(self._codes)
            raise CodebookError(f"unknown reason '{name}'; known reasons: {known}") from None

    def name(self, code: int) -> str:
        """Return the name of *code*."""
        return self.names[int(code)]

    @property
    def names(self) -> tuple[str, ...]:
        """All names in code order."""
        return tuple(self._codes)

    @property
    def extra(self) -> tuple[str, ...]:
        """Names added beyond the core vocabulary, in code order."""
        return self.names[len(CORE_REASONS) :]

    def precedence(self) -> np.ndarray:
        """Return rank per code (higher wins) following the documented precedence."""
        order = ["valid", "skipped", "missing", "invalid", *reversed(self.extra),
                 "dont_know", "refused"]
        rank = np.zeros(len(self._codes), dtype=np.int16)
        for r, name in enumerate(order):
            rank[self._codes[name]] = r
        return rank

    def combine(self, *codes: np.ndarray) -> np.ndarray:
        """Return, row by row, the strongest reason among *codes* (vectorised)."""
        rank = self.precedence()
        inverse = np.argsort(rank).astype(np.int8)
        best = np.zeros_like(codes[0], dtype=np.int16)
        for c in codes:
            np.maximum(best, rank[c], out=best)
        return inverse[best]

    def __getitem__(self, name: str) -> int:
        return self._codes[name]

    def __iter__(self) -> Iterator[str]:
        return iter(self._codes)

    def __len__(self) -> int:
        return len(self._codes)

    def __repr__(self) -> str:
        return f"Reasons({list(self.extra)!r})"

    def __eq__(self, other: object) -> bool:
        return isinstance(other, Reasons) and self.names == other.names

    __hash__ = None  # type: ignore[assignment]
