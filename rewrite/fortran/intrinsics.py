"""Result types of Fortran intrinsic functions (Fortran 2018, clause 16), from their arguments."""
from __future__ import annotations

from ..ir import CHARACTER, INTEGER, LOGICAL, UNKNOWN, Category, NumType, arithmetic_type
from .expr import Argument

# result has the type and kind of the first argument
_SAME = set("""abs sqrt exp log log10 sin cos tan asin acos atan atan2 sinh cosh tanh asinh acosh atanh
mod modulo sign dim max min maxval minval sum product aint anint spacing nearest fraction
set_exponent scale rrspacing tiny huge epsilon transpose reshape spread pack unpack cshift eoshift
merge erf erfc erfc_scaled gamma log_gamma hypot bessel_j0 bessel_j1 bessel_jn bessel_y0 bessel_y1
bessel_yn conjg norm2 iand ior ieor not ishft ishftc ibset ibclr ibits shifta shiftl shiftr
sind cosd tand asind acosd atand atan2d cotan cotand dsqrt dexp dlog dlog10 dsin dcos dtan dabs
datan datan2 dsinh dcosh dtanh dmod dsign dmax1 dmin1 dint dnint alog alog10 amax1 amin1 amod
cabs csqrt cexp clog csin ccos iabs isign idim max0 min0
sb_power exact_sum""".split())  # sb_power, exact_sum: samebits_runtime, same type as their first argument
_DOUBLE_SPECIFIC = set("dsqrt dexp dlog dlog10 dsin dcos dtan dabs datan datan2 dsinh dcosh dtanh dmod "
                       "dsign dmax1 dmin1 dint dnint".split())
_REAL_SPECIFIC = set("alog alog10 amax1 amin1 amod".split())
_INTEGER = set("""int nint floor ceiling size len len_trim index scan verify lbound ubound shape count
iachar ichar exponent kind digits maxexponent minexponent precision range radix selected_real_kind
selected_int_kind selected_char_kind maxloc minloc findloc popcnt poppar leadz trailz storage_size
bit_size idint ifix idnint int2 int8 command_argument_count""".split())
_LOGICAL = set("""any all present associated allocated btest lge lgt lle llt is_iostat_end is_iostat_eor
is_contiguous same_type_as extends_type_of isnan""".split())
_CHARACTER = set("trim adjustl adjustr repeat char achar new_line".split())


def _argument(arguments: list[Argument], position: int, keyword: str) -> Argument | None:
    for argument in arguments:
        if argument.keyword == keyword:
            return argument
    positional = [a for a in arguments if a.keyword is None]
    return positional[position] if position < len(positional) else None


def _kind_text(argument: Argument | None) -> str | None:
    if argument is None or argument.value is None:
        return None
    return getattr(argument.value, "key", None) or "?"


def result_type(name: str, arguments: list[Argument]) -> NumType | None:
    """The result type, UNKNOWN when it depends on something unresolved, None when ``name``
    is not an intrinsic this table knows."""
    values = [a.value for a in arguments if a.value is not None]
    first = values[0].type if values else UNKNOWN
    if name in _DOUBLE_SPECIFIC:
        return NumType(Category.REAL, "d")
    if name in _REAL_SPECIFIC:
        return NumType(Category.REAL)
    if name in ("abs", "cabs") and first.category is Category.COMPLEX:
        return NumType(Category.REAL, first.kind)
    if name in ("max", "min", "dot_product", "matmul", "exact_dot"):
        result = first
        for value in values[1:]:
            if name in ("max", "min") and value.type.category != first.category and value.type.is_known \
                    and first.is_known:
                return UNKNOWN
            result = arithmetic_type(result, value.type) if name != "max" and name != "min" else result
        return result
    if name in _SAME:
        return first
    if name in ("real", "float", "sngl", "dble", "dfloat", "aimag", "dimag", "cmplx", "dcmplx"):
        kind = _kind_text(_argument(arguments, 1 if name != "cmplx" else 2, "kind"))
        if name in ("dble", "dfloat", "dimag"):
            category, kind = Category.REAL, "d"
        elif name == "dcmplx":
            category, kind = Category.COMPLEX, "d"
        elif name == "cmplx":
            category = Category.COMPLEX
        else:
            category = Category.REAL
            if name in ("real", "aimag") and kind is None and first.category is Category.COMPLEX:
                kind = first.kind
        if values and not first.is_known and name in ("real", "aimag") and kind is None:
            return UNKNOWN
        return NumType(category, kind)
    if name in _INTEGER:
        kind = _kind_text(_argument(arguments, 1, "kind")) if name in ("int", "nint", "floor", "ceiling") else None
        return NumType(Category.INTEGER, kind)
    if name in _LOGICAL:
        return LOGICAL
    if name in _CHARACTER:
        return CHARACTER
    if name == "dprod":
        return NumType(Category.REAL, "d")
    return None


def is_intrinsic(name: str) -> bool:
    return result_type(name, []) is not None
