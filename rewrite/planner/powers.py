"""The power rule: ``x**n`` with an integer literal exponent as an explicit product.

Builds disagree on ``x**6``: gfortran evaluates it with one grouping at -O0 (a runtime
routine) and another at -O2, and C or Python ``pow`` gives a third answer. An explicit product
with parentheses pins one grouping for every build. The product is not always bit-equal to what
a given build computed before, so the edit is answer-changing, and its reason says so.

Schemes use the fewest multiplications, written so that no grouping is left to the compiler
(``x*x*x`` needs no parentheses: ``(x*x)*x`` equals ``x*(x*x)`` because multiplication is
commutative). Negative exponents become ``1/(product)`` with a kind-matched ``1``.
"""
from __future__ import annotations

from fractions import Fraction

from ..edits import ANSWER_CHANGING, Edit, Finding, TextChange
from ..ir import Category, Level, Node, Operand, Operation, Site, Unary, walk_with_parents

RULE = "power"

_TABLE = {
    2: "x*x",
    3: "x*x*x",
    4: "(x*x)*(x*x)",
    5: "((x*x)*(x*x))*x",
    6: "(x*x*x)*(x*x*x)",
    7: "((x*x*x)*(x*x*x))*x",
    8: "((x*x)*(x*x))*((x*x)*(x*x))",
}
_NAMES = {2: "a square", 3: "a cube", 4: "a square of a square", 5: "a fourth power times x",
          6: "a cube times a cube", 7: "a cube times a cube times x", 8: "a fourth power squared"}


def scheme(n: int) -> str:
    """The product for x**n (n >= 2) with ``x`` as placeholder; beyond the table: squaring
    for even n, times x for odd n."""
    if n in _TABLE:
        return _TABLE[n]
    if n % 2 == 0:
        half = scheme(n // 2)
        return f"({half})*({half})"
    return f"({scheme(n - 1)})*x"


def multiplications(n: int) -> int:
    """Multiplications the written product asks for (a compiler may share repeated factors)."""
    return scheme(n).count("*")


def evaluate(n: int, x, multiply=lambda a, b: a * b):
    """Evaluate the scheme for x**n with the given multiplication (tests compare it with exact
    arithmetic); follows the scheme's grouping exactly."""
    text = scheme(n)
    position = 0

    def product():
        nonlocal position
        value = factor()
        while position < len(text) and text[position] == "*":
            position += 1
            value = multiply(value, factor())
        return value

    def factor():
        nonlocal position
        if text[position] == "(":
            position += 1
            value = product()
            position += 1
            return value
        position += 1
        return x

    return product()


def _integer_exponent(node: Node) -> tuple[int | None, bool]:
    """(n, written as a real literal) for an integer-valued literal exponent, else (None, _)."""
    sign = 1
    if isinstance(node, Unary) and node.operator in ("-", "+"):
        sign = -1 if node.operator == "-" else 1
        node = node.operand
    if not isinstance(node, Operand) or node.form != "literal":
        return None, False
    digits = node.key.split("_")[0].replace("d", "e").replace("q", "e")
    if node.type.category is Category.INTEGER:
        return sign * int(digits), False
    if node.type.category is Category.REAL:
        value = Fraction(digits)
        if value.denominator == 1:
            return sign * int(value), True
        return None, True
    return None, False


def _fraction_exponent(node: Node) -> Fraction | None:
    if isinstance(node, Operand) and node.form == "literal" and node.type.category is Category.REAL:
        return Fraction(node.key.split("_")[0].replace("d", "e").replace("q", "e"))
    return None


def _plain(base: Node) -> bool:
    """A variable or array element: safe to write several times."""
    from ..ir import walk

    if not isinstance(base, Operand) or base.form not in ("name", "element"):
        return False
    return all(not (isinstance(n, Operand) and n.form == "call") for n in walk(base))




def _needs_parentheses(parent: Node | None) -> bool:
    return isinstance(parent, Unary) or (
        isinstance(parent, Operation) and parent.level in (Level.MULTIPLICATIVE, Level.POWER))


def plan(site: Site, text: str, options, spelling) -> tuple[list[Edit], list[Finding]]:
    edits: list[Edit] = []
    findings: list[Finding] = []
    for root in site.roots:
        for node, parent in walk_with_parents(root):
            if not isinstance(node, Operation) or node.level is not Level.POWER:
                continue
            base, exponent = node.left, node.right
            if base.type.category is not Category.REAL:
                continue
            original = spelling.display(node.span)
            n, real_written = _integer_exponent(exponent)
            if n is None:
                fraction = _fraction_exponent(exponent)
                if fraction in (Fraction(1, 2), Fraction(3, 2)):
                    edit, finding = _square_root(node, parent, fraction, options, spelling, original)
                    edits.extend([edit] if edit else [])
                    findings.extend([finding] if finding else [])
                continue
            if abs(n) < 2:
                continue
            if abs(n) > options.power_threshold or not _plain(base):
                why = (f"exponent above power-threshold ({options.power_threshold})" if _plain(base)
                       else "the base is not a plain variable or array element, so it is not written twice")
                edit = _runtime_call(node, n, site, spelling, original, why)
                if edit is None:
                    missing = ("the runtime has no power function for this language"
                               if RUNTIME_POWER not in spelling.runtime_functions
                               else "no place for the runtime import in this unit")
                    findings.append(Finding(node.span, RULE, f"{original}: {why}; {missing}: not rewritten"))
                else:
                    edits.append(edit)
                continue
            if spelling.spans_lines(node.span):
                findings.append(Finding(node.span, RULE, f"{original}: continued over lines: not rewritten"))
                continue
            x = spelling.display(base.span)
            product = scheme(abs(n)).replace("x", "\0").replace("\0", x)
            if n < 0:
                inner = product if abs(n) == 1 else f"({product})"
                product = f"{spelling.real_literal('1.0', base.type)}/{inner}"
            if node.parenthesised or not _needs_parentheses(parent):
                replacement = product
            else:
                replacement = f"({product})"
            if node.parenthesised:
                replacement = f"({replacement})"
            written = "a real literal exponent, " if real_written else ""
            reason = (f"{original} -> {replacement}: {_NAMES.get(abs(n), 'repeated squaring')}"
                      f"{' (reciprocal)' if n < 0 else ''}, {written}one fixed grouping for every build; "
                      f"{spelling.power_note}{'; ' + spelling.reciprocal_note if n < 0 else ''}")
            edits.append(Edit(node.span, (TextChange(node.span.start, node.span.end, replacement),), RULE,
                              ANSWER_CHANGING, reason, original, replacement))
    return edits, findings


RUNTIME_POWER = "sb_power"


def _runtime_call(node, n, site, spelling, original, why):
    """x**n as a call of the runtime's sb_power (binary exponentiation in one fixed order)."""
    if site.anchor is None or spelling.spans_lines(node.span) or RUNTIME_POWER not in spelling.runtime_functions:
        return None
    base = spelling.display(node.left.span)
    if node.left.parenthesised and base.startswith("(") and base.endswith(")"):
        base = base[1:-1]  # the call's own parentheses group it
    call = spelling.call(RUNTIME_POWER, [base, str(n)])
    reason = (f"{original} -> {call}: {why}; the runtime computes it by binary exponentiation in one fixed "
              f"order (docs/runtime.md); how x**n is computed is left to the processor, so the bits can change")
    return Edit(node.span, (TextChange(node.span.start, node.span.end, call),), RULE, ANSWER_CHANGING, reason,
                original, call, requires=(RUNTIME_POWER,))


def _square_root(node, parent, fraction, options, spelling, original):
    base = node.left
    note = ("they differ from pow for x = -0.0 (pow gives +0, sqrt -0) and x = -inf (pow +inf, sqrt NaN); "
            "sqrt is correctly rounded (IEEE 754-2019 5.4.1), pow is not")
    if not options.fractional_powers or spelling.sqrt is None:
        return None, Finding(node.span, RULE, f"{original} calls pow, which libraries round differently; "
                             f"a sqrt form would pin it, but {note}"
                             + ("; set fractional-powers = true to rewrite" if spelling.sqrt else ""))
    x = spelling.display(base.span)
    if fraction == Fraction(3, 2):
        if not _plain(base):
            return None, Finding(node.span, RULE, f"{original}: the base is not a plain variable: not rewritten")
        product = f"{x}*{spelling.call(spelling.sqrt, [x])}"
        if _needs_parentheses(parent) or node.parenthesised:
            product = f"({product})"
    else:
        product = spelling.call("sqrt", [x])
        if node.parenthesised:
            product = f"({product})"
    if spelling.spans_lines(node.span):
        return None, Finding(node.span, RULE, f"{original}: continued over lines: not rewritten")
    reason = f"{original} -> {product}: pow replaced by the correctly rounded sqrt; {note}"
    return Edit(node.span, (TextChange(node.span.start, node.span.end, product),), RULE, ANSWER_CHANGING,
                reason, original, product), None
