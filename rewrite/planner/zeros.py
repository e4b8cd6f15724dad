"""The signed-zero rule: ``+ 0.0`` after results that may be -0.0 depending on argument order.

``min(0.0, -0.0)`` and ``min(-0.0, 0.0)`` are both "the minimum", but implementations return
whichever zero they meet first or second, so the sign of a zero result changes with the
argument order or the layout of an array. Adding +0.0 turns -0.0 into +0.0 and leaves every
other value alone (IEEE 754-2019, 6.3: an exact zero sum is +0 in round-to-nearest, except
that (-0) + (-0) is -0; x + 0.0 is x for x != 0). The guard changes answers only in the sign
of a zero: the reason says so. A guard already there is recognised, never doubled.
Which functions a language's front end names and guards is the spelling's list.
"""
from __future__ import annotations

from fractions import Fraction

from ..edits import ANSWER_CHANGING, Edit, Finding, TextChange
from ..ir import Category, Node, Operand, Operation, Site, Unary, walk_with_parents

RULE = "zero"




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


def plan(site: Site, text: str, options, spelling) -> tuple[list[Edit], list[Finding]]:
    edits: list[Edit] = []
    findings: list[Finding] = []
    guarded_functions = getattr(spelling, "guarded_functions", frozenset())
    if not guarded_functions:
        return edits, findings
    for root in site.roots:
        for node, parent in walk_with_parents(root):
            if not isinstance(node, Operand) or node.function not in guarded_functions:
                continue
            shown = spelling.display(node.span)
            if node.type.category is Category.UNKNOWN:
                findings.append(Finding(node.span, RULE, f"{shown}: the type of its result is unknown: no signed-zero "
                                        "guard added"))
                continue
            if node.type.category is not Category.REAL or _guarded(node, parent):
                continue
            zero = spelling.real_literal("0.0", node.type)
            if isinstance(parent, (Operation, Unary)):
                changes = (TextChange(node.span.start, node.span.start, "(", 1),
                           TextChange(node.span.end, node.span.end, f" + {zero})", -1))
            else:
                changes = (TextChange(node.span.end, node.span.end, f" + {zero}", -1),)
            after = spelling.display(node.span, changes) if len(changes) == 1 else \
                f"({spelling.display(node.span)} + {zero})"
            reason = (f"{shown} -> {after}: which zero {node.function} returns for +0.0 and -0.0 depends on the "
                      f"argument order or the data layout; adding +0.0 makes it +0.0 every time; answer-changing "
                      f"only in the sign of a zero result (every other value is unchanged)")
            edits.append(Edit(node.span, changes, RULE, ANSWER_CHANGING, reason, shown, after))
    return edits, findings
