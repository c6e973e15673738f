"""The grammar of our expression language: tokens, syntax-tree nodes and the parser.

The text is split by a tokenizer that knows only the tokens of the grammar below, parsed by a Pratt
(precedence-climbing) parser into a tree of frozen nodes, and evaluated vectorised over
:class:`~wstats.decoding.columns.DecodedColumn` arrays (:mod:`wstats.decoding.expression_eval`).
Nothing is ever handed to Python's ``eval`` or ``ast``: a character outside the grammar is an
:class:`~wstats.errors.ExpressionError` naming its column.

Grammar (lowest precedence first)::

    expr    := or
    or      := and ("or" and)*
    and     := not ("and" not)*
    not     := "not" not | compare
    compare := sum (("==" | "!=" | "<" | "<=" | ">" | ">=") sum)?     # no chains
    sum     := product (("+" | "-") product)*
    product := unary (("*" | "/") unary)*
    unary   := "-" unary | power
    power   := atom ("^" unary)?                                       # right-associative
    atom    := NUMBER | NAME | NAME "(" args ")" | "(" expr ")"
    args    := expr ("," expr)*          # strings only as oneof(x, "a", "b") choices

Missing values: a result is valid only where every input it depends on is valid, otherwise
its reason is ``Reasons.combine`` of the inputs' reasons; undefined arithmetic (division by
zero, ``log`` of a value <= 0, ``sqrt`` of a negative, overflow) gives ``invalid``. Two
deliberate exceptions follow the logic of questionnaire skips: ``and``/``or`` use three-valued
(Kleene) logic, so ``false and <missing>`` is a valid false, and ``if(c, a, b)`` takes the
reason of the branch it selects (or of ``c`` when ``c`` is not valid).
"""

from __future__ import annotations

import keyword
import re
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from wstats.errors import ExpressionError, did_you_mean

Arrays = tuple[np.ndarray, np.ndarray]

# name -> (min args, max args or None for any number)
FUNCTIONS: dict[str, tuple[int, int | None]] = {
    "if": (3, 3), "min": (2, None), "max": (2, None), "abs": (1, 1), "sqrt": (1, 1),
    "log": (1, 1), "exp": (1, 1), "round": (1, 2), "floor": (1, 1), "ceil": (1, 1),
    "between": (3, 3), "oneof": (2, None),
}
_KEYWORDS = frozenset({"and", "or", "not"})
_TOKEN = re.compile(
    r"(?P<ws>\s+)"
    r"|(?P<num>(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)"
    r"|(?P<name>[A-Za-z_][A-Za-z0-9_]*)"
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
_PYTHON_WORDS = frozenset(w for w in keyword.kwlist if w.islower()) - _KEYWORDS - {"if"}
_COMPARE = ("==", "!=", "<", "<=", ">", ">=")
_BOOLEAN_FUNCS = ("between", "oneof")


@dataclass(frozen=True)
class _Tok:
    kind: str  # num, name, str, op, kw, end
    text: str
    col: int  # 1-based column


@dataclass(frozen=True)
class _Num:
    value: float


@dataclass(frozen=True)
class _Str:
    value: str


@dataclass(frozen=True)
class _Var:
    name: str


@dataclass(frozen=True)
class _Unary:
    op: str
    arg: _Node


@dataclass(frozen=True)
class _Binary:
    op: str
    left: _Node
    right: _Node


@dataclass(frozen=True)
class _Call:
    func: str
    args: tuple[_Node, ...]


_Node = _Num | _Str | _Var | _Unary | _Binary | _Call


class _Parser:
    """Recursive-descent / precedence-climbing parser over the token list."""

    def __init__(self, text: str, where: str) -> None:
        self.text, self.where = text, where
        self.toks = _tokenize(text, self._fail)
        self.i = 0

    def _fail(self, col: int, what: str) -> ExpressionError:
        """Build the one-line error for a problem at column *col*."""
        return ExpressionError(f"{self.where}: expression '{self.text}' column {col}: {what}")

    def peek(self) -> _Tok:
        """Return the current token."""
        return self.toks[self.i]

    def take(self) -> _Tok:
        """Consume and return the current token."""
        tok = self.toks[self.i]
        self.i += 1
        return tok

    def expect(self, text: str) -> None:
        """Consume an operator token *text* or fail."""
        tok = self.take()
        if tok.text != text or tok.kind not in ("op",):
            got = "the end" if tok.kind == "end" else f"'{tok.text}'"
            raise self._fail(tok.col, f"expected '{text}' but found {got}")

    def parse(self) -> _Node:
        """Parse a whole expression and insist nothing follows it."""
        node = self.expr()
        tok = self.peek()
        if tok.kind != "end":
            raise self._fail(tok.col, f"unexpected '{tok.text}' after a complete expression")
        return node

    def expr(self) -> _Node:
        """Parse an ``or`` chain."""
        node = self.conj()
        while self.peek().text == "or" and self.peek().kind == "kw":
            self.take()
            node = _Binary("or", node, self.conj())
        return node

    def conj(self) -> _Node:
        """Parse an ``and`` chain."""
        node = self.negation()
        while self.peek().text == "and" and self.peek().kind == "kw":
            self.take()
            node = _Binary("and", node, self.negation())
        return node

    def negation(self) -> _Node:
        """Parse ``not`` prefixes."""
        if self.peek().text == "not" and self.peek().kind == "kw":
            self.take()
            return _Unary("not", self.negation())
        return self.compare()

    def compare(self) -> _Node:
        """Parse one optional comparison; chains like ``a < b < c`` are refused."""
        node = self.sum()
        if self.peek().kind == "op" and self.peek().text in _COMPARE:
            op = self.take().text
            node = _Binary(op, node, self.sum())
            nxt = self.peek()
            if nxt.kind == "op" and nxt.text in _COMPARE:
                raise self._fail(nxt.col, "comparisons cannot be chained; use between(x, lo, hi)"
                                 " or 'and'")
        return node

    def sum(self) -> _Node:
        """Parse ``+``/``-`` chains (left-associative)."""
        node = self.product()
        while self.peek().kind == "op" and self.peek().text in ("+", "-"):
            op = self.take().text
            node = _Binary(op, node, self.product())
        return node

    def product(self) -> _Node:
        """Parse ``*``/``/`` chains (left-associative)."""
        node = self.unary()
        while self.peek().kind == "op" and self.peek().text in ("*", "/"):
            op = self.take().text
            node = _Binary(op, node, self.unary())
        return node

    def unary(self) -> _Node:
        """Parse unary minus (binds looser than ``^``: ``-x^2`` is ``-(x^2)``)."""
        if self.peek().kind == "op" and self.peek().text in ("-", "+"):
            op = self.take().text
            arg = self.unary()
            return _Unary("-", arg) if op == "-" else arg
        return self.power()

    def power(self) -> _Node:
        """Parse ``^`` (right-associative)."""
        node = self.atom()
        if self.peek().kind == "op" and self.peek().text == "^":
            self.take()
            node = _Binary("^", node, self.unary())
        return node

    def atom(self) -> _Node:
        """Parse a number, a variable, a call or a parenthesised expression."""
        tok = self.take()
        if tok.kind == "num":
            return _Num(float(tok.text))
        if tok.kind == "op" and tok.text == "(":
            node = self.expr()
            self.expect(")")
            return node
        if tok.kind == "name":
            if self.peek().kind == "op" and self.peek().text == "(":
                return self.call(tok)
            return _Var(tok.text)
        if tok.kind == "str":
            raise self._fail(tok.col, "text is only allowed as a choice in oneof(x, \"a\", ...)")
        if tok.kind == "end":
            raise self._fail(tok.col, "the expression ends too early")
        raise self._fail(tok.col, f"unexpected '{tok.text}'")

    def call(self, name: _Tok) -> _Node:
        """Parse the arguments of an allowed function call."""
        if name.text not in FUNCTIONS:
            allowed = ", ".join(sorted(FUNCTIONS))
            raise self._fail(name.col, f"function '{name.text}' is not allowed; allowed: "
                             f"{allowed}{did_you_mean(name.text, FUNCTIONS)}")
        self.expect("(")
        args: list[_Node] = [self.expr()] if self.peek().text != ")" else []
        while self.peek().kind == "op" and self.peek().text == ",":
            self.take()
            args.append(self.choice() if name.text == "oneof" else self.expr())
        self.expect(")")
        low, high = FUNCTIONS[name.text]
        if len(args) < low or (high is not None and len(args) > high):
            want = f"{low}" if low == high else f"{low} to {high}" if high else f"at least {low}"
            raise self._fail(name.col, f"{name.text}() takes {want} arguments, got {len(args)}")
        if name.text == "round" and len(args) == 2 and not _is_constant(args[1]):
            raise self._fail(name.col, "round(x, digits) needs a number for digits")
        return _Call(name.text, tuple(args))

    def choice(self) -> _Node:
        """Parse a constant choice of oneof: a number, a negative number or a string."""
        tok = self.peek()
        if tok.kind == "str":
            self.take()
            return _Str(tok.text[1:-1])
        node = self.unary()
        if not _is_constant(node):
            raise self._fail(tok.col, "oneof() choices must be numbers or quoted text")
        return node


def _is_constant(node: _Node) -> bool:
    """Tell whether *node* is a (possibly negated) number literal."""
    return isinstance(node, _Num) or (isinstance(node, _Unary) and node.op == "-"
                                      and isinstance(node.arg, _Num))


def _constant(node: _Node) -> float:
    """Return the value of a constant node."""
    if isinstance(node, _Num):
        return node.value
    assert isinstance(node, _Unary) and isinstance(node.arg, _Num)
    return -node.arg.value


def _tokenize(text: str, fail: Callable[[int, str], ExpressionError]) -> list[_Tok]:
    """Split *text* into tokens, rejecting any character outside the grammar."""
    toks: list[_Tok] = []
    pos = 0
    while pos < len(text):
        m = _TOKEN.match(text, pos)
        if m is None or (m.lastgroup == "op" and text.startswith("**", pos)):
            ch = text[pos]
            what = _FORBIDDEN.get(ch, f"character '{ch}' is not part of the expression language")
            if ch in "\"'":
                what = "unterminated or escaped text"
            raise fail(pos + 1, what)
        kind = m.lastgroup or "ws"
        word = m.group()
        if kind == "name" and word.startswith("__"):
            raise fail(pos + 1, f"names starting with '__' such as '{word}' are not allowed")
        if kind == "num" and m.end() < len(text) and (text[m.end()].isalpha()
                                                      or text[m.end()] in "._"):
            raise fail(m.end() + 1, f"unexpected '{text[m.end()]}' after the number '{word}'")
        if kind == "name" and word in _PYTHON_WORDS:
            raise fail(pos + 1, f"'{word}' is not part of the expression language")
        if kind == "name" and m.end() < len(text) and text[m.end()] in ".[":
            raise fail(m.end() + 1, _FORBIDDEN[text[m.end()]])
        if kind != "ws":
            toks.append(_Tok("kw" if kind == "name" and word in _KEYWORDS else kind, word,
                             pos + 1))
        pos = m.end()
    toks.append(_Tok("end", "", len(text) + 1))
    return toks


def _names(node: _Node) -> frozenset[str]:
    """Collect the variable names a tree refers to."""
    if isinstance(node, _Var):
        return frozenset({node.name})
    if isinstance(node, _Unary):
        return _names(node.arg)
    if isinstance(node, _Binary):
        return _names(node.left) | _names(node.right)
    if isinstance(node, _Call):
        return frozenset().union(*(_names(a) for a in node.args))
    return frozenset()


def _is_boolean(node: _Node) -> bool:
    """Tell whether the tree yields 1/0 truth values."""
    if isinstance(node, _Binary):
        return node.op in _COMPARE or node.op in ("and", "or")
    if isinstance(node, _Unary):
        return node.op == "not"
    return isinstance(node, _Call) and node.func in _BOOLEAN_FUNCS
