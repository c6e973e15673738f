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
    args    := expr ("," expr)*          # strings only as oneof/reason choices
    NAME    := [A-Za-z_][A-Za-z0-9_]* | "`" any characters but "`" "`"

Nesting (parentheses, calls, signs, ``not``, ``^``) is limited to ``MAX_DEPTH`` (100)
levels; a run of one level (``a + b - c ...``, ``x or y or ...``) may be of any length.
``reason(x, "name", ...)`` is true where x has no value for one of the named reasons (and
false elsewhere, never missing): the way to select rows by why they are missing, since a
code the codebook turns into a reason is no longer a value of x.

Missing values: a result is valid only where every input it depends on is valid, otherwise
its reason is ``Reasons.combine`` of the inputs' reasons; undefined arithmetic (division by
zero, ``log`` of a value <= 0, ``sqrt`` of a negative, overflow) gives ``invalid``. Two
deliberate exceptions follow the logic of questionnaire skips: ``and``/``or`` use three-valued
(Kleene) logic, so ``false and <missing>`` is a valid false, and ``if(c, a, b)`` takes the
reason of the branch it selects (or of ``c`` when ``c`` is not valid).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from wstats.decoding.expression_tokens import Tok, tokenize
from wstats.errors import ExpressionError, did_you_mean

Arrays = tuple[np.ndarray, np.ndarray]

# name -> (min args, max args or None for any number)
FUNCTIONS: dict[str, tuple[int, int | None]] = {
    "if": (3, 3), "min": (2, None), "max": (2, None), "abs": (1, 1), "sqrt": (1, 1),
    "log": (1, 1), "exp": (1, 1), "round": (1, 2), "floor": (1, 1), "ceil": (1, 1),
    "between": (3, 3), "oneof": (2, None), "reason": (2, None),
}
_COMPARE = ("==", "!=", "<", "<=", ">", ">=")
_BOOLEAN_FUNCS = ("between", "oneof", "reason")
#: Functions whose arguments after the first are constant choices (numbers or quoted text).
_CHOICE_FUNCS = ("oneof", "reason")


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
class _Chain:
    """A run of left-associative operators of one level: args[0] ops[0] args[1] ops[1] ..."""

    ops: tuple[str, ...]
    args: tuple[_Node, ...]


@dataclass(frozen=True)
class _Call:
    func: str
    args: tuple[_Node, ...]


_Node = _Num | _Str | _Var | _Unary | _Binary | _Chain | _Call


#: Deepest nesting of parentheses, calls, signs, 'not' and '^' the parser takes.
MAX_DEPTH = 100
#: Binding strength of the infix operators (higher binds tighter).
_PREC = {"or": 1, "and": 2, **dict.fromkeys(_COMPARE, 4), "+": 5, "-": 5, "*": 6, "/": 6,
         "^": 8}
_NOT, _COMPARISON, _SIGN = 3, 4, 7
#: Operators whose runs are kept flat (one node, folded left to right when evaluated).
_CHAINED = frozenset({"or", "and", "+", "-", "*", "/"})


class _Parser:
    """Precedence-climbing parser over the token list.

    Each level of nesting costs three Python frames, whatever the operator, and the depth
    is capped at :data:`MAX_DEPTH` with a one-line error; a long run of one precedence level
    (``a + b - c + ...``, ``x or y or ...``) is read in a loop into one flat node, so its
    length costs no depth at all.
    """

    def __init__(self, text: str, where: str) -> None:
        self.text, self.where = text, where
        self.toks = tokenize(text, self._fail)
        self.i = 0
        self.depth = 0

    def _fail(self, col: int, what: str) -> ExpressionError:
        """Build the one-line error for a problem at column *col*."""
        shown = self.text if len(self.text) <= 80 else self.text[:77] + "..."
        return ExpressionError(f"{self.where}: expression '{shown}' column {col}: {what}")

    def peek(self) -> Tok:
        """Return the current token."""
        return self.toks[self.i]

    def take(self) -> Tok:
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

    def infix(self) -> str | None:
        """Return the infix operator at the current token, or None."""
        tok = self.peek()
        if (tok.kind == "kw" and tok.text in ("and", "or")) or (
                tok.kind == "op" and tok.text in _PREC):
            return tok.text
        return None

    def expr(self, lowest: int = 0) -> _Node:
        """Parse operators binding at least as tight as *lowest*, one nesting level deeper."""
        self.depth += 1
        if self.depth > MAX_DEPTH:
            raise self._fail(self.peek().col, f"the expression nests more than {MAX_DEPTH} "
                             "levels deep (parentheses, calls, signs, 'not' and '^' together); "
                             "split it into derived variables")
        node = self.prefix(lowest)
        while (op := self.infix()) is not None and _PREC[op] >= lowest:
            node = self.operator(op, node)
        self.depth -= 1
        return node

    def operator(self, op: str, left: _Node) -> _Node:
        """Parse the right side of *op* (and, for a chained operator, the rest of its run)."""
        col = self.take().col
        if op == "^":  # right-associative; the exponent may carry a sign
            return _Binary("^", left, self.expr(_SIGN))
        if op in _COMPARE:
            node = _Binary(op, left, self.expr(_PREC[op] + 1))
            if self.infix() in _COMPARE:
                raise self._fail(self.peek().col, "comparisons cannot be chained; use "
                                 "between(x, lo, hi) or 'and'")
            return node
        del col
        ops, args = [op], [left, self.expr(_PREC[op] + 1)]
        while (nxt := self.infix()) is not None and _PREC[nxt] == _PREC[op]:
            self.take()
            ops.append(nxt)
            args.append(self.expr(_PREC[op] + 1))
        if len(ops) == 1:
            return _Binary(op, args[0], args[1])
        return _Chain(tuple(ops), tuple(args))

    def prefix(self, lowest: int) -> _Node:
        """Parse 'not' and sign prefixes where they may stand, else an atom."""
        tok = self.peek()
        if tok.kind == "kw" and tok.text == "not" and lowest <= _NOT:
            self.take()
            return _Unary("not", self.expr(_NOT))
        if tok.kind == "op" and tok.text in ("-", "+") and lowest <= _SIGN:
            self.take()
            arg = self.expr(_SIGN)  # binds looser than '^': -x^2 is -(x^2)
            return _Unary("-", arg) if tok.text == "-" else arg
        return self.atom()

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
            if self.peek().kind == "op" and self.peek().text == "(" and not tok.quoted:
                return self.call(tok)
            return _Var(tok.text)
        if tok.kind == "str":
            raise self._fail(tok.col, "text is only allowed as a choice in oneof(x, \"a\", ...) "
                             "and reason(x, \"name\", ...)")
        if tok.kind == "end":
            raise self._fail(tok.col, "the expression ends too early")
        if tok.kind == "kw":
            raise self._fail(tok.col, f"'{tok.text}' cannot stand here; put the part it "
                             "applies to in parentheses")
        raise self._fail(tok.col, f"unexpected '{tok.text}'")

    def call(self, name: Tok) -> _Node:
        """Parse the arguments of an allowed function call."""
        if name.text not in FUNCTIONS:
            allowed = ", ".join(sorted(FUNCTIONS))
            raise self._fail(name.col, f"function '{name.text}' is not allowed; allowed: "
                             f"{allowed}{did_you_mean(name.text, FUNCTIONS)}")
        self.expect("(")
        args: list[_Node] = [self.expr()] if self.peek().text != ")" else []
        while self.peek().kind == "op" and self.peek().text == ",":
            self.take()
            args.append(self.choice(name.text) if name.text in _CHOICE_FUNCS else self.expr())
        self.expect(")")
        low, high = FUNCTIONS[name.text]
        if len(args) < low or (high is not None and len(args) > high):
            want = f"{low}" if low == high else f"{low} to {high}" if high else f"at least {low}"
            raise self._fail(name.col, f"{name.text}() takes {want} arguments, got {len(args)}")
        if name.text == "round" and len(args) == 2 and not _is_constant(args[1]):
            raise self._fail(name.col, "round(x, digits) needs a number for digits")
        if name.text == "reason" and not isinstance(args[0], _Var):
            raise self._fail(name.col, "reason(x, \"name\", ...) needs a variable as x")
        return _Call(name.text, tuple(args))

    def choice(self, func: str) -> _Node:
        """Parse a constant choice of oneof or reason: a (signed) number or quoted text."""
        tok = self.peek()
        if tok.kind == "str":
            self.take()
            return _Str(tok.text[1:-1])
        if func == "reason":
            raise self._fail(tok.col, "reason() names reasons in quotes, e.g. "
                             "reason(x, \"refused\")")
        node = self.expr(_SIGN)
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


def _children(node: _Node) -> tuple[_Node, ...]:
    """Return the nodes directly below *node*."""
    if isinstance(node, _Unary):
        return (node.arg,)
    if isinstance(node, _Binary):
        return (node.left, node.right)
    if isinstance(node, _Chain | _Call):
        return node.args
    return ()


def _names(node: _Node) -> frozenset[str]:
    """Collect the variable names a tree refers to (iteratively: any depth)."""
    found: set[str] = set()
    todo = [node]
    while todo:
        here = todo.pop()
        if isinstance(here, _Var):
            found.add(here.name)
        todo.extend(_children(here))
    return frozenset(found)


def _is_boolean(node: _Node) -> bool:
    """Tell whether the tree yields 1/0 truth values."""
    if isinstance(node, _Chain):
        return node.ops[0] in ("and", "or")
    if isinstance(node, _Binary):
        return node.op in _COMPARE or node.op in ("and", "or")
    if isinstance(node, _Unary):
        return node.op == "not"
    return isinstance(node, _Call) and node.func in _BOOLEAN_FUNCS
