"""Checks of the gfortran harness itself (rewrite.verify.gfortran).

The differential tests trust this harness to move float64 bits in and out of
compiled programs unchanged, so it is checked first against IEEE 754
arithmetic as NumPy does it.
"""

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from rewrite.verify.gfortran import (
    check_syntax,
    evaluate_expressions,
    expression_program,
    order_by_modules,
)
from rewrite.verify.textdiff import parenthesis_insertions


def test_stream_round_trip_keeps_every_bit(gfortran):
    # outside check: IEEE 754-2008 binary64 encodings (signed zero, subnormal,
    # infinities, quiet NaN with a payload) written by NumPy, read by a
    # gfortran 12 program through access='stream', returned unchanged.
    special = np.array(
        [0x0000000000000000, 0x8000000000000000, 0x0000000000000001, 0x800FFFFFFFFFFFFF,
         0x7FF0000000000000, 0xFFF0000000000000, 0x7FF8000000000123, 0x3FF0000000000001,
         0x7FEFFFFFFFFFFFFF, 0xC00921FB54442D18],
        dtype=np.uint64,
    ).view(np.float64)
    inputs = np.column_stack([special, special[::-1]])
    out = evaluate_expressions(["a", "b"], ["a", "b"], inputs, ["-O0"], compiler=gfortran)
    assert out.dtype == np.uint64
    assert out.shape == (len(special), 2)
    assert np.array_equal(out[:, 0], special.view(np.uint64))
    assert np.array_equal(out[:, 1], special[::-1].view(np.uint64))


@settings(max_examples=3, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 2**32 - 1))
def test_single_operations_match_ieee_in_numpy(gfortran, seed):
    # outside check: IEEE 754 correctly rounded + - * / sqrt, as computed by
    # NumPy float64 element-wise; gfortran 12 at -O0 on x86-64 (SSE2) must
    # give the same bits for one operation.
    rng = np.random.default_rng(seed)
    n = 500
    mags = 10.0 ** rng.uniform(-150, 150, size=(n, 6))
    signs = rng.choice([-1.0, 1.0], size=(n, 6))
    x = mags * signs
    exprs = ["a + b", "a - b", "a * b", "a / b", "sqrt(abs(a))", "v(3) - v(1)", "v(2) * b"]
    got = evaluate_expressions(exprs, ["a", "b", "v(4)"], x, ["-O0"], compiler=gfortran)
    a, b, v = x[:, 0], x[:, 1], x[:, 2:6]
    with np.errstate(all="ignore"):
        want = [a + b, a - b, a * b, a / b, np.sqrt(np.abs(a)), v[:, 2] - v[:, 0], v[:, 1] * b]
    for k, w in enumerate(want):
        assert np.array_equal(got[:, k], w.view(np.uint64)), exprs[k]


def test_inputs_are_not_folded(gfortran):
    # Same program, two input files: the answers must follow the file
    # (an optimiser that folded a guessed value would give one answer).
    exprs = ["a + b + c"]
    x1 = np.array([[1.0, 2.0, 3.0]])
    x2 = np.array([[1e-20, 1.0, -1.0]])
    r1 = evaluate_expressions(exprs, ["a", "b", "c"], x1, ["-O2"], compiler=gfortran)
    r2 = evaluate_expressions(exprs, ["a", "b", "c"], x2, ["-O2"], compiler=gfortran)
    assert r1.view(np.float64)[0, 0] == 6.0
    # common practice, no source: (1e-20 + 1) - 1 rounds to 0 in binary64
    assert r2.view(np.float64)[0, 0] == (1e-20 + 1.0) - 1.0 == 0.0


def test_column_count_is_checked():
    with pytest.raises(ValueError):
        evaluate_expressions(["a"], ["a", "v(3)"], np.zeros((2, 2)), ["-O0"])


def test_program_text_declares_arrays():
    mod, drv = expression_program(["v(2) + a"], ["a", "v(3)"])
    assert "real(8), intent(in) :: v(3)" in mod
    assert "x(2:4, i)" in drv


def test_check_syntax_orders_modules_and_reports_errors(tmp_path, gfortran):
    # outside check: gfortran 12 -fsyntax-only needs the .mod of a used module
    user = tmp_path / "a_user.f90"
    user.write_text("subroutine s\n  use zz_mod\n  k = 1\nend subroutine s\n")
    mod = tmp_path / "z_mod.f90"
    mod.write_text("module zz_mod\n  integer :: k\nend module zz_mod\n")
    bad = tmp_path / "bad.f90"
    bad.write_text("program p\n  x = = 1\nend program p\n")
    assert order_by_modules([user, mod]) == [mod, user]
    results = {r.path.name: r for r in check_syntax([user, mod, bad], compiler=gfortran)}
    assert results["a_user.f90"].ok and results["z_mod.f90"].ok
    assert not results["bad.f90"].ok
    assert results["bad.f90"].errors and results["bad.f90"].errors[0].line == 2
    # Without ordering the retry pass still finds the module.
    results = check_syntax([user, mod], order=False, compiler=gfortran)
    assert all(r.ok for r in results)
    # A module nobody provides is reported, not retried forever.
    lone = tmp_path / "lone.f90"
    lone.write_text("subroutine t\n  use nowhere_mod\nend subroutine t\n")
    (res,) = check_syntax([lone], compiler=gfortran)
    assert not res.ok and "module" in res.output.lower()


@settings(max_examples=200, deadline=None)
@given(
    text=st.text(alphabet="ab+*() ", max_size=30),
    where=st.lists(st.tuples(st.integers(0, 30), st.sampled_from("()")), max_size=6),
)
def test_parenthesis_insertions_finds_exactly_the_inserted(text, where):
    # Property against a direct construction: insert parentheses at known
    # places; the helper must accept, and deleting what it reports must give
    # the original back.
    out = list(text)
    for pos, ch in sorted(where, reverse=True):
        out.insert(min(pos, len(out)), ch)
    rewritten = "".join(out)
    ins = parenthesis_insertions(text, rewritten)
    assert ins is not None and len(ins) == len(where)
    assert "".join(c for j, c in enumerate(rewritten) if j not in set(ins)) == text
    # Any other change is refused.
    if text:
        assert parenthesis_insertions(text, rewritten.replace(text[-1], "x")) is None
        assert parenthesis_insertions(text + "+", rewritten) is None
