"""The power rule: schemes, their accuracy against exact arithmetic, and the rewrites."""
from fractions import Fraction

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rewrite.api import rewrite_text
from rewrite.config import Options
from rewrite.planner.powers import evaluate, scheme

from conftest import module

POWERS = Options(rules=("power",))
UNIT = Fraction(1, 2**53)  # binary64 unit roundoff (IEEE 754-2019 binary64: p = 53)


def gamma(k: int) -> Fraction:
    """gamma_k = k*u / (1 - k*u): the relative error bound of a product of k+1 floating-point
    numbers in any order (Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed.,
    section 3.1; recalled from memory)."""
    return k * UNIT / (1 - k * UNIT)


@pytest.mark.parametrize("n, text", [
    (2, "x*x"), (3, "x*x*x"), (4, "(x*x)*(x*x)"), (6, "(x*x*x)*(x*x*x)"), (8, "((x*x)*(x*x))*((x*x)*(x*x))"),
])
def test_documented_schemes(n, text):
    # the cube times a cube for x**6: common practice, no source
    assert scheme(n) == text


@pytest.mark.parametrize("n", list(range(2, 17)))
def test_scheme_multiplies_n_factors(n):
    # each scheme is a product of exactly n copies of x
    assert scheme(n).count("x") == n
    assert evaluate(n, Fraction(3)) == Fraction(3) ** n


@settings(max_examples=400, deadline=None)
@given(st.integers(2, 16),
       st.floats(min_value=2.0**-30, max_value=2.0**30, allow_nan=False, allow_infinity=False),
       st.booleans())
def test_scheme_error_within_the_documented_bound(n, x, negative):
    x = -x if negative else x
    value = evaluate(n, x)
    exact = Fraction(x) ** n  # outside check: fractions.Fraction is exact
    relative = abs(Fraction(value) - exact) / abs(exact)
    assert relative <= gamma(n - 1)


def _rewrite(body, declarations="real(dp) :: a, b, x, y\n    integer :: i, n", options=POWERS):
    result = rewrite_text(module(body, declarations), options=options)
    assert result.problems == ()
    return result


def _after(result):
    return [e.after for e in result.edits]


def test_integer_and_negative_exponents():
    result = _rewrite("y = x**2 + x**6\ny = x**(-3)\ny = 2.0_dp*x**2\ny = -x**4")
    assert _after(result) == ["x*x", "(x*x*x)*(x*x*x)", "1.0_dp/(x*x*x)", "(x*x)", "((x*x)*(x*x))"]
    assert all(e.effect == "answer-changing" for e in result.edits)
    assert "left to the processor" in result.edits[1].reason and "cube times a cube" in result.edits[1].reason
    assert "y = 2.0_dp*(x*x)" in result.text


@pytest.mark.parametrize("declaration, one", [
    ("double precision :: x, y", "1.0d0"), ("real :: x, y", "1.0"), ("real(8) :: x, y", "1.0_8"),
    ("real(kind=dp) :: x, y", "1.0_dp"),
])
def test_reciprocal_literal_matches_the_kind(declaration, one):
    result = _rewrite("y = x**(-2)", declaration)
    assert _after(result) == [f"{one}/(x*x)"]


def test_left_alone_reported_or_sent_to_the_runtime():
    result = _rewrite("n = i**2\ny = sqrt(x)**2\ny = x**9\ny = x**n\ny = x**1", "real(dp) :: x, y\n    integer :: i, n")
    assert [(e.before, e.after) for e in result.edits] == [
        ("", "use samebits_runtime, only: sb_power"), ("sqrt(x)**2", "sb_power(sqrt(x), 2)"),
        ("x**9", "sb_power(x, 9)")]
    assert all(e.effect == "answer-changing" for e in result.edits)
    assert "not a plain variable" in result.edits[1].reason and "above power-threshold (8)" in result.edits[2].reason
    assert result.text.count("use samebits_runtime") == 1
    assert rewrite_text(result.text, options=POWERS).edits == ()


def test_runtime_import_is_not_repeated_when_present():
    source = module("y = x**12", "real(dp) :: x, y").replace(
        "  subroutine work()\n", "  subroutine work()\n    use samebits_runtime\n")
    result = rewrite_text(source, options=POWERS)
    assert [e.after for e in result.edits] == ["sb_power(x, 12)"]


def test_threshold_is_configurable():
    result = _rewrite("y = x**9", options=Options(rules=("power",), power_threshold=12))
    assert _after(result) == ["(((x*x)*(x*x))*((x*x)*(x*x)))*x"]


def test_real_exponents():
    result = _rewrite("y = x**2.0 + x**0.5 + a**1.5")
    assert _after(result) == ["x*x"]
    assert any("pow" in f.message and "-0.0" in f.message for f in result.findings)
    asked = _rewrite("y = x**2.0 + x**0.5 + a**1.5", options=Options(rules=("power",), fractional_powers=True))
    assert _after(asked) == ["x*x", "sqrt(x)", "a*sqrt(a)"]
    assert all("-inf" in e.reason for e in asked.edits[1:])


def test_array_elements_are_plain_calls_are_not():
    result = _rewrite("y = v(i+1)**3 + f(x)**3", "real(dp) :: x, y, v(5)\n    integer :: i\n    real(dp), external :: f")
    assert _after(result) == ["use samebits_runtime, only: sb_power", "v(i+1)*v(i+1)*v(i+1)", "sb_power(f(x), 3)"]


def test_powers_and_chains_together_reach_a_fixed_point():
    source = module("y = a + x**6 + b*x**2*a")
    first = rewrite_text(source)
    assert sorted(e.rule for e in first.edits) == ["chain", "chain", "power", "power"]
    assert "y = (a + (x*x*x)*(x*x*x)) + (b*(x*x))*a" in first.text
    assert rewrite_text(first.text).edits == ()
