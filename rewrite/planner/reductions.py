"""The reduction rule: sums whose result depends on the order become runtime calls.

An intrinsic ``sum`` has no defined order: gfortran's result changes with -Ofast and with every
permutation or chunking of the data, and ``dot_product`` likewise. The runtime's ``exact_sum``
and ``exact_dot`` return the exact value rounded once, the same whatever the order, the
chunking or the number of processes. That is not what any build computed before, so the edit is
answer-changing. Only the function's name is replaced: the arguments stay byte for byte.
"""
from __future__ import annotations

from ..edits import ANSWER_CHANGING, Edit, Finding, TextChange
from ..ir import Category, Operand, Site, walk

RULE = "sum"
# standard function -> (runtime function, argument keywords the runtime accepts)
REPLACEMENTS = {
    "sum": ("exact_sum", {None, "array", "dim", "mask"}),
    "dot_product": ("exact_dot", {None, "vector_a", "vector_b"}),
}


def _has_dim(node: Operand) -> bool:
    """True when a sum call passes DIM (keyword, or an integer second positional argument)."""
    if "dim" in node.keywords:
        return True
    positional = [part for part, keyword in zip(node.parts, node.keywords) if keyword is None]
    return len(positional) >= 2 and positional[1].type.category is Category.INTEGER


def plan(site: Site, text: str, options, spelling) -> tuple[list[Edit], list[Finding]]:
    edits: list[Edit] = []
    findings: list[Finding] = []
    for root in site.roots:
        for node in walk(root):
            if not isinstance(node, Operand) or node.function not in REPLACEMENTS or not node.parts:
                continue
            runtime, keywords = REPLACEMENTS[node.function]
            arrays = node.parts[:2] if node.function == "dot_product" else node.parts[:1]
            categories = {a.type.category for a in arrays}
            if categories == {Category.UNKNOWN} or Category.UNKNOWN in categories:
                findings.append(Finding(node.span, RULE, f"{spelling.display(node.span)}: the type of its "
                                        "array is unknown: not rewritten"))
                continue
            if categories != {Category.REAL}:
                continue  # integer sums are exact already; complex ones have no runtime yet
            if not set(node.keywords) <= keywords:
                findings.append(Finding(node.span, RULE, f"{spelling.display(node.span)}: unexpected argument "
                                        "keyword: not rewritten"))
                continue
            if node.function == "sum" and _has_dim(node) and getattr(node.parts[0], "rank", 0) not in (2, 3):
                findings.append(Finding(node.span, RULE, f"{spelling.display(node.span)}: the runtime's exact_sum "
                                        "takes dim for whole arrays of rank 2 and 3 only: not rewritten"))
                continue
            if site.anchor is None or node.function_span is None:
                findings.append(Finding(node.span, RULE, f"{spelling.display(node.span)}: no place for the "
                                        "runtime import in this unit: not rewritten"))
                continue
            before = spelling.display(node.span)
            change = TextChange(node.function_span.start, node.function_span.end, runtime)
            after = spelling.display(node.span, (change,))
            reason = (f"{before} -> {after}: the {node.function} intrinsic has no defined order (its bits change "
                      f"with flags, permutation and chunking); {runtime} returns the exact value rounded once, "
                      f"the same for any order, chunking or process count")
            edits.append(Edit(node.span, (change,), RULE, ANSWER_CHANGING, reason, before, after,
                              requires=(runtime,)))
    return edits, findings
