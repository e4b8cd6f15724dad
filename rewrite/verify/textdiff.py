"""Text-level checks of a rewrite that only inserts parentheses."""

from __future__ import annotations

import re
from dataclasses import dataclass

__all__ = [
    "Insertions",
    "classify_insertions",
    "inserted_characters",
    "join_continuations",
    "parenthesis_insertions",
]


def inserted_characters(original: str, rewritten: str, allowed: str) -> list[int] | None:
    """Positions in ``rewritten`` of characters inserted into ``original``.

    Returns ``None`` unless ``rewritten`` is ``original`` with only
    characters from ``allowed`` inserted (nothing deleted, nothing changed).

    Greedy (earliest) matching is enough: if some embedding of ``original``
    exists whose unmatched characters are all allowed, the earliest one also
    exists, and each character it leaves unmatched is either unmatched in
    that embedding too or equal to a character that embedding left
    unmatched, so allowed as well.
    """
    i = 0
    inserted: list[int] = []
    n = len(original)
    for j, ch in enumerate(rewritten):
        if i < n and ch == original[i]:
            i += 1
        elif ch in allowed:
            inserted.append(j)
        else:
            return None
    return inserted if i == n else None


def parenthesis_insertions(original: str, rewritten: str) -> list[int] | None:
    """Like :func:`inserted_characters` with ``(`` and ``)`` allowed."""
    return inserted_characters(original, rewritten, "()")


#: A free-form continuation break as a rewrite may insert it when an edit
#: pushes a line past the line limit: ``&``, end of line, indentation and an
#: optional leading ``&`` (Fortran 2018 6.3.2.4).
_BREAK = re.compile(r"[ \t]*&[ \t]*\r?\n[ \t]*&?[ \t]*")


@dataclass(frozen=True)
class Insertions:
    """What a rewrite inserted: parentheses, and continuation breaks."""

    parens: tuple[int, ...]  # positions in the rewritten text
    breaks: tuple[str, ...]  # each inserted break, as text


def classify_insertions(original: str, rewritten: str) -> Insertions | None:
    """Parentheses and continuation breaks inserted into ``original``, or None.

    ``None`` when ``rewritten`` is not ``original`` with only parentheses and
    whole continuation breaks (``&`` newline indentation) inserted: any
    deleted or changed character, or inserted whitespace that is not part
    of a break, is refused.
    """
    ins = inserted_characters(original, rewritten, "()&\r\n \t")
    if ins is None:
        return None
    runs: list[list[int]] = []
    for j in ins:
        if runs and runs[-1][-1] == j - 1:
            runs[-1].append(j)
        else:
            runs.append([j])
    breaks = []
    for run in runs:
        rest = "".join(rewritten[j] for j in run if rewritten[j] not in "()")
        if not rest:
            continue
        if not _BREAK.fullmatch(rest):
            return None
        breaks.append(rest)
    parens = tuple(j for j in ins if rewritten[j] in "()")
    return Insertions(parens, tuple(breaks))


def join_continuations(text: str) -> str:
    """Join free-form continued lines (no comments or strings across breaks)."""
    return re.sub(r"&[ \t]*\r?\n[ \t]*&?", "", text)
