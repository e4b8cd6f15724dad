"""Unified diff of a result, accepted by ``git apply`` (and ``patch -p1``).

Before each file's diff comes a summary block of ``#`` lines (which ``git apply`` skips as
commentary) listing the number of edits per effect and every answer-changing edit by line, so a
reviewer cannot miss one.
"""
from __future__ import annotations

import difflib
import re

from ..edits import ANSWER_CHANGING, BIT_FOR_BIT
from .paths import shown

_NO_NEWLINE = "\\ No newline at end of file\n"


_LINE = re.compile(r"[^\n]*\n|[^\n]+\Z")


def _lines(text: str) -> list[str]:
    """Lines as git and patch see them: ended by LF only (a form feed or a lone CR is not an end)."""
    return _LINE.findall(text)


def _emit(line: str, prefix: str) -> list[str]:
    if line.endswith("\n"):
        return [prefix + line]
    return [prefix + line + "\n", _NO_NEWLINE]


def _range(start: int, count: int) -> str:
    if count == 1:
        return f"{start + 1}"
    return f"{start + 1 if count else start},{count}"


def unified_diff(old: str, new: str, path: str, context: int = 3) -> str:
    old_lines, new_lines = _lines(old), _lines(new)
    matcher = difflib.SequenceMatcher(None, old_lines, new_lines, autojunk=False)
    out: list[str] = []
    for group in matcher.get_grouped_opcodes(context):
        first, last = group[0], group[-1]
        out.append(f"@@ -{_range(first[1], last[2] - first[1])} +{_range(first[3], last[4] - first[3])} @@\n")
        for tag, i1, i2, j1, j2 in group:
            if tag == "equal":
                for line in old_lines[i1:i2]:
                    out.extend(_emit(line, " "))
                continue
            for line in old_lines[i1:i2]:
                out.extend(_emit(line, "-"))
            for line in new_lines[j1:j2]:
                out.extend(_emit(line, "+"))
    if not out:
        return ""
    name = shown(path)
    return f"--- a/{name}\n+++ b/{name}\n" + "".join(out)


def summary(result) -> str:
    name = shown(result.path)
    counts = {effect: sum(1 for e in result.edits if e.effect == effect) for effect in (BIT_FOR_BIT, ANSWER_CHANGING)}
    lines = [f"# samebits: {name}: {len(result.edits)} edit(s): {counts[BIT_FOR_BIT]} {BIT_FOR_BIT}, "
             f"{counts[ANSWER_CHANGING]} {ANSWER_CHANGING}\n"]
    for edit in result.edits:
        if edit.effect == ANSWER_CHANGING:
            lines.append(f"# ANSWER-CHANGING {name}:{edit.line}: {edit.rule}: {edit.reason}\n")
    return "".join(lines)


def result_diff(result) -> str:
    body = unified_diff(result.original, result.text, result.path)
    return summary(result) + body if body else ""
