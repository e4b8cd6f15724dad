"""Checks of the power runtime: ``sb_power`` (Fortran) and ``rewrite.runtime.powers``.

Things outside the project that the checks lean on:

* gfortran: the module is compiled at -O0, -O2, -O3 -march=native and
  -O3 -flto (the last two skipped where they do not build); the
  bits it computes must equal the Python reference (``power``/``power32``)
  and must not change with the level.  Floats go in and out through
  ``access='stream'`` binary files, never through decimal text.
* gfortran's own ``x**n`` with a run-time default-integer exponent (see
  ``test_agrees_with_gfortran_runtime_power``).
* ``fractions.Fraction`` (exact rational arithmetic, Python standard
  library) for the error bound.
* IEEE 754-2019, 9.2 (``pown``) for special values, quoted from memory.
"""

from __future__ import annotations

import math
import shutil
import struct
import subprocess
import tempfile
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from rewrite.runtime.powers import (
    BINARY32_UNIT_ROUNDOFF,
    BINARY64_UNIT_ROUNDOFF,
    error_bound,
    fortran_source,
    grouping,
    power,
    power32,
)
from rewrite.verify.gfortran import (
    CompileError,
    build_program,
    check_syntax,
    find_gfortran,
    run_program,
    write_stream,
)

GFORTRAN = find_gfortran()
needs_gfortran = pytest.mark.skipif(
    GFORTRAN is None,
    reason="gfortran is not installed (set $SAMEBITS_GFORTRAN or put gfortran on PATH)",
)

INT32_MIN, INT32_MAX = -(2**31), 2**31 - 1
INT64_MIN, INT64_MAX = -(2**63), 2**63 - 1

#: Optimisation levels the runtime must be indifferent to.
LEVELS = {
    "O0": ("-O0",),
    "O2": ("-O2",),
    "O3-native": ("-O3", "-march=native"),
    "O3-lto": ("-O3", "-flto"),  # link-time optimisation: inlined across the two units
}
#: Levels whose flags may not work everywhere: probed first, skipped when they fail.
PROBED = {"O3-native", "O3-lto"}

#: Exponents outside -40..40 that every batch contains.
LARGE_EXPONENTS = [
    41, 63, 64, 65, 100, 127, 128, 255, 1000, 1023, 1024, 1025, 4097, 65535, 2**20 + 1,
    INT32_MAX, INT32_MIN, INT32_MIN + 1, 2**31, 2**32 + 3, 2**62, 2**62 + 1,
    INT64_MAX, INT64_MIN, INT64_MIN + 1,
]
LARGE_EXPONENTS += [-n for n in LARGE_EXPONENTS if -n <= INT64_MAX]


def _f64(bits: int) -> float:
    return struct.unpack("<d", struct.pack("<Q", bits))[0]


def _bits64(x: float) -> int:
    return struct.unpack("<Q", struct.pack("<d", x))[0]


# Special inputs: zeros, ones, infinities, the smallest subnormal, the largest subnormal and
# smallest normal, the largest finite value, neighbours of 1, and NaNs (quiet, signalling,
# negative).  Binary64/binary32 limits: common practice, no source; np.finfo agrees (asserted).
QNAN64, SNAN64, NEG_QNAN64 = 0x7FF8000000000001, 0x7FF0000000000001, 0xFFF8000000000000
SPECIAL64 = np.array(
    [0.0, -0.0, 1.0, -1.0, 2.0, -2.0, 0.5, -0.5, math.inf, -math.inf,
     5e-324, -5e-324, 2.2250738585072014e-308, 2.225073858507201e-308,
     1.7976931348623157e308, -1.7976931348623157e308, 1.0000000000000002, 0.9999999999999999,
     -1.0000000000000002, 3.0, 10.0, 0.1]
    + [_f64(b) for b in (QNAN64, SNAN64, NEG_QNAN64, 0xFFF0000000000005)],
    dtype=np.float64,
)
QNAN32, SNAN32 = 0x7FC00001, 0x7F800001
SPECIAL32 = np.concatenate([
    np.array([0.0, -0.0, 1.0, -1.0, 2.0, -2.0, 0.5, -0.5, np.inf, -np.inf,
              1e-45, -1e-45, 1.1754944e-38, 1.1754942e-38, 3.4028235e38, -3.4028235e38,
              1.0000001, 0.99999994, -1.0000001, 3.0, 10.0, 0.1], dtype=np.float32),
    np.array([QNAN32, SNAN32, 0xFFC00000, 0xFF800005], dtype=np.uint32).view(np.float32),
])
assert SPECIAL32.size == SPECIAL64.size
assert SPECIAL64[12] == np.finfo(np.float64).tiny and SPECIAL64[14] == np.finfo(np.float64).max
assert SPECIAL32[12] == np.finfo(np.float32).tiny and SPECIAL32[14] == np.finfo(np.float32).max
assert SPECIAL64[10] == np.nextafter(0.0, 1.0) and SPECIAL32[10] == np.nextafter(np.float32(0), np.float32(1))


# --------------------------------------------------------------------------
# The Fortran side: one driver, compiled once per level, fed many rows
# --------------------------------------------------------------------------

DRIVER = """\
program sb_power_driver
  use, intrinsic :: iso_fortran_env, only: real32, real64, int32, int64
  use samebits_runtime, only: sb_power
  implicit none
  integer(int64) :: cnt
  integer :: u
  real(real64), allocatable :: x64(:), a(:), b(:), e(:)
  real(real32), allocatable :: x32(:), c(:), d(:), f(:)
  integer(int64), allocatable :: n64(:)
  integer(int32), allocatable :: n32(:)
  open(newunit=u, file='in.bin', access='stream', form='unformatted', status='old', action='read')
  read(u) cnt
  allocate(x64(cnt), x32(cnt), n64(cnt), n32(cnt))
  read(u) x64, x32, n64, n32
  close(u)
  a = sb_power(x64, n64)
  b = sb_power(x64, n32)
  e = x64**n32
  c = sb_power(x32, n64)
  d = sb_power(x32, n32)
  f = x32**n32
  open(newunit=u, file='out.bin', access='stream', form='unformatted', status='replace', action='write')
  write(u) a, b, e, c, d, f
  close(u)
end program sb_power_driver
"""


class Driver:
    """The driver built at one level: ``run`` returns the result bits."""

    def __init__(self, workdir: Path, flags: tuple[str, ...]):
        self.workdir = workdir
        # Two compilation units: the calls cannot be inlined into the driver.
        self.exe = build_program(
            [("samebits_runtime.f90", fortran_source().read_text()), ("driver.f90", DRIVER)],
            flags, workdir, compiler=GFORTRAN,
        )

    def run(self, x64, x32, n64, n32) -> dict[str, np.ndarray]:
        cnt = len(x64)
        write_stream(
            self.workdir / "in.bin", np.array([cnt], dtype=np.int64),
            np.asarray(x64, np.float64), np.asarray(x32, np.float32),
            np.asarray(n64, np.int64), np.asarray(n32, np.int32),
        )
        run_program(self.exe, cwd=self.workdir)
        raw = np.fromfile(self.workdir / "out.bin", dtype=np.uint8)
        assert raw.size == 3 * 8 * cnt + 3 * 4 * cnt
        w64 = raw[: 24 * cnt].view(np.uint64).reshape(3, cnt)
        w32 = raw[24 * cnt:].view(np.uint32).reshape(3, cnt)
        return {"r64_n64": w64[0], "r64_n32": w64[1], "gf64_n32": w64[2],
                "r32_n64": w32[0], "r32_n32": w32[1], "gf32_n32": w32[2]}


def reference(x64, x32, n64, n32) -> dict[str, np.ndarray]:
    """The same four results from the Python reference, as bits."""
    xs64 = np.asarray(x64, np.float64).tolist()
    ns64 = [int(v) for v in n64]
    ns32 = [int(v) for v in n32]
    x32 = np.asarray(x32, np.float32)
    return {
        "r64_n64": np.array([power(x, n) for x, n in zip(xs64, ns64)], np.float64).view(np.uint64),
        "r64_n32": np.array([power(x, n) for x, n in zip(xs64, ns32)], np.float64).view(np.uint64),
        "r32_n64": np.array([power32(x32[i], n) for i, n in enumerate(ns64)], np.float32).view(np.uint32),
        "r32_n32": np.array([power32(x32[i], n) for i, n in enumerate(ns32)], np.float32).view(np.uint32),
    }


def _to_int32(n64: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    fits = (n64 >= INT32_MIN) & (n64 <= INT32_MAX)
    other = rng.integers(INT32_MIN, INT32_MAX, n64.size, endpoint=True)
    return np.where(fits, n64, other).astype(np.int32)


def _scaled(rng, count, exps, mant_bits, emin, emax, dtype):
    """Values whose |n|-th power lands anywhere from below underflow to above overflow.

    ``emin``/``emax``: exponents of the smallest subnormal and of the largest finite value.
    """
    k = np.maximum(np.abs(exps), 1)
    e = np.floor(rng.uniform(emin - 30, emax + 30, count) / k).astype(np.int64)
    e = np.clip(e, emin, emax)
    mant = 1.0 + rng.integers(0, 2**mant_bits, count) / 2.0**mant_bits
    sign = np.where(rng.random(count) < 0.5, -1.0, 1.0)
    return (sign * np.ldexp(mant, e)).astype(dtype)


def batch(seed: int = 2024, count: int = 20000):
    """Deterministic rows: special grid, random bits, range-edge values, near-one values."""
    rng = np.random.default_rng(seed)
    grid_n = np.array(list(range(-40, 41)) + LARGE_EXPONENTS, dtype=np.int64)
    gx = np.repeat(np.arange(SPECIAL64.size), grid_n.size)
    gn = np.tile(grid_n, SPECIAL64.size)
    x64, x32, n64 = [SPECIAL64[gx]], [SPECIAL32[gx]], [gn]
    rest = count - gn.size
    assert rest > 0
    small = rng.integers(-40, 41, rest)
    big = rng.choice(np.array(LARGE_EXPONENTS, dtype=np.int64), rest)
    n = np.where(rng.random(rest) < 0.9, small, big).astype(np.int64)
    kind = rng.integers(0, 3, rest)
    bits64 = rng.integers(0, 2**64, rest, dtype=np.uint64, endpoint=False).view(np.float64)
    bits32 = rng.integers(0, 2**32, rest, dtype=np.uint64).astype(np.uint32).view(np.float32)
    sc64 = _scaled(rng, rest, n, 52, -1074, 1023, np.float64)
    sc32 = _scaled(rng, rest, n, 23, -149, 127, np.float32)
    near64 = (1.0 + rng.integers(-2**12, 2**12, rest) * 2.0**-52) * np.where(rng.random(rest) < 0.5, -1, 1)
    near32 = (np.float32(1.0) + rng.integers(-2**6, 2**6, rest).astype(np.float32) * np.float32(2.0**-23)).astype(np.float32)
    x64.append(np.choose(kind, [bits64, sc64, near64]))
    x32.append(np.choose(kind, [bits32, sc32, near32]).astype(np.float32))
    n64.append(n)
    x64 = np.concatenate(x64)
    x32 = np.concatenate(x32)
    n64 = np.concatenate(n64)
    return x64, x32, n64, _to_int32(n64, rng)


@pytest.fixture(scope="module")
def workspace():
    tmp = Path(tempfile.mkdtemp(prefix="samebits-power-"))
    yield tmp
    shutil.rmtree(tmp, ignore_errors=True)


@pytest.fixture(scope="module")
def drivers(workspace):
    """Level name -> Driver (built on first use; a level that cannot build is skipped)."""
    built: dict[str, Driver | None] = {}

    def get(level: str) -> Driver:
        if level not in built:
            flags = LEVELS[level]
            try:
                if level in PROBED:  # probe: does this host's compiler accept the flags?
                    probe = workspace / f"probe-{level}"
                    exe = build_program([("p.f90", "program p\nend program p\n")], flags, probe,
                                        compiler=GFORTRAN)
                    run_program(exe)
                built[level] = Driver(workspace / level, flags)
            except (CompileError, OSError) as exc:
                built[level] = None
                built[level + ":why"] = str(exc)
        if built[level] is None:
            pytest.skip(f"flags {' '.join(LEVELS[level])} do not work here: {built[level + ':why'][:200]}")
        return built[level]

    return get


@pytest.fixture(scope="module")
def big_batch():
    return batch()


@pytest.fixture(scope="module")
def big_expected(big_batch):
    return reference(*big_batch)


@pytest.fixture(scope="module")
def big_results(drivers, big_batch):
    cache: dict[str, dict[str, np.ndarray]] = {}

    def get(level: str) -> dict[str, np.ndarray]:
        if level not in cache:
            cache[level] = drivers(level).run(*big_batch)
        return cache[level]

    return get


def _describe(mask, x, n, got, want, fmt):
    rows = np.nonzero(mask)[0][:5]
    return "; ".join(f"x={x[i]!r} n={int(n[i])} got={int(got[i]):{fmt}} want={int(want[i]):{fmt}}" for i in rows)


def _assert_same(key, got, want, x64, x32, n64, n32):
    x = x64 if key.startswith(("r64", "gf64")) else x32
    n = n64 if key.endswith("n64") else n32
    fmt = "016x" if key.startswith(("r64", "gf64")) else "08x"
    diff = got != want
    assert not diff.any(), f"{key}: {int(diff.sum())} of {diff.size} rows differ: " + _describe(diff, x, n, got, want, fmt)


# --------------------------------------------------------------------------
# Compiled sb_power == Python reference, at every level
# --------------------------------------------------------------------------


@needs_gfortran
@pytest.mark.parametrize("level", list(LEVELS))
def test_fortran_bits_equal_reference(level, big_results, big_batch, big_expected):
    # Source: gfortran compiles and runs the module; bits compared exactly.
    got = big_results(level)
    for key, want in big_expected.items():
        _assert_same(key, got[key], want, *big_batch)


@needs_gfortran
@pytest.mark.parametrize("level", [lv for lv in LEVELS if lv != "O0"])
def test_levels_give_the_same_bits(level, big_results, big_batch):
    # The point of the runtime: the optimisation level must not change the bits.
    base = big_results("O0")
    got = big_results(level)
    for key in ("r64_n64", "r64_n32", "r32_n64", "r32_n32"):
        _assert_same(key, got[key], base[key], *big_batch)


@needs_gfortran
@pytest.mark.parametrize("level", list(LEVELS))
def test_agrees_with_gfortran_runtime_power(level, big_results, big_batch):
    # Source: gfortran itself.  With a run-time default-integer exponent, gfortran
    # 12.2 evaluates x**n through libgcc's __powidf2/__powisf2, which (from memory)
    # is the same least-significant-bit-first square-and-multiply, 1/y for n < 0.
    # Observed: same bits as sb_power at every level.  If a future gfortran changes
    # that routine, this test fails while sb_power stays right; the other tests
    # still hold sb_power to its own definition.
    # (With an integer(8) exponent gfortran calls a libgfortran routine that takes
    # 1/x first for n < 0 and gives other bits; not checked here.)
    got = big_results(level)
    _assert_same("r64_n32", got["gf64_n32"], got["r64_n32"], *big_batch)
    _assert_same("r32_n32", got["gf32_n32"], got["r32_n32"], *big_batch)


def _bits64_strategy():
    return st.one_of(
        st.integers(0, 2**64 - 1).map(_f64),  # every bit pattern: NaN payloads, sNaN
        st.floats(allow_nan=True, allow_infinity=True, allow_subnormal=True),
        st.floats(0.5, 2.0).flatmap(lambda v: st.sampled_from([v, -v])),
    )


_exponents = st.one_of(
    st.integers(-40, 40), st.sampled_from(LARGE_EXPONENTS), st.integers(INT64_MIN, INT64_MAX)
)
_rows = st.lists(
    st.tuples(_bits64_strategy(), st.integers(0, 2**32 - 1), _exponents), min_size=1, max_size=50
)


@needs_gfortran
@pytest.mark.parametrize("level", list(LEVELS))
@settings(max_examples=25, deadline=None)
@given(rows=_rows)
def test_fortran_matches_reference_hypothesis(level, drivers, rows):
    # Source: gfortran-compiled sb_power vs the Python reference, bit for bit.
    x64 = np.array([r[0] for r in rows], np.float64)
    x32 = np.array([r[1] for r in rows], np.uint32).view(np.float32)
    n64 = np.array([r[2] for r in rows], np.int64)
    n32 = n64.astype(np.int32)  # wraps modulo 2**32: any int32 will do
    got = drivers(level).run(x64, x32, n64, n32)
    want = reference(x64, x32, n64, n32)
    for key in want:
        _assert_same(key, got[key], want[key], x64, x32, n64, n32)


# --------------------------------------------------------------------------
# Literal exponents in the same compilation unit (inlined, constant-propagated)
# --------------------------------------------------------------------------

CONSTANT_EXPONENTS = [1, 2, 3, -1, 9, 10, 12, 13, 15, 16, 17, 23, 31, 32, 40, 100, 1000, -9, -13, -16, -1000,
                      INT32_MAX, INT32_MIN, INT64_MAX, INT64_MIN, 2**40 + 7]


def _literal(n: int) -> str:
    if n == INT32_MIN:
        return "(-huge(1_int32) - 1_int32)"
    if n == INT64_MIN:
        return "(-huge(1_int64) - 1_int64)"
    if INT32_MIN < n <= INT32_MAX:
        return str(n)  # default integer
    return f"{n}_int64"


def _constant_program() -> str:
    lines = [
        "program sb_power_literals",
        "  use, intrinsic :: iso_fortran_env, only: real32, real64, int32, int64",
        "  use samebits_runtime, only: sb_power",
        "  implicit none",
        "  integer(int64) :: cnt",
        "  integer :: u",
        "  real(real64), allocatable :: x64(:), y64(:, :)",
        "  real(real32), allocatable :: x32(:), y32(:, :)",
        "  open(newunit=u, file='in.bin', access='stream', form='unformatted', status='old', action='read')",
        "  read(u) cnt",
        f"  allocate(x64(cnt), x32(cnt), y64(cnt, {len(CONSTANT_EXPONENTS)}), y32(cnt, {len(CONSTANT_EXPONENTS)}))",
        "  read(u) x64, x32",
        "  close(u)",
    ]
    for k, n in enumerate(CONSTANT_EXPONENTS, start=1):
        lines.append(f"  y64(:, {k}) = sb_power(x64, {_literal(n)})")
        lines.append(f"  y32(:, {k}) = sb_power(x32, {_literal(n)})")
    lines += [
        "  open(newunit=u, file='out.bin', access='stream', form='unformatted', status='replace', action='write')",
        "  write(u) y64, y32",
        "  close(u)",
        "end program sb_power_literals",
    ]
    return "\n".join(lines) + "\n"


@needs_gfortran
@pytest.mark.parametrize("level", list(LEVELS))
def test_literal_exponents_in_one_unit(level, drivers, workspace):
    # The rewritten code calls sb_power(x, 12) with literal exponents.  With the
    # module in the same file, the optimiser may inline, unroll and specialise;
    # the bits must still be the reference's.  Source: gfortran.
    drivers(level)  # skips when the level does not build here
    wd = workspace / f"literal-{level}"
    exe = build_program([("all.f90", fortran_source().read_text() + _constant_program())],
                        LEVELS[level], wd, compiler=GFORTRAN)
    rng = np.random.default_rng(7)
    x64 = np.concatenate([SPECIAL64, rng.uniform(-2.0, 2.0, 300),
                          1.0 + rng.integers(-1000, 1000, 300) * 2.0**-52])
    x32 = np.concatenate([SPECIAL32, rng.uniform(-2.0, 2.0, 300).astype(np.float32),
                          (1.0 + rng.integers(-100, 100, 300) * 2.0**-23).astype(np.float32)])
    write_stream(wd / "in.bin", np.array([x64.size], np.int64), x64, x32)
    run_program(exe, cwd=wd)
    m, k = x64.size, len(CONSTANT_EXPONENTS)
    raw = np.fromfile(wd / "out.bin", dtype=np.uint8)
    y64 = raw[: 8 * m * k].view(np.uint64).reshape(k, m)  # Fortran y(cnt, k): column k is row k here
    y32 = raw[8 * m * k:].view(np.uint32).reshape(k, m)
    for j, n in enumerate(CONSTANT_EXPONENTS):
        want64 = np.array([power(x, n) for x in x64.tolist()], np.float64).view(np.uint64)
        want32 = np.array([power32(x, n) for x in x32], np.float32).view(np.uint32)
        nn = np.full(m, n, dtype=object)
        _assert_same("r64_n64", y64[j], want64, x64, x32, nn, nn)
        _assert_same("r32_n64", y32[j], want32, x64, x32, nn, nn)


# --------------------------------------------------------------------------
# Special values (IEEE 754-2019, 9.2.1 pown, from memory)
# --------------------------------------------------------------------------


@needs_gfortran
@pytest.mark.parametrize("level", list(LEVELS))
def test_fortran_special_values(level, big_results, big_batch):
    x64, x32, n64, n32 = big_batch
    got = big_results(level)
    for xs, key, ns, bits_t, float_t in (
        (x64, "r64_n64", n64, np.uint64, np.float64), (x64, "r64_n32", n32, np.uint64, np.float64),
        (x32, "r32_n64", n64, np.uint32, np.float32), (x32, "r32_n32", n32, np.uint32, np.float32),
    ):
        r = got[key].view(float_t)
        one = np.array(1.0, float_t).view(bits_t)
        odd = (ns % 2) != 0
        # pown(x, 0) is 1 for every x, also 0, inf and NaN (IEEE 754-2019 9.2.1, from memory).
        zero_n = ns == 0
        assert zero_n.sum() > 100 and np.isnan(xs[zero_n]).any()
        assert (got[key][zero_n] == one).all(), key
        # NaN in, NaN out for n != 0 (IEEE 754-2019 9.2.1, from memory).
        assert np.isnan(r[np.isnan(xs) & ~zero_n]).all(), key
        # Sign: (-a)**n = (-1)**n a**n, and for zeros and infinities pown gives the
        # sign of x for odd n and + for even n (algebra; IEEE 754-2019 9.2.1, from memory).
        ok = ~np.isnan(xs) & ~zero_n
        assert (np.signbit(r[ok]) == (np.signbit(xs[ok]) & odd[ok])).all(), key
        # -0.0: odd n > 0 -> -0.0, even n > 0 -> +0.0, odd n < 0 -> -inf, even n < 0 -> +inf.
        negz = (xs == 0) & np.signbit(xs)
        for cond, value in ((odd & (ns > 0), -0.0), (~odd & (ns > 0), 0.0),
                            (odd & (ns < 0), -np.inf), (~odd & (ns < 0), np.inf)):
            sel = negz & cond
            assert sel.any()
            want = np.array(value, float_t).view(bits_t)
            assert (got[key][sel] == want).all(), (key, value)
        # +-inf: |result| is inf for n > 0 and 0 for n < 0 (IEEE 754-2019 9.2.1, from memory).
        inf = np.isinf(xs)
        assert (np.isinf(r[inf & (ns > 0)])).all() and (r[inf & (ns < 0)] == 0).all(), key
        # +-1: exact (+-1)**n, all products exact.  Source: algebra.
        unit = np.abs(xs) == 1
        assert (np.abs(r[unit & ~zero_n]) == 1).all(), key


def test_reference_special_values():
    # Same rules on the Python reference, which runs without gfortran.
    # IEEE 754-2019 9.2.1 pown, from memory.
    for x in (0.0, -0.0, math.inf, -math.inf, math.nan, _f64(SNAN64), 1.0, -3.5, 5e-324):
        assert _bits64(power(x, 0)) == _bits64(1.0)
        assert power32(np.float32(x), 0) == np.float32(1.0)
    assert _bits64(power(-0.0, 3)) == _bits64(-0.0)
    assert _bits64(power(-0.0, 4)) == _bits64(0.0)
    assert power(-0.0, -3) == -math.inf and power(0.0, -3) == math.inf and power(-0.0, -2) == math.inf
    assert _bits64(power(-math.inf, -3)) == _bits64(-0.0) and power(-math.inf, 3) == -math.inf
    assert math.isnan(power(math.nan, 5)) and math.isnan(power(math.nan, -5))
    assert np.signbit(power32(np.float32(-0.0), 5)) and not np.signbit(power32(np.float32(-0.0), 6))
    assert power32(np.float32(-0.0), -5) == -np.inf
    # A signalling NaN with n = 1 stays signalling: the first factor is copied
    # (see the module docstring); the Fortran tests hold sb_power to the same.
    assert _bits64(power(_f64(SNAN64), 1)) == SNAN64
    assert int(np.array(power32(np.array([SNAN32], np.uint32).view(np.float32)[0], 1)).view(np.uint32)) == SNAN32


@given(x=st.floats(allow_nan=False), n=st.integers(-200, 200))
@settings(max_examples=300, deadline=None)
def test_reference_sign(x, n):
    # (-a)**n = (-1)**n a**n (algebra); zeros and infinities as pown (IEEE 754-2019 9.2.1, from memory).
    r = power(x, n)
    assert math.copysign(1.0, r) == (math.copysign(1.0, x) if n % 2 else 1.0)


# --------------------------------------------------------------------------
# Error bound against exact rational arithmetic
# --------------------------------------------------------------------------

F64_TINY, F64_HUGE = Fraction(2) ** -1022, Fraction(np.finfo(np.float64).max.item())
F32_TINY, F32_HUGE = Fraction(2) ** -126, Fraction(float(np.finfo(np.float32).max))


def _exact_in_model(x: Fraction, n: int, tiny: Fraction, huge: Fraction) -> Fraction | None:
    """Exact x**n, or None when some intermediate could leave the normal range.

    All intermediates lie between |x| and |x|**|n| (powers.py docstring), and the
    result is x**n; a factor 2 of room covers the rounding errors.
    """
    ax = abs(x)
    if ax == 0:
        return None
    # Cheap pre-filter before the exact power: |log2 |x|**n| far outside the range.
    if abs(math.log2(ax) * n) > math.log2(huge) + 8:
        return None
    p = ax ** abs(n)
    for v in (ax, p, x**n if n > 0 else 1 / p):
        if not (2 * tiny <= abs(v) <= huge / 2):
            return None
    return x**n


def _relative_error(r, exact: Fraction) -> Fraction:
    return abs(Fraction(float(r)) - exact) / abs(exact)


@st.composite
def _in_range(draw, mant_bits, emin, emax):
    """(x, n) whose powers stay normal: x = +-(1 + f) * 2**e with e chosen from n."""
    n = draw(st.one_of(st.integers(-64, 64), st.integers(-400, 400)).filter(lambda v: v != 0))
    k = abs(n)
    lo, hi = -((-(emin + 2)) // k), (emax - 2) // k - 1
    if lo > hi:
        lo = hi = 0
    e = draw(st.integers(lo, hi))
    f = draw(st.integers(0, 2**mant_bits - 1))
    if k > 200:  # keep x**n of moderate size: x near 1
        e, f = draw(st.sampled_from([(0, f % 4096), (-1, 2**mant_bits - 1 - f % 4096)]))
    x = math.ldexp(1 + f / 2**mant_bits, e) * draw(st.sampled_from([1, -1]))
    return x, n


@given(xn=_in_range(52, -1022, 1023))
@settings(max_examples=400, deadline=None)
def test_error_bound_binary64(xn):
    # Source: fractions.Fraction is exact, so |r - x**n| / |x**n| is the true error.
    x, n = xn
    exact = _exact_in_model(Fraction(x), n, F64_TINY, F64_HUGE)
    assume(exact is not None)
    r = power(x, n)
    assert math.isfinite(r)
    assert _relative_error(r, exact) <= Fraction(error_bound(n))


@given(xn=_in_range(23, -126, 127))
@settings(max_examples=400, deadline=None)
def test_error_bound_binary32(xn):
    # Source: fractions.Fraction (exact); binary32 values are exact in binary64.
    x, n = xn
    x32 = np.float32(x)
    assert float(x32) == x  # 23 fraction bits: exactly representable
    exact = _exact_in_model(Fraction(x), n, F32_TINY, F32_HUGE)
    assume(exact is not None)
    r = power32(x32, n)
    assert np.isfinite(r)
    bound = error_bound(n, unit_roundoff=BINARY32_UNIT_ROUNDOFF)
    assert _relative_error(r, exact) <= Fraction(bound)


@given(n=st.integers(-(2**70), 2**70))
def test_error_bound_large_exponents(n):
    # The bound is gamma_k: k*u/(1 - k*u), k = n-1 or |n|, rounded up, inf past k*u >= 1.
    # Checked with exact rationals (Fraction).
    b = error_bound(n)
    k = n - 1 if n > 0 else -n
    ku = k * Fraction(BINARY64_UNIT_ROUNDOFF)
    if n == 0 or k == 0:
        assert b == 0.0
    elif ku >= 1:
        assert b == math.inf
    else:
        gamma = ku / (1 - ku)
        assert Fraction(b) >= gamma and Fraction(math.nextafter(b, 0.0)) < gamma


@needs_gfortran
def test_error_bound_on_fortran_results(big_results, big_batch):
    # The compiled results themselves (at -O2) against exact Fraction powers.
    x64, x32, n64, _ = big_batch
    got = big_results("O2")
    r64 = got["r64_n64"].view(np.float64)
    r32 = got["r32_n64"].view(np.float32)
    checked = 0
    for i in range(x64.size):
        n = int(n64[i])
        if n == 0 or abs(n) > 4097:
            continue
        for x, r, tiny, huge, u in ((float(x64[i]), r64[i], F64_TINY, F64_HUGE, BINARY64_UNIT_ROUNDOFF),
                                    (float(x32[i]), r32[i], F32_TINY, F32_HUGE, BINARY32_UNIT_ROUNDOFF)):
            if not math.isfinite(x):
                continue
            exact = _exact_in_model(Fraction(x), n, tiny, huge)
            if exact is None:
                continue
            assert _relative_error(r, exact) <= Fraction(error_bound(n, unit_roundoff=u)), (x, n)
            checked += 1
    assert checked > 5000


@pytest.mark.parametrize("n, share", [(2, 0.9), (-1, 0.9), (3, 0.5), (9, 0.5), (16, 0.5), (40, 0.5),
                                      (-2, 0.5), (-9, 0.5)])
def test_error_bound_is_nearly_reached(n, share):
    # The bound is not loose: on x uniform in [1, 2) the worst relative error seen
    # (exact, via Fraction) comes within `share` of it.  Observed when this test
    # was written: 0.98 (n=2), 0.99 (n=-1), 0.7-0.9 for the others.  Squaring
    # doubles the relative error of base each time, so the first rounding errors
    # dominate and add up coherently; a bound that was needlessly large (or
    # infinite) would fail here.
    rng = np.random.default_rng(11)
    worst = Fraction(0)
    for x in rng.uniform(1.0, 2.0, 1500).tolist():
        worst = max(worst, _relative_error(power(x, n), Fraction(x) ** n))
    assert worst <= Fraction(error_bound(n))
    assert worst >= Fraction(error_bound(n)) * Fraction(share)


# --------------------------------------------------------------------------
# The algorithm as documented, and the module's interface
# --------------------------------------------------------------------------


def test_documented_groupings():
    # The header of samebits_runtime.f90 and docs/runtime.md quote these.
    assert grouping(6) == "(x*x)*((x*x)*(x*x))"
    assert grouping(9) == "x*(((x*x)*(x*x))*((x*x)*(x*x)))"
    assert grouping(1) == "x"
    text = fortran_source().read_text()
    assert "(x*x) * ((x*x)*(x*x))" in text


@given(x=st.floats(allow_nan=False, allow_infinity=False), n=st.integers(1, 40))
@settings(max_examples=300, deadline=None)
def test_grouping_evaluates_to_power(x, n):
    # grouping(n) spelled out and evaluated by Python's own left-to-right binary64
    # products (each a correctly rounded IEEE 754 multiplication) gives power's bits.
    value = eval(grouping(n), {"__builtins__": {}}, {"x": x})  # noqa: S307 - our own text
    assert _bits64(value) == _bits64(power(x, n))


def test_reference_rejects_non_integer_exponents():
    with pytest.raises(TypeError):
        power(2.0, 2.0)
    with pytest.raises(TypeError):
        power(2.0, True)
    assert power(2.0, np.int64(3)) == 8.0


def _compile_module(flags):
    with tempfile.TemporaryDirectory(prefix="samebits-strict-") as tmp:
        cmd = [GFORTRAN, *flags, "-J", tmp, "-c", str(fortran_source()), "-o", str(Path(tmp) / "m.o")]
        return subprocess.run(cmd, capture_output=True, text=True)


@needs_gfortran
@pytest.mark.parametrize("opt", ["-O0", "-O2"])
def test_module_compiles_strictly(opt):
    # Source: gfortran's own standard conformance checking.
    proc = _compile_module(["-std=f2008", "-Wall", "-Wextra", "-Werror", "-pedantic", opt])
    assert proc.returncode == 0, proc.stdout + proc.stderr


@needs_gfortran
def test_only_sb_power_is_public(tmp_path):
    import re

    text = fortran_source().read_text()
    specifics = sorted({name for line in re.findall(r"module procedure (.*)", text)
                        for name in re.split(r"\s*,\s*", line.strip())})
    assert len(specifics) == 4
    mod = tmp_path / "samebits_runtime.f90"
    mod.write_text(text)
    for name, ok in [("sb_power", True)] + [(s, False) for s in specifics]:
        prog = tmp_path / f"use_{name}.f90"
        prog.write_text(f"program p\n  use samebits_runtime, only: {name}\n  implicit none\nend program p\n")
        results = {r.path.name: r for r in check_syntax([mod, prog], compiler=GFORTRAN)}
        assert results[mod.name].ok
        assert results[prog.name].ok is ok, (name, results[prog.name].output)
