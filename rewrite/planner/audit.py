"""The audit rule: findings without edits for what parentheses cannot pin.

- libm-dependent functions (sin, exp, log, pow with a real exponent, ...): their results are
  not correctly rounded and differ between library versions and CPUs (numpy's exp and log take
  other code paths with and without AVX-512: docs/rules.md);
- BLAS-dependent operations (dot, matmul, einsum, the ``@`` operator, linear algebra): the
  library chooses blocking, threads and FMA use, so the order of the sums is not the code's.
"""
from __future__ import annotations

from ..edits import Edit, Finding
from ..ir import Category, Level, Operand, Operation, Site, walk

RULE = "audit"

LIBM = frozenset("""sin cos tan asin acos atan atan2 sinh cosh tanh asinh acosh atanh exp exp2 expm1 log log2
log10 log1p erf erfc gamma lgamma log_gamma cbrt hypot power""".split())
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


def plan(site: Site, text: str, options, spelling) -> tuple[list[Edit], list[Finding]]:
    findings: list[Finding] = []
    for root in site.roots:
        for node in walk(root):
            if isinstance(node, Operand) and node.function in LIBM:
                if node.type.category is Category.INTEGER:
                    continue
                findings.append(Finding(node.span, RULE, f"{spelling.display(node.span)}: {_LIBM_RISK}; where "
                                        "bits must match across machines, pin the library version or use a "
                                        "correctly rounded implementation", "warning"))
            elif isinstance(node, Operand) and node.function in BLAS:
                findings.append(Finding(node.span, RULE, f"{spelling.display(node.span)}: {_BLAS_RISK}; for "
                                        "reproducible sums use exact_dot from the runtime or fix the library and "
                                        "thread count", "warning"))
            elif isinstance(node, Operation) and node.operator == "@":
                findings.append(Finding(node.span, RULE, f"{spelling.display(node.span)}: matrix product: "
                                        f"{_BLAS_RISK}", "warning"))
            elif isinstance(node, Operation) and node.level is Level.POWER and node.left.type.is_floating \
                    and not _reported_by_power_rule(node.right):
                findings.append(Finding(node.span, RULE, f"{spelling.display(node.span)}: a power with a "
                                        f"non-integer exponent calls pow: {_LIBM_RISK}", "warning"))
    return [], findings
