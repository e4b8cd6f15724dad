"""Check lines, ``file:line:col: rule: effect: reason``, and problem lines ``file:line: message``."""
from __future__ import annotations

from .paths import shown  # noqa: F401  (re-exported for the CLI)


def problem_lines(result) -> list[str]:
    name = shown(result.path)
    lines = [f"{name}:{p.line}: {p.message}" if p.line else f"{name}: {p.message}" for p in result.problems]
    if result.notice:
        lines.append(f"{name}: {result.notice}")
    return lines


def check_lines(result) -> list[str]:
    """Proposals and findings of one file, in the order of the source."""
    name = shown(result.path)
    rows = [((e.line, e.column, 0), f"{name}:{e.line}:{e.column}: {e.rule}: {e.effect}: {e.reason}")
            for e in result.edits]
    rows += [((f.line, f.column, 1), f"{name}:{f.line}:{f.column}: {f.rule}: {f.severity}: {f.message}")
             for f in result.findings]
    return [text for _key, text in sorted(rows, key=lambda row: row[0])]
