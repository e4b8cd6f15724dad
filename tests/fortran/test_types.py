"""Types from declarations: which chains are real (edited), integer (left), unknown (reported)."""
from rewrite.api import rewrite_text

from conftest import module


def _edited(result):
    return [e.before for e in result.edits]


def _unresolved(result):
    return [f.message for f in result.findings if "unresolved" in f.message]


def test_declaration_forms_make_chains_real():
    source = (
        "module forms\n  implicit none\n  integer, parameter :: dp = kind(1.0d0), wp = dp\ncontains\n"
        "  subroutine s()\n"
        "    real :: r1, r2, r3\n    real(8) :: e1, e2, e3\n    real(kind=dp) :: k1, k2, k3\n"
        "    real*8 :: s1, s2, s3\n    double precision :: d1, d2, d3\n    complex(wp) :: z1, z2, z3\n"
        "    integer :: i1, i2, i3\n"
        "    r1 = r1 + r2 + r3\n    e1 = e1 + e2 + e3\n    k1 = k1 + k2 + k3\n    s1 = s1 + s2 + s3\n"
        "    d1 = d1 + d2 + d3\n    z1 = z1 + z2 + z3\n    i1 = i1 + i2 + i3\n"
        "  end subroutine s\nend module forms\n"
    )
    result = rewrite_text(source)
    assert result.problems == ()
    assert _edited(result) == ["r1 + r2 + r3", "e1 + e2 + e3", "k1 + k2 + k3", "s1 + s2 + s3",
                               "d1 + d2 + d3", "z1 + z2 + z3"]


def test_mixed_integer_and_real_is_edited_integer_only_is_not():
    result = rewrite_text(module("x = i + j + a\nk = i + j + n\nx = a*b*c\nx = a*a*a\nx = a*a*a*a"))
    assert _edited(result) == ["i + j + a", "a*b*c", "a*a*a*a"]


def test_parameters_function_results_and_components():
    source = (
        "module comp\n  implicit none\n  integer, parameter :: dp = kind(1.0d0)\n"
        "  real(dp), parameter :: g = 9.81_dp\n"
        "  type :: cell\n    real(dp) :: h, t\n    integer :: k\n  end type cell\n"
        "contains\n"
        "  real(dp) function area(x)\n    real(dp), intent(in) :: x\n    area = x * g * 2.0_dp\n  end function area\n"
        "  function depth(x) result(d)\n    real(dp), intent(in) :: x\n    real(dp) :: d\n    d = x + g + x\n"
        "  end function depth\n"
        "  subroutine s(c)\n    type(cell), intent(inout) :: c\n    integer :: n\n"
        "    c%h = c%h + area(c%t) + depth(c%h)\n    n = c%k + c%k + 1\n"
        "    c%t = real(c%k, dp) + dble(n) + sqrt(abs(c%h))\n"
        "  end subroutine s\nend module comp\n"
    )
    result = rewrite_text(source)
    assert result.problems == ()
    assert _edited(result) == ["x * g * 2.0_dp", "x + g + x", "c%h + area(c%t) + depth(c%h)",
                               "real(c%k, dp) + dble(n) + sqrt(abs(c%h))"]


def test_default_implicit_typing_i_to_n_integer():
    # Fortran 2018 8.7: without IMPLICIT NONE, names starting I-N are integer, others real
    source = "subroutine legacy(n)\n  dimension w(10)\n  w(1) = w(2) + w(3) + x\n  m = n + k + 1\nend subroutine\n"
    result = rewrite_text(source)
    assert _edited(result) == ["w(2) + w(3) + x"]


def test_implicit_statement_with_letter_ranges():
    source = ("subroutine legacy()\n  implicit double precision (a-h, o-z), integer (i-n)\n"
              "  a = b + c + d\n  m = i + j + k\nend subroutine\n")
    assert _edited(rewrite_text(source)) == ["b + c + d"]


def test_unknown_operands_are_reported_not_edited():
    source = module("x = a + mystery(b) + c\nx = a + b + c", "real(dp) :: a, b, c, x")
    result = rewrite_text(source)
    assert _edited(result) == ["a + b + c"]
    assert len(_unresolved(result)) == 1 and "mystery(b)" in _unresolved(result)[0]


def test_use_of_an_unknown_module_makes_undeclared_names_unknown():
    source = ("subroutine s()\n  use other_module\n  x = y + z + 1.0\nend subroutine\n")
    result = rewrite_text(source)
    assert result.edits == () and len(_unresolved(result)) == 1


def test_use_of_a_module_in_the_same_file_resolves():
    source = ("module kinds\n  implicit none\n  integer, parameter :: dp = kind(1.0d0)\n"
              "  real(dp) :: shared_heat\nend module kinds\n"
              "subroutine s()\n  use kinds, only: dp, heat => shared_heat\n  implicit none\n"
              "  real(dp) :: y\n  y = heat + y + 1.0_dp\nend subroutine\n")
    assert _edited(rewrite_text(source)) == ["heat + y + 1.0_dp"]


def test_local_array_named_sum_shadows_the_intrinsic():
    source = module("x = sum(i) + a + b", "real(dp) :: a, b, x\n    integer :: i\n    integer :: sum(3)")
    result = rewrite_text(source)
    # sum(i) is an integer array element here, so the chain is still real (a, b)
    assert _edited(result) == ["sum(i) + a + b"]
