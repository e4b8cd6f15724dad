"""The part of a file that libcst has to see.

In a file with candidates, most top-level functions and classes usually hold none. Those are
cut down to their header (decorators, signature, return annotation) with ``...`` as the body,
which keeps every name the module binds and every return annotation the types use, and the
rest of the file goes to libcst as written, except for a byte-order mark and form feeds in
indentation, which libcst cannot keep. ``Outline.text`` is that shortened text and
``Outline.original_offset`` maps its offsets back to offsets of the file, so spans stay exact.
A file whose statements all hold candidates (and has neither) is not changed at all.
"""
from __future__ import annotations

import ast
import bisect
import re
from dataclasses import dataclass

_NEWLINE = re.compile(r"\r\n|\r|\n")  # the line breaks ast counts (a form feed is not one)


def line_starts(text: str) -> list[int]:
    """Offsets where the physical lines begin, as ast numbers them (line n starts at [n - 1])."""
    return [0] + [match.end() for match in _NEWLINE.finditer(text)]


@dataclass(frozen=True)
class Piece:
    outline_start: int
    original_start: int
    length: int
    stub: bool = False  # text only the outline has (a stub body): all of it maps to original_start


class Outline:
    def __init__(self, text: str, pieces: list[Piece]):
        self.text = text
        self.pieces = pieces
        self._starts = [piece.outline_start for piece in pieces]

    @property
    def shortened(self) -> bool:
        """False when the outline is the file itself (offsets need no mapping)."""
        return len(self.pieces) > 1 or self.pieces[0].original_start != 0

    def original_offset(self, offset: int, end: bool = False) -> int:
        """The file offset of an outline offset; ``end`` for the end of a span, which may sit
        just after the last character of a piece."""
        index = bisect.bisect_left(self._starts, offset) - 1 if end else bisect.bisect_right(self._starts, offset) - 1
        index = max(index, 0)
        piece = self.pieces[index]
        if piece.stub:
            return piece.original_start  # where the file goes on after the cut-down definition
        return piece.original_start + min(offset - piece.outline_start, piece.length)


def whole(text: str) -> Outline:
    """The outline that is the file itself."""
    return Outline(text, [Piece(0, 0, len(text))])


def _first_line(statement: ast.stmt) -> int:
    return min([statement.lineno] + [decorator.lineno for decorator in getattr(statement, "decorator_list", ())])


def _leading_form_feeds(text: str, starts: list[int]) -> list[int]:
    """Offsets of form feeds in the indentation of a line, which libcst drops from its code."""
    found = []
    for start in starts:
        position = start
        while position < len(text) and text[position] in " \t\x0c":
            if text[position] == "\x0c":
                found.append(position)
            position += 1
    return found


def outline(text: str, tree: ast.Module, flagged: set[int]) -> Outline:
    """The text libcst needs: the top-level function and class definitions whose index is not in
    ``flagged`` are cut down to their header, a byte-order mark and the form feeds in a line's
    indentation (which libcst would drop, shifting every later position) are left out; every
    other character is kept as written. ``tree`` is ast's tree of the text without its BOM."""
    starts = line_starts(text)
    changes: list[tuple[int, int, str]] = []  # (start, end, outline text) in file offsets
    for index, statement in enumerate(tree.body):
        if index in flagged or not isinstance(statement, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
            continue
        body_line = statement.body[0].lineno
        end_line = statement.end_lineno or body_line
        if body_line <= statement.lineno or end_line >= len(starts) and not text.endswith(("\n", "\r")):
            continue  # one-line definitions, and a last line without a line break: keep as written
        if index + 1 < len(tree.body) and _first_line(tree.body[index + 1]) <= end_line:
            continue  # another statement on the last line (after a semicolon)
        newline = _NEWLINE.search(text, starts[body_line - 1]).group()
        drop_end = starts[end_line] if end_line < len(starts) else len(text)
        changes.append((starts[body_line - 1], drop_end, f" ...{newline}"))
    deletions = ([0] if text.startswith("\ufeff") else []) + _leading_form_feeds(text, starts)
    for offset in deletions:
        if not any(start <= offset < end for start, end, _ in changes):
            changes.append((offset, offset + 1, ""))
    if not changes:
        return whole(text)
    changes.sort()
    parts: list[str] = []
    pieces: list[Piece] = []
    position = 0  # in the file
    length = 0  # of the outline so far
    for start, end, new in changes:
        if start > position:
            pieces.append(Piece(length, position, start - position))
            parts.append(text[position:start])
            length += start - position
        if new:
            pieces.append(Piece(length, end, len(new), stub=True))
            parts.append(new)
            length += len(new)
        position = end
    pieces.append(Piece(length, position, len(text) - position))
    parts.append(text[position:])
    kept = [piece for piece in pieces if piece.length] or pieces[-1:]
    return Outline("".join(parts), kept)
