"""The reduction rule: sums whose result depends on the order become runtime calls.

An intrinsic ``sum`` has no defined order: gfortran's result changes with -Ofast and with every
permutation or chunking of the data, and ``dot_product`` likewise. The runtime's ``exact_sum``
and ``exact_dot`` return the exact value rounded once, the same whatever the order, the
chunking or the number of processes. That is not what any build computed before, so the edit is
answer-changing. Only the function's name is replaced: the arguments stay byte for byte.
"""
from __future__ import annotations

from dataclasses import dataclass

from ..edits import ANSWER_CHANGING, Edit, Finding, TextChange
from ..ir import Category, Operand, Site, walk

RULE = "sum"


@dataclass(frozen=True)
class Replacement:
    runtime: str  # the runtime function called instead
    arrays: int  # how many leading arguments are the summed arrays
    keywords: frozenset  # argument keywords the runtime accepts (None: positional)
    positional: int  # at most this many positional arguments
    what: str  # for the reason


# neutral function names from the front ends -> the runtime call that replaces them
REPLACEMENTS = {
    "sum": Replacement("exact_sum", 1, frozenset({None, "array", "dim", "mask"}), 3, "the sum intrinsic has no defined order: its bits change with flags, "
                       "permutation and chunking"),
    "dot_product": Replacement("exact_dot", 2, frozenset({None, "vector_a", "vector_b"}), 2,
                               "the dot_product intrinsic has no defined order: its bits change with flags, permutation "
                               "and chunking"),
    "array_sum": Replacement("exact_sum", 1, frozenset({None, "a", "axis"}), 2, "an array sum adds in an order "
                             "that follows the library's blocking and the memory layout: permuting, transposing or "
                             "chunking the data changes its bits"),
    "array_mean": Replacement("exact_mean", 1, frozenset({None, "a", "axis"}), 2, "an array mean sums in an "
                              "order that follows the library's blocking and the memory layout: permuting, "
                              "transposing or chunking the data changes its bits"),
    "add_reduce": Replacement("exact_reduce", 1, frozenset({None, "array", "axis"}), 2, "an add reduction sums in "
                              "an order that follows the library's blocking and the memory layout: permuting or "
                              "chunking the data changes its bits"),
    "iterable_sum": Replacement("exact_sum", 1, frozenset({None}), 1, "a sum of an iterable adds "
                                "left to right, so its bits change with the order of the items"),
}


def _has_dim(node: Operand) -> bool:
    """True when a sum call passes DIM (keyword, or an integer second positional argument)."""
    if "dim" in node.keywords:
        return True
    positional = [part for part, keyword in zip(node.parts, node.keywords) if keyword is None]
    return len(positional) >= 2 and positional[1].type.category is Category.INTEGER


def _changes(node: Operand, runtime: str) -> tuple[TextChange, ...]:
    """Only the function's name is replaced; a method call ``a.sum(...)`` becomes ``runtime(a, ...)``."""
    if not node.method:
        return (TextChange(node.function_span.start, node.function_span.end, runtime),)
    receiver = node.parts[0]
    rest = ", " if len(node.parts) > 1 else ""
    # order 2: inside any chain parenthesis (0) or guard (1) that opens at the same offset
    return (TextChange(receiver.span.start, receiver.span.start, f"{runtime}(", order=2),
            TextChange(node.function_span.start, node.function_span.end, rest))


def plan(site: Site, text: str, options, spelling) -> tuple[list[Edit], list[Finding]]:
    edits: list[Edit] = []
    findings: list[Finding] = []
    for root in site.roots:
        for node in walk(root):
            if not isinstance(node, Operand) or node.function not in REPLACEMENTS or not node.parts:
                continue
            replacement = REPLACEMENTS[node.function]
            runtime = replacement.runtime
            shown = spelling.display(node.span)
            arrays = node.parts[:replacement.arrays]
            categories = {a.type.category for a in arrays}
            if Category.UNKNOWN in categories:
                findings.append(Finding(node.span, RULE, f"{shown}: the type of its array is unknown: not rewritten"))
                continue
            if categories != {Category.REAL}:
                continue  # integer sums are exact already; complex ones have no runtime yet
            if not set(node.keywords) <= replacement.keywords or \
                    sum(1 for k in node.keywords if k is None) > replacement.positional:
                findings.append(Finding(node.span, RULE, f"{shown}: an argument the runtime's {runtime} does not "
                                        "take: not rewritten"))
                continue
            if node.function == "sum" and _has_dim(node) and spelling.sum_dim_ranks is not None and \
                    getattr(node.parts[0], "rank", 0) not in spelling.sum_dim_ranks:
                ranks = " and ".join(str(r) for r in spelling.sum_dim_ranks)
                findings.append(Finding(node.span, RULE, f"{shown}: the runtime's exact_sum takes dim for whole "
                                        f"arrays of rank {ranks} only: not rewritten"))
                continue
            if site.anchor is None or node.function_span is None or runtime not in spelling.runtime_functions:
                findings.append(Finding(node.span, RULE, f"{shown}: no place for the runtime import in this unit: "
                                        "not rewritten"))
                continue
            changes = _changes(node, runtime)
            after = spelling.display(node.span, changes)
            mean = " divided by the count" if runtime == "exact_mean" else ""
            reason = (f"{shown} -> {after}: {replacement.what}; {runtime} returns the exact sum rounded once"
                      f"{mean}, the same for any order, chunking or process count")
            edits.append(Edit(node.span, changes, RULE, ANSWER_CHANGING, reason, shown, after, requires=(runtime,)))
    return edits, findings
