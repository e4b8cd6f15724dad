"""Reference for ``sb_power`` of ``fortran/samebits_runtime.f90``, bit for bit.

``power(x, n)`` (binary64, plain Python floats) and ``power32(x, n)`` (binary32,
``numpy.float32`` arithmetic) perform exactly the rounded operations of the Fortran
module, in the same order:

    m = |n|;  result = (none yet);  base = x
    while True:
        if m is odd:  result = base if result is none yet else result * base
        m = m // 2
        if m == 0:    stop
        base = base * base
    if n < 0:  result = 1 / result
    (n == 0 gives 1 for every x, NaN included: IEEE 754-2019, 9.2, pown, from memory)

The first factor is copied rather than multiplied by 1.  That is the same number
(1 * y is exact) except for a signalling NaN, which a multiplication would quiet;
compilers fold ``1 * y`` into ``y``, so the copy is what keeps that one case equal
across optimisation levels.

Error bound
-----------
Model (the standard one for IEEE 754 arithmetic without underflow or overflow):
``fl(a op b) = (a op b)(1 + d)`` with ``|d| <= u``, ``u = 2**-53`` (binary64) or
``2**-24`` (binary32), for ``op`` in ``* /``.

Write ``n = sum of 2**j over j in S`` and let ``b_j`` be the computed ``base`` after
``j`` squarings.  ``b_j = b_(j-1)**2 (1 + d_j)``, hence
``b_j = x**(2**j) * prod_(i<=j) (1 + d_i)**(2**(j-i))``: a product of
``2**j - 1`` factors of the form ``(1 + d)``.  The result multiplies the ``|S|``
selected ``b_j`` with ``|S| - 1`` rounded products (the first is a copy), so for
``n > 0`` it equals ``x**n`` times a product of

    sum_(j in S) (2**j - 1)  +  (|S| - 1)  =  n - 1

factors ``(1 + d_i)``, the ``d_i`` not necessarily distinct.  For ``n < 0`` the
division adds one factor ``(1 + d)`` and turns the others into ``(1 + d_i)**-1``:
``|n|`` factors.  A product of ``k`` factors ``(1 + d_i)**(+-1)`` with ``k u < 1``
is ``1 + theta`` with ``|theta| <= gamma_k = k u / (1 - k u)`` (Higham, *Accuracy
and Stability of Numerical Algorithms*, 2nd ed., Lemma 3.1; cited from memory).
So the relative error of ``sb_power(x, n)`` is at most ``gamma_(n-1)`` for ``n > 0``,
``gamma_|n|`` for ``n < 0`` and 0 for ``n`` in ``{0, 1}``.

The model needs every intermediate to be a normal number.  Since ``|base|`` and
``|result|`` move monotonically from ``|x|`` towards ``|x|**|n|``, it is enough that
``|x|``, ``|x|**|n|`` and ``|x|**n`` lie in the normal range (with a little room for
the rounding errors).  With underflow to subnormals the bound does not hold; with
overflow the result is an infinity (or a zero for ``n < 0``).
"""

from __future__ import annotations

import math
from fractions import Fraction
from pathlib import Path

__all__ = [
    "BINARY32_UNIT_ROUNDOFF",
    "BINARY64_UNIT_ROUNDOFF",
    "error_bound",
    "fortran_source",
    "grouping",
    "power",
    "power32",
]

#: Unit roundoff of binary64 (round to nearest): half the spacing above 1.
BINARY64_UNIT_ROUNDOFF = 2.0**-53
#: Unit roundoff of binary32.
BINARY32_UNIT_ROUNDOFF = 2.0**-24


def fortran_source() -> Path:
    """Path of ``samebits_runtime.f90`` (installed with the package)."""
    return Path(__file__).resolve().parent / "fortran" / "samebits_runtime.f90"


def _check_exponent(n: object) -> int:
    if isinstance(n, bool) or not isinstance(n, int):
        try:
            import numpy as np
        except ImportError:  # pragma: no cover - numpy missing
            np = None
        if np is not None and isinstance(n, np.integer):
            return int(n)
        raise TypeError(f"exponent must be an int, not {type(n).__name__}")
    return n


def power(x: float, n: int) -> float:
    """``x**n`` in binary64 by the algorithm of ``sb_power`` (same bits).

    ``n`` may be any Python int; ``sb_power`` itself takes int32 or int64.
    Division by zero follows IEEE 754 (``1/(+-0) = +-inf``) rather than raising.
    """
    n = _check_exponent(n)
    if not isinstance(x, float):
        x = float(x)
    if n == 0:
        return 1.0
    m = -n if n < 0 else n
    result = None
    base = x
    while True:
        if m & 1:
            result = base if result is None else result * base
        m >>= 1
        if m == 0:
            break
        base = base * base
    if n < 0:
        # Python raises on division by zero; IEEE 754 gives a signed infinity.
        result = math.copysign(math.inf, result) if result == 0.0 else 1.0 / result
    return result


def power32(x, n: int):
    """``x**n`` in binary32 (``numpy.float32``) by the algorithm of ``sb_power``.

    ``x`` should be a ``numpy.float32``; other values are converted with
    ``numpy.float32(x)`` (a rounding).  Pass float32 values through numpy, not
    through Python floats, to keep signalling NaNs signalling.
    """
    import numpy as np

    n = _check_exponent(n)
    one = np.float32(1.0)
    if not isinstance(x, np.float32):
        x = np.float32(x)
    if n == 0:
        return one
    m = -n if n < 0 else n
    result = None
    base = x
    with np.errstate(all="ignore"):
        while True:
            if m & 1:
                result = base if result is None else np.float32(result * base)
            m >>= 1
            if m == 0:
                break
            base = np.float32(base * base)
        if n < 0:
            result = np.float32(one / result)
    return result


def grouping(n: int, name: str = "x") -> str:
    """The product ``sb_power(x, n)`` computes, fully parenthesised (``n >= 1``).

    ``grouping(6) == "(x*x)*((x*x)*(x*x))"``.  Shared subexpressions are written
    out each time; ``sb_power`` computes each squaring once.
    """
    n = _check_exponent(n)
    if n < 1:
        raise ValueError("grouping is defined for n >= 1")
    m = n
    result = None
    base = name
    while True:
        if m & 1:
            result = base if result is None else f"{_wrap(result)}*{_wrap(base)}"
        m >>= 1
        if m == 0:
            break
        base = f"{_wrap(base)}*{_wrap(base)}"
    return result


def _wrap(expr: str) -> str:
    return f"({expr})" if "*" in expr else expr


def error_bound(n: int, *, unit_roundoff: float = BINARY64_UNIT_ROUNDOFF) -> float:
    """Bound on the relative error of ``sb_power(x, n)`` (see the module docstring).

    ``gamma_k = k u / (1 - k u)`` with ``k = n - 1`` (``n > 0``), ``k = |n|``
    (``n < 0``), ``0`` for ``n`` in ``{0, 1}``; ``u`` is ``unit_roundoff``
    (binary64 by default; pass ``BINARY32_UNIT_ROUNDOFF`` for real32).  The value
    is rounded upward to a float; ``inf`` when ``k u >= 1``.  Valid only while no
    intermediate underflows or overflows (module docstring).
    """
    n = _check_exponent(n)
    if n == 0:
        return 0.0
    k = n - 1 if n > 0 else -n
    ku = k * Fraction(unit_roundoff)
    if ku >= 1:
        return math.inf
    gamma = ku / (1 - ku)
    bound = float(gamma)
    if Fraction(bound) < gamma:
        bound = math.nextafter(bound, math.inf)
    return bound
