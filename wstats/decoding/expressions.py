"""Our own small expression language for derived variables and row conditions.

:func:`parse_expression` turns text into a checked :class:`Expression` (the grammar and parser
are in :mod:`wstats.decoding.expression_syntax`); :meth:`Expression.evaluate` computes it
vectorised over decoded columns (:mod:`wstats.decoding.expression_eval`). Nothing is ever
handed to Python's ``eval`` or ``ast``.
"""

from __future__ import annotations

from collections.abc import Collection, Mapping
from dataclasses import dataclass

import numpy as np

from wstats.decoding.columns import DecodedColumn
from wstats.decoding.expression_eval import Evaluator
from wstats.decoding.expression_syntax import (
    FUNCTIONS,
    _is_boolean,
    _names,
    _Node,
    _Parser,
    _tokenize,
)
from wstats.decoding.reasons import VALID, Reasons
from wstats.errors import ExpressionError, did_you_mean

__all__ = ["FUNCTIONS", "Expression", "expression_names", "parse_expression"]


@dataclass(frozen=True)
class Expression:
    """A parsed, checked expression.

    Attributes
    ----------
    text : the expression as written.
    where : where it came from (used in messages), e.g. ``"derived.bd_bmi in cb.toml"``.
    inputs : the variable names it reads.
    boolean : True when the result is a truth value (comparison, and/or/not, between, oneof).
    """

    text: str
    where: str
    inputs: frozenset[str]
    boolean: bool
    _root: _Node

    def evaluate(
        self,
        data: Mapping[str, DecodedColumn],
        vocabulary: Reasons,
        n_rows: int | None = None,
    ) -> tuple[np.ndarray, np.ndarray]:
        """Evaluate over decoded columns.

        Parameters
        ----------
        data : name -> DecodedColumn; must hold every name in :attr:`inputs`.
        vocabulary : the shared reason vocabulary (used to combine input reasons).
        n_rows : row count, needed only when the expression reads no variable.

        Returns
        -------
        (values, reasons) : float64 values (NaN where not valid; truth values are 1.0/0.0)
            and int8 reason codes.

        Examples
        --------
        >>> from wstats.decoding.columns import Dataset
        >>> ds = Dataset.from_arrays({"A": [1.0, 2.0, float("nan")]})
        >>> parse_expression("A * 2 + 1", ["A"], "test").evaluate(ds, ds.vocabulary)[0]
        array([ 3.,  5., nan])
        """
        missing = sorted(self.inputs - set(data))
        if missing:
            raise ExpressionError(f"{self.where}: expression '{self.text}' reads "
                                  f"'{missing[0]}', which is not in the data"
                                  f"{did_you_mean(missing[0], data)}")
        if n_rows is None:
            n_rows = len(next(iter(data.values()))) if data else 0
        evaluator = Evaluator(data, vocabulary, n_rows, self.where, self.text)
        values, reasons = evaluator.node(self._root)
        values = np.where(reasons == VALID, values, np.nan)
        return values.astype(np.float64), reasons.astype(np.int8)


def parse_expression(text: str, known: Collection[str] | None, where: str) -> Expression:
    """Parse and check an expression of the wstats expression language.

    Parameters
    ----------
    text : the expression, e.g. ``"WEIGHT_KG / (HEIGHT_CM / 100) ^ 2"``.
    known : names that may be used; None accepts any name (checked later against data).
    where : context for messages, e.g. ``"derived.bd_bmi in survey.toml"`` or ``"--where"``.

    Returns
    -------
    Expression

    Raises
    ------
    ExpressionError
        On a syntax error, a forbidden construct, or an unknown variable or function.

    Examples
    --------
    >>> sorted(parse_expression("dm_age >= 65 and ar_dist == 2", None, "where").inputs)
    ['dm_age', 'ar_dist']
    """
    if not isinstance(text, str) or not text.strip():
        raise ExpressionError(f"{where}: the expression is empty; write e.g. 'A / B'")
    parser = _Parser(text, where)
    root = parser.parse()
    inputs = _names(root)
    if known is not None:
        known_set = set(known)
        for name in sorted(inputs):
            if name not in known_set:
                col = next(t.col for t in parser.toks if t.kind == "name" and t.text == name)
                raise parser._fail(col, f"unknown variable '{name}'{did_you_mean(name, known)}")
    return Expression(text, where, inputs, _is_boolean(root), root)


def expression_names(text: str, where: str = "--where") -> list[str]:
    """Return the variable names an expression reads, in order of first appearance.

    Examples
    --------
    >>> expression_names("dm_age >= 65 and ar_dist == 2")
    ['dm_age', 'ar_dist']
    """
    expr = parse_expression(text, None, where)
    toks = _tokenize(text, _Parser(text, where)._fail)
    return list(dict.fromkeys(t.text for t in toks if t.kind == "name" and t.text in expr.inputs))
