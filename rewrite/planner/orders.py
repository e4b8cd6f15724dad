"""Evaluation orders of a chain, as trees over its terms, and their measured accuracy.

A chain ``t0 op1 t1 op2 t2 ...`` is a list of terms with signs: ``+``/``*`` give +1,
``-``/``/`` give -1 (the inverse operation). An order is a binary tree over the terms in their
written sequence; written as text it keeps the terms in place, adds parentheses around every
inner group and flips the operators inside a group that a ``-`` or ``/`` opens
(``a + b - c - d`` balanced is ``(a + b) - (c + d)``). Orders are compared against exact
rational arithmetic (``fractions.Fraction``).
"""
from __future__ import annotations

import math
import random
from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache

INVERSE = {"+": "-", "-": "+", "*": "/", "/": "*"}
POSITIVE = {"+", "*"}

Tree = "int | tuple"  # a term index, or (left, right)


def signs(operators: list[str]) -> list[int]:
    return [1] + [1 if op in POSITIVE else -1 for op in operators]


def written(n: int, start: int = 0):
    tree = start
    for index in range(start + 1, start + n):
        tree = (tree, index)
    return tree


def balanced(n: int, start: int = 0):
    if n == 1:
        return start
    half = n // 2
    return (balanced(half, start), balanced(n - half, start + half))


@lru_cache(maxsize=None)
def _all_trees(start: int, stop: int) -> tuple:
    if stop - start == 1:
        return (start,)
    trees = []
    for split in range(start + 1, stop):
        for left in _all_trees(start, split):
            for right in _all_trees(split, stop):
                trees.append((left, right))
    return tuple(trees)


def all_trees(n: int) -> tuple:
    """Every bracketing of n terms in written order (Catalan(n-1) of them)."""
    return _all_trees(0, n)


def first(tree) -> int:
    while isinstance(tree, tuple):
        tree = tree[0]
    return tree


def last(tree) -> int:
    while isinstance(tree, tuple):
        tree = tree[1]
    return tree


@dataclass(frozen=True)
class Layout:
    """What an order changes in the text: parentheses around groups, operators to flip."""

    groups: tuple[tuple[int, int], ...]  # (first term, last term) of each parenthesised group
    operators: tuple[str, ...]  # the operator written before term j (index j-1)


def layout(tree, operators: list[str]) -> Layout:
    sign = signs(operators)
    groups: list[tuple[int, int]] = []
    written_ops = list(operators)

    def visit(node, top: bool) -> None:
        if not isinstance(node, tuple):
            return
        left, right = node
        if not top:
            groups.append((first(node), last(node)))
        head = first(node)
        split = first(right)
        relative = sign[split] * sign[head]
        kind = "+" if operators[split - 1] in ("+", "-") else "*"
        written_ops[split - 1] = kind if relative > 0 else INVERSE[kind]
        visit(left, False)
        visit(right, False)

    visit(tree, True)
    return Layout(tuple(groups), tuple(written_ops))


def evaluate(tree, values: list, operators: list[str], kind: str, arithmetic=None):
    """The chain's value in the given order; ``values`` are the terms' values.

    Each group's value is taken with the sign of its first term; the operator that joins a
    right group to its left is the relative sign of their first terms."""
    sign = signs(operators)
    add = kind == "+"

    def combine(a, b, positive):
        if arithmetic is not None:
            return arithmetic(a, b, ("+" if positive else "-") if add else ("*" if positive else "/"))
        if add:
            return a + b if positive else a - b
        return a * b if positive else a / b

    def visit(node):
        if not isinstance(node, tuple):
            return values[node]
        left, right = node
        relative = sign[first(right)] * sign[first(left)]
        return combine(visit(left), visit(right), relative > 0)

    return visit(tree)


def ulps(value: float, exact: Fraction) -> float:
    """|value - exact| in units in the last place of the exact value (binary64)."""
    if math.isnan(value) or math.isinf(value):
        return math.inf
    if exact == 0:
        return 0.0 if value == 0 else math.inf
    magnitude = abs(float(exact)) if abs(exact) < Fraction(2) ** 1024 else math.inf
    if magnitude == 0 or math.isinf(magnitude):
        return math.inf
    spacing = math.ulp(magnitude)
    return float(abs(Fraction(value) - exact) / Fraction(spacing))


def worst_error(tree, rows: list[list[float]], operators: list[str], kind: str, exacts=None) -> float:
    """The largest error, in ulps of the exact result, over the sample rows."""
    worst = 0.0
    exacts = exacts if exacts is not None else exact_values(rows, operators, kind)
    for row, exact in zip(rows, exacts):
        if exact is None:
            continue
        try:
            value = evaluate(tree, row, operators, kind)
        except (ZeroDivisionError, OverflowError):
            return math.inf
        worst = max(worst, ulps(value, exact))
    return worst


def exact_values(rows: list[list[float]], operators: list[str], kind: str) -> list[Fraction | None]:
    """The exact value of the chain for each row (the same for every order); None where a
    division by zero makes it undefined."""
    tree = written(len(operators) + 1)
    values = []
    for row in rows:
        try:
            values.append(evaluate(tree, [Fraction(v) for v in row], operators, kind))
        except (ZeroDivisionError, ValueError, OverflowError):
            values.append(None)
    return values


def sample_rows(columns: list[dict], count: int = 200, seed: int = 20261202) -> list[list[float]]:
    """Rows of values for the terms: each column is ``{"samples": [...]}`` (used in turn) or
    ``{"range": [low, high]}`` (drawn uniformly, deterministically)."""
    rng = random.Random(seed)
    rows = []
    for index in range(count):
        row = []
        for column in columns:
            if "samples" in column:
                values = column["samples"]
                row.append(float(values[index % len(values)]))
            else:
                low, high = column["range"]
                row.append(rng.uniform(float(low), float(high)))
        rows.append(row)
    return rows


def most_accurate(n: int, rows: list[list[float]], operators: list[str], kind: str):
    """(tree, its worst error, the written order's worst error): the bracketing in written
    order with the smallest worst error; ties keep the written order, then the balanced one."""
    exacts = exact_values(rows, operators, kind)
    candidates = [written(n), balanced(n)]
    if n <= 7:
        candidates += [t for t in all_trees(n) if t not in candidates]
    errors = [worst_error(t, rows, operators, kind, exacts) for t in candidates]
    best = min(range(len(candidates)), key=lambda i: (errors[i], i))
    return candidates[best], errors[best], errors[0]
