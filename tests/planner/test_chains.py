"""The chain rule on representative statements."""
import pytest

from rewrite.api import rewrite_text
from rewrite.config import Options

from conftest import module


def _after(body, declarations=None):
    source = module(body) if declarations is None else module(body, declarations)
    result = rewrite_text(source, options=Options(rules=("chain",)))
    assert result.problems == ()
    return [e.after for e in result.edits], result


@pytest.mark.parametrize("statement, expected", [
    ("x = a + b + c", ["(a + b) + c"]),
    ("x = a - b + c*d - e", ["((a - b) + c*d) - e"]),
    ("x = a*b/c*d", ["((a*b)/c)*d"]),
    ("x = -a + b + c", ["(-a + b) + c"]),
    ("x = (a + b) + c", []),
    ("x = (a + b + c)", ["(a + b) + c"]),
    ("x = a**2 + b + c", ["(a**2 + b) + c"]),
    ("x = a + b*c*d", ["(b*c)*d"]),
    ("x = sqrt(a + b + c)", ["(a + b) + c"]),
    ("x = a + b; y = c*d*e", ["(c*d)*e"]),
    ("x = a*a*a", []),
    ("x = a + a + a", []),
    ("x = a - a - a", ["(a - a) - a"]),
    ("x = a*a/a", ["(a*a)/a"]),
])
def test_chains(statement, expected):
    assert _after(statement)[0] == expected


def test_nested_chains_inside_arguments_and_subscripts():
    after, result = _after("x = max(a + b + c, d) * y * z", "real(dp) :: a, b, c, d, x, y, z")
    assert sorted(after) == sorted(["(max(a + b + c, d) * y) * z", "(a + b) + c"])
    assert "x = (max((a + b) + c, d) * y) * z" in result.text


def test_integer_chains_in_subscripts_and_do_bounds_are_left():
    after, _ = _after("do i = 1, n + k + 1\n  v(i + j + 1) = v(i) + v(j) + v(k)\nend do",
                      "real(dp) :: v(10)\n    integer :: i, j, k, n")
    assert after == ["(v(i) + v(j)) + v(k)"]


def test_control_statements():
    body = ("if (a + b + c > d) x = y*z*a\n"
            "if (a*b*c > 0.0_dp) then\nelse if (a - b - c < 0.0_dp) then\nend if\n"
            "do while (x + y + z < a)\nend do\n"
            "where (v + w + 1.0_dp > 0.0_dp) v = v + w + 2.0_dp\n"
            "call consume(a + b + c)\nprint *, a + b + c\nwrite(*, '(f8.3)') a*b*c\n"
            "100 x = a + b + c")
    after, result = _after(body, "real(dp) :: a, b, c, d, x, y, z, v(3), w(3)")
    assert after == ["(a + b) + c", "(y*z)*a", "(a*b)*c", "(a - b) - c", "(x + y) + z",
                     "(v + w) + 1.0_dp", "(v + w) + 2.0_dp", "(a + b) + c", "(a + b) + c",
                     "(a*b)*c", "(a + b) + c"]
    assert "100 x = (a + b) + c" in result.text


def test_declarations_formats_strings_and_comments_are_never_touched():
    source = (
        "module quiet\n  implicit none\n  real, parameter :: c = 1.0 + 2.0 + 3.0\ncontains\n"
        "  subroutine s(a, b)\n    real :: a, b\n    character(len=20) :: t\n"
        "    t = 'a + b + c'  ! a + b + c\n    write(*, 10) a\n10  format(f8.3, ' + ', 'x*y*z')\n"
        "    b = (a + b) + c\n  end subroutine s\nend module quiet\n"
    )
    result = rewrite_text(source)
    assert result.edits == () and result.text == source


def test_long_line_is_rewrapped_with_continuation():
    operands = " + ".join(f"value_number_{k}" for k in range(7))
    declarations = "real(dp) :: " + ", ".join(f"value_number_{k}" for k in range(7)) + ", x"
    source = module(f"x = {operands}", declarations)
    assert max(len(line) for line in source.splitlines()) <= 132
    result = rewrite_text(source)
    assert len(result.edits) == 1
    assert max(len(line) for line in result.text.splitlines()) <= 132
    assert " &\n" in result.text
    assert rewrite_text(result.text).edits == ()


def test_statement_with_sign_after_operator_is_left_with_a_finding():
    result = rewrite_text(module("x = a * -b * c"))
    assert result.edits == ()
    assert any(f.rule == "not-analysed" for f in result.findings)


def test_occupancy_refuses_overlaps_and_accepts_insertions():
    from rewrite.edits import Edit, Occupancy, TextChange
    from rewrite.ir import Span

    def edit(*changes):
        return Edit(Span(0, 0), tuple(TextChange(*c) for c in changes), "r", "bit-for-bit", "")

    taken = Occupancy()
    first = edit((5, 5, "("), (9, 9, ")"))
    assert taken.fits(first)
    taken.take(first)
    assert taken.fits(edit((5, 5, "("), (7, 7, ")")))  # insertions never collide
    assert not taken.fits(edit((4, 8, "x")))  # a replacement around an insertion
    assert taken.fits(edit((10, 12, "y")))
    taken.take(edit((10, 12, "y")))
    assert not taken.fits(edit((11, 11, "(")))  # an insertion inside a replacement
    assert taken.fits(edit((12, 12, ")")))  # at its end is fine
    assert not taken.fits(edit((11, 14, "z")))
