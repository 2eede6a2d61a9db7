"""Tests of engine.physics.formula: the checked merit-index formula language.

Valid formulas are checked against the same expression written directly in numpy
(numpy is the reference); every rejected construct has its own error test.
"""

from __future__ import annotations

import builtins
import dataclasses

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

from engine.base.errors import CriteriaError
from engine.physics.formula import MAX_LENGTH, MAX_NODES, Formula, parse_formula

NAMES = ("loss_factor", "storage_modulus", "density", "x", "y")

positive = st.floats(min_value=1e-3, max_value=1e9, allow_nan=False, allow_infinity=False)


@st.composite
def positive_arrays(draw, count):
    """`count` arrays of positive floats sharing one shape."""
    shape = draw(hnp.array_shapes(min_dims=0, max_dims=2, max_side=6))
    return [draw(hnp.arrays(np.float64, shape, elements=positive)) for _ in range(count)]


# ----------------------------------------------------------------- valid formulas


@settings(max_examples=60, deadline=None)
@given(positive_arrays(3))
def test_power_law_index_matches_numpy(arrays):
    eta, modulus, rho = arrays
    formula = parse_formula("loss_factor * storage_modulus ** 0.5 / density", NAMES)
    values = {"loss_factor": eta, "storage_modulus": modulus, "density": rho}
    # numpy reference
    np.testing.assert_allclose(formula.evaluate(values), eta * modulus**0.5 / rho, rtol=1e-14)


@settings(max_examples=60, deadline=None)
@given(positive_arrays(3))
def test_sqrt_index_matches_numpy(arrays):
    eta, modulus, rho = arrays
    formula = parse_formula("sqrt(loss_factor*storage_modulus)/density", NAMES)
    values = {"loss_factor": eta, "storage_modulus": modulus, "density": rho}
    # numpy reference
    np.testing.assert_allclose(formula.evaluate(values), np.sqrt(eta * modulus) / rho, rtol=1e-14)


@settings(max_examples=60, deadline=None)
@given(positive_arrays(1))
def test_max_with_a_constant_matches_numpy(arrays):
    (eta,) = arrays
    result = parse_formula("max(loss_factor, 0.1)", NAMES).evaluate({"loss_factor": eta})
    np.testing.assert_array_equal(result, np.maximum(eta, 0.1))  # numpy reference


@settings(max_examples=60, deadline=None)
@given(positive_arrays(2))
def test_unary_minus_and_parentheses_match_numpy(arrays):
    x, y = arrays
    result = parse_formula("-x + 2*(y-1)", NAMES).evaluate({"x": x, "y": y})
    np.testing.assert_allclose(result, -x + 2 * (y - 1), rtol=1e-14, atol=1e-9)


@settings(max_examples=60, deadline=None)
@given(positive_arrays(3))
def test_every_function_matches_numpy(arrays):
    x, y, z = arrays
    text = "log10(x) + log(y) - exp(-x/(1+x)) + abs(1-y) + min(x, y, density) - max(y, x)"
    result = parse_formula(text, NAMES).evaluate({"x": x, "y": y, "density": z})
    reference = (
        np.log10(x)
        + np.log(y)
        - np.exp(-x / (1 + x))
        + np.abs(1 - y)
        + np.minimum(np.minimum(x, y), z)
        - np.maximum(y, x)
    )
    np.testing.assert_allclose(result, reference, rtol=1e-12, atol=1e-9)


def test_values_broadcast():
    formula = parse_formula("x * y", NAMES)
    x = np.array([1.0, 2.0, 3.0])
    y = np.array([[1.0], [10.0]])
    result = formula.evaluate({"x": x, "y": y})
    np.testing.assert_array_equal(result, x * y)  # numpy reference
    assert result.shape == (2, 3)


def test_scalar_values_give_a_float_array():
    result = parse_formula("x / 4", NAMES).evaluate({"x": 2})
    assert isinstance(result, np.ndarray)
    assert result.dtype == np.float64
    assert float(result) == 0.5


def test_integer_constants_are_computed_as_floats():
    # 7 / 2 is true division and 2 ** 0.5 a float power: same as numpy float64 maths.
    result = parse_formula("7 / 2 + 2 ** 0.5 + (10 ** 10) ** 10", NAMES).evaluate({})
    assert float(result) == pytest.approx(3.5 + np.sqrt(2.0) + 1e100, rel=1e-15)


def test_power_with_a_quantity_exponent_overflows_to_inf_not_an_error():
    result = parse_formula("x ** y", NAMES).evaluate({"x": 10.0, "y": np.array([2.0, 1000.0])})
    np.testing.assert_array_equal(result, [100.0, np.inf])


def test_out_of_domain_values_give_nan():
    result = parse_formula("sqrt(x) + log(y)", NAMES).evaluate({"x": [-1.0, 4.0], "y": 1.0})
    assert np.isnan(result[0])
    assert result[1] == 2.0


def test_names_used_and_extra_values_ignored():
    formula = parse_formula("loss_factor * sqrt(storage_modulus) + max(x, 1)", NAMES)
    assert formula.names == frozenset({"loss_factor", "storage_modulus", "x"})
    assert formula.text == "loss_factor * sqrt(storage_modulus) + max(x, 1)"
    values = {"loss_factor": 0.5, "storage_modulus": 4.0, "x": 0.0, "density": 1.0}
    assert float(formula.evaluate(values)) == 2.0


def test_formula_is_frozen_and_compares_by_text():
    first = parse_formula("x + y", NAMES)
    second = parse_formula("x + y", NAMES)
    assert isinstance(first, Formula)
    assert first == second
    assert hash(first) == hash(second)
    with pytest.raises(dataclasses.FrozenInstanceError, match="text"):
        first.text = "x"  # type: ignore[misc]


def test_quantity_may_share_a_function_name():
    formula = parse_formula("log * log(log)", ["log"])
    assert float(formula.evaluate({"log": np.e})) == pytest.approx(np.e, rel=1e-15)


def test_surrounding_whitespace_is_accepted():
    assert float(parse_formula("  x + 1\n", NAMES).evaluate({"x": 1.0})) == 2.0


def test_evaluation_never_uses_eval_or_exec(monkeypatch):
    def forbidden(*args, **kwargs):
        raise AssertionError("eval/exec called")

    monkeypatch.setattr(builtins, "eval", forbidden)
    monkeypatch.setattr(builtins, "exec", forbidden)
    formula = parse_formula("sqrt(x) * y ** 2 - max(x, y)", NAMES)
    assert float(formula.evaluate({"x": 4.0, "y": 3.0})) == 2.0 * 9.0 - 4.0


# ------------------------------------------------------------------- rejections


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("x.real", r"attribute access 'x\.real' at column 1 is not allowed"),
        ("x + y.__class__", r"attribute access 'y\.__class__' at column 5"),
        ("().__class__", r"attribute access"),
        ("np.sqrt(x)", r"attribute access 'np\.sqrt' at column 1"),
        ("sin(x)", r"unknown function 'sin' at column 1; functions: abs, exp, log"),
        ("x + open(y)", r"unknown function 'open' at column 5"),
        ("x(2)", r"'x' at column 1 is a quantity, not a function"),
        ("(1)(2)", r"call of '1' at column 1 is not allowed"),
        ("__import__('os')", r"name '__import__' at column 1 is not allowed: names of the form"),
        ("x + __builtins__", r"name '__builtins__' at column 5 is not allowed"),
        ("lambda: x", r"lambda 'lambda: x' at column 1 is not allowed"),
        ("[v for v in x]", r"comprehension '\[v for v in x\]' at column 1"),
        ("max(v for v in x)", r"comprehension '\(v for v in x\)' at column 4"),
        ("{v: 1 for v in x}", r"comprehension"),
        ("x[0]", r"subscript 'x\[0\]' at column 1 is not allowed"),
        ("x < y", r"comparison '<' at column 3 is not allowed"),
        ("x + (y >= 1)", r"comparison '>=' at column 8"),
        ("x and y", r"boolean operator 'and' at column 3 is not allowed"),
        ("x or y", r"boolean operator 'or' at column 3"),
        ("not x", r"operator 'not' at column 1 is not allowed"),
        ("~x", r"operator '~' at column 1 is not allowed"),
        ("x // y", r"operator '//' at column 3 is not allowed"),
        ("(x) % y", r"operator '%' at column 5 is not allowed"),
        ("x @ y", r"operator '@' at column 3"),
        ("x ^ 2", r"operator '\^' at column 3"),
        ("x if y else 1", r"conditional expression 'x if y else 1' at column 1"),
        ("(x := 2)", r"assignment expression 'x := 2' at column 2"),
        ("sqrt(x=1)", r"keyword argument 'x' of sqrt\(\) at column 6 is not allowed"),
        ("max(x, **y)", r"keyword argument '\*\*' of max\(\) at column 8"),
        ("max(*x)", r"starred argument '\*x' of max\(\) at column 5 is not allowed"),
        ("sqrt(x, y)", r"sqrt\(\) at column 1 takes exactly 1 argument; got 2"),
        ("log()", r"log\(\) at column 1 takes exactly 1 argument; got 0"),
        ("min(x)", r"min\(\) at column 1 takes 2 or more arguments; got 1"),
        ("'abc'", r"string \"'abc'\" at column 1 is not allowed"),
        ("x + b'1'", r"string \"b'1'\" at column 5"),
        ("f'{x}'", r"string"),
        ("True + x", r"constant 'True' at column 1 is not allowed"),
        ("None", r"constant 'None' at column 1"),
        ("...", r"constant '\.\.\.' at column 1"),
        ("2j * x", r"complex number '2j' at column 1 is not allowed"),
        ("(x, y)", r"tuple '\(x, y\)' at column 1 is not allowed"),
        ("[x]", r"list '\[x\]' at column 1"),
        ("{x}", r"set '\{x\}' at column 1"),
        ("{1: x}", r"dict '\{1: x\}' at column 1"),
        ("sqrt", r"'sqrt' at column 1 is a function; call it as sqrt\(\.\.\.\)"),
        ("1" * 400, r"number '1{20}' at column 1 is too large"),
    ],
)
def test_rejected_constructs(text, message):
    with pytest.raises(CriteriaError, match=message):
        parse_formula(text, NAMES)


def test_unknown_quantity_lists_valid_names():
    with pytest.raises(
        CriteriaError,
        match=r"unknown quantity 'modulus' at column 15; valid names: density, loss_factor, "
        r"storage_modulus, x, y",
    ):
        parse_formula("loss_factor * modulus", NAMES)


def test_unknown_quantity_with_no_names_allowed():
    with pytest.raises(
        CriteriaError, match=r"unknown quantity 'x' at column 1; valid names: \(none"
    ):
        parse_formula("x", [])


def test_column_counts_characters_not_bytes():
    # 'η' takes two bytes in UTF-8 but one column.
    with pytest.raises(CriteriaError, match=r"unknown quantity 'zz' at column 5"):
        parse_formula("η + zz", ["η"])


def test_column_counts_leading_spaces():
    with pytest.raises(CriteriaError, match=r"unknown quantity 'zz' at column 7"):
        parse_formula("  x + zz", NAMES)


@pytest.mark.parametrize("text", ["", "   ", "\n"])
def test_empty_formula(text):
    with pytest.raises(CriteriaError, match=r"formula is empty"):
        parse_formula(text, NAMES)


def test_formula_must_be_text():
    with pytest.raises(CriteriaError, match=r"formula must be text; got int"):
        parse_formula(3, NAMES)  # type: ignore[arg-type]


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("x +* y", r"formula 'x \+\* y' is not valid at column 4: invalid syntax"),
        (" x y", r"is not valid at column 4"),
        ("x +", r"is not valid at the end"),
        ("sqrt(x", r"is not valid"),
        ("x = 1", r"is not valid"),
    ],
)
def test_syntax_errors_give_a_position(text, message):
    with pytest.raises(CriteriaError, match=message):
        parse_formula(text, NAMES)


def test_null_byte_is_rejected():
    with pytest.raises(CriteriaError, match=r"formula 'x\\x00' (is not valid|cannot be read)"):
        parse_formula("x\x00", NAMES)


def test_line_break_is_rejected():
    with pytest.raises(CriteriaError, match=r"one line; line break at column 3"):
        parse_formula("(x\n+ y)", NAMES)


def test_text_too_long():
    text = "x + " * 125 + "x"
    assert len(text) > MAX_LENGTH
    with pytest.raises(
        CriteriaError, match=rf"formula is {len(text)} characters long; at most 500"
    ):
        parse_formula(text, NAMES)


def test_tree_too_large():
    text = "+".join(["x"] * 120)  # 239 characters, 239 nodes
    assert len(text) <= MAX_LENGTH
    with pytest.raises(
        CriteriaError, match=rf"formula has 239 terms and operators; at most {MAX_NODES}"
    ):
        parse_formula(text, NAMES)


def test_largest_tree_is_accepted():
    text = "+".join(["x"] * 100)  # 199 nodes
    assert float(parse_formula(text, NAMES).evaluate({"x": 1.0})) == 100.0


@pytest.mark.parametrize(
    ("text", "message"),
    [
        (
            "x ** 11",
            r"exponent '11' of '\*\*' at column 3 is 11; "
            r"constant exponents must lie within -10 to 10",
        ),
        ("x ** -10.5", r"exponent '-10.5' of '\*\*' at column 3 is -10.5"),
        ("x ** (5 + 6)", r"exponent '5 \+ 6' of '\*\*' at column 3 is 11"),
        ("x ** exp(3)", r"exponent 'exp\(3\)' of '\*\*' at column 3 is 20.08"),
        ("x ** (1/0)", r"exponent '1/0' of '\*\*' at column 3 is inf"),
        ("10 ** 400", r"exponent '400' of '\*\*' at column 4 is 400"),
        ("10**10**10", r"exponent of '\*\*' at column 3 contains another power '10\*\*10'"),
        ("2 ** x ** 2", r"exponent of '\*\*' at column 3 contains another power 'x \*\* 2'"),
        ("x ** (y * (2 ** 3))", r"nested powers are not allowed"),
    ],
)
def test_exponent_limits(text, message):
    with pytest.raises(CriteriaError, match=message):
        parse_formula(text, NAMES)


def test_exponent_limit_is_inclusive():
    result = parse_formula("x ** 10 + x ** -10", NAMES).evaluate({"x": 2.0})
    assert float(result) == 2.0**10 + 2.0**-10


# --------------------------------------------------------- allowed names and values


@pytest.mark.parametrize(
    ("names", "message"),
    [
        ("x", r"allowed_names must be a collection of names, not one string"),
        (["loss factor"], r"quantity name 'loss factor' cannot be used in formulas"),
        (["lambda"], r"quantity name 'lambda' cannot be used"),
        (["__class__"], r"quantity name '__class__' cannot be used"),
        ([3], r"quantity name 3 cannot be used"),
    ],
)
def test_bad_allowed_names(names, message):
    with pytest.raises(CriteriaError, match=message):
        parse_formula("1", names)


def test_evaluate_missing_value():
    formula = parse_formula("x * y + density", NAMES)
    with pytest.raises(
        CriteriaError, match=r"formula 'x \* y \+ density' needs a value for density, y"
    ):
        formula.evaluate({"x": 1.0})


def test_evaluate_non_numeric_value():
    with pytest.raises(CriteriaError, match=r"value for 'x' in formula 'x \+ 1' is not numeric"):
        parse_formula("x + 1", NAMES).evaluate({"x": "soft"})


def test_evaluate_values_that_do_not_broadcast():
    formula = parse_formula("x + y", NAMES)
    with pytest.raises(CriteriaError, match=r"do not broadcast together: x \(2,\), y \(3,\)"):
        formula.evaluate({"x": np.ones(2), "y": np.ones(3)})
