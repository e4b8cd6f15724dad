"""Exact sums for rewritten Python code: the same bits for every order, layout and split.

``numpy.sum`` and plain loops add in an order that the library or the build chooses
(pairwise blocks, SIMD lanes, the memory layout of an ``axis`` reduction), so their
bits change with the build and the shape of the data.  The one sum that does not
depend on order, chunking or the number of processes, and that has no range limit,
is the exact mathematical sum rounded once.  This module computes it.

Public functions
----------------
``exact_sum(values, axis=None, dtype=None)``
    The exact sum of float64 or float32 values, rounded once (to nearest, ties to
    even) to the input precision or to ``dtype``.
``exact_dot(a, b)``
    The exact value of ``sum(a[i] * b[i])`` (every product exact), rounded once.
``SumAccumulator(dtype=numpy.float64)``
    A mergeable exact state: ``add`` data in any pieces, ``merge`` states from other
    processes, ``result()`` gives the same bits as one ``exact_sum`` of everything.

Special values (IEEE 754 rules for a sum): any NaN gives NaN; +inf and -inf
together give NaN; otherwise an infinity gives that infinity; an exact sum whose
rounded value is beyond the largest finite number gives an infinity of its sign
(``math.fsum`` raises ``OverflowError`` there, and also when only an intermediate
sum of its own overflows); an exact sum of zero is +0.0, also for -0.0 inputs and
for empty input.

How the sum is computed (float64)
---------------------------------
Write the bits of a float64 as ``u = s * 2**63 + e * 2**52 + m`` (sign, biased
exponent, fraction).  Its value is ``(-1)**s * S * 2**(max(e, 1) - 1075)`` with the
integer significand ``S = m + 2**52`` (``e >= 1``) or ``S = m`` (``e == 0``).  Values
with the same top twelve bits ``b = u >> 52`` (sign and exponent) share one unit,
so the sum of a bin is the integer ``sum(S)`` times that unit.  Per block of the
input (2**15 elements, so it stays in cache) the code does one shift and two
scatter-adds (``numpy.add.at``) into 4096 bins:

* ``F[b] += x`` in float64.  All values of a bin have the same sign and lie within
  a factor of two, so after ``c`` additions ``F[b]`` differs from the exact bin sum by
  at most ``c**2`` units (the classical bound ``(c - 1) * 2**-53 * sum|x|`` for
  recursive summation in any order; Higham, *Accuracy and Stability of Numerical
  Algorithms*, 2nd ed., section 4.2, from memory).  Additions that underflow are
  exact, so subnormals do not spoil the bound (IEEE 754 property; common practice,
  no source).
* ``U[b] += u`` in uint64, wrapping modulo ``2**64``.  The sign and exponent bits
  are multiples of ``2**52``, so ``U[b] mod 2**52 == sum(S) mod 2**52`` exactly.

At most ``c = 2**25`` values go into a bin before the bins are read (a window), so
the float estimate is within ``2**50`` units: the exact bin sum is the one number
congruent to ``U mod 2**52`` within ``2**51`` of ``F``:
``sum(S) = R + 2**52 * round((|F| / unit - R) / 2**52)`` with ``R = U mod 2**52``.
The nonzero bins (a few hundred at most) are added as Python integers in units
of ``2**-1074``; the total is rounded once with Python's ``int / int`` true division,
which CPython rounds correctly (checked against ``math.fsum`` in the tests).

Bins 2047 and 4095 hold +-inf and NaN; their float sums say which occurred.  The
float estimate of a bin can overflow only for exponents near the top (``2**25``
values of ``2**998`` or more); then the window is redone with every value of
``2**977`` or more scaled by ``2**-1000`` (exact) and that part shifted back as an
integer.  (The bound assumes the default round-to-nearest mode of the FPU.)

float32 uses 512 bins and one scatter: a float64 sum of at most ``2**29`` float32
significands of one bin is exact, so no residue is needed.  Its total (units of
``2**-149``) is rounded to float32 by the integer routine ``_int_to_float32``, once.

``axis`` reductions move the reduced axes last (a view).  Rows of at least 2**11
values use the kernel above, 32 rows at a time with one set of bins per row
(``row * 4096 + bin``); the nonzero bins of all rows are turned into limbs (below)
and rounded together.  Shorter rows go in groups of about 2**16
values: a value with LSB position ``p`` (units ``2**-1074``) goes to the cell
``(row, p // 32)``, split at ``2**(32 * (p // 32) + 42)`` into two floats that sum
exactly in float64 (at most 2047 per cell, each below ``2**42`` of its grid), with
``numpy.add.at``.  The cells become 32-bit limbs of a fixed-point number per row,
which are carried and rounded once with vectorised integer code (a 64-bit window
below the top bit, a sticky bit for everything under it, ties to even, the target's
subnormal quantum as the lowest rounding point).  If a cell's float sum overflows
(values near the top of the range), that group uses integer pieces instead.
``exact_dot`` writes each product as ``p + e`` with Dekker's exact product (Veltkamp
splitting) and sums the ``p`` and ``e`` with the float64 kernel; products too large or
too small for that split to be exact use integer significands (27 + 26 bits, three
partial products below ``2**55``) scattered into limbs.  float32 products are exact
in float64 and go straight to the float64 kernel.

Memory: the input is never copied whole; non-contiguous or byte-swapped arrays are
copied 2**18 elements at a time, and an array whose memory is one contiguous block
in any axis order or direction (transposes, reversed views) is not copied at all.
"""

from __future__ import annotations

import itertools
import math
import operator
import struct
import sys

import numpy as np

__all__ = ["SumAccumulator", "exact_dot", "exact_sum"]

#: Elements per block of the float64 kernel (one shift and two scatters; fits in cache).
_BLOCK = 1 << 15
#: Elements per window: at most this many values enter one bin before it is read.
#: The float estimate of a bin is then within 2**50 units (c**2 with c = 2**25).
_WINDOW64 = 1 << 25
#: float32 bins stay exact in float64 for up to 2**29 values (2**29 * 2**24 = 2**53).
_WINDOW32 = 1 << 29
#: Elements per copied piece of a non-contiguous array or of an iterable.
_CHUNK = 1 << 18
#: Elements per group of short rows scattered into limbs at once (temporaries stay in cache).
_ROW_GROUP = 1 << 16
#: Rows at least this long use per-row bins of the float64 kernel (``_rows_long``).
_LONG_ROW = 1 << 11
#: Exponent fields at or above this can overflow a float64 bin estimate in a window.
_BIG_EXPONENT = 2000
_BIG_SHIFT = 1000

_NAN = 1
_POS_INF = 2
_NEG_INF = 4

_MASK32 = (1 << 32) - 1
_MASK52 = (1 << 52) - 1


class _Format:
    """A binary floating-point format as this module uses it."""

    __slots__ = ("dtype", "bits", "uint", "fraction_bits", "precision", "unit_exp", "exp_max", "code")

    def __init__(self, dtype, bits, uint, fraction_bits, unit_exp, exp_max):
        self.dtype = np.dtype(dtype)
        self.bits = bits
        self.uint = np.dtype(uint)
        self.fraction_bits = fraction_bits
        self.precision = fraction_bits + 1
        #: the smallest subnormal is 2**unit_exp; exact totals are integers in this unit
        self.unit_exp = unit_exp
        self.exp_max = exp_max
        self.code = bits


_F64 = _Format(np.float64, 64, np.uint64, 52, -1074, 2047)
_F32 = _Format(np.float32, 32, np.uint32, 23, -149, 255)


def _format_of_dtype(dtype) -> _Format:
    dtype = np.dtype(dtype)
    if dtype.kind == "f" and dtype.itemsize == 8:
        return _F64
    if dtype.kind == "f" and dtype.itemsize == 4:
        return _F32
    raise TypeError(f"exact sums take float64 or float32 values, not {dtype}")


def _refuse_masked(values) -> None:
    ma = sys.modules.get("numpy.ma")  # a masked array implies numpy.ma is loaded
    if ma is not None and isinstance(values, ma.MaskedArray):
        raise TypeError("masked arrays are not supported: pass values.compressed()")


def _target_format(dtype):
    if dtype is None:
        return None
    try:
        return _format_of_dtype(dtype)
    except TypeError:
        raise TypeError(f"dtype must be float64 or float32, not {dtype!r}") from None


# ---------------------------------------------------------------------------
# Rounding an exact integer total once


def _int_to_float32(total: int, unit_exp: int) -> float:
    """``total * 2**unit_exp`` rounded to binary32 (nearest, ties to even), as a float.

    The returned Python float holds the binary32 value exactly (or is +-inf).
    """
    if total == 0:
        return 0.0
    negative = total < 0
    mag = -total if negative else total
    length = mag.bit_length()
    # Round at 24 significant bits, but never below the binary32 quantum 2**-149.
    shift = max(length - 24, (-149) - unit_exp)
    if shift > 0:
        kept = mag >> shift
        rest = mag - (kept << shift)
        half = 1 << (shift - 1)
        if rest > half or (rest == half and kept & 1):
            kept += 1
    else:
        kept, shift = mag, 0  # fewer than 24 bits above the quantum: exact
    exponent = shift + unit_exp
    if kept == 0:
        value = 0.0
    elif kept.bit_length() + exponent > 128:
        value = math.inf
    else:
        value = math.ldexp(float(kept), exponent)  # kept < 2**25: exact
        if value >= 2.0**128:
            value = math.inf
    return -value if negative else value


def _round_total(total: int, unit_exp: int, target: _Format) -> float:
    """``total * 2**unit_exp`` rounded once to ``target``, as a Python float."""
    if target is _F32:
        return _int_to_float32(total, unit_exp)
    if unit_exp >= 0:
        scaled = total << unit_exp
        try:
            return float(scaled)
        except OverflowError:
            return math.inf if total > 0 else -math.inf
    try:
        return total / (1 << -unit_exp)  # CPython rounds int / int correctly
    except OverflowError:
        return math.inf if total > 0 else -math.inf


def _finish(total: int, flags: int, unit_exp: int, target: _Format):
    """The numpy scalar of ``target`` for an exact total and its special-value flags."""
    kind = target.dtype.type
    if flags & _NAN or (flags & _POS_INF and flags & _NEG_INF):
        return kind(math.nan)
    if flags & _POS_INF:
        return kind(math.inf)
    if flags & _NEG_INF:
        return kind(-math.inf)
    with np.errstate(over="ignore"):
        return kind(_round_total(total, unit_exp, target))


# ---------------------------------------------------------------------------
# The 1-D kernels: contiguous native arrays to (exact integer total, flags)


def _read_bins64(acc_f: np.ndarray, acc_u: np.ndarray):
    """Exact total (units 2**-1074) and flags of one window's bins; None on overflow."""
    flags = 0
    pos, neg = acc_f[2047], acc_f[4095]
    if math.isnan(pos) or math.isnan(neg):
        flags |= _NAN
    if pos == math.inf:
        flags |= _POS_INF
    if neg == -math.inf:
        flags |= _NEG_INF
    acc_f[2047] = acc_f[4095] = 0.0
    if not np.isfinite(acc_f).all():
        return None
    bins = np.flatnonzero(acc_f)
    if bins.size == 0:
        return 0, flags
    field = bins & 2047
    unit_shift = np.maximum(field, 1) - 1  # unit of the bin is 2**(unit_shift - 1074)
    scaled = np.abs(np.ldexp(acc_f[bins], 1074 - unit_shift))  # estimate in units, exact scaling
    residue = acc_u[bins] & np.uint64(_MASK52)
    carries = np.rint((scaled - residue.astype(np.float64)) * 2.0**-52)
    total = 0
    for high, low, shift, negative in zip(
        carries.astype(np.int64).tolist(), residue.tolist(), unit_shift.tolist(), (bins >= 2048).tolist()
    ):
        value = ((high << 52) | low) << shift
        total = total - value if negative else total + value
    return total, flags


class _Bins64:
    """The 4096 float64 bins of one window: float estimates and wrapped bit sums."""

    __slots__ = ("f", "u", "count")

    def __init__(self):
        self.f = np.zeros(4096)
        self.u = np.zeros(4096, np.uint64)
        self.count = 0

    def add(self, a: np.ndarray) -> None:
        """Add a contiguous 1-D float64 array (the window must stay <= ``_WINDOW64``)."""
        n = a.shape[0]
        self.count += n
        u = a.view(np.uint64)
        buf = np.empty(min(n, _BLOCK), np.uint64)
        buf_i = buf.view(np.int64)
        acc_f, acc_u = self.f, self.u
        at = np.add.at
        shift = np.right_shift
        with np.errstate(over="ignore"):  # a top bin may overflow: detected when read
            for start in range(0, n, _BLOCK):
                stop = min(start + _BLOCK, n)
                ub = u[start:stop]
                if stop - start == buf.shape[0]:
                    bu, bi = buf, buf_i
                else:
                    bu, bi = buf[: stop - start], buf_i[: stop - start]
                shift(ub, 52, out=bu)  # bin = sign and exponent bits
                at(acc_f, bi, a[start:stop])
                at(acc_u, bi, ub)

    def read(self):
        """Exact total (units 2**-1074) and flags; None if a bin estimate overflowed."""
        return _read_bins64(self.f.copy(), self.u)


def _window64(a: np.ndarray):
    """Exact total and flags of a contiguous float64 array of at most ``_WINDOW64`` values."""
    bins = _Bins64()
    bins.add(a)
    return bins.read()


def _window64_safe(a: np.ndarray):
    """As ``_window64`` for windows whose top bins overflowed: huge values scaled down."""
    total, flags = 0, 0
    scale = 2.0**-_BIG_SHIFT
    for start in range(0, a.shape[0], _CHUNK):
        block = a[start : start + _CHUNK]
        field = (block.view(np.uint64) >> 52) & np.uint64(2047)
        big = (field >= _BIG_EXPONENT) & (field != 2047)
        small = _window64(np.where(big, 0.0, block))
        scaled = _window64(block[big] * scale)  # exact: the values stay normal
        assert small is not None and scaled is not None
        total += small[0] + (scaled[0] << _BIG_SHIFT)
        flags |= small[1]
    return total, flags


def _contig64(a: np.ndarray):
    total, flags = 0, 0
    for start in range(0, a.shape[0], _WINDOW64):
        window = a[start : start + _WINDOW64]
        part = _window64(window)
        if part is None:
            part = _window64_safe(window)
        total += part[0]
        flags |= part[1]
    return total, flags


def _contig32(a: np.ndarray):
    """Exact total (units 2**-149) and flags of a contiguous float32 array."""
    total, flags = 0, 0
    u = a.view(np.uint32)
    n = a.shape[0]
    buf = np.empty(min(n, _BLOCK), np.int64)
    for wstart in range(0, n, _WINDOW32):
        wstop = min(wstart + _WINDOW32, n)
        acc = np.zeros(512)
        for start in range(wstart, wstop, _BLOCK):
            stop = min(start + _BLOCK, wstop)
            bi = buf[: stop - start]
            np.right_shift(u[start:stop], 23, out=bi)
            acc += np.bincount(bi, weights=a[start:stop], minlength=512)
        pos, neg = acc[255], acc[511]
        if math.isnan(pos) or math.isnan(neg):
            flags |= _NAN
        if pos == math.inf:
            flags |= _POS_INF
        if neg == -math.inf:
            flags |= _NEG_INF
        acc[255] = acc[511] = 0.0
        bins = np.flatnonzero(acc)
        if bins.size == 0:
            continue
        unit_shift = np.maximum(bins & 255, 1) - 1
        sums = np.abs(np.ldexp(acc[bins], 149 - unit_shift))  # exact integers below 2**53
        for value, shift, negative in zip(
            sums.astype(np.int64).tolist(), unit_shift.tolist(), (bins >= 256).tolist()
        ):
            total = total - (value << shift) if negative else total + (value << shift)
    return total, flags


def _contig(a: np.ndarray, fmt: _Format):
    return _contig64(a) if fmt is _F64 else _contig32(a)


# ---------------------------------------------------------------------------
# Arbitrary arrays: layout handling without whole copies


def _memory_order(a: np.ndarray) -> np.ndarray:
    """A view of ``a`` with nonnegative strides and axes by decreasing stride.

    The order of the elements of a view does not matter to an exact sum; this one
    is C-contiguous whenever the memory of ``a`` is one contiguous block.
    """
    if a.ndim == 0:
        return a.reshape(1)
    a = a[tuple(slice(None, None, -1) if st < 0 else slice(None) for st in a.strides)]
    order = sorted(range(a.ndim), key=lambda k: -a.strides[k])
    return a.transpose(order)


def _chunk_index(shape, limit):
    """Index tuples cutting an array of ``shape`` into C-order pieces of <= ``limit`` values."""
    inner, k = 1, len(shape)
    while k > 0 and inner * shape[k - 1] <= limit:
        inner *= shape[k - 1]
        k -= 1
    if k == 0:
        yield ()
        return
    axis = k - 1
    step = max(1, limit // inner)
    for outer in np.ndindex(*shape[:axis]):
        for start in range(0, shape[axis], step):
            yield outer + (slice(start, min(start + step, shape[axis])),)


def _exact_array(a: np.ndarray, fmt: _Format):
    """Exact total (units 2**fmt.unit_exp) and flags of every value of ``a``."""
    if a.size == 0:
        return 0, 0
    b = _memory_order(a)
    if b.flags.c_contiguous and a.dtype.isnative:
        return _contig(b.reshape(-1), fmt)
    total, flags = 0, 0
    for index in _chunk_index(b.shape, _CHUNK):
        part = _contig(np.ascontiguousarray(b[index], dtype=fmt.dtype).reshape(-1), fmt)
        total += part[0]
        flags |= part[1]
    return total, flags


def _exact_iterable(values, fmt: _Format = _F64):
    """Exact total and flags of an iterable of numbers, read ``_CHUNK`` at a time."""
    total, flags = 0, 0
    iterator = iter(values)
    while True:
        piece = None  # at most one chunk alive
        piece = np.fromiter(itertools.islice(iterator, _CHUNK), dtype=np.float64)
        if piece.size == 0:
            break
        if fmt is _F32:
            narrow = piece.astype(np.float32)
            if not np.array_equal(narrow.astype(np.float64), piece, equal_nan=True):
                raise ValueError("a value is not exactly representable in float32")
            part = _contig32(narrow)
        else:
            part = _contig64(piece)
        total += part[0]
        flags |= part[1]
        if piece.size < _CHUNK:
            break
    return total, flags


# ---------------------------------------------------------------------------
# Fixed-point limbs: many short rows, and exact products


def _decompose(x: np.ndarray):
    """Significand (uint64), LSB position (units 2**-1074), sign bit and specials of ``x``.

    ``x`` is a contiguous float64 array; ``specials`` is None when it holds no inf or
    NaN, else ``(nan, inf)`` boolean masks (the significands there are set to 0).
    """
    u = x.view(np.uint64)
    top = (u >> 52).view(np.int64)
    sig = u & np.uint64(_MASK52)
    field = top & 2047
    negative = top >> 11
    np.bitwise_or(sig, np.uint64(1 << 52), out=sig, where=field != 0)
    specials = None
    if field.max() == 2047:
        special = field == 2047
        fraction = sig & np.uint64(_MASK52)
        specials = (special & (fraction != 0), special & (fraction == 0))
        sig[special] = 0
    np.maximum(field, 1, out=field)
    field -= 1
    return sig, field, negative, specials


def _scatter_limbs(sig, position, negative, row, nrows, pieces=3):
    """Per-row sums of ``(-1)**negative * sig * 2**position`` as 32-bit limbs.

    ``sig``: uint64 below 2**56; ``position``: int64 >= 0; ``negative``: int64 0/1;
    ``row``: int64 broadcastable to them.  ``pieces`` = 2 suffices when every
    ``sig`` is below 2**33.  Returns ``(limbs, origin)``: int64 of shape
    ``(n_limbs, nrows)``; limb ``j`` has weight ``2**(32 * (j + origin))``; limbs are
    not carried.  A cell (limb, row, sign) receives at most ``pieces`` values below
    2**32 per entry of its row, so the float64 scatter is exact while every row
    has fewer than 2**19 entries.
    """
    limb = position >> 5
    offset = (position & 31).view(np.uint64)
    low, high = int(limb.min()), int(limb.max())
    origin = low - 2  # two zero limbs below, for the rounding window
    n_limbs = high - low + 7  # two pad, three for the pieces, headroom for carries
    stride = 2 * nrows  # cells: (limb, row, sign)
    index = (limb * stride + (2 * row - origin * stride) + negative).ravel()
    size = n_limbs * stride
    shifted = sig << offset  # wraps: the low 64 bits of sig * 2**offset
    acc = np.bincount(index, weights=(shifted & np.uint64(_MASK32)).ravel(), minlength=size)
    acc += np.bincount(index + stride, weights=(shifted >> np.uint64(32)).ravel(), minlength=size)
    if pieces > 2:
        above = (sig >> np.uint64(1)) >> (np.uint64(63) - offset)  # bits 64.. of sig * 2**offset
        acc += np.bincount(index + 2 * stride, weights=above.ravel(), minlength=size)
    acc = acc.astype(np.int64).reshape(n_limbs, nrows, 2)
    return acc[:, :, 0] - acc[:, :, 1], origin


def _carry(limbs: np.ndarray) -> None:
    """Carry in place: every limb but the top one into [0, 2**32)."""
    for j in range(limbs.shape[0] - 1):
        carry = limbs[j] >> 32
        limbs[j] -= carry << 32
        limbs[j + 1] += carry


def _round_limbs(limbs: np.ndarray, origin: int, unit_exp: int, target: _Format) -> np.ndarray:
    """Round each column of fixed-point ``limbs`` once to ``target`` (float64 array out).

    Column ``r`` is ``sum_j limbs[j, r] * 2**(32 * (j + origin) + unit_exp)``.
    """
    _carry(limbs)
    negative = limbs[-1] < 0
    if negative.any():
        flipped = -limbs[:, negative]
        _carry(flipped)
        limbs[:, negative] = flipped
    n_limbs, nrows = limbs.shape
    precision = target.precision
    nonzero = limbs != 0
    present = nonzero.any(axis=0)
    cols = np.arange(nrows)
    high = n_limbs - 1 - np.argmax(nonzero[::-1], axis=0)
    high = np.where(present, high, 2)
    a0 = limbs[high, cols]
    a1 = limbs[high - 1, cols]
    a2 = limbs[high - 2, cols]
    below = nonzero.sum(axis=0) - nonzero[high, cols] - nonzero[high - 1, cols] - nonzero[high - 2, cols]
    length0 = np.frexp(a0.astype(np.float64))[1].astype(np.int64)  # bit length, 1..32
    length0 = np.where(present, length0, 1)
    lu = length0.astype(np.uint64)
    top = (a0.astype(np.uint64) << np.uint64(32)) | a1.astype(np.uint64)
    a2u = a2.astype(np.uint64)
    window = (top << (np.uint64(32) - lu)) | (a2u >> lu)  # the top 64 bits, MSB at bit 63
    sticky = ((a2u & ((np.uint64(1) << lu) - np.uint64(1))) != 0) | (below > 0)
    kept = (window >> np.uint64(64 - precision)).astype(np.int64)
    round_bit = ((window >> np.uint64(63 - precision)) & np.uint64(1)).astype(np.int64)
    sticky |= (window & np.uint64((1 << (63 - precision)) - 1)) != 0
    shift = 32 * high + length0 - precision  # kept * 2**shift is the value truncated
    # Never round below the target's quantum (subnormal results).
    floor = (target.unit_exp - unit_exp) - 32 * origin
    extra = np.clip(floor - shift, 0, precision + 1)
    more = extra > 0
    if more.any():
        e1 = np.maximum(extra - 1, 0)
        new_round = (kept >> e1) & 1
        lost = (kept & ((np.int64(1) << e1) - 1)) != 0
        sticky = np.where(more, sticky | (round_bit != 0) | lost, sticky)
        round_bit = np.where(more, new_round, round_bit)
        kept = np.where(more, kept >> extra, kept)
        shift = shift + extra
    kept += round_bit & (sticky | (kept & 1))
    with np.errstate(over="ignore"):
        value = np.ldexp(kept.astype(np.float64), shift + 32 * origin + unit_exp)
    value[~present] = 0.0
    return np.where(negative, -value, value)


def _row_flags(value, negative, specials):
    """Apply the inf/NaN rules per row to ``value`` (float64, one per row)."""
    nan, inf = specials
    pos_inf = (inf & (negative == 0)).any(axis=1)
    neg_inf = (inf & (negative != 0)).any(axis=1)
    value[pos_inf] = math.inf
    value[neg_inf] = -math.inf
    value[nan.any(axis=1) | (pos_inf & neg_inf)] = math.nan


def _rows_short_limbs(c: np.ndarray, target: _Format) -> np.ndarray:
    """Row sums of a contiguous float64 ``(rows, L)`` array via integer limb pieces.

    The general route (any values); ``_rows_short`` uses it when its float cells
    would overflow.
    """
    nrows = c.shape[0]
    sig, position, negative, specials = _decompose(c)
    rows = np.arange(nrows, dtype=np.int64)[:, None]
    limbs, origin = _scatter_limbs(sig, position, negative, rows, nrows)
    value = _round_limbs(np.ascontiguousarray(limbs), origin, _F64.unit_exp, target)
    if specials is not None:
        _row_flags(value, negative, specials)
    return value


_ONES = np.uint64((1 << 64) - 1)


def _rows_short(c: np.ndarray, fmt: _Format, target: _Format) -> np.ndarray:
    """Row sums of a contiguous ``(rows, L)`` array with L < 2**11 (``_LONG_ROW``).

    Cells are (row, 32-bit limb of the LSB position ``p``).  Every value of cell ``q``
    is a multiple of ``2**(32q)`` units (units 2**-1074) below ``2**(32q + 84)``;
    split at ``2**(32q + 42)`` into ``hi`` (below 2**42 of its grid) and ``lo`` (below
    2**42 units), at most 2047 of each sum exactly in float64 (2047 * 2**42 < 2**53).
    """
    if fmt is _F32:
        c = c.astype(np.float64)  # exact; rounded to the target below as usual
    nrows = c.shape[0]
    u = c.view(np.uint64)
    top = (u >> 52).view(np.int64)
    field = top & 2047
    specials = None
    if field.max() == 2047:
        special = field == 2047
        fraction = u & np.uint64(_MASK52)
        specials = (special & (fraction != 0), special & (fraction == 0))
        c = np.where(special, 0.0, c)
        u = c.view(np.uint64)
        field[special] = 0
    position = np.maximum(field, 1, out=field)
    position -= 1
    limb = position >> 5
    high = int(limb.max())
    zero = (u << np.uint64(1)) == 0
    if zero.any():
        limb[zero] = high  # zeros add nothing anywhere; keep them from widening the range
    low = int(limb.min())
    n_cells = high - low + 1
    hi = (u & (_ONES << (42 - (position & 31)).view(np.uint64))).view(np.float64)
    lo = c - hi
    index = (limb * nrows + (np.arange(nrows, dtype=np.int64)[:, None] - low * nrows)).ravel()
    cells_hi = np.zeros(n_cells * nrows)
    cells_lo = np.zeros(n_cells * nrows)
    with np.errstate(over="ignore", invalid="ignore"):
        np.add.at(cells_hi, index, hi.ravel())
    if not np.isfinite(cells_hi).all():
        value = _rows_short_limbs(c, target)
    else:
        np.add.at(cells_lo, index, lo.ravel())
        grid = (32 * (low + np.arange(n_cells)) - 1074)[:, None]
        h = np.ldexp(cells_hi.reshape(n_cells, nrows), -grid - 42).astype(np.int64) * 1024
        l_ = np.ldexp(cells_lo.reshape(n_cells, nrows), -grid).astype(np.int64)
        limbs = np.zeros((n_cells + 6, nrows), np.int64)  # 2 pad limbs, 2 spill, 2 headroom
        limbs[2 : 2 + n_cells] += l_ & _MASK32
        limbs[3 : 3 + n_cells] += (l_ >> 32) + (h & _MASK32)
        limbs[4 : 4 + n_cells] += h >> 32
        value = _round_limbs(limbs, low - 2, _F64.unit_exp, target)
    if specials is not None:
        _row_flags(value, top >> 11, specials)
    with np.errstate(over="ignore"):
        return value.astype(target.dtype)


#: Rows per group of long rows binned together (cells: rows * 4096).
_LONG_GROUP = 32


def _rows_long(sub: np.ndarray, n_kept: int, fmt: _Format, target: _Format) -> np.ndarray:
    """Sums over the trailing axes of ``sub`` for a few long rows (at most ``_WINDOW64`` each).

    The float64 kernel with one set of 4096 bins per row (``numpy.add.at`` on
    ``row * 4096 + bin``); the bins of all rows become limbs and are rounded together.
    """
    kept_shape, red_shape = sub.shape[:n_kept], sub.shape[n_kept:]
    nrows = math.prod(kept_shape)
    acc_f = np.zeros(nrows * 4096)
    acc_u = np.zeros(nrows * 4096, np.uint64)
    offsets = (np.arange(nrows, dtype=np.int64) * 4096)[:, None]
    lead = (slice(None),) * n_kept
    with np.errstate(over="ignore"):
        for index in _chunk_index(red_shape, max(1, _BLOCK // nrows)):
            piece = np.ascontiguousarray(sub[lead + index], dtype=np.float64).reshape(nrows, -1)
            u = piece.view(np.uint64)
            cell = ((u >> np.uint64(52)).view(np.int64) + offsets).ravel()
            np.add.at(acc_f, cell, piece.ravel())
            np.add.at(acc_u, cell, u.ravel())
    f = acc_f.reshape(nrows, 4096)
    pos, neg = f[:, 2047].copy(), f[:, 4095].copy()
    f[:, 2047] = f[:, 4095] = 0.0
    overflowed = ~np.isfinite(f).all(axis=1)
    f[overflowed] = 0.0
    cells = np.flatnonzero(acc_f)
    value = np.zeros(nrows)
    if cells.size:
        row, b = cells >> 12, cells & 4095
        unit_shift = np.maximum(b & 2047, 1) - 1
        scaled = np.abs(np.ldexp(acc_f[cells], 1074 - unit_shift))
        residue = acc_u[cells] & np.uint64(_MASK52)
        carries = np.rint((scaled - residue.astype(np.float64)) * 2.0**-52).astype(np.uint64)
        sig = np.concatenate((residue, carries))  # bin sum = carries * 2**52 + residue
        position = np.concatenate((unit_shift, unit_shift + 52))
        negative = np.tile(b >> 11, 2)
        limbs, origin = _scatter_limbs(sig, position, negative, np.tile(row, 2), nrows)
        value = _round_limbs(np.ascontiguousarray(limbs), origin, _F64.unit_exp, target)
    nan = np.isnan(pos) | np.isnan(neg) | ((pos == math.inf) & (neg == -math.inf))
    value[pos == math.inf] = math.inf
    value[neg == -math.inf] = -math.inf
    value[nan] = math.nan
    for k in np.flatnonzero(overflowed & ~nan & ~np.isinf(value)).tolist():
        index = np.unravel_index(k, kept_shape) if kept_shape else ()
        total, flags = _exact_array(sub[tuple(index)], fmt)
        value[k] = _finish(total, flags, fmt.unit_exp, target)
    with np.errstate(over="ignore"):
        return value.astype(target.dtype)


def _rows(v: np.ndarray, n_kept: int, fmt: _Format, target: _Format):
    """Sums over the trailing axes of ``v`` (its first ``n_kept`` axes are kept)."""
    kept_shape = v.shape[:n_kept]
    n_rows = math.prod(kept_shape)
    length = math.prod(v.shape[n_kept:])
    out = np.zeros(n_rows, target.dtype)
    if n_rows and length > _WINDOW64:
        for k, index in enumerate(np.ndindex(*kept_shape)):
            total, flags = _exact_array(v[index], fmt)
            out[k] = _finish(total, flags, fmt.unit_exp, target)
    elif n_rows and length >= _LONG_ROW:
        row = 0
        for index in _chunk_index(kept_shape, _LONG_GROUP):
            dropped = sum(not isinstance(i, slice) for i in index)  # axes indexed away
            part = _rows_long(v[index], n_kept - dropped, fmt, target)
            out[row : row + part.shape[0]] = part
            row += part.shape[0]
    elif n_rows and length:
        group = max(1, _ROW_GROUP // length)
        row = 0
        for index in _chunk_index(kept_shape, group):
            piece = np.ascontiguousarray(v[index], dtype=fmt.dtype).reshape(-1, length)
            out[row : row + piece.shape[0]] = _rows_short(piece, fmt, target)
            row += piece.shape[0]
            del piece  # at most one copied group alive
    out = out.reshape(kept_shape)
    return out[()] if out.ndim == 0 else out


def _normalize_axes(axis, ndim):
    axes = (axis,) if not isinstance(axis, tuple) else axis
    result = []
    for item in axes:
        k = operator.index(item)
        if not -ndim <= k < ndim:
            raise np.exceptions.AxisError(k, ndim)
        k %= ndim
        if k in result:
            raise ValueError("duplicate value in 'axis'")
        result.append(k)
    return result


# ---------------------------------------------------------------------------
# Public API


def exact_sum(values, axis=None, dtype=None):
    """The exact sum of ``values`` rounded once (to nearest, ties to even).

    ``values``: a numpy array of float64 or float32 (any shape, strides or byte
    order), or any iterable of numbers (converted to float64).
    ``axis``: None (all values), an int or a tuple of ints, as for ``numpy.sum``.
    ``dtype``: None (the input precision; float64 for iterables), numpy.float64 or
    numpy.float32: the precision of the result; the exact sum is rounded once to it.

    Arrays give a numpy scalar (``axis`` None or every axis) or array of the result
    dtype; iterables with ``dtype=None`` and ``axis=None`` give a Python float.  The
    bits depend only on the multiset of values in each sum: not on order, layout,
    chunking or platform.  float64 results equal ``math.fsum`` wherever that does not
    raise ``OverflowError``; see the module docstring for special values.
    """
    target = _target_format(dtype)
    _refuse_masked(values)
    if not isinstance(values, (np.ndarray, np.generic)):
        if axis is None:
            total, flags = _exact_iterable(values)
            value = _finish(total, flags, _F64.unit_exp, target or _F64)
            return float(value) if target is None else value
        values = np.asarray(values, dtype=np.float64)
    a = np.asarray(values)
    fmt = _format_of_dtype(a.dtype)
    target = target or fmt
    if axis is None:
        total, flags = _exact_array(a, fmt)
        return _finish(total, flags, fmt.unit_exp, target)
    axes = _normalize_axes(axis, a.ndim)
    kept = [k for k in range(a.ndim) if k not in axes]
    if not kept:
        total, flags = _exact_array(a, fmt)
        return _finish(total, flags, fmt.unit_exp, target)
    return _rows(a.transpose(kept + sorted(axes)), len(kept), fmt, target)


_DOT_BLOCK = 1 << 14


def _dot_flags(a: np.ndarray, b: np.ndarray) -> int:
    """NaN / +inf / -inf flags of the products ``a * b`` (IEEE 754 products)."""
    flags = 0
    bad_a, bad_b = ~np.isfinite(a), ~np.isfinite(b)
    if bad_a.any() or bad_b.any():
        nan = np.isnan(a) | np.isnan(b) | (np.isinf(a) & (b == 0)) | (np.isinf(b) & (a == 0))
        inf = (bad_a | bad_b) & ~nan
        if nan.any():
            flags |= _NAN
        if inf.any():
            sign = np.signbit(a[inf]) ^ np.signbit(b[inf])
            if (~sign).any():
                flags |= _POS_INF
            if sign.any():
                flags |= _NEG_INF
    return flags


def _dot_integer(a: np.ndarray, b: np.ndarray) -> int:
    """Exact sum(a * b) in units 2**-2148 from integer significands (finite a, b)."""
    sa, pa, na, _ = _decompose(a)
    sb, pb, nb, _ = _decompose(b)
    low26 = np.uint64((1 << 26) - 1)
    ah, al = sa >> np.uint64(26), sa & low26
    bh, bl = sb >> np.uint64(26), sb & low26
    base = pa + pb
    sig = np.concatenate((ah * bh, ah * bl + al * bh, al * bl))  # each < 2**55
    position = np.concatenate((base + 52, base + 26, base))
    negative = np.tile(na ^ nb, 3)
    limbs, origin = _scatter_limbs(sig, position, negative, np.int64(0), 1)
    total = 0
    for j, value in enumerate(limbs[:, 0].tolist()):
        if value:
            total += value << (32 * (j + origin))
    return total


_SPLITTER = 134217729.0  # 2**27 + 1 (Veltkamp)


def _dot_block64(a: np.ndarray, b: np.ndarray, bins: _Bins64):
    """sum(a * b) of contiguous 1-D float64 arrays: returns (total, flags).

    Products in the safe range are split exactly into ``p + e`` (Dekker's product
    with Veltkamp splitting; exact without overflow or underflow, Dekker 1971,
    from memory) and added to ``bins`` (units 2**-1074); the returned total (units
    2**-2148) holds the rest (huge or tiny products), from integer significands.
    Zero products add nothing.
    """
    flags = _dot_flags(a, b)
    with np.errstate(all="ignore"):
        p = a * b
        mag = np.abs(p)
        safe = (mag >= 2.0**-900) & (mag < 2.0**990) & (np.abs(a) < 2.0**990) & (np.abs(b) < 2.0**990)
        rest = ~safe & np.isfinite(a) & np.isfinite(b) & (a != 0) & (b != 0)
        if not safe.all():
            a_s, b_s, p = a[safe], b[safe], p[safe]
        else:
            a_s, b_s = a, b
        t = _SPLITTER * a_s
        ah = t - (t - a_s)
        al = a_s - ah
        t = _SPLITTER * b_s
        bh = t - (t - b_s)
        bl = b_s - bh
        e = ((ah * bh - p) + ah * bl + al * bh) + al * bl  # p + e == a * b exactly
    # |p|, |e| < 2**990: 2**25 of them cannot overflow a bin estimate.
    bins.add(p)
    bins.add(e)
    total = _dot_integer(a[rest], b[rest]) if rest.any() else 0
    return total, flags


def _as_float_array(x):
    _refuse_masked(x)
    if isinstance(x, (np.ndarray, np.generic)):
        return np.asarray(x), True
    return np.fromiter(x, dtype=np.float64), False


def exact_dot(a, b):
    """The exact value of ``sum(a[i] * b[i])`` rounded once (to nearest, ties to even).

    Every product is taken exactly (as ``p + e`` by Dekker's product with Veltkamp
    splitting, or from integer significands where that split could under- or
    overflow) and the products are summed exactly, so the bits do not depend on
    order or blocking.
    ``a`` and ``b``: arrays of the same shape (no broadcasting) or iterables of the
    same length.  Result: float32 if both are float32 arrays, float64 otherwise
    (a Python float when both are iterables).  Special values follow IEEE products
    and sums: NaN, ``inf * 0`` -> NaN; +inf and -inf products together -> NaN.
    """
    xa, array_a = _as_float_array(a)
    xb, array_b = _as_float_array(b)
    if xa.shape != xb.shape:
        raise ValueError(f"exact_dot needs equal shapes, got {xa.shape} and {xb.shape}")
    fa, fb = _format_of_dtype(xa.dtype), _format_of_dtype(xb.dtype)
    both32 = fa is _F32 and fb is _F32
    total, flags = 0, 0
    bins = _Bins64()
    if xa.size:
        for index in _chunk_index(xa.shape, _DOT_BLOCK):
            pa = np.ascontiguousarray(xa[index], dtype=np.float64).reshape(-1)
            pb = np.ascontiguousarray(xb[index], dtype=np.float64).reshape(-1)
            if bins.count + 2 * pa.shape[0] > _WINDOW64:
                part = bins.read()
                total += part[0] << (0 if both32 else 1074)
                flags |= part[1]
                bins = _Bins64()
            if both32:
                with np.errstate(invalid="ignore"):
                    products = pa * pb  # float32 products are exact in float64
                flags |= _dot_flags(pa, pb)
                bins.add(np.where(np.isfinite(products), products, 0.0))
            else:
                part = _dot_block64(pa, pb, bins)
                total += part[0]
                flags |= part[1]
    part = bins.read()  # never None: every value added is below 2**990 in magnitude
    total += part[0] << (0 if both32 else 1074)
    flags |= part[1]
    unit = _F64.unit_exp if both32 else 2 * _F64.unit_exp
    value = _finish(total, flags, unit, _F32 if both32 else _F64)
    if not (array_a or array_b):
        return float(value)
    return value


# ---------------------------------------------------------------------------
# Mergeable accumulator

_MAGIC = b"SBXS"
_MAGIC_INT = int.from_bytes(_MAGIC, "little")
_VERSION = 1
#: magic, version, dtype code (64 or 32), flags, sign, shift, magnitude length in bytes
_HEADER = struct.Struct("<4sBBBBHH")
_MAX_SHIFT = 4096
_MAX_MAGNITUDE_BYTES = 1024  # far above any reachable total (about 2200 bits)


def _split_total(total: int):
    """``(sign, shift, odd)`` with ``|total| == odd << shift`` and ``odd`` odd (or all 0)."""
    magnitude = abs(total)
    if magnitude == 0:
        return 0, 0, 0
    shift = (magnitude & -magnitude).bit_length() - 1
    return int(total < 0), shift, magnitude >> shift


def _check_state(code, flags, sign, shift, odd):
    if code not in (32, 64):
        raise ValueError(f"accumulator state: unknown dtype code {code}")
    if not 0 <= flags <= 7:
        raise ValueError("accumulator state: bad flags")
    if sign not in (0, 1) or not 0 <= shift <= _MAX_SHIFT:
        raise ValueError("accumulator state: bad sign or shift")
    if odd == 0 and (sign or shift):
        raise ValueError("accumulator state: zero must have sign 0 and shift 0")
    if odd and not odd & 1:
        raise ValueError("accumulator state: magnitude not canonical")


class SumAccumulator:
    """Exact running sum of float64 (default) or float32 values; mergeable.

    ``add`` any number of arrays or iterables, ``merge`` (or ``+``) accumulators of
    the same dtype, and ``result()`` is bit-identical to ``exact_sum`` of all the
    values at once.  The state is an exact integer (units of the format's smallest
    subnormal) plus NaN / +inf / -inf flags, so any split of the data and any merge
    order give the same state.  ``to_bytes``/``from_bytes`` and
    ``to_array``/``from_array`` move it between processes (formats in docs/runtime.md).
    """

    __slots__ = ("_fmt", "_total", "_flags")

    def __init__(self, dtype=np.float64):
        fmt = _target_format(dtype)
        if fmt is None:
            raise TypeError("dtype must be float64 or float32, not None")
        self._fmt = fmt
        self._total = 0
        self._flags = 0

    @property
    def dtype(self) -> np.dtype:
        return self._fmt.dtype

    def add(self, values) -> "SumAccumulator":
        """Add every value of an array (any shape) or iterable; returns self.

        A float32 accumulator refuses float64 arrays (TypeError) and iterable
        items not exactly representable in float32 (ValueError); a float64
        accumulator takes float32 arrays exactly.
        """
        _refuse_masked(values)
        if isinstance(values, (np.ndarray, np.generic)):
            a = np.asarray(values)
            fmt = _format_of_dtype(a.dtype)
            if fmt is _F64 and self._fmt is _F32:
                raise TypeError("a float32 accumulator cannot take float64 values exactly")
            total, flags = _exact_array(a, fmt)
            total <<= fmt.unit_exp - self._fmt.unit_exp
        else:
            total, flags = _exact_iterable(values, self._fmt)
        self._total += total
        self._flags |= flags
        return self

    def merge(self, other: "SumAccumulator") -> "SumAccumulator":
        """Add the state of ``other`` (same dtype) to this one; returns self."""
        if not isinstance(other, SumAccumulator):
            raise TypeError("can only merge another SumAccumulator")
        if other._fmt is not self._fmt:
            raise ValueError(f"cannot merge a {other.dtype} accumulator into a {self.dtype} one")
        self._total += other._total
        self._flags |= other._flags
        return self

    def __add__(self, other):
        if not isinstance(other, SumAccumulator):
            return NotImplemented
        return self.copy().merge(other)

    def copy(self) -> "SumAccumulator":
        new = SumAccumulator(self._fmt.dtype)
        new._total, new._flags = self._total, self._flags
        return new

    def result(self):
        """The exact sum so far, rounded once: a numpy scalar of the dtype."""
        return _finish(self._total, self._flags, self._fmt.unit_exp, self._fmt)

    def __eq__(self, other):
        if not isinstance(other, SumAccumulator):
            return NotImplemented
        return (self._fmt, self._total, self._flags) == (other._fmt, other._total, other._flags)

    __hash__ = None

    def __repr__(self):
        return f"SumAccumulator(dtype={self._fmt.dtype.name}, result={self.result()!r})"

    # -- serialisation -----------------------------------------------------

    def to_bytes(self) -> bytes:
        """The state as bytes (little-endian; format in docs/runtime.md)."""
        sign, shift, odd = _split_total(self._total)
        body = odd.to_bytes((odd.bit_length() + 7) // 8, "little")
        return _HEADER.pack(_MAGIC, _VERSION, self._fmt.code, self._flags, sign, shift, len(body)) + body

    @classmethod
    def from_bytes(cls, data) -> "SumAccumulator":
        """Rebuild an accumulator from ``to_bytes``; ValueError if malformed."""
        if not isinstance(data, (bytes, bytearray, memoryview)):
            raise TypeError("from_bytes needs bytes")
        data = bytes(data)
        if len(data) < _HEADER.size:
            raise ValueError("accumulator bytes: too short")
        magic, version, code, flags, sign, shift, length = _HEADER.unpack_from(data)
        if magic != _MAGIC:
            raise ValueError("accumulator bytes: bad magic")
        if version != _VERSION:
            raise ValueError(f"accumulator bytes: unknown version {version}")
        if length > _MAX_MAGNITUDE_BYTES or len(data) != _HEADER.size + length:
            raise ValueError("accumulator bytes: length does not match")
        body = data[_HEADER.size :]
        if length and body[-1] == 0:
            raise ValueError("accumulator bytes: magnitude not canonical")
        return cls._build(code, flags, sign, shift, int.from_bytes(body, "little"))

    def to_array(self) -> np.ndarray:
        """The state as a 1-D int64 array: 7 header items, then 32-bit limbs (low first)."""
        sign, shift, odd = _split_total(self._total)
        limbs = []
        while odd:
            limbs.append(odd & _MASK32)
            odd >>= 32
        head = [_MAGIC_INT, _VERSION, self._fmt.code, self._flags, sign, shift, len(limbs)]
        return np.array(head + limbs, dtype=np.int64)

    @classmethod
    def from_array(cls, array) -> "SumAccumulator":
        """Rebuild an accumulator from ``to_array``; ValueError if malformed."""
        a = np.asarray(array)
        if a.ndim != 1 or a.dtype.kind not in "iu" or a.shape[0] < 7:
            raise ValueError("accumulator array: need a 1-D integer array of at least 7 items")
        items = [int(v) for v in a.tolist()]
        magic, version, code, flags, sign, shift, count = items[:7]
        limbs = items[7:]
        if magic != _MAGIC_INT:
            raise ValueError("accumulator array: bad magic")
        if version != _VERSION:
            raise ValueError(f"accumulator array: unknown version {version}")
        if count != len(limbs) or count * 4 > _MAX_MAGNITUDE_BYTES:
            raise ValueError("accumulator array: length does not match")
        if any(not 0 <= v <= _MASK32 for v in limbs) or (limbs and limbs[-1] == 0):
            raise ValueError("accumulator array: bad limbs")
        odd = 0
        for v in reversed(limbs):
            odd = (odd << 32) | v
        return cls._build(code, flags, sign, shift, odd)

    @classmethod
    def _build(cls, code, flags, sign, shift, odd):
        _check_state(code, flags, sign, shift, odd)
        new = cls(np.float64 if code == 64 else np.float32)
        magnitude = odd << shift
        new._total = -magnitude if sign else magnitude
        new._flags = flags
        return new
