"""Checks of the exact sums in the Fortran runtime: ``exact_sum``, ``exact_dot``, ``sb_sum_acc``.

References outside the module that the checks compare with:

* ``math.fsum`` (Python standard library): the correctly rounded binary64 sum of its inputs.
* ``fractions.Fraction`` and exact Python integers: the exact sums, and the exact dot products,
  rounded by ``round_binary`` below, an independent round-to-nearest-even written with Fraction
  arithmetic.  ``round_binary`` is itself checked against ``float(Fraction)`` (CPython rounds an
  int/int quotient correctly) and against NumPy's float64 -> float32 conversion.
* gfortran: the module is built at -O0, -O2, -O3 -march=native and -Ofast (each with
  ``-std=f2008 -Wall -Wextra -Werror``, the last two skipped where they do not build) and must
  give the same bits at every level; where IEEE arithmetic leaves no choice (infinities, NaNs,
  signed zeros) the intrinsic ``sum`` of the same data is a reference too.

Data go in and out through ``access='stream'`` binary files, never through decimal text.  All
data are made up (seeded generators), none are from anywhere.
"""

from __future__ import annotations

import math
import shutil
import struct
import tempfile
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest

from rewrite.runtime.powers import fortran_source
from rewrite.verify.gfortran import CompileError, build_program, find_gfortran, run_program, write_stream

GFORTRAN = find_gfortran()
NO_GFORTRAN = "gfortran is not installed (set $SAMEBITS_GFORTRAN or put gfortran on PATH)"

STRICT = ("-std=f2008", "-Wall", "-Wextra", "-Werror")
LEVELS = {
    "O0": ("-O0",),
    "O2": ("-O2",),
    "O3-native": ("-O3", "-march=native"),
    # The sums use integer arithmetic only, so even fast-math (which also makes the program
    # flush subnormals at start-up) must not change their bits.  Not a recommendation: the same
    # file's sb_power must not be built this way (docs/runtime.md).
    "Ofast": ("-Ofast",),
}
PROBED = {"O3-native", "Ofast"}  # flags that may not work everywhere: probed, skipped if not

INF = math.inf
NAN = math.nan
MAX64 = 1.7976931348623157e308  # largest finite binary64: common practice, no source
MAX32 = float(np.finfo(np.float32).max)
TINY64 = 5e-324  # smallest subnormal binary64, 2**-1074: common practice, no source
ACC_LEN = 72  # documented length of sb_sum_acc%digits
NDIG = 68  # value digits; digit k weighs 2**(32*k - 1074) (docs/runtime.md)
USED = 71  # 0-based index of the usage count in digits
assert MAX64 == np.finfo(np.float64).max and TINY64 == 2.0**-1074
assert MAX32 == (2**24 - 1) * 2.0**104


# --------------------------------------------------------------------------
# Independent references
# --------------------------------------------------------------------------


def round_binary(q: Fraction, prec: int, emin: int, emax: int) -> float:
    """``q`` rounded to nearest, ties to even, in a binary format (returned as a Python float).

    ``prec`` significand bits, smallest subnormal ``2**emin``, largest exponent ``emax``
    (binary64: 53, -1074, 1023; binary32: 24, -149, 127: common practice, no source).  Exact
    zero gives +0.0; a non-zero value that rounds to zero keeps its sign (IEEE 754, from memory).
    """
    if q == 0:
        return 0.0
    sign = -1.0 if q < 0 else 1.0
    a = abs(q)
    e = a.numerator.bit_length() - a.denominator.bit_length()  # 2**(e-1) < a < 2**(e+1)
    if a < Fraction(2) ** e:
        e -= 1  # now 2**e <= a < 2**(e+1)
    lsb = max(e - prec + 1, emin)
    scaled = a / Fraction(2) ** lsb
    n = math.floor(scaled)
    rest = scaled - n
    if rest > Fraction(1, 2) or (rest == Fraction(1, 2) and n % 2 == 1):
        n += 1
    if Fraction(n) * Fraction(2) ** lsb >= Fraction(2) ** (emax + 1):
        return sign * INF
    return sign * math.ldexp(n, lsb)


def round64(q: Fraction) -> float:
    return round_binary(q, 53, -1074, 1023)


def round32(q: Fraction) -> float:
    return round_binary(q, 24, -149, 127)


def scaled_int(x: float, scale: int) -> int:
    """x * 2**scale as an exact integer (x finite, 2**scale a multiple of its denominator)."""
    num, den = float(x).as_integer_ratio()
    return num * ((1 << scale) // den)


def exact_sum(values) -> Fraction:
    """Exact sum of finite floats (binary32 values given as their exact float64 equals)."""
    return Fraction(sum(scaled_int(v, 1074) for v in values), 1 << 1074)


def exact_dot(a, b) -> Fraction:
    return Fraction(sum(scaled_int(x, 1074) * scaled_int(y, 1074) for x, y in zip(a, b)), 1 << 2148)


def ieee_sum(values, rounding) -> float:
    """IEEE rules for a sum (docs/runtime.md): NaN if any NaN or both infinities, else the
    infinity present, else the exact sum rounded once."""
    vals = [float(v) for v in values]
    if any(math.isnan(v) for v in vals) or (INF in vals and -INF in vals):
        return NAN
    if INF in vals:
        return INF
    if -INF in vals:
        return -INF
    return rounding(exact_sum(vals))


def ieee_dot(a, b, rounding) -> float:
    """Products taken exactly; inf*0 and NaN factors give NaN, inf*x an infinity of the sign."""
    finite_a, finite_b, special = [], [], []
    for x, y in zip(map(float, a), map(float, b)):
        if math.isfinite(x) and math.isfinite(y):
            finite_a.append(x)
            finite_b.append(y)
        else:
            special.append(x * y)  # Python's own IEEE product: inf*0 -> nan, inf*-2 -> -inf
    if special:
        return ieee_sum(special, lambda q: NAN)  # only the specials decide
    return rounding(exact_dot(finite_a, finite_b))


def bits64(x: float) -> int:
    return struct.unpack("<Q", struct.pack("<d", x))[0]


def bits32(x: float) -> int:
    return int(np.array([x], np.float32).view(np.uint32)[0])


def same64(word: int, expected: float) -> bool:
    got = struct.unpack("<d", struct.pack("<Q", int(word)))[0]
    if math.isnan(expected):
        return math.isnan(got)
    return int(word) == bits64(expected)


def same32(word: int, expected: float) -> bool:
    got = float(np.array([int(word) & 0xFFFFFFFF], np.uint32).view(np.float32)[0])
    if math.isnan(expected):
        return math.isnan(got)
    return (int(word) & 0xFFFFFFFF) == bits32(expected)


def show64(word: int) -> str:
    return repr(struct.unpack("<d", struct.pack("<Q", int(word)))[0])


def test_reference_rounding_agrees_with_python_and_numpy():
    """round_binary against float(Fraction) (CPython's correctly rounded int/int division) and
    against NumPy's float64 -> float32 conversion (a single rounding of an exact input)."""
    rng = np.random.default_rng(11)
    checked = 0
    for _ in range(4000):
        kind = rng.integers(0, 4)
        if kind == 0:  # anywhere in the binary64 range, including the subnormals
            q = Fraction(int(rng.integers(1, 2**62)), 1) * Fraction(2) ** int(rng.integers(-1140, 962))
        elif kind == 1:  # exact ties between binary64 neighbours
            q = Fraction(2 * int(rng.integers(2**52, 2**53)) + 1, 2) * Fraction(2) ** int(rng.integers(-1074, 960))
        elif kind == 2:  # ties in the subnormal range
            q = Fraction(2 * int(rng.integers(0, 2**20)) + 1, 2) * Fraction(2) ** -1074
        else:  # arbitrary rationals
            q = Fraction(int(rng.integers(1, 2**62)), int(rng.integers(1, 2**62))) * Fraction(2) ** int(rng.integers(-1100, 1000))
        q = q if rng.random() < 0.5 else -q
        assert bits64(round64(q)) == bits64(float(q)), q  # reference: CPython float(Fraction)
        x = float(q)  # now an exact binary64 value: one rounding to binary32 is NumPy's
        if 0 < abs(x) < 3.4e38:  # (Fraction(-0.0) has no sign)
            with np.errstate(over="ignore"):
                assert bits32(round32(Fraction(x))) == bits32(np.float32(x)), x  # reference: NumPy
        checked += 1
    assert checked == 4000
    assert round64(Fraction(MAX64) + Fraction(2) ** 970) == INF  # the tie above MAX rounds to 2**1024
    assert round64(Fraction(MAX64) + Fraction(2) ** 970 - Fraction(2) ** -1074) == MAX64


# --------------------------------------------------------------------------
# The driver: one program per level, many cases per run
# --------------------------------------------------------------------------

# Ops read from in.bin (int64 op code, then its data); results go to out.bin as 8-byte words
# (a real32 result is its 4 bytes and 4 zero bytes).  Op 0 ends the run.
DRIVER_SOURCE = """\
program sums_driver
  use, intrinsic :: iso_fortran_env, only: real32, real64, int32, int64
  use samebits_runtime, only: exact_sum, exact_dot, sb_sum_acc, sb_acc_init, sb_acc_add, &
      sb_acc_merge, sb_acc_normalise, sb_acc_result, sb_acc_result32, sb_acc_size
  implicit none
  integer :: uin, uout
  integer(int64) :: op
  open(newunit=uin, file='in.bin', access='stream', form='unformatted', status='old', action='read')
  open(newunit=uout, file='out.bin', access='stream', form='unformatted', status='replace', &
      action='write')
  do
    read(uin) op
    select case (op)
    case (0)
      exit
    case (1)
      call op_sum64()
    case (2)
      call op_sum32()
    case (3)
      call op_mask64()
    case (4)
      call op_mask32()
    case (5)
      call op_dim64()
    case (6)
      call op_dim32()
    case (7)
      call op_rank64()
    case (8)
      call op_rank32()
    case (9)
      call op_acc()
    case (10)
      call op_digits()
    case (11)
      call op_dot()
    case (12)
      write(uout) int(sb_acc_size(), int64)
    case (13)
      call op_merge()
    case default
      error stop 'unknown op'
    end select
  end do
  close(uin)
  close(uout)

contains

  subroutine put64(x)
    real(real64), intent(in) :: x
    write(uout) x
  end subroutine put64

  subroutine put32(x)
    real(real32), intent(in) :: x
    write(uout) x, 0_int32
  end subroutine put32

  subroutine read_mask(n, m)
    integer(int64), intent(in) :: n
    logical, allocatable, intent(out) :: m(:)
    integer(int32), allocatable :: mi(:)
    allocate(mi(n))
    read(uin) mi
    m = mi /= 0_int32
  end subroutine read_mask

  ! n, x(n): exact_sum(x), sum(x), exact_sum(x(1::2))
  subroutine op_sum64()
    integer(int64) :: n
    real(real64), allocatable :: x(:)
    read(uin) n
    allocate(x(n))
    read(uin) x
    call put64(exact_sum(x))
    call put64(sum(x))
    call put64(exact_sum(x(1::2)))
  end subroutine op_sum64

  subroutine op_sum32()
    integer(int64) :: n
    real(real32), allocatable :: x(:)
    read(uin) n
    allocate(x(n))
    read(uin) x
    call put32(exact_sum(x))
    call put32(sum(x))
    call put32(exact_sum(x(1::2)))
  end subroutine op_sum32

  ! n, x(n), mask(n): exact_sum(x, mask=m), exact_sum(x, m), sum(x, mask=m)
  subroutine op_mask64()
    integer(int64) :: n
    real(real64), allocatable :: x(:)
    logical, allocatable :: m(:)
    read(uin) n
    allocate(x(n))
    read(uin) x
    call read_mask(n, m)
    call put64(exact_sum(x, mask=m))
    call put64(exact_sum(x, m))
    call put64(sum(x, mask=m))
  end subroutine op_mask64

  subroutine op_mask32()
    integer(int64) :: n
    real(real32), allocatable :: x(:)
    logical, allocatable :: m(:)
    read(uin) n
    allocate(x(n))
    read(uin) x
    call read_mask(n, m)
    call put32(exact_sum(x, mask=m))
    call put32(exact_sum(x, m))
    call put32(sum(x, mask=m))
  end subroutine op_mask32

  ! rank, shape(rank), dim, usemask, x, [mask]: exact_sum(a, dim [, mask]) in array element order
  subroutine op_dim64()
    integer(int64) :: rank, shp(3), d, usemask, n
    real(real64), allocatable :: x(:), a2(:,:), a3(:,:,:), r1(:), r2(:,:)
    logical, allocatable :: m(:), m2(:,:), m3(:,:,:)
    integer :: i, j
    read(uin) rank
    read(uin) shp(1:rank), d, usemask
    n = product(shp(1:rank))
    allocate(x(n))
    read(uin) x
    if (usemask /= 0) then
      call read_mask(n, m)
    else
      allocate(m(n))
      m = .true.
    end if
    select case (rank)
    case (1)
      if (usemask /= 0) then
        call put64(exact_sum(x, dim=int(d), mask=m))
      else
        call put64(exact_sum(x, dim=int(d)))
      end if
    case (2)
      a2 = reshape(x, shp(1:2))
      m2 = reshape(m, shp(1:2))
      if (usemask /= 0) then
        r1 = exact_sum(a2, int(d), m2)
      else
        r1 = exact_sum(a2, dim=int(d))
      end if
      do i = 1, size(r1)
        call put64(r1(i))
      end do
    case (3)
      a3 = reshape(x, shp(1:3))
      m3 = reshape(m, shp(1:3))
      if (usemask /= 0) then
        r2 = exact_sum(a3, dim=int(d), mask=m3)
      else
        r2 = exact_sum(a3, int(d))
      end if
      do j = 1, size(r2, 2)
        do i = 1, size(r2, 1)
          call put64(r2(i, j))
        end do
      end do
    end select
  end subroutine op_dim64

  subroutine op_dim32()
    integer(int64) :: rank, shp(3), d, usemask, n
    real(real32), allocatable :: x(:), a2(:,:), a3(:,:,:), r1(:), r2(:,:)
    logical, allocatable :: m(:), m2(:,:), m3(:,:,:)
    integer :: i, j
    read(uin) rank
    read(uin) shp(1:rank), d, usemask
    n = product(shp(1:rank))
    allocate(x(n))
    read(uin) x
    if (usemask /= 0) then
      call read_mask(n, m)
    else
      allocate(m(n))
      m = .true.
    end if
    select case (rank)
    case (1)
      if (usemask /= 0) then
        call put32(exact_sum(x, dim=int(d), mask=m))
      else
        call put32(exact_sum(x, dim=int(d)))
      end if
    case (2)
      a2 = reshape(x, shp(1:2))
      m2 = reshape(m, shp(1:2))
      if (usemask /= 0) then
        r1 = exact_sum(a2, int(d), m2)
      else
        r1 = exact_sum(a2, dim=int(d))
      end if
      do i = 1, size(r1)
        call put32(r1(i))
      end do
    case (3)
      a3 = reshape(x, shp(1:3))
      m3 = reshape(m, shp(1:3))
      if (usemask /= 0) then
        r2 = exact_sum(a3, dim=int(d), mask=m3)
      else
        r2 = exact_sum(a3, int(d))
      end if
      do j = 1, size(r2, 2)
        do i = 1, size(r2, 1)
          call put32(r2(i, j))
        end do
      end do
    end select
  end subroutine op_dim32

  ! rank, shape(rank), x, mask: exact_sum(a), exact_sum(a, mask), exact_sum(a(1::2, ...))
  subroutine op_rank64()
    integer(int64) :: rank, shp(7), n
    real(real64), allocatable :: x(:)
    logical, allocatable :: m(:)
    real(real64), allocatable :: a2(:,:), a3(:,:,:), a4(:,:,:,:), a5(:,:,:,:,:), &
        a6(:,:,:,:,:,:), a7(:,:,:,:,:,:,:)
    read(uin) rank
    read(uin) shp(1:rank)
    n = product(shp(1:rank))
    allocate(x(n))
    read(uin) x
    call read_mask(n, m)
    select case (rank)
    case (1)
      call put64(exact_sum(x))
      call put64(exact_sum(x, m))
      call put64(exact_sum(x(1::2)))
    case (2)
      a2 = reshape(x, shp(1:2))
      call put64(exact_sum(a2))
      call put64(exact_sum(a2, reshape(m, shp(1:2))))
      call put64(exact_sum(a2(1::2, :)))
    case (3)
      a3 = reshape(x, shp(1:3))
      call put64(exact_sum(a3))
      call put64(exact_sum(a3, reshape(m, shp(1:3))))
      call put64(exact_sum(a3(1::2, :, :)))
    case (4)
      a4 = reshape(x, shp(1:4))
      call put64(exact_sum(a4))
      call put64(exact_sum(a4, reshape(m, shp(1:4))))
      call put64(exact_sum(a4(1::2, :, :, :)))
    case (5)
      a5 = reshape(x, shp(1:5))
      call put64(exact_sum(a5))
      call put64(exact_sum(a5, reshape(m, shp(1:5))))
      call put64(exact_sum(a5(1::2, :, :, :, :)))
    case (6)
      a6 = reshape(x, shp(1:6))
      call put64(exact_sum(a6))
      call put64(exact_sum(a6, reshape(m, shp(1:6))))
      call put64(exact_sum(a6(1::2, :, :, :, :, :)))
    case (7)
      a7 = reshape(x, shp(1:7))
      call put64(exact_sum(a7))
      call put64(exact_sum(a7, reshape(m, shp(1:7))))
      call put64(exact_sum(a7(1::2, :, :, :, :, :, :)))
    end select
  end subroutine op_rank64

  subroutine op_rank32()
    integer(int64) :: rank, shp(7), n
    real(real32), allocatable :: x(:)
    logical, allocatable :: m(:)
    real(real32), allocatable :: a2(:,:), a3(:,:,:), a4(:,:,:,:), a5(:,:,:,:,:), &
        a6(:,:,:,:,:,:), a7(:,:,:,:,:,:,:)
    read(uin) rank
    read(uin) shp(1:rank)
    n = product(shp(1:rank))
    allocate(x(n))
    read(uin) x
    call read_mask(n, m)
    select case (rank)
    case (1)
      call put32(exact_sum(x))
      call put32(exact_sum(x, m))
      call put32(exact_sum(x(1::2)))
    case (2)
      a2 = reshape(x, shp(1:2))
      call put32(exact_sum(a2))
      call put32(exact_sum(a2, reshape(m, shp(1:2))))
      call put32(exact_sum(a2(1::2, :)))
    case (3)
      a3 = reshape(x, shp(1:3))
      call put32(exact_sum(a3))
      call put32(exact_sum(a3, reshape(m, shp(1:3))))
      call put32(exact_sum(a3(1::2, :, :)))
    case (4)
      a4 = reshape(x, shp(1:4))
      call put32(exact_sum(a4))
      call put32(exact_sum(a4, reshape(m, shp(1:4))))
      call put32(exact_sum(a4(1::2, :, :, :)))
    case (5)
      a5 = reshape(x, shp(1:5))
      call put32(exact_sum(a5))
      call put32(exact_sum(a5, reshape(m, shp(1:5))))
      call put32(exact_sum(a5(1::2, :, :, :, :)))
    case (6)
      a6 = reshape(x, shp(1:6))
      call put32(exact_sum(a6))
      call put32(exact_sum(a6, reshape(m, shp(1:6))))
      call put32(exact_sum(a6(1::2, :, :, :, :, :)))
    case (7)
      a7 = reshape(x, shp(1:7))
      call put32(exact_sum(a7))
      call put32(exact_sum(a7, reshape(m, shp(1:7))))
      call put32(exact_sum(a7(1::2, :, :, :, :, :, :)))
    end select
  end subroutine op_rank32

  ! kind (64 or 32), mode (0 array adds, 1 scalar adds), nchunks, sizes, x:
  !   result and result32 of all chunk accumulators merged, of one accumulator fed
  !   all of x at once; then per chunk its raw digits and its normalised digits
  subroutine op_acc()
    integer(int64) :: kind, mode, nchunks, total, pos, c, i
    integer(int64), allocatable :: sizes(:)
    real(real64), allocatable :: x64(:)
    real(real32), allocatable :: x32(:)
    type(sb_sum_acc), allocatable :: accs(:)
    type(sb_sum_acc) :: merged, whole, tmp
    read(uin) kind, mode, nchunks
    allocate(sizes(nchunks), accs(nchunks))
    read(uin) sizes
    total = sum(sizes)
    if (kind == 64) then
      allocate(x64(total))
      read(uin) x64
    else
      allocate(x32(total))
      read(uin) x32
    end if
    pos = 0
    do c = 1, nchunks
      call sb_acc_init(accs(c))
      if (mode == 0) then
        if (kind == 64) then
          call sb_acc_add(accs(c), x64(pos + 1:pos + sizes(c)))
        else
          call sb_acc_add(accs(c), x32(pos + 1:pos + sizes(c)))
        end if
      else
        do i = pos + 1, pos + sizes(c)
          if (kind == 64) then
            call sb_acc_add(accs(c), x64(i))
          else
            call sb_acc_add(accs(c), x32(i))
          end if
        end do
      end if
      pos = pos + sizes(c)
    end do
    call sb_acc_init(merged)
    do c = 1, nchunks
      call sb_acc_merge(merged, accs(c))
    end do
    call put64(sb_acc_result(merged))
    call put32(sb_acc_result32(merged))
    call sb_acc_init(whole)
    if (kind == 64) then
      call sb_acc_add(whole, x64)
    else
      call sb_acc_add(whole, x32)
    end if
    call put64(sb_acc_result(whole))
    call put32(sb_acc_result32(whole))
    do c = 1, nchunks
      write(uout) accs(c)%digits
      tmp = accs(c)
      call sb_acc_normalise(tmp)
      write(uout) tmp%digits
    end do
  end subroutine op_acc

  ! digits(sb_acc_size()): sb_acc_result and sb_acc_result32 of them
  subroutine op_digits()
    type(sb_sum_acc) :: acc
    read(uin) acc%digits
    call put64(sb_acc_result(acc))
    call put32(sb_acc_result32(acc))
  end subroutine op_digits

  ! digits A, digits B, ns, xs(ns), na, xa(na): acc = A, merge B, add xs one by one, add xa as
  ! an array: sb_acc_result, sb_acc_result32, acc%digits
  subroutine op_merge()
    type(sb_sum_acc) :: acc, other
    integer(int64) :: ns, na, i
    real(real64), allocatable :: xs(:), xa(:)
    read(uin) acc%digits, other%digits
    read(uin) ns
    allocate(xs(ns))
    read(uin) xs
    read(uin) na
    allocate(xa(na))
    read(uin) xa
    call sb_acc_merge(acc, other)
    do i = 1, ns
      call sb_acc_add(acc, xs(i))
    end do
    call sb_acc_add(acc, xa)
    call put64(sb_acc_result(acc))
    call put32(sb_acc_result32(acc))
    write(uout) acc%digits
  end subroutine op_merge

  ! ka, kb (64 or 32), n, a(n), b(n): exact_dot(a, b)
  subroutine op_dot()
    integer(int64) :: ka, kb, n
    real(real64), allocatable :: a64(:), b64(:)
    real(real32), allocatable :: a32(:), b32(:)
    read(uin) ka, kb, n
    if (ka == 64) then
      allocate(a64(n))
      read(uin) a64
    else
      allocate(a32(n))
      read(uin) a32
    end if
    if (kb == 64) then
      allocate(b64(n))
      read(uin) b64
    else
      allocate(b32(n))
      read(uin) b32
    end if
    if (ka == 64 .and. kb == 64) then
      call put64(exact_dot(a64, b64))
    else if (ka == 32 .and. kb == 32) then
      call put32(exact_dot(vector_a=a32, vector_b=b32))
    else if (ka == 32) then
      call put64(exact_dot(a32, b64))
    else
      call put64(exact_dot(a64, b32))
    end if
  end subroutine op_dot

end program sums_driver
"""


class Batch:
    """Operations for the driver (DRIVER_SOURCE) and how to read their results back."""

    def __init__(self):
        self.parts: list[np.ndarray] = []
        # (key, number of 8-byte output words, indices of words that come from the intrinsic)
        self.readers: list[tuple[str, int, tuple[int, ...]]] = []

    def _op(self, code: int, *arrays) -> None:
        self.parts.append(np.array([code], np.int64))
        self.parts.extend(np.ascontiguousarray(a) for a in arrays)

    @staticmethod
    def _i64(*values) -> np.ndarray:
        return np.array(values, np.int64)

    def sum(self, key: str, x: np.ndarray) -> None:
        """exact_sum(x), intrinsic sum(x), exact_sum(x(1::2))."""
        self._op(1 if x.dtype == np.float64 else 2, self._i64(x.size), x)
        self.readers.append((key, 3, (1,)))

    def mask(self, key: str, x: np.ndarray, m: np.ndarray) -> None:
        """exact_sum(x, mask=m), exact_sum(x, m), intrinsic sum(x, mask=m)."""
        self._op(3 if x.dtype == np.float64 else 4, self._i64(x.size), x, m.astype(np.int32))
        self.readers.append((key, 3, (2,)))

    def dim(self, key: str, x: np.ndarray, shape, dim: int, m: np.ndarray | None) -> None:
        """exact_sum(reshape(x, shape), dim [, mask]) in array element order."""
        code = 5 if x.dtype == np.float64 else 6
        arrays = [x] + ([m.astype(np.int32)] if m is not None else [])
        self._op(code, self._i64(len(shape), *shape, dim, int(m is not None)), *arrays)
        if len(shape) == 1:
            count = 1
        elif 1 <= dim <= len(shape):
            count = int(np.prod(shape)) // shape[dim - 1]
        else:  # rank 2 with an invalid dim: size(array, 1) NaNs (docs/runtime.md)
            count = shape[0]
        self.readers.append((key, count, ()))

    def rank(self, key: str, x: np.ndarray, shape, m: np.ndarray) -> None:
        """exact_sum(a), exact_sum(a, mask), exact_sum(a(1::2, :, ...)) for a = reshape(x, shape)."""
        self._op(7 if x.dtype == np.float64 else 8, self._i64(len(shape), *shape), x, m.astype(np.int32))
        self.readers.append((key, 3, ()))

    def acc(self, key: str, x: np.ndarray, sizes, scalar_adds: bool) -> None:
        """Chunks into accumulators (array or scalar adds), merged; one-shot; digits per chunk."""
        kind = 64 if x.dtype == np.float64 else 32
        self._op(9, self._i64(kind, int(scalar_adds), len(sizes), *sizes), x)
        self.readers.append((key, 4 + 2 * ACC_LEN * len(sizes), ()))

    def digits(self, key: str, digits) -> None:
        """sb_acc_result and sb_acc_result32 of a digit array."""
        self._op(10, np.array([int(d) for d in digits], np.int64))
        self.readers.append((key, 2, ()))

    def merge(self, key: str, a, b, scalars: np.ndarray, array: np.ndarray) -> None:
        """acc = a; merge b; add scalars one by one; add array; results and digits."""
        self._op(13, np.array([int(d) for d in a], np.int64), np.array([int(d) for d in b], np.int64),
                 self._i64(scalars.size), scalars, self._i64(array.size), array)
        self.readers.append((key, 2 + ACC_LEN, ()))

    def dot(self, key: str, a: np.ndarray, b: np.ndarray) -> None:
        ka = 64 if a.dtype == np.float64 else 32
        kb = 64 if b.dtype == np.float64 else 32
        self._op(11, self._i64(ka, kb, a.size), a, b)
        self.readers.append((key, 1, ()))

    def size(self, key: str) -> None:
        self._op(12)
        self.readers.append((key, 1, ()))

    def arrays(self) -> list[np.ndarray]:
        return self.parts + [np.array([0], np.int64)]

    def parse(self, raw: np.ndarray) -> dict[str, np.ndarray]:
        keys = [key for key, _, _ in self.readers]
        assert len(set(keys)) == len(keys), "duplicate keys"
        out, pos = {}, 0
        for key, count, _ in self.readers:
            out[key] = raw[pos:pos + count]
            pos += count
        assert pos == raw.size, (pos, raw.size)
        return out


class Driver:
    """The driver and the module built at one level (two compilation units)."""

    def __init__(self, workdir: Path, flags: tuple[str, ...]):
        self.workdir = workdir
        self.exe = build_program(
            [("samebits_runtime.f90", fortran_source().read_text()), ("driver.f90", DRIVER_SOURCE)],
            (*STRICT, *flags), workdir, compiler=GFORTRAN,
        )

    def run(self, batch: Batch) -> dict[str, np.ndarray]:
        write_stream(self.workdir / "in.bin", *batch.arrays())
        run_program(self.exe, cwd=self.workdir)
        return batch.parse(np.fromfile(self.workdir / "out.bin", dtype=np.uint64))


@pytest.fixture(scope="module")
def workspace():
    tmp = Path(tempfile.mkdtemp(prefix="samebits-sums-"))
    yield tmp
    shutil.rmtree(tmp, ignore_errors=True)


@pytest.fixture(scope="module")
def drivers(workspace):
    built: dict[str, object] = {}

    def get(level: str) -> Driver:
        if GFORTRAN is None:
            pytest.skip(NO_GFORTRAN)
        if level not in built:
            flags = LEVELS[level]
            try:
                if level in PROBED:
                    probe = workspace / f"probe-{level}"
                    run_program(build_program([("p.f90", "program p\nend program p\n")], flags, probe,
                                              compiler=GFORTRAN))
                built[level] = Driver(workspace / level, flags)
            except (CompileError, OSError) as exc:
                if level not in PROBED:
                    raise
                built[level] = str(exc)
        if isinstance(built[level], str):
            pytest.skip(f"flags {' '.join(LEVELS[level])} do not work here: {built[level][:200]}")
        return built[level]

    return get


# --------------------------------------------------------------------------
# Data (all generated, seeded)
# --------------------------------------------------------------------------


def wide64(rng, n: int, lo: float = -300.0, hi: float = 300.0) -> np.ndarray:
    """Mixed signs, magnitudes 10**lo .. 10**hi, with subnormals sprinkled in."""
    x = rng.choice([-1.0, 1.0], n) * (1.0 + rng.random(n)) * 10.0 ** rng.uniform(lo, hi, n)
    sub = rng.random(n) < 0.05
    x[sub] = rng.integers(-2**52, 2**52, int(sub.sum())) * TINY64
    return x


def cancelling64(rng, n: int) -> np.ndarray:
    """Heavy cancellation: values and their negatives, plus small leftovers, shuffled."""
    half = wide64(rng, n // 2, -20, 300)
    rest = wide64(rng, n - 2 * (n // 2) + 5, -320, -250)
    x = np.concatenate([half, -half, rest])
    rng.shuffle(x)
    return x


def wide32(rng, n: int) -> np.ndarray:
    x = rng.choice([-1.0, 1.0], n) * (1.0 + rng.random(n)) * 10.0 ** rng.uniform(-37, 37, n)
    x = x.astype(np.float32)
    sub = rng.random(n) < 0.05
    x[sub] = (rng.integers(-2**23, 2**23, int(sub.sum())) * 2.0**-149).astype(np.float32)
    return x


def cancelling32(rng, n: int) -> np.ndarray:
    half = wide32(rng, n // 2)
    x = np.concatenate([half, -half, (rng.integers(-2**20, 2**20, 7) * 2.0**-140).astype(np.float32)])
    rng.shuffle(x)
    return x


def double_rounding_traps(rng, count: int) -> list[np.ndarray]:
    """binary32 triples b + h + t: h is half an ulp of b and t a tiny nudge, so that rounding the
    exact sum to binary64 first lands on a binary32 tie and goes the wrong way."""
    traps = []
    while len(traps) < count:
        e = int(rng.integers(-60, 60))
        sig = int(rng.integers(2**23, 2**24))
        t_sign = 1 if sig % 2 == 0 else -1  # even: single rounding goes up, double stays; odd: reverse
        b = sig * 2.0 ** (e - 23)
        h = 2.0 ** (e - 24)
        t = t_sign * 2.0 ** (e - 60)
        arr = np.array([b, h, t], np.float32)
        assert [float(v) for v in arr] == [b, h, t]  # all three exactly binary32
        rng.shuffle(arr)
        traps.append(arr)
    return traps


SPECIAL64 = [  # name, values, expected (IEEE rules; docs/runtime.md), order-free for gfortran's sum
    ("empty", [], 0.0, True),
    ("minus zero", [-0.0], 0.0, True),
    ("minus zeros", [-0.0] * 5, 0.0, True),
    ("cancel to zero", [1.5, -1.5], 0.0, True),
    ("cancel subnormals", [TINY64, -TINY64, 3 * TINY64, -3 * TINY64], 0.0, True),
    ("nan", [1.0, NAN, 2.0], NAN, True),
    ("plus inf", [1.0, INF, -1e308], INF, True),
    ("minus inf", [-INF, 1e308, 1e308], -INF, True),
    ("both infinities", [INF, 1.0, -INF], NAN, True),
    ("inf and nan", [INF, NAN], NAN, True),
    ("overflow up", [MAX64, MAX64], INF, False),
    ("overflow down", [-MAX64, -MAX64, 1.0], -INF, False),
    ("back in range", [MAX64, MAX64, -MAX64], MAX64, False),  # intrinsic: inf
    ("tie at overflow", [MAX64, 2.0**970], INF, False),  # exact 2**1024 - 2**970: even is 2**1024
    ("below the tie", [MAX64, 2.0**970, -TINY64], MAX64, False),
    ("above max, below tie", [MAX64, 2.0**969], MAX64, False),
    ("tie to even", [1.0, 2.0**-53], 1.0, False),
    ("tie broken by a subnormal", [1.0, 2.0**-53, TINY64], 1.0 + 2.0**-52, False),  # intrinsic: 1.0
    ("odd tie", [1.0 + 2.0**-52, 2.0**-53], 1.0 + 2.0**-51, False),
    ("subnormal result", [2.0**-1020, -(2.0**-1020 - 2.0**-1072)], 4 * TINY64, False),
]

SPECIAL32 = [
    ("empty", [], 0.0, True),
    ("minus zeros", [-0.0, -0.0], 0.0, True),
    ("nan", [1.0, NAN], NAN, True),
    ("plus inf", [INF, 3.0e38], INF, True),
    ("minus inf", [-INF, 3.0e38], -INF, True),
    ("both infinities", [INF, -INF], NAN, True),
    ("overflow up", [MAX32, MAX32], INF, False),
    ("back in range", [MAX32, MAX32, -MAX32], MAX32, False),
    ("tie at overflow", [MAX32, 2.0**103], INF, False),
    ("below the tie", [MAX32, 2.0**103, -(2.0**-149)], MAX32, False),
    ("tie broken far below", [1.0, 2.0**-24, 2.0**-149], 1.0 + 2.0**-23, False),
]


def long_with_specials(rng):
    """Long arrays (the eight-stream path) with infinities and NaNs at awkward places."""
    cases = []
    base = wide64(rng, 10003)
    for name, where, values in [
        ("long inf in a stream", [7777], [INF]),
        ("long nan in the tail", [10002], [NAN]),
        ("long opposite infinities", [1300, 8700], [INF, -INF]),
        ("long minus inf first", [0], [-INF]),
    ]:
        x = base.copy()
        x[where] = values
        cases.append((name, x))
    cases.append(("many infinities", np.full(300_000, INF)))  # 37,500 per lane: trash must not wrap
    return cases


# --------------------------------------------------------------------------
# The batch and its expected results
# --------------------------------------------------------------------------


def build_cases():
    rng = np.random.default_rng(20240)
    b = Batch()
    exp: dict = {"sum64": {}, "sum32": {}, "perm": {}, "mask": {}, "dim": {}, "rank": {},
                 "acc": {}, "dot": {}, "special": {}, "traps": {}}

    # whole-array sums, binary64 (reference: math.fsum)
    sizes = [1, 2, 3, 7, 100, 2039, 2040, 2041, 3000, 4095, 4096, 4103, 2 * 16320 + 5, 50_000]
    for n in sizes:
        x = wide64(rng, n)
        b.sum(f"wide {n}", x)
        exp["sum64"][f"wide {n}"] = x
    for n in (10, 1000, 20_000):
        x = cancelling64(rng, n)
        b.sum(f"cancelling {n}", x)
        exp["sum64"][f"cancelling {n}"] = x
    # Worst case for the lanes: every element puts the largest possible chunk (just below 2**52)
    # into the same digit (significand all ones, position 31 mod 32), so a lane digit overflows
    # unless lanes are normalised often enough (docs/runtime.md: every 2040 additions).
    worst = (2**53 - 1) * 2.0**-51
    for name, x in [("worst chunks", np.full(200_000, worst)),
                    ("worst chunks, both signs", np.concatenate([np.full(100_000, -worst), np.full(70_000, worst)]))]:
        b.sum(name, x)
        exp["sum64"][name] = x
    # Short arrays (one lane) whose positive lane carries past the highest digit any element
    # touches, while the negative numbers win one digit lower: the digit range the module
    # tracks for short arrays must include that carry.
    for i in range(3):
        pos = np.full(3000 + 300 * i, worst * 2.0 ** (7 * i))
        neg = -(1 + rng.random(300)) * 2.0 ** rng.integers(-40, 40, 300) * 2.0**20
        x = np.concatenate([pos, neg])
        rng.shuffle(x)
        b.sum(f"carry above the top {i}", x)
        exp["sum64"][f"carry above the top {i}"] = x
    x = rng.integers(-2**52, 2**52, 5000) * TINY64
    b.sum("subnormals", x)
    exp["sum64"]["subnormals"] = x
    x = wide64(rng, 300_000)
    b.sum("wide 300000", x)
    exp["sum64"]["wide 300000"] = x

    # whole-array sums, binary32 (reference: exact Fraction sum, rounded once to binary32)
    for n in (1, 5, 333, 4096, 20_000):
        for maker in (wide32, cancelling32):
            x = maker(rng, n)
            key = f"{maker.__name__} {n}"
            b.sum(key, x)
            exp["sum32"][key] = x
    for i, x in enumerate(double_rounding_traps(rng, 40)):
        b.sum(f"trap {i}", x)
        exp["traps"][f"trap {i}"] = x

    # permutations (the exact sum must not move; gfortran's sum does)
    datasets = {"cancelling": cancelling64(rng, 20_000), "wide": wide64(rng, 50_000),
                "tie": np.array([1.0, 2.0**-53, TINY64] + [0.0] * 5)}
    for name, x in datasets.items():
        exp["perm"][name] = x
        for p in range(5):
            b.sum(f"perm {name} {p}", rng.permutation(x))

    # masks
    for n in (17, 5000, 40_000):
        x = wide64(rng, n)
        m = rng.random(n) < 0.5
        b.mask(f"mask64 {n}", x, m)
        exp["mask"][f"mask64 {n}"] = (x, m)
        x32 = wide32(rng, n)
        b.mask(f"mask32 {n}", x32, m)
        exp["mask"][f"mask32 {n}"] = (x32, m)
    x = wide64(rng, 9000)
    x[[5, 4500, 8999]] = [NAN, INF, -INF]
    m = np.ones(9000, bool)
    m[[5, 4500, 8999]] = False
    b.mask("mask hides specials", x, m)
    exp["mask"]["mask hides specials"] = (x, m)
    b.mask("mask all false", x, np.zeros(9000, bool))
    exp["mask"]["mask all false"] = (x, np.zeros(9000, bool))

    # dim sums
    for dtype in (np.float64, np.float32):
        for shape, dims in [((50,), (1,)), ((37, 23), (1, 2)), ((5000, 3), (1, 2)),
                            ((7, 5, 11), (1, 2, 3)), ((3, 4100, 2), (2,))]:
            n = int(np.prod(shape))
            x = wide64(rng, n) if dtype == np.float64 else wide32(rng, n)
            for d in dims:
                for use_mask in (False, True):
                    m = rng.random(n) < 0.6 if use_mask else None
                    key = f"dim {np.dtype(dtype).name} {shape} {d} {use_mask}"
                    b.dim(key, x, shape, d, m)
                    exp["dim"][key] = (x, shape, d, m)
        x = wide64(rng, 12) if dtype == np.float64 else wide32(rng, 12)
        key = f"dim {np.dtype(dtype).name} invalid"
        b.dim(key, x, (4, 3), 3, None)
        exp["dim"][key] = (x, (4, 3), 3, None)

    # every rank
    shapes = [(900,), (30, 31), (9, 10, 11), (5, 6, 7, 4), (3, 4, 5, 2, 6), (2, 3, 4, 3, 2, 5),
              (2, 3, 2, 3, 2, 3, 4)]
    for shape in shapes:
        n = int(np.prod(shape))
        for dtype in (np.float64, np.float32):
            x = wide64(rng, n) if dtype == np.float64 else cancelling32(rng, n)[:n]
            m = rng.random(n) < 0.5
            key = f"rank {np.dtype(dtype).name} {len(shape)}"
            b.rank(key, x, shape, m)
            exp["rank"][key] = (x, shape, m)

    # accumulators: chunks as processes
    acc_cases = [
        ("arrays 64", cancelling64(rng, 40_000), [0, 1, 5000, 13, 7000, 2041, 4096, 21_854], False),
        ("scalars 64", wide64(rng, 2503), [3, 500, 0, 2000], True),
        ("arrays 32", wide32(rng, 30_000), [10_000, 1, 19_999], False),
        ("scalars 32", cancelling32(rng, 1500), [700, 807], True),
    ]
    x = wide64(rng, 6000)
    x[100], x[5500] = INF, -INF
    acc_cases.append(("opposite infinities in two processes", x, [3000, 3000], False))
    for i, trap in enumerate(double_rounding_traps(rng, 6)):  # sb_acc_result32 must round once
        acc_cases.append((f"acc trap {i}", trap, [1, 2], i % 2 == 0))
    for key, x, chunk_sizes, scalars in acc_cases:
        assert sum(chunk_sizes) == x.size
        b.acc(key, x, chunk_sizes, scalars)
        exp["acc"][key] = (x, chunk_sizes, scalars)

    # exact dot products
    def dot_factors(kind, n, lo, hi):
        if kind == 64:
            return rng.choice([-1.0, 1.0], n) * (1 + rng.random(n)) * 2.0 ** rng.integers(lo, hi, n)
        x = (rng.choice([-1.0, 1.0], n) * (1 + rng.random(n)) * 2.0 ** rng.integers(-60, 50, n)).astype(np.float32)
        sub = rng.random(n) < 0.05
        x[sub] = rng.integers(-2**23, 2**23, int(sub.sum())) * 2.0**-149  # some subnormals
        return x

    for n in (0, 1, 10, 1000, 3000):
        for ka, kb in ((64, 64), (32, 32), (32, 64), (64, 32)):
            # binary64 factors from 2**-1074 up: many products lie far below 2**-1074
            a, bb = dot_factors(ka, n, -1074, 500), dot_factors(kb, n, -600, 500)
            if n >= 10:  # cancelling pairs: (a, b) and (a, -b)
                a = np.concatenate([a, a[: n // 2]])
                bb = np.concatenate([bb, -bb[: n // 2]])
            key = f"dot {ka}x{kb} {n}"
            b.dot(key, a, bb)
            exp["dot"][key] = (a, bb)
    a, bb = dot_factors(64, 500, 400, 1000), dot_factors(64, 500, 400, 1000)
    b.dot("dot 64x64 overflowing", a, bb)
    exp["dot"]["dot 64x64 overflowing"] = (a, bb)
    dot_specials = [
        ("inf times zero", [INF, 1.0], [0.0, 2.0], NAN),
        ("inf times two", [INF, 1.0], [2.0, 2.0], INF),
        ("minus inf", [-INF, 1.0], [3.0, 2.0], -INF),
        ("opposite infinite products", [INF, 1.0], [1.0, -INF], NAN),
        ("nan times zero", [NAN], [0.0], NAN),
        ("overflowing products cancel", [1e300, 1e300], [1e300, -1e300], 0.0),  # intrinsic: NaN
        ("overflowing product", [1e300, 1e300], [1e300, 1e300], INF),
        ("tiny negative product", [TINY64], [-TINY64], -0.0),  # exact -2**-2148 rounds to -0
        # each product 2**-1076 rounds to zero on its own; eight of them make 2**-1073
        ("tiny products add up", [TINY64] * 8, [0.25] * 8, 2 * TINY64),
    ]
    for name, a, bb, expected in dot_specials:
        b.dot(f"dot special {name}", np.array(a), np.array(bb))
        exp["dot"][f"dot special {name}"] = expected

    # special values
    for name, values, expected, order_free in SPECIAL64:
        b.sum(f"special64 {name}", np.array(values, np.float64))
        exp["special"][f"special64 {name}"] = (expected, order_free, 64)
    for name, values, expected, order_free in SPECIAL32:
        b.sum(f"special32 {name}", np.array(values, np.float32))
        exp["special"][f"special32 {name}"] = (expected, order_free, 32)
    for name, x in long_with_specials(rng):
        b.sum(f"special64 {name}", x)
        exp["special"][f"special64 {name}"] = (ieee_sum(x, round64), False, 64)

    b.size("size")
    return b, exp


@pytest.fixture(scope="module")
def cases():
    return build_cases()


@pytest.fixture(scope="module")
def results(drivers, cases):
    batch, _ = cases
    cache: dict[str, dict] = {}

    def get(level: str) -> dict[str, np.ndarray]:
        if level not in cache:
            cache[level] = drivers(level).run(batch)
        return cache[level]

    return get


def fsum_or_ieee(x) -> float:
    """math.fsum where it applies (finite data, no overflow); the exact rules otherwise."""
    try:
        return math.fsum(np.asarray(x, np.float64).tolist())
    except (OverflowError, ValueError):
        return ieee_sum(x, round64)


ALL_LEVELS = list(LEVELS)


# --------------------------------------------------------------------------
# The checks
# --------------------------------------------------------------------------


@pytest.mark.parametrize("level", ALL_LEVELS)
def test_sums_equal_fsum(results, cases, level):
    out = results(level)
    _, exp = cases
    for key, x in exp["sum64"].items():
        words = out[key]
        ref = math.fsum(x.tolist())  # reference: math.fsum, correctly rounded
        assert same64(words[0], ref), (key, show64(words[0]), ref)
        ref_strided = math.fsum(x[::2].tolist())  # x(1::2): a non-contiguous actual argument
        assert same64(words[2], ref_strided), (key, "x(1::2)")
    # The data are hard: gfortran's own sum misses the correctly rounded value on them.
    for key in ("cancelling 1000", "cancelling 20000"):
        assert not same64(out[key][1], math.fsum(exp["sum64"][key].tolist())), key


@pytest.mark.parametrize("level", ALL_LEVELS)
def test_real32_sums_are_rounded_once(results, cases, level):
    out = results(level)
    _, exp = cases
    for key, x in exp["sum32"].items():
        ref = round32(exact_sum(x.tolist()))  # reference: exact Fraction sum, rounded once
        assert same32(out[key][0], ref), (key, ref)
        assert same32(out[key][2], round32(exact_sum(x[::2].tolist()))), (key, "x(1::2)")
    for key, x in exp["traps"].items():
        single = round32(exact_sum(x.tolist()))
        double = float(np.float32(math.fsum(x.tolist())))  # via binary64 first (fsum), then to binary32
        assert single != double  # the case really separates the two roundings
        assert same32(out[key][0], single), (key, single, double)


@pytest.mark.parametrize("level", ALL_LEVELS)
def test_permutations_do_not_change_the_bits(results, cases, level):
    out = results(level)
    _, exp = cases
    for name, x in exp["perm"].items():
        words = {int(out[f"perm {name} {p}"][0]) for p in range(5)}
        assert len(words) == 1, name
        assert same64(words.pop(), math.fsum(x.tolist()))  # reference: math.fsum
    # gfortran's intrinsic sum of the same permutations (the reference for "order matters") moves
    intrinsic = {int(out[f"perm cancelling {p}"][1]) for p in range(5)}
    assert len(intrinsic) > 1


@pytest.mark.parametrize("level", ALL_LEVELS)
def test_masked_sums(results, cases, level):
    out = results(level)
    _, exp = cases
    for key, (x, m) in exp["mask"].items():
        if x.dtype == np.float64:
            ref = fsum_or_ieee(x[m])  # reference: math.fsum of the selected elements
            assert same64(out[key][0], ref) and same64(out[key][1], ref), (key, show64(out[key][0]), ref)
        else:
            ref = round32(exact_sum(x[m].tolist()))  # reference: Fraction, rounded once
            assert same32(out[key][0], ref) and same32(out[key][1], ref), key
    assert same64(out["mask all false"][0], 0.0)


def _dim_reference(x, shape, d, m, rounding):
    arr = x.reshape(shape, order="F")
    sel = np.ones(arr.shape, bool) if m is None else m.reshape(shape, order="F")
    if len(shape) == 1:
        return [rounding(exact_sum(arr[sel].tolist()))]
    moved = np.moveaxis(arr, d - 1, -1)
    msel = np.moveaxis(sel, d - 1, -1)
    rest = moved.shape[:-1]
    res = np.empty(rest, dtype=object)
    for idx in np.ndindex(*rest):
        res[idx] = rounding(exact_sum(moved[idx][msel[idx]].tolist()))
    return list(res.flatten(order="F"))


@pytest.mark.parametrize("level", ALL_LEVELS)
def test_dim_sums_equal_column_sums(results, cases, level):
    out = results(level)
    _, exp = cases
    for key, (x, shape, d, m) in exp["dim"].items():
        words = out[key]
        wide = x.dtype == np.float64
        same = same64 if wide else same32
        if "invalid" in key:  # dim outside 1..rank: NaNs (documented behaviour)
            assert all(same(w, NAN) for w in words)
            continue
        # reference: per column, math.fsum (binary64) or the exact Fraction sum rounded once (binary32)
        if wide:
            ref = _dim_reference(x, shape, d, m, round64)
            arr = x.reshape(shape, order="F")
            if len(shape) == 2 and m is None:
                cols = [math.fsum(arr[:, j].tolist()) if d == 1 else math.fsum(arr[j, :].tolist())
                        for j in range(shape[2 - d])]
                assert [bits64(c) for c in cols] == [bits64(r) for r in ref]  # fsum agrees
        else:
            ref = _dim_reference(x, shape, d, m, round32)
        assert len(words) == len(ref), key
        bad = [i for i, (w, r) in enumerate(zip(words, ref)) if not same(w, r)]
        assert not bad, (key, bad[:5])


@pytest.mark.parametrize("level", ALL_LEVELS)
def test_every_rank(results, cases, level):
    out = results(level)
    _, exp = cases
    for key, (x, shape, m) in exp["rank"].items():
        words = out[key]
        arr = x.reshape(shape, order="F")
        strided = arr[::2].flatten()
        if x.dtype == np.float64:  # reference: math.fsum
            refs = [math.fsum(x.tolist()), math.fsum(x[m].tolist()), math.fsum(strided.tolist())]
            assert all(same64(w, r) for w, r in zip(words, refs)), key
        else:  # reference: exact Fraction sum, rounded once
            refs = [round32(exact_sum(v.tolist())) for v in (x, x[m], strided)]
            assert all(same32(w, r) for w, r in zip(words, refs)), key


def _acc_parts(words):
    merged64, merged32, whole64, whole32 = words[:4]
    rest = np.asarray(words[4:]).view(np.int64).reshape(-1, 2, ACC_LEN)
    return merged64, merged32, whole64, whole32, rest[:, 0, :], rest[:, 1, :]


def is_normalised(digits) -> bool:
    """The documented normalised form: value digits in [0, 2**32) below the most significant
    non-zero one, which has the sign of the value and |d| < 2**32; flags 0 or 1; usage <= 1."""
    value = [int(d) for d in digits[:NDIG]]
    top = max((k for k, d in enumerate(value) if d), default=-1)
    return (all(0 <= d < 2**32 for d in value[:top]) and (top < 0 or 0 < abs(value[top]) < 2**32)
            and all(int(f) in (0, 1) for f in digits[NDIG:NDIG + 3]) and int(digits[USED]) in (0, 1))


def digit_value(digits) -> Fraction:
    """Value of the value digits as documented: digit k weighs 2**(32*k - 1074)."""
    return Fraction(sum(int(d) << (32 * k) for k, d in enumerate(digits[:NDIG])), 1 << 1074)


@pytest.mark.parametrize("level", ALL_LEVELS)
def test_accumulator_chunks_and_merges(results, cases, level):
    out = results(level)
    _, exp = cases
    for key, (x, chunk_sizes, scalars) in exp["acc"].items():
        merged64, merged32, whole64, whole32, raw, normalised = _acc_parts(out[key])
        ref64 = ieee_sum(x, round64)  # reference: exact Fraction sum (math.fsum agrees where it works)
        ref32 = ieee_sum(x, round32)  # the same exact sum rounded once to binary32
        if math.isfinite(ref64):
            assert ref64 == math.fsum(x.astype(np.float64).tolist())
        assert same64(merged64, ref64) and same64(whole64, ref64), key
        assert same32(merged32, ref32) and same32(whole32, ref32), key
        start = 0
        for c, n in enumerate(chunk_sizes):
            part = x[start:start + n]
            start += n
            finite = [float(v) for v in part if math.isfinite(v)]
            # documented layout and invariants, checked with exact integers (no float involved)
            assert digit_value(raw[c]) == exact_sum(finite), (key, c)
            assert digit_value(normalised[c]) == exact_sum(finite), (key, c)
            assert is_normalised(normalised[c]), (key, c)
            if scalars:  # usage count: one per non-zero finite value added one by one
                assert raw[c][USED] == sum(1 for v in finite if v != 0)
            else:  # array adds leave the accumulator normalised
                assert raw[c][USED] == (1 if n else 0)
                assert list(raw[c]) == list(normalised[c])


def _mpi_sum(rows) -> list[int]:
    """What MPI_SUM on MPI_INTEGER8 would give: plain integer sums (checked to fit int64)."""
    total = [sum(int(r[k]) for r in rows) for k in range(ACC_LEN)]
    assert all(-(2**63) <= t < 2**63 for t in total)
    return total


def _digits_of(q: Fraction) -> list[int]:
    """Digits of an exact multiple of 2**-1074 in base 2**32 (floor division: non-negative
    digits and a signed top digit, a valid if not the normalised form), usage count 1."""
    n = q * (1 << 1074)
    assert n.denominator == 1
    n = int(n)
    digits = []
    for _ in range(NDIG - 1):
        digits.append(n % (1 << 32))
        n //= 1 << 32
    digits.append(n)  # signed top digit
    return digits + [0, 0, 0, 1]


@pytest.mark.parametrize("level", ALL_LEVELS)
def test_accumulators_summed_as_integers(results, drivers, cases, level):
    """Processes: each normalises, the digit arrays are summed as integers (as MPI_SUM would),
    and the result of the sum is the one-shot result."""
    out = results(level)
    _, exp = cases
    b = Batch()
    expected = {}
    for key, (x, chunk_sizes, scalars) in exp["acc"].items():
        _, _, _, _, raw, normalised = _acc_parts(out[key])
        b.digits(f"{key} normalised", _mpi_sum(normalised))
        expected[f"{key} normalised"] = x
        b.digits(f"{key} raw", _mpi_sum(raw))  # usage counts are small here: still exact
        expected[f"{key} raw"] = x
        for order in (list(range(len(chunk_sizes))), list(reversed(range(len(chunk_sizes))))):
            pair = _mpi_sum([_mpi_sum([normalised[i] for i in order[:1]]),
                             _mpi_sum([normalised[i] for i in order[1:]])])
            b.digits(f"{key} tree {order[0]}", pair)
            expected[f"{key} tree {order[0]}"] = x
    # digit arrays built here from the documented layout, including un-normalised ones
    rng = np.random.default_rng(5)
    built = {}
    for i in range(300):
        q = Fraction(int(rng.integers(-2**62, 2**62)), 1) * Fraction(2) ** int(rng.integers(-1074, 980))
        if i % 3 == 0:
            q += Fraction(int(rng.integers(-2**62, 2**62)), 1) * Fraction(2) ** int(rng.integers(-1074, -900))
        digits = _digits_of(q)
        if i % 2 == 0:  # spread: move value between neighbouring digits, usage count 2**31
            for k in range(NDIG - 1):
                move = int(rng.integers(-(2**29), 2**29))
                digits[k] += move * (1 << 32)
                digits[k + 1] -= move
            digits[USED] = 2**31  # |d| <= used * (2**32 - 1) still holds (documented limit)
        b.digits(f"built {i}", digits)
        built[f"built {i}"] = q
    for i, trap in enumerate(double_rounding_traps(rng, 20)):
        q = exact_sum(trap.tolist())
        b.digits(f"built trap {i}", _digits_of(q))
        built[f"built trap {i}"] = q
    limit = _digits_of(Fraction(3))
    limit[USED] = 2**31 + 1  # beyond the documented limit: the result is a NaN
    b.digits("over the limit", limit)
    got = drivers(level).run(b)
    for key, x in expected.items():
        assert same64(got[key][0], ieee_sum(x, round64)), key  # reference: exact Fraction sum
        assert same32(got[key][1], ieee_sum(x, round32)), key
    for key, q in built.items():
        assert same64(got[key][0], round64(q)), (key, show64(got[key][0]), round64(q))  # reference: Fraction
        assert same32(got[key][1], round32(q)), key
    assert same64(got["over the limit"][0], NAN)


def _spread(q: Fraction, used: int, rng) -> list[int]:
    """Digits of q, un-normalised (value moved between neighbours) with usage count ``used``."""
    digits = _digits_of(q)
    for k in range(NDIG - 1):
        move = int(rng.integers(-(2**28), 2**28))
        digits[k] += move * (1 << 32)
        digits[k + 1] -= move
    digits[USED] = used  # |d| < 2**61 <= used * (2**32 - 1) for the counts used below
    return digits


@pytest.mark.parametrize("level", ALL_LEVELS)
def test_accumulators_near_the_usage_limit(drivers, level):
    """Merges and additions into accumulators whose usage counts are close to the documented
    limit 2**31 must normalise first and stay exact (reference: exact Fraction sums)."""
    rng = np.random.default_rng(9)
    b = Batch()
    expected = {}
    empty = [0] * ACC_LEN
    for i in range(20):
        qa = Fraction(int(rng.integers(-2**62, 2**62)), 1) * Fraction(2) ** int(rng.integers(-1074, 900))
        qb = Fraction(int(rng.integers(-2**62, 2**62)), 1) * Fraction(2) ** int(rng.integers(-1074, 900))
        xs = wide64(rng, 3, -200, 200)
        xa = wide64(rng, 5000 if i % 2 else 7)
        b.merge(f"near {i}", _spread(qa, 2**31 - 1, rng), _spread(qb, 2**31 - 2, rng), xs, xa)
        expected[f"near {i}"] = qa + qb + exact_sum(xs.tolist()) + exact_sum(xa.tolist())
        b.merge(f"at limit {i}", _spread(qa, 2**31, rng), empty, xs, xa[:0])
        expected[f"at limit {i}"] = qa + exact_sum(xs.tolist())
    # One digit at the documented bound used * (2**32 - 1) (value moved up from the digit above)
    # and an array added on top: its lanes land on that digit, so the accumulator must be
    # normalised before they are folded in.
    q = exact_sum([3.0 / 7.0 * 2.0**-40])
    full = _digits_of(q)
    full[34] += (2**31 - 2) * (1 << 32)  # digit 34 weighs 2**14
    full[35] -= 2**31 - 2
    full[USED] = 2**31 - 1
    assert abs(full[34]) <= full[USED] * (2**32 - 1)
    xa = 2.0**40 * (1.0 + rng.random(20_000) * 31.0)  # lane digit 34 (2**14 .. 2**45) near 2**32
    b.merge("full digit", full, empty, xa[:0], xa)
    expected["full digit"] = q + exact_sum(xa.tolist())
    got = drivers(level).run(b)
    for key, q in expected.items():
        words = got[key]
        assert same64(words[0], round64(q)), (key, show64(words[0]), round64(q))
        assert same32(words[1], round32(q)), key
        digits = np.asarray(words[2:]).view(np.int64)
        assert digit_value(digits) == q, key
        if key.startswith("at limit"):  # normalised before the first scalar, then one per scalar
            assert digits[USED] == 1 + 3, key
        else:
            assert is_normalised(digits), key  # an array add leaves the accumulator normalised


@pytest.mark.parametrize("level", ALL_LEVELS)
def test_special_values(results, cases, level):
    out = results(level)
    _, exp = cases
    for key, (expected, order_free, kind) in exp["special"].items():
        words = out[key]
        same = same64 if kind == 64 else same32
        assert same(words[0], expected), (key, show64(words[0]) if kind == 64 else words[0], expected)
        if order_free and level != "Ofast":
            # reference: gfortran's intrinsic sum, where IEEE arithmetic leaves it no choice
            intrinsic = words[1]
            assert same(intrinsic, expected), (key, "gfortran's sum disagrees with the IEEE rule")


@pytest.mark.parametrize("level", ALL_LEVELS)
def test_exact_dot(results, cases, level):
    out = results(level)
    _, exp = cases
    for key, spec in exp["dot"].items():
        word = out[key][0]
        if key.startswith("dot special"):
            assert same64(word, spec), (key, show64(word), spec)  # bits: the sign of a zero counts
            continue
        a, bb = spec
        r32 = a.dtype == np.float32 and bb.dtype == np.float32
        ref = ieee_dot(a, bb, round32 if r32 else round64)  # reference: exact Fraction products and sum
        assert (same32 if r32 else same64)(word, ref), (key, ref)


def test_levels_give_identical_bits(results, cases):
    """Every result of the exact routines (not the intrinsic's) has the same bits at every level."""
    batch, _ = cases
    base = results("O0")
    compared = 0
    for level in ALL_LEVELS[1:]:
        try:
            other = results(level)
        except pytest.skip.Exception:
            continue
        for key, count, intrinsic in batch.readers:
            keep = [i for i in range(count) if i not in intrinsic]
            assert [int(base[key][i]) for i in keep] == [int(other[key][i]) for i in keep], (level, key)
        compared += 1
    assert compared >= 1
    assert int(base["size"][0]) == ACC_LEN  # sb_acc_size() as documented
