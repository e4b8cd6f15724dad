"""The reduction rule: intrinsic sum and dot_product on real arrays become runtime calls."""
from rewrite.api import rewrite_text
from rewrite.config import Options

from conftest import module

SUMS = Options(rules=("sum",))


def _edits(body, declarations):
    result = rewrite_text(module(body, declarations), options=SUMS)
    assert result.problems == ()
    return result


def test_sums_and_dot_products_of_reals():
    result = _edits("x = sum(v) + sum(w, dim=1, mask=w > 0.0_dp)\nx = dot_product(v, v)\nn = sum(iv)",
                    "real(dp) :: x, v(5), w(3,3)\n    integer :: iv(4), n")
    assert [e.after for e in result.edits] == [
        "use samebits_runtime, only: exact_dot, exact_sum", "exact_sum(v)",
        "exact_sum(w, dim=1, mask=w > 0.0_dp)", "exact_dot(v, v)"]
    assert {e.effect for e in result.edits} == {"answer-changing"}
    assert "no defined order" in result.edits[1].reason
    # the USE goes after the unit's header (there is no USE yet), before its declarations
    assert "  subroutine work()\n    use samebits_runtime, only: exact_dot, exact_sum\n    real(dp)" in result.text
    assert rewrite_text(result.text, options=SUMS).edits == ()


def test_use_goes_after_existing_use_statements_before_implicit():
    source = ("module kinds\n  integer, parameter :: dp = kind(1.0d0)\nend module kinds\n"
              "subroutine total(v, x)\n  use kinds, only: dp\n  implicit none\n  real(dp) :: v(:), x\n"
              "  x = sum(v)\nend subroutine total\n")
    result = rewrite_text(source, options=SUMS)
    assert "  use kinds, only: dp\n  use samebits_runtime, only: exact_sum\n  implicit none\n" in result.text


def test_shadowed_sum_is_left_alone():
    local_array = _edits("x = sum(1)", "real(dp) :: x, sum(3)")
    assert local_array.edits == ()
    source = ("module helpers\ncontains\n  real function sum(v)\n    real :: v(:)\n    sum = v(1)\n  end function\n"
              "  subroutine s(v, x)\n    real :: v(:), x\n    x = sum(v)\n  end subroutine\nend module helpers\n")
    assert rewrite_text(source, options=SUMS).edits == ()
    through_use = ("subroutine s(v, x)\n  use stats, only: sum\n  real :: v(3), x\n  x = sum(v)\nend subroutine\n")
    assert rewrite_text(through_use, options=SUMS).edits == ()


def test_dim_only_for_whole_arrays_of_rank_two_and_three():
    result = _edits("y2 = sum(w, 2)\ny3 = sum(c, dim=3)\nx = sum(v, dim=1)\ny3 = sum(q, dim=1)\nx = sum(v, v > 0.0_dp)",
                    "real(dp) :: x, v(5), w(3,3), c(2,2,2), y2(3), y3(2,2)\n    real(dp), dimension(2,2,2,2) :: q")
    assert [e.after for e in result.edits][1:] == ["exact_sum(w, 2)", "exact_sum(c, dim=3)", "exact_sum(v, v > 0.0_dp)"]
    assert sum("rank 2 and 3 only" in f.message for f in result.findings) == 2
