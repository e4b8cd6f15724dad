"""The signed-zero rule: ``+ 0.0`` after results that may be -0.0 depending on argument order.

``min(0.0, -0.0)`` and ``min(-0.0, 0.0)`` are both "the minimum", but implementations return
whichever zero they meet first or second, so the sign of a zero result changes with the
argument order or the layout of an array. Adding +0.0 turns -0.0 into +0.0 and leaves every
other value alone (IEEE 754-2019, 6.3: an exact zero sum is +0 in round-to-nearest, except
that (-0) + (-0) is -0; x + 0.0 is x for x != 0). The guard changes answers only in the sign
of a zero: the reason says so. A guard already there is recognised, never doubled.
Which functions a language's front end names and guards is the spelling's list; the option
``guard-functions`` adds functions of the user's own, by the name the code calls them.
``sign(a, b)`` is guarded only where ``a`` may be zero (it is -0.0 for a zero ``a`` and a
negative ``b``); a literal non-zero ``a`` cannot give a zero.
No guard where it cannot matter: inside a comparison (the zeros compare equal), or as an
argument of another guarded call (the outer guard decides the sign) or of ``abs``. Under a
unary minus the guard goes outside the negation, ``(-min(a, b) + 0.0)``, since -(+0.0) is
-0.0 again.
"""
from __future__ import annotations

from fractions import Fraction

from ..edits import ANSWER_CHANGING, Edit, Finding, TextChange
from ..ir import Category, Node, Operand, Operation, Site, Unary, walk_with_parents

RULE = "zero"
SIGN = frozenset({"sign", "dsign"})
ABSOLUTE = frozenset({"abs", "dabs", "cabs"})
# -0.0 and +0.0 compare equal (IEEE 754-2019 5.11; Fortran 2018 7.4.3.2): no guard inside a comparison
COMPARISONS = frozenset({"==", "/=", "!=", "<", "<=", ">", ">=", ".eq.", ".ne.", ".lt.", ".le.", ".gt.", ".ge."})

_ORDER_RISK = ("which zero {function} returns for +0.0 and -0.0 depends on the argument order or the data "
               "layout; adding +0.0 makes it +0.0 every time")
_SIGN_RISK = ("{function} gives -0.0 where its first argument is zero and its second negative (or -0.0, where "
              "the processor has signed zeros); adding +0.0 makes that zero +0.0")
_LISTED_RISK = "{function} is listed in guard-functions as a source of -0.0; adding +0.0 makes a zero result +0.0"
_EFFECT = "answer-changing only in the sign of a zero result (every other value is unchanged)"


def is_positive_zero(node: Node | None) -> bool:
    """A literal +0 (0.0, 0., 0.0_dp, 0.0d0, 0e0)."""
    if not isinstance(node, Operand) or node.form != "literal" or node.type.category is not Category.REAL:
        return False
    digits = node.key.split("_")[0].lower().replace("d", "e").replace("q", "e")
    try:
        return Fraction(digits) == 0
    except ValueError:
        return False


def _guarded(node: Node, parent: Node | None) -> bool:
    if not isinstance(parent, Operation) or parent.operator != "+":
        return False
    other = parent.right if parent.left is node else parent.left
    return is_positive_zero(other)


def _callee(node: Operand) -> str:
    return node.key.split("(", 1)[0]


def _listed(node: Operand, names: tuple[str, ...], ignore_case: bool) -> bool:
    """The call's callee is one of the user's guard-functions (``np.nanmin`` or just ``nanmin``)."""
    if node.form != "call" or not names:
        return False
    callee = _callee(node)
    last = callee.rpartition(".")[2]
    if ignore_case:
        callee, last, names = callee.lower(), last.lower(), tuple(n.lower() for n in names)
    return callee in names or last in names


def _first_argument(node: Operand) -> Node | None:
    for part, keyword in zip(node.parts, node.keywords):
        if keyword == "a":
            return part
    positional = [part for part, keyword in zip(node.parts, node.keywords) if keyword is None]
    return positional[0] if positional else (node.parts[0] if node.parts and not node.keywords else None)


def _may_be_zero(value: Node | None) -> bool:
    if not isinstance(value, Operand) or value.form != "literal":
        return True
    digits = value.key.split("_")[0].lower().replace("d", "e").replace("q", "e")
    try:
        return Fraction(digits) == 0
    except ValueError:
        return True


def _needs_parentheses(node: Node, parent: Node | None) -> bool:
    """``x + 0.0`` needs parentheses unless it stands alone or as an argument of a call (a
    receiver, an attribute's base, a subscripted value or an operand binds tighter than +)."""
    if parent is None:
        return False
    if isinstance(parent, Operand) and parent.form == "call":
        for index, part in enumerate(parent.parts):
            if part is node:
                keyword = parent.keywords[index] if index < len(parent.keywords) else None
                return keyword == "*func" or (parent.method and index == 0)
    return True


def _negated(node: Operand, negation: Unary) -> Operand:
    """The guarded call seen through its negation: the negation's span, the call's type and name."""
    return Operand(negation.span, node.type, negation.parenthesised, node.key, node.parts, node.form,
                   node.function, node.function_span, node.keywords)


def plan(site: Site, text: str, options, spelling) -> tuple[list[Edit], list[Finding]]:
    edits: list[Edit] = []
    findings: list[Finding] = []
    guarded_functions = getattr(spelling, "guarded_functions", frozenset())
    listed = tuple(getattr(options, "guard_functions", ()))
    if not guarded_functions and not listed:
        return edits, findings
    ignore_case = getattr(spelling, "names_ignore_case", False)
    for root in site.roots:
        parents = {id(node): parent for node, parent in walk_with_parents(root)}
        for node, parent in walk_with_parents(root):
            if not isinstance(node, Operand):
                continue
            known = node.function in guarded_functions
            if not known and not _listed(node, listed, ignore_case):
                continue
            if node.function in SIGN and not _may_be_zero(_first_argument(node)):
                continue
            subject = node  # the node whose parent holds a guard, if there is one
            if isinstance(parent, Unary) and parent.operator == "-":
                subject, node, parent = parent, _negated(node, parent), parents.get(id(parent))
            if isinstance(parent, Operation) and parent.operator in COMPARISONS:
                continue
            if isinstance(parent, Operand) and (parent.function in guarded_functions
                                                or _listed(parent, listed, ignore_case)) \
                    and parent.function not in SIGN:
                continue  # an argument of min/max/...: the outer guard decides
            if isinstance(parent, Operand) and parent.function in ABSOLUTE:
                continue  # abs(-0.0) is +0.0 already
            shown = spelling.display(node.span)
            if node.type.category is Category.UNKNOWN:
                findings.append(Finding(node.span, RULE, f"{shown}: the type of its result is unknown: no signed-zero "
                                        "guard added"))
                continue
            if node.type.category is not Category.REAL or _guarded(subject, parent):
                continue
            zero = spelling.real_literal("0.0", node.type)
            if _needs_parentheses(subject, parent):
                changes = (TextChange(node.span.start, node.span.start, "(", 1),
                           TextChange(node.span.end, node.span.end, f" + {zero})", -1))
            else:
                changes = (TextChange(node.span.end, node.span.end, f" + {zero}", -1),)
            after = spelling.display(node.span, changes) if len(changes) == 1 else \
                f"({spelling.display(node.span)} + {zero})"
            if not known:
                risk = _LISTED_RISK.format(function=_callee(node))
            elif node.function in SIGN:
                risk = _SIGN_RISK.format(function=node.function)
            else:
                risk = _ORDER_RISK.format(function=node.function)
            reason = f"{shown} -> {after}: {risk}; {_EFFECT}"
            edits.append(Edit(node.span, changes, RULE, ANSWER_CHANGING, reason, shown, after))
    return edits, findings
