"""Evaluating a parsed expression vectorised over decoded columns, reasons included.

The grammar, the parser and the rules for missing values are in :mod:`wstats.decoding.expressions`;
this module walks the parsed tree over whole arrays (or row tiles) of
:class:`~wstats.decoding.columns.DecodedColumn` values and reason codes.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import TYPE_CHECKING

import numpy as np

from wstats.decoding.expression_syntax import (
    Arrays,
    _Binary,
    _Call,
    _constant,
    _Num,
    _Str,
    _Unary,
    _Var,
)
from wstats.decoding.reasons import INVALID, VALID, Reasons
from wstats.errors import ExpressionError

if TYPE_CHECKING:
    from wstats.decoding.columns import DecodedColumn
    from wstats.decoding.expression_syntax import _Node

__all__ = ["Evaluator"]


class Evaluator:
    """Walk a tree computing (values, reasons) arrays."""

    def __init__(self, data: Mapping[str, DecodedColumn], vocab: Reasons, n: int,
                 where: str, text: str) -> None:
        self.data, self.vocab, self.n = data, vocab, n
        self.where, self.text = where, text

    def node(self, node: _Node) -> Arrays:
        """Evaluate one node."""
        if isinstance(node, _Num):
            return np.full(self.n, node.value), np.zeros(self.n, dtype=np.int8)
        if isinstance(node, _Var):
            return self.var(node.name)
        if isinstance(node, _Unary):
            v, r = self.node(node.arg)
            out = -v if node.op == "-" else (v == 0).astype(np.float64)
            return out, r
        if isinstance(node, _Binary):
            return self.binary(node)
        if isinstance(node, _Call):
            return self.call(node)
        raise self.error("text is only allowed as a choice in oneof()")

    def error(self, what: str) -> ExpressionError:
        """Build a one-line evaluation error."""
        return ExpressionError(f"{self.where}: expression '{self.text}': {what}")

    def var(self, name: str) -> Arrays:
        """Return a numeric variable's values and reasons."""
        col = self.data[name]
        if col.values.dtype.kind != "f":
            raise self.error(f"variable '{name}' holds text; test it with oneof({name}, \"a\")")
        return col.values, col.reasons

    def settle(self, values: np.ndarray, *reasons: np.ndarray) -> Arrays:
        """Combine input reasons; undefined results of valid inputs become ``invalid``."""
        r = self.vocab.combine(*reasons) if len(reasons) > 1 else reasons[0].copy()
        r[(r == VALID) & ~np.isfinite(values)] = INVALID
        return values, r

    def binary(self, node: _Binary) -> Arrays:
        """Evaluate an operator with two operands."""
        lv, lr = self.node(node.left)
        rv, rr = self.node(node.right)
        if node.op in ("and", "or"):
            return self.kleene(node.op, lv, lr, rv, rr)
        with np.errstate(all="ignore"):
            out = _BINARY[node.op](lv, rv)
        return self.settle(out.astype(np.float64), lr, rr)

    def kleene(self, op: str, lv: np.ndarray, lr: np.ndarray, rv: np.ndarray,
               rr: np.ndarray) -> Arrays:
        """Three-valued and/or: a valid false (and) / true (or) operand decides alone."""
        lt, rt = (lv != 0) & (lr == VALID), (rv != 0) & (rr == VALID)
        lf, rf = (lv == 0) & (lr == VALID), (rv == 0) & (rr == VALID)
        if op == "and":
            decided, value = lf | rf | (lt & rt), (lt & rt)
        else:
            decided, value = lt | rt | (lf & rf), (lt | rt)
        reasons = np.where(decided, VALID, self.vocab.combine(lr, rr)).astype(np.int8)
        return value.astype(np.float64), reasons

    def call(self, node: _Call) -> Arrays:
        """Evaluate an allowed function."""
        if node.func == "oneof":
            return self.oneof(node)
        if node.func == "round" and len(node.args) == 2:
            v, r = self.node(node.args[0])
            return self.settle(np.round(v, int(_constant(node.args[1]))), r)
        pairs = [self.node(a) for a in node.args]
        vals = [p[0] for p in pairs]
        if node.func == "if":
            return self.choose(pairs)
        with np.errstate(all="ignore"):
            if node.func in ("min", "max"):
                red = np.minimum if node.func == "min" else np.maximum
                out = red.reduce(np.vstack(vals), axis=0)
            elif node.func == "between":
                out = ((vals[0] >= vals[1]) & (vals[0] <= vals[2])).astype(np.float64)
            else:
                out = _UNARY[node.func](vals[0])
        return self.settle(out, *(p[1] for p in pairs))

    def choose(self, pairs: list[Arrays]) -> Arrays:
        """Evaluate ``if(c, a, b)``: the reason comes from c, then from the branch taken."""
        (cv, cr), (av, ar), (bv, br) = pairs
        take_a = cv != 0
        values = np.where(take_a, av, bv)
        reasons = np.where(cr != VALID, cr, np.where(take_a, ar, br)).astype(np.int8)
        return values, reasons

    def oneof(self, node: _Call) -> Arrays:
        """Evaluate ``oneof(x, c1, c2, ...)`` for a numeric or a text x."""
        first = node.args[0]
        choices = node.args[1:]
        texts = [c.value for c in choices if isinstance(c, _Str)]
        if texts:
            if len(texts) != len(choices) or not isinstance(first, _Var):
                raise self.error("oneof() with text choices needs a text variable and only "
                                 "text choices")
            col = self.data[first.name]
            hit = np.isin(col.values.astype(str), texts)
            return hit.astype(np.float64), col.reasons.copy()
        v, r = self.node(first)
        hit = np.isin(v, np.array([_constant(c) for c in choices]))
        return hit.astype(np.float64), r


def _ratio(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Divide, giving NaN (not inf) where the divisor is zero."""
    return np.where(b == 0, np.nan, a / np.where(b == 0, 1.0, b))


def _log(a: np.ndarray) -> np.ndarray:
    """Natural log, NaN where the argument is <= 0."""
    return np.where(a > 0, np.log(np.where(a > 0, a, 1.0)), np.nan)


_BINARY: dict[str, Callable[[np.ndarray, np.ndarray], np.ndarray]] = {
    "+": np.add, "-": np.subtract, "*": np.multiply, "/": _ratio, "^": np.power,
    "==": np.equal, "!=": np.not_equal, "<": np.less, "<=": np.less_equal,
    ">": np.greater, ">=": np.greater_equal,
}
_UNARY: dict[str, Callable[[np.ndarray], np.ndarray]] = {
    "abs": np.abs, "sqrt": np.sqrt, "log": _log, "exp": np.exp, "round": np.round,
    "floor": np.floor, "ceil": np.ceil,
}
