"""The signed-zero rule in Fortran: results of min, max, minval, maxval (and sign with a first
argument that may be zero) get a kind-matched + 0.0 guard, recognised when it is there.

Outside checks: IEEE 754-2019 6.3 (an exact zero sum of opposite-signed operands is +0 in
round-to-nearest, so x + 0.0 turns -0.0 into +0.0 and leaves every other x alone) is what the
reasons promise; gfortran checks the bits in tests/verify/test_build_advice.py. Python's own
float addition is used below as the IEEE 754 oracle.
"""
import math

from hypothesis import given, settings
from hypothesis import strategies as st

from rewrite.api import rewrite_text
from rewrite.config import Options, from_table

from conftest import module

ZEROS = Options(rules=("zero",))


def _rewrite(body, declarations="real(dp) :: a, b, c(4), x\n    real :: s\n    double precision :: y\n"
                                 "    integer :: i, j", options=ZEROS):
    result = rewrite_text(module(body, declarations), options=options)
    assert result.problems == ()
    return result


def test_guards_are_spelled_in_the_operands_kind():
    result = _rewrite("x = min(a, b)\ny = max(y, 0d0)\ns = min(s, 1.0)\nx = maxval(c)")
    assert [e.after for e in result.edits] == ["min(a, b) + 0.0_dp", "max(y, 0d0) + 0.0d0", "min(s, 1.0) + 0.0",
                                              "maxval(c) + 0.0_dp"]
    assert all(e.effect == "answer-changing" and "only in the sign of a zero" in e.reason for e in result.edits)


def test_guard_inside_an_expression_is_parenthesised():
    result = _rewrite("x = 2.0_dp * min(a, b) - max(a, b)")
    assert "x = 2.0_dp * (min(a, b) + 0.0_dp) - (max(a, b) + 0.0_dp)" in result.text


def test_existing_guards_are_recognised_and_never_doubled():
    result = _rewrite("x = min(a, b) + 0.0_dp\nx = 0.0d0 + max(a, b)\nx = (minval(c) + 0._dp) * 2.0_dp")
    assert result.edits == ()
    once = _rewrite("x = min(a, b) * max(a, b)")
    assert rewrite_text(once.text, options=ZEROS).edits == ()


def test_integer_results_and_nonzero_sign_magnitudes_are_left_alone():
    result = _rewrite("i = min(i, j)\nx = sign(1.0_dp, a) + sign(2.5d0, b)\nx = sign(a, b)\nx = sign(0.0_dp, b)")
    assert [e.before for e in result.edits] == ["sign(a, b)", "sign(0.0_dp, b)"]
    assert "first argument is zero" in result.edits[0].reason


def test_specific_names_and_upper_case():
    result = _rewrite("y = DMAX1(y, 0.0d0)\ns = AMIN1(s, 2.0)\nx = Max(a, b)")
    assert [e.after for e in result.edits] == ["DMAX1(y, 0.0d0) + 0.0d0", "AMIN1(s, 2.0) + 0.0",
                                              "Max(a, b) + 0.0_dp"]


def test_guard_functions_option_adds_user_functions():
    source = ("module m\n  implicit none\n  integer, parameter :: dp = kind(1.0d0)\ncontains\n"
              "  real(dp) function lowest(a, b)\n    real(dp), intent(in) :: a, b\n    lowest = a\n  end function\n"
              "  subroutine work(a, b, x)\n    real(dp), intent(in) :: a, b\n    real(dp), intent(out) :: x\n"
              "    x = LOWEST(a, b)\n  end subroutine\nend module m\n")
    plain = rewrite_text(source, options=ZEROS)
    assert plain.edits == ()
    options = from_table({"rules": ["zero"], "guard-functions": ["lowest"]}, "samebits.toml")
    listed = rewrite_text(source, options=options)
    assert [e.after for e in listed.edits] == ["LOWEST(a, b) + 0.0_dp"]
    assert "guard-functions" in listed.edits[0].reason


def test_python_guard_functions_by_qualified_or_last_name():
    source = ("import numpy as np\nimport numpy.typing as npt\n\n"
              "def low(a: float, v: npt.NDArray[np.float64]) -> float:\n    return np.nanmin(v) * a\n")
    assert rewrite_text(source, language="python", options=ZEROS).edits == ()  # not listed: nothing
    for name in ("nanmin", "np.nanmin"):
        options = from_table({"rules": ["zero"], "guard-functions": [name]}, "samebits.toml")
        result = rewrite_text(source, language="python", options=options)
        assert [e.after for e in result.edits] == ["(np.nanmin(v) + 0.0)"]


@settings(max_examples=200, deadline=None)
@given(st.sampled_from([0.0, -0.0, 1.5, -2.25, 5e-324, -5e-324, 1e308, -math.inf, math.inf]))
def test_the_guard_does_what_the_reason_says(value):
    # IEEE 754-2019 6.3 through Python's float addition: x + 0.0 is +0.0 for x = -0.0 and x itself
    # for every other x (the reason's promise: "answer-changing only in the sign of a zero result")
    guarded = value + 0.0
    if value == 0.0:
        assert math.copysign(1.0, guarded) == 1.0
    else:
        assert guarded == value


def test_guards_where_they_matter_only():
    result = _rewrite("x = -min(a, b)\nx = 2.0_dp * (-max(a, b))\nif (max(a, b) > 0.0_dp) x = 1.0_dp\n"
                      "x = max(a, min(b, x))\nx = abs(min(a, b))")
    # -(+0.0) is -0.0 again (IEEE 754-2019 5.5.1, negate flips the sign bit; section from memory), so the guard goes
    # outside the negation; in a comparison -0.0 == +0.0 (IEEE 754-2019 5.11) and the guard would
    # change nothing; the outer max's guard decides the sign of a nested min
    # and abs(-0.0) is +0.0 (IEEE 754-2019 5.5.1, abs clears the sign bit; from memory)
    assert [e.after for e in result.edits] == ["-min(a, b) + 0.0_dp", "((-max(a, b)) + 0.0_dp)",
                                              "max(a, min(b, x)) + 0.0_dp"]
    assert rewrite_text(result.text, options=ZEROS).edits == ()


def test_python_guards_bind_before_attributes_subscripts_and_comparisons():
    source = ("import numpy as np\nimport numpy.typing as npt\n\n"
              "def f(x: npt.NDArray[np.float64], y: npt.NDArray[np.float64], a: float, b: float):\n"
              "    if max(a, b) > 0.0:\n        pass\n"
              "    return min(a, b).hex(), np.maximum(x, y)[0], max(a, b) ** 2, abs(min(a, b)), float(min(a, b))\n")
    result = rewrite_text(source, language="python", options=ZEROS)
    assert "(min(a, b) + 0.0).hex()" in result.text and "(np.maximum(x, y) + 0.0)[0]" in result.text
    assert "(max(a, b) + 0.0) ** 2" in result.text and "float(min(a, b) + 0.0)" in result.text
    assert "if max(a, b) > 0.0:" in result.text and "abs(min(a, b))" in result.text
    # outside check: CPython runs the rewritten function, and every zero comes back as +0.0
    # (IEEE 754-2019 6.3); the original's min(-0.0, 0.0).hex() keeps the first argument's sign
    space: dict = {}
    exec(compile(result.text, "guarded.py", "exec"), space)
    import numpy as np
    hexed, element, squared, absolute, plain = space["f"](np.array([-0.0]), np.array([-0.0]), -0.0, 0.0)
    assert hexed == (0.0).hex() and str(element) == "0.0" and plain == 0.0 and str(plain) == "0.0"
