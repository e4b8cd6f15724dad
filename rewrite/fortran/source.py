"""Free-form Fortran source text as logical statements with a character map.

A logical statement joins continuation lines (``&`` at either end), drops comments and the
comment lines between continuations, and is split at ``;``. For every character of the joined
text, ``offsets`` gives its offset in the file text, so that edits computed on tokens land at
exact places of the original. Preprocessor lines (``#`` in column 1) are masked; a statement
that a directive interrupts is marked so the front end can refuse it.
"""
from __future__ import annotations

from dataclasses import dataclass

FREE_FORM_SUFFIXES = (".f90", ".f95", ".f03", ".f08", ".F90", ".F95", ".F03", ".F08")
FIXED_FORM_SUFFIXES = (".f", ".for", ".ftn", ".f77", ".F", ".FOR", ".FTN", ".F77")


@dataclass(frozen=True)
class Statement:
    text: str
    offsets: tuple[int, ...]
    line: int
    end_line: int
    interrupted: bool  # a preprocessor line sits inside it


@dataclass(frozen=True)
class SourceProblem:
    line: int
    message: str


@dataclass(frozen=True)
class Line:
    start: int  # offset of the first character in the file text
    text: str  # without the line ending
    number: int


def physical_lines(text: str) -> list[Line]:
    lines = []
    start = 0
    number = 1
    length = len(text)
    while start < length:
        end = text.find("\n", start)
        if end < 0:
            end = length
            stop = length
        else:
            stop = end + 1
        body_end = end - 1 if end > start and text[end - 1] == "\r" and end < length else end
        if end == length and body_end > start and text[body_end - 1:body_end] == "\r":
            body_end -= 1
        lines.append(Line(start, text[start:body_end], number))
        start = stop
        number += 1
    return lines


def line_starts(text: str) -> list[int]:
    starts = [0]
    index = text.find("\n")
    while index >= 0:
        starts.append(index + 1)
        index = text.find("\n", index + 1)
    return starts


def code_length(line: str, quote: str | None = None) -> tuple[int, str | None]:
    """Length of the code part of a line (up to a comment, trailing blanks dropped) and the
    quote state at its end (a string continued with ``&``)."""
    index = 0
    last = 0
    while index < len(line):
        char = line[index]
        if quote:
            if char == quote:
                if index + 1 < len(line) and line[index + 1] == quote:
                    index += 1
                else:
                    quote = None
            last = index + 1
        elif char == "!":
            break
        elif char in "'\"":
            quote = char
            last = index + 1
        elif not char.isspace():
            last = index + 1
        index += 1
    return last, quote


def logical_statements(text: str) -> tuple[list[Statement], list[SourceProblem]]:
    """Split free-form source into logical statements."""
    statements: list[Statement] = []
    problems: list[SourceProblem] = []
    chars: list[str] = []
    offsets: list[int] = []
    first_line = 0
    interrupted = False
    continuing = False
    quote: str | None = None
    last_line = 0

    def emit(end_line: int) -> None:
        nonlocal chars, offsets, interrupted
        joined = "".join(chars)
        if joined.strip():
            lead = len(joined) - len(joined.lstrip())
            tail = len(joined.rstrip())
            statements.append(
                Statement(joined[lead:tail], tuple(offsets[lead:tail]), first_line, end_line, interrupted)
            )
        chars, offsets, interrupted = [], [], False

    for line in physical_lines(text):
        body = line.text
        last_line = line.number
        stripped = body.lstrip()
        if body.startswith("#"):
            if continuing:
                interrupted = True
            continue
        index = 0
        if continuing:
            if not stripped or (stripped.startswith("!") and quote is None):
                continue
            lead = len(body) - len(stripped)
            index = lead + 1 if stripped.startswith("&") else 0
        else:
            if not stripped or stripped.startswith("!"):
                continue
            if body.startswith("\ufeff"):
                index = 1
            first_line = line.number
        continuing = False
        while index < len(body):
            char = body[index]
            if quote:
                if char == quote:
                    if index + 1 < len(body) and body[index + 1] == quote:
                        chars.extend((char, char))
                        offsets.extend((line.start + index, line.start + index + 1))
                        index += 2
                        continue
                    quote = None
                elif char == "&" and not body[index + 1:].strip():
                    continuing = True
                    break
                chars.append(char)
                offsets.append(line.start + index)
            elif char == "!":
                break
            elif char == "&" and (not body[index + 1:].strip() or body[index + 1:].lstrip().startswith("!")):
                continuing = True
                break
            elif char == ";":
                emit(line.number)
                first_line = line.number
            else:
                if char in "'\"":
                    quote = char
                chars.append(char)
                offsets.append(line.start + index)
            index += 1
        if not continuing:
            if quote:
                problems.append(SourceProblem(line.number, "character literal is not closed on this line"))
                quote = None
            emit(line.number)
    if continuing:
        problems.append(SourceProblem(last_line, "file ends inside a continued statement"))
        emit(last_line)
    return statements, problems
