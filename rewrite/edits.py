"""Edits, findings and problems: what the planner proposes and how it lands on the text.

An ``Edit`` is one proposal a reviewer accepts or refuses as a whole (for example all the
parentheses that pin one chain); its ``changes`` are insertions or replacements at offsets of
the original text, so every byte outside them stays as it was.
"""
from __future__ import annotations

import bisect
from dataclasses import dataclass

from .ir import Span

BIT_FOR_BIT = "bit-for-bit"
ANSWER_CHANGING = "answer-changing"
EFFECTS = (BIT_FOR_BIT, ANSWER_CHANGING)


@dataclass(frozen=True)
class TextChange:
    """Replace ``start:end`` by ``text`` (an insertion when start == end). Insertions at one
    offset land in the order of ``order``: a guard that wraps a single operand opens after (+1)
    and closes before (-1) the parentheses of a chain that starts or ends with that operand, and
    the runtime call that replaces a method call (``a.sum()``) opens innermost (+2)."""

    start: int
    end: int
    text: str
    order: int = 0


@dataclass(frozen=True)
class Edit:
    span: Span
    changes: tuple[TextChange, ...]
    rule: str
    effect: str
    reason: str
    before: str = ""
    after: str = ""
    line: int = 0
    column: int = 0
    requires: tuple[str, ...] = ()  # runtime functions the new text calls


@dataclass(frozen=True)
class Finding:
    """Something reported and not edited."""

    span: Span
    rule: str
    message: str
    severity: str = "note"
    line: int = 0
    column: int = 0
    kind: str = ""  # what the audit found (libm, libm-loop, blas, fma, pow, build), for filters and reports


@dataclass(frozen=True)
class Problem:
    """An error that leaves the whole file untouched."""

    line: int
    message: str


class OverlapError(ValueError):
    pass


def _ordered(changes) -> list[TextChange]:
    ordered = sorted(changes, key=lambda c: (c.start, c.end, c.order))
    for first, second in zip(ordered, ordered[1:]):
        if second.start < first.end:
            raise OverlapError(f"changes overlap at offset {second.start}")
    return ordered


def apply_changes(text: str, changes) -> str:
    pieces = []
    position = 0
    for change in _ordered(changes):
        pieces.append(text[position:change.start])
        pieces.append(change.text)
        position = change.end
    pieces.append(text[position:])
    return "".join(pieces)


class Occupancy:
    """The places already taken by accepted edits, to refuse an edit that would overlap one.

    Insertions never collide with each other; a replacement collides with any change strictly
    inside it or overlapping it.
    """

    def __init__(self):
        self._replaced: list[tuple[int, int]] = []  # sorted, disjoint
        self._inserted: list[int] = []  # sorted offsets

    def _hits_replacement(self, start: int, end: int) -> bool:
        index = bisect.bisect_right(self._replaced, (start, float("inf"))) - 1
        for neighbour in self._replaced[max(index, 0):index + 2]:
            low, high = neighbour
            if start == end:
                if low < start < high:
                    return True
            elif start < high and low < end:
                return True
        return False

    def _hits_insertion(self, start: int, end: int) -> bool:
        index = bisect.bisect_right(self._inserted, start)
        return index < len(self._inserted) and self._inserted[index] < end

    def fits(self, edit: Edit) -> bool:
        for change in edit.changes:
            if self._hits_replacement(change.start, change.end):
                return False
            if change.start < change.end and self._hits_insertion(change.start, change.end):
                return False
        try:
            _ordered(edit.changes)
        except OverlapError:
            return False
        return True

    def take(self, edit: Edit) -> None:
        for change in edit.changes:
            if change.start == change.end:
                bisect.insort(self._inserted, change.start)
            else:
                bisect.insort(self._replaced, (change.start, change.end))
