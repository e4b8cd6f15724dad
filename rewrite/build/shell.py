"""Option groups of a shell build script (``build.sh``, a ``#!/bin/sh`` file, ``configure.ac``):
flag assignments and compiler commands.

- Logical lines join lines ending in a backslash; a ``#`` at the start of a word, outside
  quotes, starts a comment; here-document bodies are skipped; a line splits into commands at
  ``;``, ``&&``, ``||``, ``|`` and ``&``.
- ``NAME=value`` (also after ``export``, ``local``, ``readonly``, ``declare``): a name holding
  ``FLAGS`` or ``OPT`` holds options, also inside ``${FFLAGS:-"-O0 -Wall"}``; ``FC``, ``CC``
  ... name a compiler. ``make FFLAGS=...`` and ``cmake -DCMAKE_Fortran_FLAGS=...`` count too.
- A command whose word is a compiler (``gfortran``, ``/opt/bin/ifx``) or a compiler variable
  (``$FC``, ``"${FC}"``, ``$fc`` assigned ``${FC:-gfortran}``) is read for options.
- Scope: the whole file. No branch tracking (``case``/``if`` on the compiler are not followed).
"""
from __future__ import annotations

import re

from .commands import (FamilyLists, Variables, command_families, default_families, is_c_var, is_compiler_var, is_flag_var,
                       name_wrappers, referenced, usage_families)
from .compilers import LAUNCHERS, UNKNOWN, family_of
from .tokens import (OptionGroup, Word, logical_lines, shell_comment, shell_word_end, split_commands,
                     words)

_KEYWORDS = frozenset("if then else elif fi do done while until for in ! time exec command nohup builtin "
                      "{ } ( ) case esac".split())
_ASSIGN = re.compile(r"(?:(?:export|local|readonly|declare|typeset)(?:[ \t]+-\w+)*[ \t]+)?"
                     r"([A-Za-z_]\w*)(\+?=)")
_HEREDOC = re.compile(r"<<-?[ \t]*(['\"]?)([A-Za-z_]\w*)\1")
_ARG_ASSIGN = re.compile(r"(-D)?([A-Za-z_]\w*)(?::\w+)?=")


def _segments(text: str):
    """(lo, hi) of each command, here-document bodies left out."""
    spans = logical_lines(text)
    i = 0
    while i < len(spans):
        lo, hi = spans[i]
        cut = shell_comment(text, lo, hi)
        yield from split_commands(text, lo, cut)
        heredoc = _HEREDOC.search(text, lo, cut)
        i += 1
        if heredoc:
            delimiter = heredoc.group(2)
            while i < len(spans) and text[spans[i][0]:spans[i][1]].strip() != delimiter:
                i += 1
            i += 1


def _skip_space(text: str, i: int, hi: int) -> int:
    while i < hi and text[i] in " \t\r\n\\":
        i += 1
    return i


def _parse(text: str, lo: int, hi: int):
    """(assignments, command word, argument spans) of one command."""
    assignments = []
    i = _skip_space(text, lo, hi)
    while i < hi:
        end = shell_word_end(text, i, hi)
        word = text[i:end]
        if word in _KEYWORDS or word in LAUNCHERS:
            i = _skip_space(text, end, hi)
            continue
        m = _ASSIGN.match(text, i, hi)
        if m and m.start() == i:
            value_end = shell_word_end(text, m.end(), hi)
            assignments.append((m.group(1), m.end(), value_end))
            i = _skip_space(text, value_end, hi)
            continue
        break
    if i >= hi:
        return assignments, None, []
    end = shell_word_end(text, i, hi)
    command = words(text, i, end)
    args = []
    j = _skip_space(text, end, hi)
    while j < hi:
        k = shell_word_end(text, j, hi)
        if k == j:
            k += 1
        args.append((j, k))
        j = _skip_space(text, k, hi)
    return assignments, (command[0] if command else None), args


def groups(text: str) -> list[OptionGroup]:
    parsed = [(lo, hi, *_parse(text, lo, hi)) for lo, hi in _segments(text)]
    variables = Variables()
    seen = FamilyLists()
    fortran, c_families, note = seen.fortran, seen.c, seen.note

    for _lo, _hi, assignments, command, args in parsed:
        for name, a, b in assignments:
            variables.add(name, text[a:b])
        for a, b in args:
            m = _ARG_ASSIGN.match(text, a, b)
            if m and is_compiler_var(m.group(2)):
                variables.add(m.group(2), text[m.end():b])
    for _lo, _hi, assignments, command, args in parsed:
        for name, _a, _b in assignments:
            if is_compiler_var(name):
                note(variables.families(name), c=is_c_var(name))
        if command is not None:
            family = family_of(command.text)
            if family:
                note((family,), c=False)

    uses: dict[str, list[str]] = {}
    for _lo, _hi, assignments, command, args in parsed:
        if command is None:
            continue
        families, _ = command_families(command, variables)
        for a, b in args if families else ():
            for name in referenced(text[a:b]):
                uses.setdefault(name, []).extend(f for f in families if f not in uses.get(name, []))
    reach = usage_families(uses, variables)

    def defaults(name: str) -> tuple[str, ...]:
        return default_families(name, reach, c_families, fortran)

    out: list[OptionGroup] = []

    def assignment(name: str, a: int, b: int) -> None:
        ws = words(text, a, b)
        if is_compiler_var(name):
            if ws:
                family = family_of(ws[0].text)
                out.append(OptionGroup(tuple(ws[1:]), (family,) if family else defaults(name),
                                       invoker=ws[0] if family else None, invoker_family=family,
                                       assumed=_assumed(ws[0], family)))
        elif is_flag_var(name):
            out.append(OptionGroup(tuple(ws), defaults(name)))

    for _lo, _hi, assignments, command, args in parsed:
        for name, a, b in assignments:
            assignment(name, a, b)
        if command is None:
            continue
        families, literal = command_families(command, variables)
        if families:
            if not literal and families == (UNKNOWN,):
                families = defaults("FFLAGS")
            ws = [w for a, b in args for w in words(text, a, b)]
            family = families[0] if literal else None
            out.append(OptionGroup(tuple(ws), families, invoker=command if literal else None,
                                   invoker_family=family, assumed=_assumed(command, family)))
            continue
        for a, b in args:  # make FFLAGS=..., cmake -DCMAKE_Fortran_FLAGS=...
            m = _ARG_ASSIGN.match(text, a, b)
            if m:
                assignment(m.group(2), m.end(), b)
    return name_wrappers(out, variables)


def _assumed(word: Word, family: str | None) -> str:
    return word.text.rsplit("/", 1)[-1] if family == UNKNOWN else ""
