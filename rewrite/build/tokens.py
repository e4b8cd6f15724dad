"""Words of build-file text with exact offsets: the one tokenizer every build-file reader uses.

A ``Word`` is a run of characters between separators (white space, quotes, shell operators,
backslashes); its ``start``/``end`` are offsets into the file's text, so ``text[start:end]`` is
the word as written. Strings that a file format decodes (JSON, TOML basic strings) are split in
decoded form and mapped back through a per-character offset table (``Decoded``).

An ``OptionGroup`` is what a reader hands to the audit: the words of one flag assignment or one
compiler command, the compiler families whose rules apply, and the scope inside which one
option can neutralise another (``-ffp-contract=off`` clears ``-march=native``).
"""
from __future__ import annotations

import bisect
from dataclasses import dataclass

SEPARATORS = frozenset(" \t\r\n\f\v\"'`;|&<>\\")


@dataclass(frozen=True)
class Word:
    text: str
    start: int
    end: int


@dataclass(frozen=True)
class Decoded:
    """A string as a format decodes it, with the text offset of each decoded character."""

    value: str
    offsets: tuple[int, ...]
    stop: int  # text offset just after the last decoded character's source (escapes included)

    def end_of(self, k: int) -> int:
        """Text offset just after the source of decoded character ``k``."""
        return self.offsets[k + 1] if k + 1 < len(self.offsets) else self.stop

    def words(self, separators=SEPARATORS) -> list[Word]:
        out = []
        for word in words(self.value, 0, len(self.value), separators):
            out.append(Word(word.text, self.offsets[word.start], self.end_of(word.end - 1)))
        return out


@dataclass(frozen=True)
class OptionGroup:
    """The words of one flag assignment or compiler command.

    ``families``: compiler families whose rules apply (``unknown`` means GCC rules, said so in
    each message); ``scope``: findings that depend on other options (FMA-capable targets, the
    Intel default model) look at every group of the same scope; ``invoker``: the literal
    compiler word when this group names the compiler itself (``FC = ifx``, ``ifx -c a.f90``);
    ``source``: the translation unit, for compile_commands.json entries; ``assumed``: why the
    family is unknown (``mpif90``), for the message."""

    words: tuple[Word, ...]
    families: tuple[str, ...]
    scope: str = "file"
    invoker: Word | None = None
    invoker_family: str | None = None
    source: str = ""
    assumed: str = ""


def words(text: str, lo: int = 0, hi: int | None = None, separators=SEPARATORS) -> list[Word]:
    """Split ``text[lo:hi]`` into words at separator characters."""
    hi = len(text) if hi is None else hi
    out: list[Word] = []
    start = None
    for i in range(lo, hi):
        if text[i] in separators:
            if start is not None:
                out.append(Word(text[start:i], start, i))
                start = None
        elif start is None:
            start = i
    if start is not None:
        out.append(Word(text[start:hi], start, hi))
    return out


def logical_lines(text: str) -> list[tuple[int, int]]:
    """(start, end) of each logical line: physical lines joined where a line ends in an odd
    number of backslashes (before an optional CR). ``end`` excludes the newline."""
    out = []
    start = 0
    n = len(text)
    i = 0
    while i <= n:
        newline = text.find("\n", i)
        if newline < 0:
            if start < n:
                out.append((start, n))
            break
        stop = newline - 1 if newline > 0 and text[newline - 1] == "\r" else newline
        if _escaped(text, stop, start):
            i = newline + 1  # continued
            continue
        out.append((start, stop))
        start = i = newline + 1
    return out


def _escaped(text: str, i: int, lo: int) -> bool:
    """True when an odd number of backslashes (not before ``lo``) stands just before ``i``."""
    j = i - 1
    while j >= lo and text[j] == "\\":
        j -= 1
    return (i - 1 - j) % 2 == 1


def make_comment(text: str, lo: int, hi: int) -> int:
    """Offset where a make comment starts in ``text[lo:hi]`` (``hi`` when there is none): the first
    ``#`` not escaped by a backslash (make knows no quotes)."""
    i = text.find("#", lo, hi)
    while i >= 0:
        if not _escaped(text, i, lo):
            return i
        i = text.find("#", i + 1, hi)
    return hi


def _unquoted(text: str, lo: int, hi: int):
    """Offsets of the characters of ``text[lo:hi]`` outside shell quotes and not escaped by a
    backslash (a quote character itself counts as inside)."""
    quote = None
    i = lo
    while i < hi:
        c = text[i]
        if quote:
            if c == "\\" and quote == '"':
                i += 2
                continue
            if c == quote:
                quote = None
        elif c == "\\":
            i += 2
            continue
        elif c in "\"'":
            quote = c
        else:
            yield i
        i += 1


def shell_comment(text: str, lo: int, hi: int) -> int:
    """Offset where a shell comment starts: a ``#`` at the start of a word, outside quotes."""
    for i in _unquoted(text, lo, hi):
        if text[i] == "#" and (i == lo or text[i - 1] in " \t\r\n;&|("):
            return i
    return hi


def split_commands(text: str, lo: int, hi: int) -> list[tuple[int, int]]:
    """Split a shell line at unquoted ``;``, ``&&``, ``||``, ``|`` and ``&``."""
    out = []
    depth = 0
    start = lo
    for i in _unquoted(text, lo, hi):
        c = text[i]
        if i < start:
            continue  # the rest of a ``&&`` or ``||``
        if c == "{" and i > lo and text[i - 1] == "$":
            depth += 1
        elif c == "}" and depth:
            depth -= 1
        elif c in ";&|" and not depth:
            out.append((start, i))
            while i + 1 < hi and text[i + 1] in ";&|":
                i += 1
            start = i + 1
    out.append((start, hi))
    return [(a, b) for a, b in out if text[a:b].strip()]


def shell_word_end(text: str, i: int, hi: int) -> int:
    """End of the shell word that starts at ``i``: quotes, ``${...}`` and ``$(...)`` included."""
    depth = 0
    for i in _unquoted(text, i, hi):
        c = text[i]
        if c in "{(" and i > 0 and text[i - 1] == "$":
            depth += 1
        elif c in "})" and depth:
            depth -= 1
        elif c in " \t\r\n;&|" and not depth:
            return i
    return hi


class LineIndex:
    """1-based line and column of text offsets."""

    def __init__(self, text: str):
        self.starts = [0] + [i + 1 for i, c in enumerate(text) if c == "\n"]

    def line_col(self, offset: int) -> tuple[int, int]:
        line = bisect.bisect_right(self.starts, offset)
        return line, offset - self.starts[line - 1] + 1
