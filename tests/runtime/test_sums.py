"""Checks of ``rewrite.runtime.sums``: exact sums, exact dot products, accumulators.

Outside references the checks lean on:

* ``math.fsum`` (Python standard library): the correctly rounded sum of its
  inputs, round-half-even (CPython's documentation and the comments of its
  implementation; from memory).  It raises ``OverflowError`` when the sum or one
  of its own partial sums overflows, so such cases use the next reference.
* ``fractions.Fraction`` (standard library): exact rational arithmetic.  The
  exact sum is rounded by ``ref_round`` below, which is written independently of
  the code under test: it walks to the two neighbouring floats with
  ``numpy.nextafter`` and compares distances as Fractions, ties to the even
  significand.
* IEEE 754 rules for sums and products with inf and NaN, and overflow to an
  infinity when the value rounded with an unbounded exponent exceeds the largest
  finite number (IEEE 754-2019, 4.3 and 7.4, from memory).
"""

from __future__ import annotations

import math
import random
import struct
import subprocess
import sys
import tracemalloc
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rewrite.runtime import sums
from rewrite.runtime.sums import SumAccumulator, exact_dot, exact_sum

ROOT = Path(__file__).resolve().parents[2]
MAX64 = float(np.finfo(np.float64).max)
MAX32 = float(np.finfo(np.float32).max)
TINY64 = 5e-324

#: Applied to every property test here (no global profile: other test files keep theirs).
CHECK = settings(deadline=None, max_examples=150)


# ---------------------------------------------------------------------------
# References


def exact(values) -> Fraction:
    return sum((Fraction(float(v)) for v in values), Fraction(0))


def ref_round(value: Fraction, dtype) -> np.floating:
    """``value`` rounded to nearest ``dtype``, ties to even, overflow to inf."""
    kind = np.dtype(dtype).type
    info = np.finfo(dtype)
    if value == 0:
        return kind(0.0)
    largest = Fraction(float(info.max))
    half_top_ulp = Fraction(2) ** (int(info.maxexp) - int(info.nmant) - 2)
    if abs(value) >= largest + half_top_ulp:  # the tie goes to the even 2**emax: overflow
        return kind(math.inf if value > 0 else -math.inf)
    with np.errstate(over="ignore"):
        return _nearest(value, kind, info)


def _nearest(value, kind, info):
    low = kind(float(value))  # a first guess only (it may even be an infinity)
    if np.isinf(low):
        low = kind(math.copysign(float(info.max), float(low)))
    while Fraction(float(low)) > value:
        down = np.nextafter(low, kind(-math.inf))
        if np.isinf(down):  # between -max - half an ulp and -max
            return low
        low = down
    while True:
        up = np.nextafter(low, kind(math.inf))
        if np.isinf(up) or Fraction(float(up)) > value:
            break
        low = up
    if Fraction(float(low)) == value:
        return low
    high = np.nextafter(low, kind(math.inf))
    if np.isinf(high):
        return low
    below, above = value - Fraction(float(low)), Fraction(float(high)) - value
    if below != above:
        return low if below < above else high
    uint = np.uint64 if info.bits == 64 else np.uint32
    return low if int(np.asarray(low).view(uint)) % 2 == 0 else high


def bits(x, dtype=np.float64) -> bytes:
    return np.asarray(x, dtype=dtype).tobytes()


def fsum_or_exact(values) -> np.float64:
    """math.fsum where it answers; the Fraction reference where it raises."""
    try:
        return np.float64(math.fsum(values))
    except OverflowError:
        return ref_round(exact(values), np.float64)


# ---------------------------------------------------------------------------
# Strategies and data

finite64 = st.floats(allow_nan=False, allow_infinity=False)
finite32 = st.floats(allow_nan=False, allow_infinity=False, width=32)
wide64 = st.builds(
    lambda m, e: m * 10.0**e,
    st.floats(-10.0, 10.0, allow_nan=False),
    st.integers(-300, 300),
)
subnormal64 = st.integers(-(2**52) + 1, 2**52 - 1).map(lambda k: k * TINY64)
values64 = st.one_of(finite64, wide64, subnormal64)


@st.composite
def cancelling(draw, element=values64, max_size=60):
    """Values with heavy cancellation: x and -x pairs plus a few small values."""
    xs = draw(st.lists(element, max_size=max_size))
    small = draw(st.lists(st.one_of(subnormal64, st.floats(-1e-5, 1e-5)), max_size=5))
    values = xs + [-v for v in xs if draw(st.booleans())] + small
    random.Random(draw(st.integers(0, 2**32))).shuffle(values)
    return values


def wide_random(n, seed, lo=-300, hi=300):
    rng = np.random.default_rng(seed)
    x = rng.standard_normal(n) * 10.0 ** rng.uniform(lo, hi, n)
    x[rng.integers(0, n, n // 20)] = rng.integers(-(2**52), 2**52, n // 20) * TINY64  # subnormals
    k = n // 4
    x[k : 2 * k] = -x[:k]  # exact cancellation
    return x


# ---------------------------------------------------------------------------
# float64: bit-equal to math.fsum


@CHECK
@given(cancelling())
def test_float64_matches_fsum_array_and_iterable(values):
    want = fsum_or_exact(values)  # math.fsum (Fraction where it raises)
    assert bits(exact_sum(np.array(values, dtype=np.float64))) == bits(want)
    got = exact_sum(values)
    assert type(got) is float and bits(got) == bits(want)
    assert bits(exact_sum(iter(values))) == bits(want)


@pytest.mark.parametrize("seed", range(4))
def test_float64_random_wide_range_matches_fsum(seed):
    x = wide_random(150_000, seed)  # several blocks of the kernel
    want = math.fsum(x)  # math.fsum
    assert bits(exact_sum(x)) == bits(want)
    assert bits(exact_sum(x.tolist())) == bits(want)


def test_float64_windows_blocks_and_chunks(monkeypatch):
    # Small windows, blocks and copy chunks take the same code paths as huge inputs.
    monkeypatch.setattr(sums, "_WINDOW64", 1000)
    monkeypatch.setattr(sums, "_BLOCK", 96)
    monkeypatch.setattr(sums, "_CHUNK", 700)
    x = wide_random(20_000, 7)
    want = math.fsum(x)  # math.fsum
    assert bits(exact_sum(x)) == bits(want)
    assert bits(exact_sum(x[::3])) == bits(math.fsum(x[::3]))  # math.fsum
    assert bits(exact_sum(v for v in x.tolist())) == bits(want)


def test_subnormal_results_match_fsum():
    cases = [
        [TINY64, TINY64],
        [2.2250738585072014e-308, -TINY64],
        [1e-310, -3e-310, 7e-311],
        [1.0, -1.0, 3 * TINY64],
        [2.0**-1022, -(2.0**-1023), -(2.0**-1074)],
    ]
    for values in cases:
        want = math.fsum(values)  # math.fsum
        assert bits(exact_sum(np.array(values))) == bits(want), values
        assert bits(exact_sum(values)) == bits(want), values


def test_fsum_rounding_of_python_int_division():
    # The float64 rounding is Python's int / int: checked against math.fsum on
    # sums that are ties and near-ties at many exponents, subnormal ones included.
    rng = random.Random(3)
    for _ in range(300):
        e = rng.randint(-1074, 960)
        a = math.ldexp(rng.randint(2**52, 2**53 - 1), e) if e > -1074 else TINY64
        tail = math.ldexp(1.0, max(e - 1, -1074)) * rng.choice([1, -1, 0.5, 3])
        values = [a, tail, math.ldexp(rng.random(), max(e - 60, -1074))]
        assert bits(exact_sum(values)) == bits(math.fsum(values))  # math.fsum


# ---------------------------------------------------------------------------
# float32: the exact sum rounded once to binary32


@CHECK
@given(st.lists(finite32, max_size=80))
def test_float32_rounded_once(values):
    a = np.array(values, dtype=np.float32)
    want = ref_round(exact(values), np.float32)  # Fraction sum, rounded by ref_round
    got = exact_sum(a)
    assert got.dtype == np.float32 and bits(got, np.float32) == bits(want, np.float32)


@CHECK
@given(st.floats(2.0**-80, 2.0**100), st.booleans(), st.booleans())
def test_float32_near_ties_not_double_rounded(x, negative, up):
    # x + ulp/2 is a binary32 tie; a nudge far below float64 precision decides it.
    # Rounding through float64 first would land on the tie and round to even.
    v = np.float32(-x if negative else x)
    ulp = abs(float(np.spacing(v)))
    nudge = ulp * 2.0**-40 * (1 if up else -1)
    values = np.array([v, math.copysign(ulp / 2, float(v)), nudge], np.float32)
    assert values.astype(np.float64).tolist() == [float(v), math.copysign(ulp / 2, float(v)), nudge]
    want = ref_round(exact(values.tolist()), np.float32)  # Fraction sum, rounded by ref_round
    assert bits(exact_sum(values), np.float32) == bits(want, np.float32)
    assert bits(exact_sum(values.astype(np.float64), dtype=np.float32), np.float32) == bits(want, np.float32)


def test_float32_ties_and_blocks():
    # 1 + 2**-24 is a binary32 tie (to 1); 1 + 2**-24 + 2**-60 is not (up).
    one, half_ulp, tiny = np.float32(1), np.float32(2.0**-24), np.float32(2.0**-60)
    assert exact_sum(np.array([one, half_ulp])) == np.float32(1)
    assert exact_sum(np.array([one, half_ulp, tiny])) == np.nextafter(one, np.float32(2))
    rng = np.random.default_rng(5)
    x = (rng.standard_normal(70_000) * 10.0 ** rng.uniform(-30, 30, 70_000)).astype(np.float32)
    x[:20_000] = -x[20_000:40_000]
    want = ref_round(exact(x.tolist()), np.float32)  # Fraction sum, rounded by ref_round
    assert bits(exact_sum(x), np.float32) == bits(want, np.float32)


@CHECK
@given(st.lists(values64, max_size=40))
def test_dtype_float32_from_float64_rounds_once(values):
    want = ref_round(exact(values), np.float32)  # Fraction sum, rounded by ref_round
    got = exact_sum(np.array(values), dtype=np.float32)
    assert bits(got, np.float32) == bits(want, np.float32)
    assert bits(exact_sum(values, dtype=np.float32), np.float32) == bits(want, np.float32)


@CHECK
@given(st.lists(finite32, max_size=40))
def test_dtype_float64_from_float32(values):
    want = math.fsum(values)  # math.fsum of the (exact) binary32 values
    assert bits(exact_sum(np.array(values, np.float32), dtype=np.float64)) == bits(want)


# ---------------------------------------------------------------------------
# Invariance: order, chunking, layout


@CHECK
@given(cancelling(max_size=40), st.randoms(use_true_random=False))
def test_permutation_and_reversal_invariant(values, rnd):
    a = np.array(values)
    want = bits(exact_sum(a))
    shuffled = values[:]
    rnd.shuffle(shuffled)
    assert bits(exact_sum(np.array(shuffled))) == want
    assert bits(exact_sum(a[::-1])) == want
    assert bits(exact_sum(shuffled)) == want


@CHECK
@given(cancelling(max_size=80), st.integers(2, 16), st.randoms(use_true_random=False))
def test_chunks_merged_through_accumulators(values, parts, rnd):
    a = np.array(values)
    cuts = sorted(rnd.randint(0, len(values)) for _ in range(parts - 1))
    pieces = np.split(a, cuts)
    accs = []
    for i, piece in enumerate(pieces):
        acc = SumAccumulator()
        acc.add(piece if i % 2 else piece.tolist())  # arrays and iterables alike
        accs.append(SumAccumulator.from_bytes(acc.to_bytes()))  # as if sent by another process
    rnd.shuffle(accs)
    total = accs[0].copy()
    for acc in accs[1:]:
        total = total + acc if rnd.random() < 0.5 else total.merge(acc)
    assert bits(total.result()) == bits(exact_sum(a)) == bits(fsum_or_exact(values))  # math.fsum
    single = SumAccumulator().add(a)
    assert total == single and total.to_bytes() == single.to_bytes()


def test_layouts_give_the_same_bits(monkeypatch):
    monkeypatch.setattr(sums, "_CHUNK", 1000)  # several copied pieces per view
    x = wide_random(6 * 7 * 90, 11).reshape(6, 7, 90)
    views = {
        "contiguous": x,
        "transposed": x.T,
        "fortran copy": np.asfortranarray(x),
        "reversed": x[::-1, :, ::-1],
        "strided": x[:, ::2, ::3],
        "mixed": x[::-1, 1:, ::-2].transpose(2, 0, 1),
        "byte-swapped": x.astype(">f8"),
    }
    for name, v in views.items():
        want = math.fsum(np.ascontiguousarray(v).ravel().tolist())  # math.fsum
        assert bits(exact_sum(v)) == bits(want), name
        assert bits(exact_sum(np.ascontiguousarray(v))) == bits(want), name


AXES = [0, 1, 2, -1, -3, (0, 2), (2, 0), (1, 2), (0, 1), (0, 1, 2)]


@pytest.mark.parametrize("axis", AXES)
@pytest.mark.parametrize("layout", ["C", "F", "reversed"])
def test_axis_sums_match_fsum_per_row(axis, layout):
    x = wide_random(4 * 6 * 9, 3).reshape(4, 6, 9)
    if layout == "F":
        x = np.asfortranarray(x)
    elif layout == "reversed":
        x = x[::-1, ::-1, ::-1]
    got = exact_sum(x, axis=axis)
    axes = tuple(a % 3 for a in ((axis,) if isinstance(axis, int) else axis))
    moved = np.moveaxis(x, axes, tuple(range(3 - len(axes), 3)))
    rows = moved.reshape(moved.shape[: 3 - len(axes)] + (-1,))
    want = np.empty(rows.shape[:-1])
    for index in np.ndindex(*rows.shape[:-1]):
        want[index] = math.fsum(rows[index])  # math.fsum per row
    assert bits(got) == bits(want)
    assert bits(exact_sum(np.ascontiguousarray(x), axis=axis)) == bits(want)
    assert np.shape(got) == np.sum(x, axis=axis).shape


@pytest.mark.parametrize("shape,axis", [((3, 5000), 1), ((5000, 3), 0), ((2, 3, 2100), -1)])
def test_long_rows(shape, axis):
    x = wide_random(math.prod(shape), 21).reshape(shape)
    got = exact_sum(x, axis=axis)
    moved = np.moveaxis(x, axis, -1)
    for index in np.ndindex(*moved.shape[:-1]):
        assert bits(got[index]) == bits(math.fsum(moved[index]))  # math.fsum per row


def test_long_rows_specials_overflow_and_huge_rows(monkeypatch):
    x = wide_random(6 * 3000, 23).reshape(6, 3000)
    x[1, 17] = np.nan
    x[2, 5], x[2, 2999] = np.inf, -np.inf
    x[3, 100] = -np.inf
    x[4, :1000], x[4, 1000:2000] = 1.7e308, -1.7e308  # the row's float bins overflow
    got = exact_sum(x, axis=1)
    assert np.isnan(got[1]) and np.isnan(got[2]) and got[3] == -np.inf
    for k in (0, 4, 5):
        want = ref_round(exact(x[k].tolist()), np.float64)  # Fraction sum, ref_round
        assert bits(got[k]) == bits(want)
    monkeypatch.setattr(sums, "_WINDOW64", 1000)  # rows longer than a window: one by one
    assert bits(exact_sum(x, axis=1)) == bits(got)
    assert bits(exact_sum(x.T, axis=0)) == bits(got)


def test_many_short_rows_in_groups(monkeypatch):
    monkeypatch.setattr(sums, "_ROW_GROUP", 64)
    x = wide_random(3000, 4).reshape(-1, 6)
    got = exact_sum(x, axis=1)
    assert bits(got) == bits([math.fsum(r) for r in x])  # math.fsum per row
    assert bits(exact_sum(x.T, axis=0)) == bits(got)


@CHECK
@given(st.lists(st.lists(finite32, min_size=3, max_size=3), min_size=1, max_size=8))
def test_float32_axis(rows):
    a = np.array(rows, dtype=np.float32)
    want = [ref_round(exact(r), np.float32) for r in rows]  # Fraction sums, ref_round
    assert bits(exact_sum(a, axis=1), np.float32) == bits(want, np.float32)
    want64 = [math.fsum(r) for r in rows]  # math.fsum of the binary32 values
    assert bits(exact_sum(a, axis=-1, dtype=np.float64)) == bits(want64)


@CHECK
@given(st.lists(st.lists(values64, min_size=4, max_size=4), min_size=1, max_size=6))
def test_axis_with_dtype_float32(rows):
    a = np.array(rows)
    want = [ref_round(exact(r), np.float32) for r in rows]  # Fraction sums, ref_round
    assert bits(exact_sum(a, axis=1, dtype=np.float32), np.float32) == bits(want, np.float32)


def test_near_ties_in_rows():
    # a + ulp(a)/2 is a tie; a third value far below (up to ~1000 binades) breaks it.
    # The rounding must see that value however far it is from the top bits.
    rng = random.Random(8)
    rows = []
    for _ in range(400):
        a = math.ldexp(rng.randint(2**52, 2**53 - 1), rng.randint(-1000, 900))
        a = -a if rng.random() < 0.5 else a
        half = math.copysign(math.ulp(a) / 2, a if rng.random() < 0.8 else -a)
        far = math.ldexp(abs(a), -rng.randint(54, 1100)) or TINY64
        rows.append([a, half, rng.choice([far, -far, 0.0]), 0.0, -a, a])
    x = np.array(rows)
    want = [math.fsum(r) for r in rows]  # math.fsum per row
    assert bits(exact_sum(x, axis=1)) == bits(want)
    assert bits(exact_sum(x.T, axis=0)) == bits(want)


def test_float32_subnormal_results_from_float64_rows():
    # float64 values near the binary32 subnormal range, rounded once to binary32
    # (the rounding point is the binary32 quantum 2**-149, not a 24-bit boundary).
    rng = np.random.default_rng(12)
    x = rng.standard_normal((300, 5)) * 10.0 ** rng.uniform(-47, -37, (300, 5))
    x[:100, 1] = -x[:100, 0] + np.ldexp(rng.integers(1, 8, 100), -150)  # ties at the quantum
    want = [ref_round(exact(r), np.float32) for r in x.tolist()]  # Fraction sums, ref_round
    assert bits(exact_sum(x, axis=1, dtype=np.float32), np.float32) == bits(want, np.float32)
    for r, w in zip(x[:40], want[:40]):
        assert bits(exact_sum(r, dtype=np.float32), np.float32) == bits(w, np.float32)


def test_huge_values_in_rows_take_the_safe_route():
    big = 1.7e308
    rows = np.array([[big] * 7 + [-big] * 7 + [1.5], [big, big, -big, 2.0**-1074] + [0.0] * 11])
    want = [ref_round(exact(r), np.float64) for r in rows.tolist()]  # Fraction sums, ref_round
    assert bits(exact_sum(rows, axis=1)) == bits(want)
    with pytest.raises(OverflowError):
        math.fsum(rows[0])  # math.fsum raises on its own intermediate overflow


# ---------------------------------------------------------------------------
# Special values, overflow, zeros


@pytest.mark.parametrize("dtype", [np.float64, np.float32])
def test_nan_and_infinities(dtype):
    rng = np.random.default_rng(2)
    base = rng.standard_normal(5000).astype(dtype)
    for k in (0, 1777, 4999):
        a = base.copy()
        a[k] = np.nan
        assert np.isnan(exact_sum(a))
        a[k] = np.inf
        assert exact_sum(a) == np.inf
        a[k] = -np.inf
        assert exact_sum(a) == -np.inf
        a[(k + 1) % 5000] = np.inf
        assert np.isnan(exact_sum(a))  # inf + -inf is NaN (IEEE 754)
    rows = np.array([[1, np.inf, 2], [np.nan, 1, 1], [np.inf, -np.inf, 0], [-np.inf, 3, 3], [1, 2, 3]], dtype)
    got = exact_sum(rows, axis=1)
    assert got[0] == np.inf and np.isnan(got[1]) and np.isnan(got[2]) and got[3] == -np.inf and got[4] == 6
    assert np.isnan(exact_sum([math.inf, math.nan])) and exact_sum([-math.inf, 1.0]) == -math.inf


def test_overflow_of_the_exact_sum():
    with pytest.raises(OverflowError):
        math.fsum([MAX64, MAX64])  # math.fsum raises where the exact sum overflows
    assert exact_sum(np.array([MAX64, MAX64])) == np.inf
    assert exact_sum([-MAX64, -MAX64]) == -math.inf
    # MAX64 + half its ulp is a tie between MAX64 (odd) and 2**1024: overflow.
    assert exact_sum([MAX64, 2.0**970]) == math.inf
    assert ref_round(exact([MAX64, 2.0**970]), np.float64) == np.inf  # Fraction + ref_round
    just_below = [MAX64, 2.0**970, -TINY64]
    assert exact_sum(just_below) == MAX64 == ref_round(exact(just_below), np.float64)
    with pytest.raises(OverflowError):
        math.fsum(just_below)  # math.fsum: intermediate overflow although the sum is finite
    assert exact_sum(np.array([MAX64, MAX64, -MAX64])) == MAX64
    many = np.array([1.7e308] * 1000 + [-1.7e308] * 1000 + [1.0])  # top bins overflow in float
    assert exact_sum(many) == 1.0
    assert exact_sum(np.array([MAX32, MAX32], np.float32)) == np.float32(np.inf)
    tie32 = np.array([MAX32, 2.0**103], np.float32)
    assert exact_sum(tie32) == np.inf == ref_round(exact(tie32.tolist()), np.float32)
    below32 = np.array([MAX32, 2.0**103, -(2.0**-149)], np.float32)
    assert exact_sum(below32) == np.float32(MAX32) == ref_round(exact(below32.tolist()), np.float32)


@pytest.mark.parametrize("dtype", [np.float64, np.float32])
def test_zeros_and_empty(dtype):
    plus = bits(0.0, dtype)
    assert bits(exact_sum(np.array([], dtype)), dtype) == plus
    assert bits(exact_sum(np.array([-0.0] * 5, dtype)), dtype) == plus
    assert bits(exact_sum(np.array([-1.5, 1.5, -0.0], dtype)), dtype) == plus
    assert bits(exact_sum(np.full((3, 4), -0.0, dtype), axis=1), dtype) == bits([0.0] * 3, dtype)
    assert bits(exact_sum(np.zeros((3, 0), dtype), axis=1), dtype) == bits([0.0] * 3, dtype)
    assert exact_sum(np.zeros((0, 3), dtype), axis=1).shape == (0,)
    assert bits(exact_sum([]), np.float64) == bits(math.fsum([]))  # math.fsum: 0.0
    assert bits(exact_sum([-0.0])) == bits(0.0) and math.fsum([-0.0]) == 0.0  # math.fsum
    assert bits(SumAccumulator(dtype).result(), dtype) == plus


def test_types_and_errors():
    assert isinstance(exact_sum(np.arange(3.0)), np.float64)
    assert isinstance(exact_sum(np.arange(3, dtype=np.float32)), np.float32)
    assert isinstance(exact_sum(np.float32(1.5)), np.float32)
    assert exact_sum(np.ones((2, 3)), axis=(0, 1)) == 6 and np.ndim(exact_sum(np.ones((2, 3)), axis=(0, 1))) == 0
    assert exact_sum([[1.0, 2.0], [3.0, 4.0]], axis=0).tolist() == [4.0, 6.0]
    with pytest.raises(TypeError):
        exact_sum(np.arange(3))
    with pytest.raises(TypeError):
        exact_sum(np.ones(3), dtype=np.int32)
    with pytest.raises(np.exceptions.AxisError):
        exact_sum(np.ones((2, 2)), axis=2)
    with pytest.raises(ValueError):
        exact_sum(np.ones((2, 2)), axis=(0, -2))
    with pytest.raises(TypeError):
        exact_sum(np.ma.masked_array([1.0, 2.0], [0, 1]))  # the mask would be ignored


# ---------------------------------------------------------------------------
# exact_dot against Fraction


def exact_dot_ref(a, b, dtype):
    value = sum((Fraction(float(x)) * Fraction(float(y)) for x, y in zip(a, b)), Fraction(0))
    return ref_round(value, dtype)  # Fraction products and sum, rounded by ref_round


pairs64 = st.lists(st.tuples(values64, values64), max_size=40)


@CHECK
@given(pairs64, st.randoms(use_true_random=False))
def test_exact_dot_float64(pairs, rnd):
    a = [p[0] for p in pairs]
    b = [p[1] for p in pairs]
    want = exact_dot_ref(a, b, np.float64)
    got = exact_dot(np.array(a), np.array(b))
    assert got.dtype == np.float64 and bits(got) == bits(want)
    assert type(exact_dot(a, b)) is float and bits(exact_dot(a, b)) == bits(want)
    order = list(range(len(pairs)))
    rnd.shuffle(order)
    assert bits(exact_dot(np.array(a)[order], np.array(b)[order])) == bits(want)


@CHECK
@given(st.lists(st.tuples(finite32, finite32), max_size=40))
def test_exact_dot_float32(pairs):
    a = np.array([p[0] for p in pairs], np.float32)
    b = np.array([p[1] for p in pairs], np.float32)
    want = exact_dot_ref(a.tolist(), b.tolist(), np.float32)
    got = exact_dot(a, b)
    assert got.dtype == np.float32 and bits(got, np.float32) == bits(want, np.float32)


def test_exact_dot_blocks_shapes_and_specials():
    rng = np.random.default_rng(9)
    a = wide_random(40_000, 1, -150, 150).reshape(200, 200)
    b = wide_random(40_000, 2, -150, 150).reshape(200, 200)
    want = exact_dot_ref(a.ravel().tolist(), b.ravel().tolist(), np.float64)
    assert bits(exact_dot(a, b)) == bits(want)
    assert bits(exact_dot(a.T, b.T)) == bits(want)  # same pairs, other order
    assert bits(exact_dot(np.array([TINY64]), np.array([0.75]))) == bits(TINY64)
    assert bits(exact_dot([TINY64], [0.5])) == bits(0.0)  # tie at half the quantum: to even (0)
    assert bits(exact_dot([-TINY64], [0.25])) == bits(-0.0)  # nonzero, rounds to -0.0
    assert exact_dot([MAX64, MAX64], [2.0, -2.0]) == 0.0
    assert exact_dot([MAX64], [2.0]) == math.inf
    assert np.isnan(exact_dot([math.inf], [0.0]))  # inf * 0 is NaN (IEEE 754)
    assert np.isnan(exact_dot([math.inf, math.inf], [1.0, -1.0]))
    assert exact_dot([math.inf, 1.0], [-2.0, 5.0]) == -math.inf
    assert np.isnan(exact_dot(np.array([1.0, np.nan]), np.array([0.0, 1.0])))
    assert np.isnan(exact_dot(np.array([np.inf], np.float32), np.array([0], np.float32)))
    assert exact_dot([], []) == 0.0
    with pytest.raises(ValueError):
        exact_dot(np.ones(3), np.ones(4))
    del rng


def test_exact_dot_windows(monkeypatch):
    monkeypatch.setattr(sums, "_DOT_BLOCK", 300)
    monkeypatch.setattr(sums, "_WINDOW64", 1000)
    a = wide_random(5000, 5, -160, 160)
    b = wide_random(5000, 6, -160, 160)
    want = exact_dot_ref(a.tolist(), b.tolist(), np.float64)
    assert bits(exact_dot(a, b)) == bits(want)
    a32 = wide_random(5000, 7, -18, 18).astype(np.float32)
    b32 = wide_random(5000, 8, -18, 18).astype(np.float32)
    want32 = exact_dot_ref(a32.tolist(), b32.tolist(), np.float32)
    assert bits(exact_dot(a32, b32), np.float32) == bits(want32, np.float32)


# ---------------------------------------------------------------------------
# Accumulator state and its serialisation


@CHECK
@given(cancelling(max_size=30), st.sampled_from([np.float64, np.float32]), st.booleans(), st.booleans())
def test_accumulator_round_trips(values, dtype, nan, inf):
    with np.errstate(over="ignore"):
        a = np.array(values, dtype)
    extra = [np.nan] * nan + [-np.inf] * inf
    everything = np.concatenate([a, np.array(extra, dtype)])
    acc = SumAccumulator(dtype).add(a).add(np.array(extra, dtype))
    for copy in (SumAccumulator.from_bytes(acc.to_bytes()), SumAccumulator.from_array(acc.to_array())):
        assert copy == acc and copy.dtype == acc.dtype
        assert bits(copy.result(), dtype) == bits(acc.result(), dtype)
    assert acc.to_array().dtype == np.int64
    assert bits(acc.result(), dtype) == bits(exact_sum(everything), dtype)


def _header(version=1, code=64, flags=0, sign=0, shift=0, length=None, body=b"\x03"):
    length = len(body) if length is None else length
    return struct.pack("<4sBBBBHH", b"SBXS", version, code, flags, sign, shift, length) + body


def test_accumulator_bytes_format_and_malformed_input():
    acc = SumAccumulator().add([3.0])  # 3 * 2**1074 units of 2**-1074: odd 3, shift 1074
    assert acc.to_bytes() == _header(shift=1074)
    assert SumAccumulator.from_bytes(_header(shift=1074)).result() == 3.0
    good = acc.to_bytes()
    bad = {
        "short": good[:5],
        "magic": b"XBXS" + good[4:],
        "version": _header(version=2),
        "dtype": _header(code=16),
        "flags": _header(flags=8),
        "sign": _header(sign=2),
        "negative zero": _header(sign=1, body=b""),
        "zero with shift": _header(shift=3, body=b""),
        "even magnitude": _header(body=b"\x02"),
        "high zero byte": _header(body=b"\x03\x00"),
        "trailing": good + b"\x00",
        "length": _header(length=2),
        "shift": _header(shift=60000),
    }
    for name, data in bad.items():
        with pytest.raises(ValueError):
            SumAccumulator.from_bytes(data)
            pytest.fail(name)
    with pytest.raises(TypeError):
        SumAccumulator.from_bytes("SBXS")


def test_accumulator_array_malformed_input():
    good = SumAccumulator().add([-2.5, 1e300]).to_array()
    assert SumAccumulator.from_array(good) == SumAccumulator().add([-2.5, 1e300])
    bad = []
    for i, v in [(0, 1), (1, 2), (2, 16), (3, 9), (4, 5), (5, -1), (6, 99)]:
        b = good.copy()
        b[i] = v
        bad.append(b)
    limb = good.copy()
    limb[7] = 2**32
    bad += [limb, good[:6], good.astype(np.float64), good.reshape(1, -1), np.append(good, 0)]
    for b in bad:
        with pytest.raises(ValueError):
            SumAccumulator.from_array(b)


def test_accumulator_rules():
    a64, a32 = SumAccumulator(), SumAccumulator(np.float32)
    with pytest.raises(ValueError):
        a64.merge(a32)
    with pytest.raises(TypeError):
        a64.merge(1.0)
    with pytest.raises(TypeError):
        a32.add(np.ones(3))  # float64 into float32 would round
    with pytest.raises(ValueError):
        a32.add([0.1])  # not a binary32 value
    a32.add([0.5, 0.25])
    assert a32.result() == np.float32(0.75)
    x32 = np.array([1e-30, 3.0, -1e20], np.float32)
    a64.add(x32)
    assert bits(a64.result()) == bits(math.fsum(x32.tolist()))  # math.fsum of the binary32 values
    with pytest.raises(TypeError):
        SumAccumulator(np.int64)
    both = SumAccumulator().add([math.inf]) + SumAccumulator().add([-math.inf])
    assert np.isnan(both.result())  # inf + -inf is NaN, carried across a merge


# ---------------------------------------------------------------------------
# Memory and imports


def _peak(fn):
    tracemalloc.start()
    try:
        fn()
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def test_no_whole_copies_of_the_input():
    x = np.random.default_rng(0).standard_normal(1 << 22)  # 32 MiB
    assert _peak(lambda: exact_sum(x)) < x.nbytes / 50
    assert _peak(lambda: exact_sum(x[::-1])) < x.nbytes / 50  # reversed view: still no copy
    strided = x[::2]  # 16 MiB of values, copied 2**18 at a time
    assert _peak(lambda: exact_sum(strided)) < strided.size * 8 / 4
    square = x.reshape(2048, 2048)
    assert _peak(lambda: exact_sum(square, axis=0)) < x.nbytes / 8  # rows one by one
    # short rows: a group of 2**16 values and its temporaries, whatever the input size
    assert _peak(lambda: exact_sum(square[:, :1000], axis=1)) < x.nbytes / 4


def test_lazy_exports_do_not_import_numpy():
    code = (
        "import sys, rewrite.runtime as r\n"
        "assert 'numpy' not in sys.modules, 'numpy imported'\n"
        "from rewrite.runtime import exact_sum, exact_dot, SumAccumulator\n"
        "assert exact_sum([1.0, 2.0]) == 3.0 and 'numpy' in sys.modules\n"
        "try:\n    r.no_such_name\nexcept AttributeError:\n    print('ok')\n"
    )
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "ok"
