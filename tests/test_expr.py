"""The wstats expression language: parsing, forbidden constructs, vectorised evaluation.

Expected values are recomputed with plain numpy (the independent oracle); operator precedence
follows ordinary algebra (^ before unary minus before * / before + -), as our grammar in
docs/codebook.md states.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from wstats.decoding.columns import Dataset, DecodedColumn
from wstats.decoding.expressions import expression_names, parse_expression
from wstats.decoding.reasons import DONT_KNOW, INVALID, REFUSED, SKIPPED, VALID, Reasons
from wstats.errors import ExpressionError

NAN = np.nan


def data(**cols: tuple[list[float], list[int]]) -> dict[str, DecodedColumn]:
    """Build decoded columns from (values, reasons) pairs sharing one vocabulary."""
    vocab = Reasons()
    out = {}
    for name, (vals, reasons) in cols.items():
        r = np.array(reasons, dtype=np.int8)
        v = np.where(r == VALID, np.array(vals, dtype=np.float64), np.nan)
        out[name] = DecodedColumn(name, v, r, vocab)
    return out


def run(text: str, cols: dict[str, DecodedColumn]) -> tuple[np.ndarray, np.ndarray]:
    """Parse and evaluate *text* over *cols*."""
    vocab = next(iter(cols.values())).vocabulary
    return parse_expression(text, list(cols), "test").evaluate(cols, vocab)


ONE = data(X=([2.0], [VALID]))


@pytest.mark.parametrize(("text", "expected"), [
    ("2 + 3 * 4 ^ 2", 2 + 3 * 4**2),
    ("-2 ^ 2", -(2**2)),
    ("2 ^ 3 ^ 2", 2 ** (3**2)),
    ("(1 + 2) * 3", 9),
    ("10 - 4 - 3", 3),
    ("12 / 4 / 3", 1),
    ("X * -X", -4),
    ("1.5e2 + .5", 150.5),
    ("min(X, 5, -1)", -1),
    ("max(X, 5, -1)", 5),
    ("abs(-X)", 2),
    ("sqrt(X * 8)", 4),
    ("log(exp(X))", 2),
    ("round(X / 3, 2)", 0.67),
    ("floor(X / 3) + ceil(X / 3)", 1),
    ("if(X > 1, 10, 20)", 10),
    ("between(X, 2, 3) + between(X, 2.5, 3)", 1),
    ("oneof(X, 1, 2) + oneof(X, -2, 3)", 1),
    ("X == 2 and not X != 2", 1),
    ("X < 1 or X >= 2", 1),
])
def test_values(text: str, expected: float) -> None:
    values, reasons = run(text, ONE)
    np.testing.assert_allclose(values, [expected])
    assert reasons.tolist() == [VALID]


def test_vectorised_against_numpy() -> None:
    rng = np.random.default_rng(7)
    a, b = rng.normal(size=200), rng.uniform(1, 2, size=200)
    cols = data(A=(a.tolist(), [VALID] * 200), B=(b.tolist(), [VALID] * 200))
    values, _ = run("(A + 1) * B ^ 2 - A / B", cols)
    np.testing.assert_allclose(values, (a + 1) * b**2 - a / b)


def test_undefined_arithmetic_is_invalid() -> None:
    cols = data(A=([1.0, 0.0, -1.0, 4.0], [VALID] * 4))
    for text, bad in [("1 / A", [False, True, False, False]), ("log(A)", [False, True, True,
                                                                          False]),
                      ("sqrt(A)", [False, False, True, False]), ("exp(A * 1000)", [True, False,
                                                                                   False, True])]:
        values, reasons = run(text, cols)
        assert (reasons == INVALID).tolist() == bad, text
        assert np.isnan(values[np.array(bad)]).all()


def test_reasons_combine_with_documented_precedence() -> None:
    # precedence refused > dont_know > invalid > missing > skipped (wstats/decoding/reasons.py)
    cols = data(A=([1, 1, 1, 1], [REFUSED, DONT_KNOW, SKIPPED, VALID]),
                B=([1, 1, 1, 1], [DONT_KNOW, SKIPPED, INVALID, VALID]))
    values, reasons = run("A + B", cols)
    assert reasons.tolist() == [REFUSED, DONT_KNOW, INVALID, VALID]
    np.testing.assert_array_equal(values, [NAN, NAN, NAN, 2])


def test_and_or_use_three_valued_logic() -> None:
    # Kleene logic: a valid false decides 'and', a valid true decides 'or'
    cols = data(A=([0, 1, 1, 0], [VALID, VALID, SKIPPED, SKIPPED]),
                B=([1, 1, 1, 1], [SKIPPED, SKIPPED, VALID, VALID]))
    v_and, r_and = run("A == 1 and B == 1", cols)
    assert r_and.tolist() == [VALID, SKIPPED, SKIPPED, SKIPPED]
    assert v_and[0] == 0
    v_or, r_or = run("A == 1 or B == 1", cols)
    assert r_or.tolist() == [SKIPPED, VALID, VALID, VALID]
    np.testing.assert_array_equal(v_or[1:], [1, 1, 1])


def test_if_takes_the_reason_of_the_branch_taken() -> None:
    cols = data(AGE=([10, 30, 30], [VALID, VALID, REFUSED]),
                SMOKES=([1, 1, 1], [SKIPPED, VALID, VALID]))
    values, reasons = run("if(AGE < 18, 0, SMOKES)", cols)
    assert reasons.tolist() == [VALID, VALID, REFUSED]
    np.testing.assert_array_equal(values, [0, 1, NAN])


def test_oneof_on_text() -> None:
    vocab = Reasons()
    s = DecodedColumn("S", np.array(["a", "b", None], dtype=object),
                      np.array([0, 0, 1], dtype=np.int8), vocab, kind="text")
    values, reasons = parse_expression('oneof(S, "a", \'c\')', ["S"], "t").evaluate({"S": s},
                                                                                   vocab)
    np.testing.assert_array_equal(values, [1, 0, NAN])
    assert reasons.tolist() == [VALID, VALID, SKIPPED]
    with pytest.raises(ExpressionError, match="holds text; test it with oneof"):
        parse_expression("S + 1", ["S"], "t").evaluate({"S": s}, vocab)


def test_constant_expression_needs_row_count() -> None:
    expr = parse_expression("1 + 1", [], "t")
    values, reasons = expr.evaluate({}, Reasons(), n_rows=3)
    np.testing.assert_array_equal(values, [2, 2, 2])
    assert expr.inputs == frozenset()


def test_inputs_and_names() -> None:
    expr = parse_expression("dm_age >= 65 and ar_dist == 2", None, "--where")
    assert expr.inputs == {"dm_age", "ar_dist"} and expr.boolean
    assert expression_names("max(B, A) + B") == ["B", "A"]
    assert not parse_expression("A + 1", None, "t").boolean


def test_dataset_mapping_is_accepted() -> None:
    ds = Dataset.from_arrays({"A": [1.0, NAN]})
    values, reasons = parse_expression("A * 2", ["A"], "t").evaluate(ds, ds.vocabulary)
    np.testing.assert_array_equal(values, [2, NAN])
    assert reasons.tolist() == [VALID, 5]  # from_arrays: NaN -> missing (code 5)


@pytest.mark.parametrize(("text", "col", "what"), [
    ("A.b", 2, "attribute access is not allowed"),
    ("A[0]", 2, "indexing is not allowed"),
    ("A [0]", 3, "indexing is not allowed"),
    ("__class__", 1, "names starting with '__'"),
    ("__import__(1)", 1, "names starting with '__'"),
    ("import A", 1, "'import' is not part of the expression language"),
    ("lambda: 1", 1, "'lambda' is not part of the expression language"),
    ("open(A)", 1, "function 'open' is not allowed"),
    ('"text"', 1, "text is only allowed as a choice in oneof"),
    ("A == 'x'", 6, "text is only allowed as a choice in oneof"),
    ("A ** 2", 3, "'\\*\\*' is not an operator \\(use \\^\\)"),
    ("A = 1", 3, "assignment is not allowed"),
    ("A % 2", 3, "'%' is not an operator"),
    ("A & B", 3, "use 'and'"),
    ("1 < A < 3", 7, "comparisons cannot be chained"),
    ("(A + 1", 7, "expected '\\)' but found the end"),
    ("A +", 4, "the expression ends too early"),
    ("A B", 3, "unexpected 'B' after a complete expression"),
    ("2A", 2, "unexpected 'A' after the number"),
    ("min(A)", 1, "min\\(\\) takes at least 2 arguments, got 1"),
    ("if(A, 1)", 1, "if\\(\\) takes 3 arguments, got 2"),
    ("round(A, A)", 1, "round\\(x, digits\\) needs a number"),
    ("oneof(A, B)", 10, "oneof\\(\\) choices must be numbers or quoted text"),
    ("A $ 1", 3, "character '\\$' is not part of the expression language"),
    ("'unterminated", 1, "unterminated or escaped text"),
])
def test_forbidden_constructs_name_the_column(text: str, col: int, what: str) -> None:
    with pytest.raises(ExpressionError, match=rf"^derived.X: expression .* column {col}: {what}"):
        parse_expression(text, ["A", "B"], "derived.X")


def test_unknown_variable_suggests_a_close_name() -> None:
    with pytest.raises(ExpressionError, match=r"column 7: unknown variable 'dm_ag'; did you "
                                              r"mean 'dm_age'"):
        parse_expression("1 + 2*dm_ag", ["dm_age"], "--where")


def test_empty_expression() -> None:
    with pytest.raises(ExpressionError, match="the expression is empty"):
        parse_expression("   ", None, "derived.X")


def test_missing_input_at_evaluation() -> None:
    with pytest.raises(ExpressionError, match="reads 'B', which is not in the data"):
        parse_expression("A + B", None, "t").evaluate(ONE | {"A": ONE["X"]}, Reasons())


# --- properties -------------------------------------------------------------------------

CODES = st.sampled_from([VALID, VALID, VALID, SKIPPED, DONT_KNOW, REFUSED, INVALID])
ROW = st.tuples(st.floats(-1e3, 1e3), CODES, st.floats(-1e3, 1e3), CODES)


@settings(max_examples=60, deadline=None)
@given(rows=st.lists(ROW, min_size=1, max_size=30), op=st.sampled_from(["+", "-", "*"]))
def test_total_operations_valid_iff_inputs_valid(rows: list[tuple[float, int, float, int]],
                                                 op: str) -> None:
    a, ra, b, rb = (list(t) for t in zip(*rows, strict=True))
    cols = data(A=(a, ra), B=(b, rb))
    values, reasons = run(f"A {op} B", cols)
    both = (np.array(ra) == VALID) & (np.array(rb) == VALID)
    assert ((reasons == VALID) == both).all()
    expect = {"+": np.add, "-": np.subtract, "*": np.multiply}[op](np.array(a), np.array(b))
    np.testing.assert_allclose(values[both], expect[both])
    vocab = cols["A"].vocabulary
    np.testing.assert_array_equal(reasons[~both], vocab.combine(np.array(ra, np.int8),
                                                                np.array(rb, np.int8))[~both])
