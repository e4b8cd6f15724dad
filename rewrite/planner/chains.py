"""The chain rule: explicit parentheses for chains of one precedence level.

A chain is three or more operands joined by operators of one level (additive ``+ -`` or
multiplicative ``* /``) with no parentheses of their own between them. The standard lets a
compiler evaluate such a chain in any mathematically equivalent order (Fortran 2018,
10.1.5.2.4), which in floating point gives other bits. Pinning the written left-to-right order
keeps the language's own interpretation: the edit is bit-for-bit wherever the compiler already
honoured it, and afterwards a standard-conforming compiler may not reorder it (fast-math
modes are not standard-conforming: see docs/rules.md).
"""
from __future__ import annotations

from ..edits import BIT_FOR_BIT, Edit, Finding, TextChange
from ..ir import Category, Level, Node, Operation, Site, Span, arithmetic_type, walk

RULE = "chain"
_CHAIN_LEVELS = (Level.ADDITIVE, Level.MULTIPLICATIVE)


def _continues(node: Node, level: Level) -> bool:
    return isinstance(node, Operation) and node.level is level and not node.parenthesised


def chain_of(head: Operation) -> tuple[list[Node], list[str]]:
    """Operands and operators of the chain whose last operation is ``head``."""
    operands: list[Node] = []
    operators: list[str] = []
    node: Node = head
    while isinstance(node, Operation) and node.level is head.level and (node is head or not node.parenthesised):
        operands.append(node.right)
        operators.append(node.operator)
        node = node.left
    operands.append(node)
    operands.reverse()
    operators.reverse()
    return operands, operators


def heads(root: Node):
    """Chain heads: operations of a chain level that are not the left part of a longer chain."""
    inner = set()
    for node in walk(root):
        if isinstance(node, Operation) and node.level in _CHAIN_LEVELS:
            if _continues(node.left, node.level):
                inner.add(id(node.left))
            if id(node) not in inner:
                yield node


def _order_free(operands: list[Node], operators: list[str]) -> bool:
    """Three identical operands joined by one commutative operator: (x*x)*x == x*(x*x)."""
    return (len(operands) == 3 and len(set(operators)) == 1 and operators[0] in ("+", "*")
            and len({getattr(o, "key", None) or id(o) for o in operands}) == 1
            and all(getattr(o, "key", "") for o in operands))


def _has_floating_operation(operands: list[Node]) -> bool:
    current = operands[0].type
    for operand in operands[1:]:
        current = arithmetic_type(current, operand.type)
        if current.is_floating:
            return True
    return False


def plan(site: Site, text: str, options, spelling) -> tuple[list[Edit], list[Finding]]:
    edits: list[Edit] = []
    findings: list[Finding] = []
    for root in site.roots:
        for head in heads(root):
            operands, operators = chain_of(head)
            if len(operands) < 3:
                continue
            unknown = [o for o in operands if o.type.category is Category.UNKNOWN]
            if unknown:
                names = ", ".join(f"'{spelling.display(o.span)}'" for o in unknown[:3])
                findings.append(Finding(Span(operands[0].span.start, operands[-1].span.end), RULE,
                                        f"unresolved chain not edited: the type of {names} is unknown"))
                continue
            if not all(o.type.category in (Category.INTEGER, Category.REAL, Category.COMPLEX) for o in operands):
                continue
            if not _has_floating_operation(operands) or _order_free(operands, operators):
                continue
            edits.append(_pin_written_order(operands, spelling))
    return edits, findings


def _pin_written_order(operands: list[Node], spelling) -> Edit:
    span = Span(operands[0].span.start, operands[-1].span.end)
    changes = [TextChange(span.start, span.start, "(" * (len(operands) - 2))]
    changes += [TextChange(o.span.end, o.span.end, ")") for o in operands[1:-1]]
    before = spelling.display(span)
    after = spelling.display(span, changes)
    reason = (f"pins the written left-to-right order: {after}; unparenthesised, the compiler may "
              f"evaluate it in any mathematically equivalent order")
    return Edit(span, tuple(changes), RULE, BIT_FOR_BIT, reason, before, after)
