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

from ..edits import ANSWER_CHANGING, BIT_FOR_BIT, Edit, Finding, TextChange
from ..ir import Category, Level, Node, Operand, Operation, Site, Span, arithmetic_type, walk
from . import orders

RULE = "chain"
_CHAIN_LEVELS = (Level.ADDITIVE, Level.MULTIPLICATIVE)


def _continues(node: Node, level: Level) -> bool:
    return isinstance(node, Operation) and node.level is level and not node.parenthesised


def chain_of(head: Operation) -> tuple[list[Node], list[str], list[Span | None]]:
    """Operands, operators and operator spans of the chain whose last operation is ``head``."""
    operands: list[Node] = []
    operators: list[str] = []
    operator_spans: list[Span | None] = []
    node: Node = head
    while isinstance(node, Operation) and node.level is head.level and (node is head or not node.parenthesised):
        operands.append(node.right)
        operators.append(node.operator)
        operator_spans.append(node.operator_span)
        node = node.left
    operands.append(node)
    operands.reverse()
    operators.reverse()
    operator_spans.reverse()
    return operands, operators, operator_spans


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
            operands, operators, operator_spans = chain_of(head)
            if len(operands) < 3:
                continue
            if any(o.type.category is Category.CHARACTER for o in operands):
                continue  # a string join ("run_" + name + ".nc"), whatever the other operands are
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
            edit, finding = _order(operands, operators, operator_spans, options, spelling)
            edits.extend([edit] if edit else [])
            findings.extend([finding] if finding else [])
    return edits, findings



def _changes(tree, operands, operators, operator_spans) -> list[TextChange] | None:
    shape = orders.layout(tree, operators)
    changes = [TextChange(operands[a].span.start, operands[a].span.start, "(") for a, _b in shape.groups]
    changes += [TextChange(operands[b].span.end, operands[b].span.end, ")") for _a, b in shape.groups]
    for index, (old, new) in enumerate(zip(operators, shape.operators)):
        if old != new:
            span = operator_spans[index]
            if span is None:
                return None
            changes.append(TextChange(span.start, span.end, new))
    return changes


def _base_name(node: Node) -> str | None:
    """The array or component a term refers to, without subscripts (h(k) and h(k+1): h)."""
    if isinstance(node, Operand) and node.form == "element":
        return node.key.split("(")[0]
    return None


def _cancelling_tree(operands, operators):
    """Written order, except that adjacent terms of the same array or component joined by a
    subtraction are combined first (h(k) - h(k+1)). None when there is no such pair."""
    sign = orders.signs(operators)
    groups: list[list[int]] = []
    index = 0
    found = False
    while index < len(operands):
        if index + 1 < len(operands) and sign[index] * sign[index + 1] < 0:
            left, right = _base_name(operands[index]), _base_name(operands[index + 1])
            if left is not None and left == right and operands[index].key != operands[index + 1].key:
                groups.append([index, index + 1])
                index += 2
                found = True
                continue
        groups.append([index])
        index += 1
    if not found:
        return None
    tree = None
    for group in groups:
        item = group[0] if len(group) == 1 else (group[0], group[1])
        tree = item if tree is None else (tree, item)
    return tree


def _columns(operands, options) -> list[dict] | None:
    columns = []
    for operand in operands:
        key = getattr(operand, "key", None)
        sample = options.samples.get(key) if key else None
        if sample is None and isinstance(operand, Operand) and operand.form == "literal":
            try:
                sample = {"samples": [float(key.split("_")[0].replace("d", "e"))]}
            except ValueError:
                return None
        if sample is None:
            return None
        columns.append(sample)
    return columns


def _order(operands, operators, operator_spans, options, spelling):
    count = len(operands)
    span = Span(operands[0].span.start, operands[-1].span.end)
    before = spelling.display(span)
    order = options.chain_order
    tree = orders.written(count)
    detail = ""
    if order == "balanced":
        tree = orders.balanced(count)
        detail = (f"balanced (pairwise) order: the error bound grows with log2 of the {count} terms instead "
                  f"of their number")
    elif order == "accurate":
        kind = "+" if operators[0] in ("+", "-") else "*"
        columns = _columns(operands, options)
        if columns is not None:
            rows = orders.sample_rows(columns, 200 if count <= 6 else 64)
            tree, best, first = orders.most_accurate(count, rows, operators, kind)
            detail = (f"accurate order from the value samples: worst error {best:.3g} ulp against "
                      f"{first:.3g} ulp for the written order (exact rational reference, {len(rows)} rows)")
        else:
            cancelling = _cancelling_tree(operands, operators) if kind == "+" else None
            if cancelling is not None:
                tree = cancelling
                detail = "accurate order: terms of the same array that are likely to cancel are combined first"
    changes = _changes(tree, operands, operators, operator_spans)
    if changes is None:
        return None, Finding(span, RULE, f"{before}: the {order} order needs an operator change this front end "
                                         "cannot place: left as it is")
    after = spelling.display(span, changes)
    if tree == orders.written(count):
        reason = f"pins the written left-to-right order: {after}; {spelling.order_note}"
        if detail:
            reason += f"; {detail}"
        elif order == "accurate":
            reason += "; accurate order: no samples and no cancelling terms, so the written order is kept"
        return Edit(span, tuple(changes), RULE, BIT_FOR_BIT, reason, before, after), None
    reason = f"{before} -> {after}: {detail}; answer-changing: not the order the language defines"
    return Edit(span, tuple(changes), RULE, ANSWER_CHANGING, reason, before, after), None
