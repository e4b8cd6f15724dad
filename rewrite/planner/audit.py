"""The audit rule: findings without edits for what parentheses cannot pin.

- libm-dependent functions (sin, exp, log, pow with a real exponent, ...): their results are
  not correctly rounded and differ between library versions and CPUs (numpy's exp and log take
  other code paths with and without AVX-512: docs/rules.md). A note; a warning inside a loop or
  on whole arrays, which a compiler may vectorise with a vector math library of other bits (the
  spelling's ``libm_severity`` says how serious a plain call is: numpy's own vector paths make
  every Python call a warning);
- BLAS-dependent operations (dot, matmul, einsum, the ``@`` operator, linear algebra): the
  library chooses blocking, threads and FMA use, so the order of the sums is not the code's;
- FMA-prone shapes (``a*b + c``, ``a*b + c*d``) where the language's compilers contract
  (``spelling.fma_note``): fusing gives one rounding instead of two, and which product is fused
  is the compiler's choice. One note per statement.
Build files are audited by ``rewrite.build``, not here.
"""
from __future__ import annotations

from ..edits import Edit, Finding
from ..ir import Category, Level, Operand, Operation, Site, walk

RULE = "audit"

LIBM = frozenset("""sin cos tan asin acos atan atan2 sinh cosh tanh asinh acosh atanh exp exp2 expm1 log log2
log10 log1p erf erfc erfc_scaled gamma lgamma log_gamma cbrt hypot power bessel_j0 bessel_j1 bessel_jn
bessel_y0 bessel_y1 bessel_yn sind cosd tand asind acosd atand atan2d cotan cotand dsin dcos dtan dasin
dacos datan datan2 dsinh dcosh dtanh dexp dlog dlog10 alog alog10 csin ccos cexp clog""".split())
BLAS = frozenset("dot matmul einsum inner tensordot vdot linalg".split())

_LIBM_RISK = ("the math library's result is not correctly rounded and changes with the library version and "
              "the CPU's code path")
_BLAS_RISK = ("the linear algebra library picks the summation order (blocking, threads, FMA), so the bits "
              "change with the library, its version and the thread count")


def _reported_by_power_rule(node) -> bool:
    """Integer exponents are the power rule's; so are 0.5 and 1.5, which it reports itself."""
    from fractions import Fraction

    from .powers import _fraction_exponent, _integer_exponent

    return _integer_exponent(node)[0] is not None or _fraction_exponent(node) in (Fraction(1, 2), Fraction(3, 2))


def _vectorisable(site: Site, node: Operand) -> bool:
    return site.in_loop or any(getattr(part, "rank", 0) > 0 or getattr(part, "form", "") == "section"
                               for part in node.parts)


def _product(node) -> bool:
    return isinstance(node, Operation) and node.operator == "*" and node.type.is_floating


def _fma_shape(node) -> str | None:
    """'a*b + c' or 'a*b + c*d' when an addition or subtraction has a real product as an operand."""
    if not isinstance(node, Operation) or node.operator not in ("+", "-") or not node.type.is_floating:
        return None
    products = _product(node.left) + _product(node.right)
    return None if not products else ("a*b + c*d" if products == 2 else "a*b + c")


def plan(site: Site, text: str, options, spelling) -> tuple[list[Edit], list[Finding]]:
    findings: list[Finding] = []
    checks = getattr(options, "audit_checks", ("libm", "blas", "fma"))
    libm, blas = "libm" in checks, "blas" in checks
    fma_note = getattr(spelling, "fma_note", "") if "fma" in checks else ""
    for root in site.roots:
        fma_found = False
        for node in walk(root):
            if isinstance(node, Operand) and node.function in LIBM:
                if node.type.category is Category.INTEGER or not libm:
                    continue
                advice = ("where bits must match across machines, pin the library version or use a correctly "
                          "rounded implementation")
                if _vectorisable(site, node) and getattr(spelling, "vector_libm_note", ""):
                    findings.append(Finding(node.span, RULE, f"{spelling.display(node.span)}: in a loop or on "
                                            f"arrays: {spelling.vector_libm_note} (and libm itself is not "
                                            "correctly rounded)", "warning", kind="libm-loop"))
                else:
                    findings.append(Finding(node.span, RULE, f"{spelling.display(node.span)}: {_LIBM_RISK}; "
                                            f"{advice}", getattr(spelling, "libm_severity", "warning"), kind="libm"))
            elif isinstance(node, Operand) and node.function in BLAS:
                if not blas:
                    continue
                findings.append(Finding(node.span, RULE, f"{spelling.display(node.span)}: {_BLAS_RISK}; for "
                                        "reproducible sums use exact_dot from the runtime or fix the library and "
                                        "thread count", "warning", kind="blas"))
            elif isinstance(node, Operation) and node.operator == "@" and blas:
                findings.append(Finding(node.span, RULE, f"{spelling.display(node.span)}: matrix product: "
                                        f"{_BLAS_RISK}", "warning", kind="blas"))
            elif isinstance(node, Operation) and node.level is Level.POWER and node.left.type.is_floating \
                    and libm and not _reported_by_power_rule(node.right):
                findings.append(Finding(node.span, RULE, f"{spelling.display(node.span)}: a power with a "
                                        f"non-integer exponent calls pow: {_LIBM_RISK}", "warning", kind="libm"))
            elif fma_note and not fma_found and _fma_shape(node):
                fma_found = True
                findings.append(Finding(node.span, RULE, f"{spelling.display(node.span)}: FMA-prone "
                                        f"({_fma_shape(node)}): {fma_note}", "note", kind="fma"))
    return [], findings
