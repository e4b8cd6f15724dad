"""Option groups of a Makefile (``Makefile``, ``*.mk``): flag variable assignments, compiler
variable assignments and recipe lines that run a compiler.

- Logical lines join physical lines ending in a backslash; a ``#`` not escaped by a backslash
  starts a comment (recipe lines: a ``#`` at the start of a shell word).
- Assignments: ``VAR = ...``, ``:=``, ``::=``, ``?=``, ``+=``, ``!=``, with ``override``,
  ``export``, ``private`` and target-specific forms (``a.o: FFLAGS += -O0``). A variable whose
  name holds ``FLAGS`` or ``OPT`` holds options; ``FC``, ``F90``, ``CC`` ... name the compiler
  (its first word), and options after it count too (``FC = ifx -fp-model precise``).
- Recipe lines (a leading tab) are shell commands; one whose command word is a compiler, or a
  compiler variable (``$(FC)``), is read for options.
- ``ifeq``/``else``/``endif`` blocks whose condition names one compiler (``ifeq ($(FC),ifx)``)
  apply that compiler's rules inside; elsewhere the compilers the file names apply (C flag
  variables take the C compilers'), or GCC's when it names none.
- Scope: the whole file (an ``-ffp-contract=off`` anywhere clears an FMA-capable target).
"""
from __future__ import annotations

import re

from .commands import (FamilyLists, Variables, command_families, condition_families, default_families, is_c_var,
                       is_compiler_var, is_flag_var, name_wrappers, referenced, usage_families)
from .compilers import UNKNOWN, family_of
from .tokens import OptionGroup, Word, logical_lines, make_comment, shell_comment, split_commands, words

_ASSIGN = re.compile(
    r"[ \t]*(?:[^:=#\t\n][^:=#\n]*?:(?![:=])[ \t]*)?(?:(?:override|export|private|unexport)[ \t]+)*"
    r"(?P<name>[A-Za-z_][\w.-]*)[ \t]*(?P<op>:::=|::=|:=|\?=|\+=|!=|=)")
_CONDITIONAL = re.compile(r"[ \t]*(ifeq|ifneq|ifdef|ifndef|else|endif)\b")


def _lines(text: str):
    """(kind, lo, hi, match) per logical line: recipe, assign, conditional or other."""
    for lo, hi in logical_lines(text):
        if text.startswith("\t", lo):
            cut = shell_comment(text, lo + 1, hi)
            yield "recipe", lo + 1, cut, None
            continue
        cut = make_comment(text, lo, hi)
        m = _CONDITIONAL.match(text, lo, cut)
        if m:
            yield "conditional", lo, cut, m
            continue
        m = _ASSIGN.match(text, lo, cut)
        if m:
            yield "assign", m.end(), cut, m
        else:
            yield "other", lo, cut, None


class _Branches:
    """Families of the ifeq/else/endif blocks around a line."""

    def __init__(self):
        self.stack: list[tuple[str, ...]] = []

    def feed(self, text: str, m: re.Match, hi: int) -> None:
        keyword = m.group(1)
        rest = text[m.end():hi]
        if keyword.startswith("if"):
            self.stack.append(condition_families(keyword + rest) if keyword == "ifeq" else ())
        elif keyword == "else" and self.stack:
            inner = re.match(r"\s*(ifeq|ifneq|ifdef|ifndef)\b(.*)", rest)
            self.stack[-1] = condition_families(inner.group(1) + inner.group(2)) \
                if inner and inner.group(1) == "ifeq" else ()
        elif keyword == "endif" and self.stack:
            self.stack.pop()

    def current(self) -> tuple[str, ...]:
        for families in reversed(self.stack):
            if families:
                return families
        return ()


def groups(text: str) -> list[OptionGroup]:
    lines = list(_lines(text))
    variables = Variables()
    seen = FamilyLists()
    fortran, c_families, note = seen.fortran, seen.c, seen.note

    for kind, lo, hi, m in lines:
        if kind == "assign":
            value = text[lo:hi]
            variables.add(m.group("name"), value)
    for kind, lo, hi, m in lines:
        if kind == "assign" and is_compiler_var(m.group("name")):
            note(variables.families(m.group("name")), c=is_c_var(m.group("name")))
        elif kind == "recipe":
            for a, b in split_commands(text, lo, hi):
                ws = words(text, a, b)
                if ws:
                    family = family_of(ws[0].text.lstrip("@+-"))
                    if family:
                        note((family,))

    uses: dict[str, list[str]] = {}
    for kind, lo, hi, m in lines:
        if kind == "recipe":
            for a, b in split_commands(text, lo, hi):
                ws = words(text, a, b)
                if not ws:
                    continue
                first = Word(ws[0].text.lstrip("@+-"), ws[0].start, ws[0].end)
                families, _ = command_families(first, variables)
                for name in referenced(text[ws[0].end:b]) if families else ():
                    uses.setdefault(name, []).extend(f for f in families if f not in uses.get(name, []))
    reach = usage_families(uses, variables)

    def defaults(name: str) -> tuple[str, ...]:
        return default_families(name, reach, c_families, fortran)

    out: list[OptionGroup] = []
    branches = _Branches()
    for kind, lo, hi, m in lines:
        if kind == "conditional":
            branches.feed(text, m, hi)
            continue
        if kind == "assign":
            name = m.group("name")
            ws = words(text, lo, hi)
            if is_compiler_var(name):
                if not ws:
                    continue
                family = family_of(ws[0].text)
                families = branches.current() or ((family,) if family else (variables.families(name) or defaults(name)))
                out.append(OptionGroup(tuple(ws[1:]), families, invoker=ws[0] if family else None,
                                       invoker_family=family, assumed=_assumed(ws[0], family)))
            elif is_flag_var(name):
                out.append(OptionGroup(tuple(ws), branches.current() or defaults(name)))
        elif kind == "recipe":
            for a, b in split_commands(text, lo, hi):
                group = _command(text, a, b, variables, branches.current(), defaults("FFLAGS"))
                if group:
                    out.append(group)
    return name_wrappers(out, variables)


def _assumed(word: Word, family: str | None) -> str:
    return word.text.rsplit("/", 1)[-1] if family == UNKNOWN else ""


def _command(text: str, lo: int, hi: int, variables: Variables, branch, fallback) -> OptionGroup | None:
    ws = words(text, lo, hi)
    while ws and ws[0].text.strip("@+-") == "":
        ws = ws[1:]
    if not ws:
        return None
    first = ws[0]
    stripped = first.text.lstrip("@+-")
    if stripped != first.text:
        first = Word(stripped, first.end - len(stripped), first.end)
    families, literal = command_families(first, variables)
    if not families:
        return None
    if not literal and families == (UNKNOWN,) and fallback != (UNKNOWN,):
        families = fallback
    family = families[0] if literal else None
    return OptionGroup(tuple(ws[1:]), branch or families, invoker=first if literal else None,
                       invoker_family=family, assumed=_assumed(first, family))
