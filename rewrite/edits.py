"""Edits, findings and problems: what the planner proposes and how it lands on the text.

An ``Edit`` is one proposal a reviewer accepts or refuses as a whole (for example all the
parentheses that pin one chain); its ``changes`` are insertions or replacements at offsets of
the original text, so every byte outside them stays as it was.
"""
from __future__ import annotations

from dataclasses import dataclass

from .ir import Span

BIT_FOR_BIT = "bit-for-bit"
ANSWER_CHANGING = "answer-changing"
EFFECTS = (BIT_FOR_BIT, ANSWER_CHANGING)


@dataclass(frozen=True)
class TextChange:
    start: int
    end: int
    text: str


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


@dataclass(frozen=True)
class Finding:
    """Something reported and not edited."""

    span: Span
    rule: str
    message: str
    severity: str = "note"
    line: int = 0
    column: int = 0


@dataclass(frozen=True)
class Problem:
    """An error that leaves the whole file untouched."""

    line: int
    message: str


class OverlapError(ValueError):
    pass


def _ordered(changes) -> list[TextChange]:
    ordered = sorted(changes, key=lambda c: (c.start, c.end))
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


def compatible(accepted: list[Edit], candidate: Edit) -> bool:
    """True when ``candidate`` can land beside the accepted edits (no overlapping replacement)."""
    try:
        _ordered([c for e in accepted for c in e.changes] + list(candidate.changes))
    except OverlapError:
        return False
    return True
