"""From option groups to findings: the flag table applied to what a build-file reader found.

Per scope and compiler family the audit first collects the tags every option sets
(``-ffp-contract=off`` sets ``no-fma``), then reports each option unit once, under the most
severe rule that applies to it; a compiler's default rule (ifx without ``-fp-model``) is
reported at the word that names the compiler.
"""
from __future__ import annotations

from dataclasses import dataclass

from .compilers import UNKNOWN, rules_family
from .flags import DEFAULTS, NOTE, SEVERITY_RANK, VECTOR, effective_severity, match, units
from .tokens import LineIndex, OptionGroup


@dataclass(frozen=True)
class BuildFinding:
    """One option that breaks reproducibility.

    ``start``/``end``: character offsets of the option in the text (an option and its separate
    argument count as one: ``-fp-model fast``); ``option``: the option as written (for JSON and
    TOML basic strings, as decoded); ``message``: ``<option>: <what it risks>; fix: <fix>``;
    ``compiler``: the family whose rules applied (``gnu``, ``flang``, ``intel``, ``nvidia``,
    ``cray``, ``nag``, or ``unknown`` for GCC rules applied to an unnamed compiler); ``rule``:
    the table key; ``source``: the translation unit (compile_commands.json entries)."""

    start: int
    end: int
    option: str
    severity: str
    message: str
    compiler: str
    rule: str = ""
    line: int = 0
    column: int = 0
    source: str = ""


class BuildFileError(ValueError):
    """The text cannot be read as the kind of build file its name says (malformed JSON or TOML,
    binary content). ``line`` is 1-based."""

    def __init__(self, line: int, message: str):
        super().__init__(f"line {line}: {message}")
        self.line = line
        self.message = message


def read_guarded(reader, text: str):
    """``reader(text)``, with a nesting too deep for the parser reported as a BuildFileError."""
    try:
        return reader(text)
    except RecursionError:
        raise BuildFileError(1, "nested too deeply to read") from None


def _note(group: OptionGroup, family: str) -> str:
    if family != UNKNOWN:
        return ""
    if group.assumed:
        return f" ({group.assumed} does not say which compiler it runs: GCC rules applied)"
    return " (no compiler named here: GCC rules applied)"


def _message(option: str, risk: str, fix: str, severity_note: bool) -> str:
    prefix = "if the code calls sin/exp/log/pow in loops, " if severity_note else ""
    return f"{option}: {prefix}{risk}; fix: {fix}"


def audit(text: str, groups: list[OptionGroup], libm_in_loops: bool | None = None) -> list[BuildFinding]:
    """Findings for the option groups a reader found in ``text``, sorted by offset."""
    tags: dict[tuple[str, str], set] = {}
    grouped_units = []
    for group in groups:
        group_units = units(group.words)
        grouped_units.append(group_units)
        for family in group.families:
            bucket = tags.setdefault((group.scope, rules_family(family)), set())
            for unit in group_units:
                for rule in match(unit.text, family):
                    bucket |= rule.tags
    index = LineIndex(text)
    seen = set()
    out: list[BuildFinding] = []

    def emit(start, end, option, rule, severity, family, group, risk_note):
        key = (start, end, rule.key)
        if key in seen:
            return
        seen.add(key)
        line, column = index.line_col(start)
        vector_note = rule.kind == VECTOR and severity == NOTE
        out.append(BuildFinding(start, end, option, severity,
                                _message(option, rule.risk + risk_note, rule.fix, vector_note), family,
                                rule.key, line, column, group.source))

    for group, group_units in zip(groups, grouped_units):
        for unit in group_units:
            best = None
            for family in group.families:
                scope_tags = tags.get((group.scope, rules_family(family)), set())
                for rule in match(unit.text, family):
                    severity = effective_severity(rule, scope_tags, libm_in_loops)
                    if severity and (best is None or SEVERITY_RANK[severity] > SEVERITY_RANK[best[1]]):
                        best = (rule, severity, family)
            if best:
                rule, severity, family = best
                option = text[unit.start:unit.end] if _plain(text, unit) else unit.text
                emit(unit.start, unit.end, option, rule, severity, family, group, _note(group, family))
        if group.invoker is not None and group.invoker_family:
            rule = DEFAULTS.get(rules_family(group.invoker_family))
            if rule and rule.families[0] == group.invoker_family:
                scope_tags = tags.get((group.scope, group.invoker_family), set())
                severity = effective_severity(rule, scope_tags, libm_in_loops)
                if severity:
                    word = group.invoker
                    emit(word.start, word.end, word.text, rule, severity, group.invoker_family, group, "")
    out.sort(key=lambda f: (f.start, f.end, f.rule))
    return out


def _plain(text: str, unit) -> bool:
    """Whether the unit stands in the text as written (no quoting or escapes between its parts)."""
    written = text[unit.start:unit.end]
    if len(unit.words) == 1:
        return written == unit.words[0].text
    return written.replace(";", " ").split() == [w.text for w in unit.words]
