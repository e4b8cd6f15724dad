"""Option groups of CMake files (``CMakeLists.txt``, ``*.cmake``).

- Commands are ``name(args)``: quoted arguments (``"-O3 -xHost"``), bracket arguments, unquoted
  arguments and nested parentheses; ``#`` line comments and ``#[[...]]`` bracket comments are
  skipped. Inside an argument, options are words separated by white space and ``;``.
- Read: ``set()`` of a variable whose name holds ``FLAGS`` (``CMAKE_Fortran_FLAGS``,
  ``CMAKE_Fortran_FLAGS_RELEASE``, ``*_INIT``; not the CACHE type and doc string),
  ``string(APPEND|PREPEND ...)`` and ``list(APPEND|PREPEND|INSERT ...)`` of such variables,
  ``add_compile_options``, ``add_link_options``, ``add_definitions``,
  ``target_compile_options``, ``target_link_options``, and the ``COMPILE_FLAGS``,
  ``COMPILE_OPTIONS``, ``LINK_FLAGS``, ``LINK_OPTIONS`` values of ``set_source_files_properties``,
  ``set_target_properties``, ``set_property`` and ``set_directory_properties``.
- Generator expressions are kept simple: ``$<$<CONFIG:Release>:-O3>`` yields ``-O3``, and
  ``$<$<Fortran_COMPILER_ID:Intel>:-fp-model=fast>`` applies Intel's rules to its options.
- Compilers: ``set(CMAKE_Fortran_COMPILER ifx)`` (any ``CMAKE_<LANG>_COMPILER``) names the
  compiler of the file; ``if()``/``elseif()`` conditions that name compilers
  (``CMAKE_Fortran_COMPILER_ID MATCHES "Intel"``) apply theirs inside the block, and the word
  that names them counts for compiler defaults (ifx without ``-fp-model``). Outside such blocks
  the compilers set in the file apply, or GCC's rules when none is set.
- Scope: the whole file.
"""
from __future__ import annotations

import re
from dataclasses import dataclass

from .commands import condition_families
from .compilers import CMAKE_IDS, UNKNOWN, families_in, family_of
from .tokens import SEPARATORS, OptionGroup, Word, words

_SEPARATORS = SEPARATORS | frozenset("()")
_PROPERTY_KEYS = frozenset("COMPILE_FLAGS COMPILE_OPTIONS LINK_FLAGS LINK_OPTIONS STATIC_LIBRARY_OPTIONS".split())
_OPTION_COMMANDS = frozenset("add_compile_options add_link_options add_definitions".split())
_TARGET_COMMANDS = frozenset("target_compile_options target_link_options".split())
_PROPERTY_COMMANDS = frozenset(
    "set_source_files_properties set_target_properties set_property set_directory_properties".split())
_BRACKET_OPEN = re.compile(r"\[(=*)\[")
_IDENT = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")


@dataclass(frozen=True)
class Arg:
    text: str  # the argument as written, quotes included
    start: int
    end: int
    quoted: bool

    @property
    def closed(self) -> bool:
        return len(self.text) >= 2 and self.text.endswith('"')

    @property
    def value(self) -> str:
        if not self.quoted:
            return self.text
        return self.text[1:-1] if self.closed else self.text[1:]

    @property
    def inner(self) -> tuple[int, int]:
        if not self.quoted:
            return self.start, self.end
        return self.start + 1, self.end - 1 if self.closed else self.end


@dataclass(frozen=True)
class Command:
    name: str
    start: int
    args: tuple[Arg, ...]


def _skip_bracket(text: str, i: int) -> int:
    """End of a bracket construct (``[==[ ... ]==]``) that opens at ``i``."""
    m = _BRACKET_OPEN.match(text, i)
    close = "]" + m.group(1) + "]"
    end = text.find(close, m.end())
    return len(text) if end < 0 else end + len(close)


def commands(text: str) -> list[Command]:
    """The command invocations of a CMake file, comments skipped."""
    out = []
    n = len(text)
    i = 0
    while i < n:
        c = text[i]
        if c == "#":
            if _BRACKET_OPEN.match(text, i + 1):
                i = _skip_bracket(text, i + 1)
            else:
                newline = text.find("\n", i)
                i = n if newline < 0 else newline
            continue
        m = _IDENT.match(text, i) if (c.isalpha() or c == "_") else None
        if m:
            j = m.end()
            while j < n and text[j] in " \t":
                j += 1
            if j < n and text[j] == "(":
                args, i = _arguments(text, j + 1)
                out.append(Command(m.group(0).lower(), m.start(), tuple(args)))
                continue
            i = m.end()
            continue
        if c == '"':
            i = _quoted_end(text, i)
            continue
        i += 1
    return out


def _quoted_end(text: str, i: int) -> int:
    j = i + 1
    while j < len(text):
        if text[j] == "\\":
            j += 2
            continue
        if text[j] == '"':
            return j + 1
        j += 1
    return len(text)


def _arguments(text: str, i: int) -> tuple[list[Arg], int]:
    args = []
    depth = 0
    n = len(text)
    while i < n:
        c = text[i]
        if c in " \t\r\n":
            i += 1
        elif c == "#":
            if _BRACKET_OPEN.match(text, i + 1):
                i = _skip_bracket(text, i + 1)
            else:
                newline = text.find("\n", i)
                i = n if newline < 0 else newline
        elif c == "(":
            depth += 1
            i += 1
        elif c == ")":
            i += 1
            if depth == 0:
                return args, i
            depth -= 1
        elif c == '"':
            end = _quoted_end(text, i)
            args.append(Arg(text[i:end], i, end, True))
            i = end
        elif c == "[" and _BRACKET_OPEN.match(text, i):
            end = _skip_bracket(text, i)
            args.append(Arg(text[i:end], i, end, False))
            i = end
        else:
            j = i
            while j < n and text[j] not in ' \t\r\n()#"':
                j += 2 if text[j] == "\\" else 1
            j = min(j, n)
            args.append(Arg(text[i:j], i, j, False))
            i = j
    return args, n


def _option_words(text: str, arg: Arg) -> list[Word]:
    lo, hi = arg.inner
    out = []
    for word in words(text, lo, hi, _SEPARATORS):
        # generator expressions: $<$<CONFIG:Release>:-O3> -> -O3
        k = word.text.find(":-")
        if word.text.startswith("$") or word.text.startswith(":"):
            if k < 0:
                continue
            word = Word(word.text[k + 1:], word.start + k + 1, word.end)
        out.append(word)
    return out


def _genex_families(arg: Arg) -> tuple[str, ...]:
    found: list[str] = []
    for ids in re.findall(r"COMPILER_ID:([^>]*)>", arg.text):
        for name in ids.split(","):
            family = CMAKE_IDS.get(name.strip().upper())
            if family and family not in found:
                found.append(family)
    return tuple(found)


def _flag_var(name: str) -> bool:
    return "FLAGS" in name.upper()


def _compiler_var(name: str) -> bool:
    return bool(re.fullmatch(r"CMAKE_\w+_COMPILER", name))


def _value_args(command: Command) -> list[Arg]:
    """The arguments of a command that hold options."""
    args = list(command.args)
    name = command.name
    if name == "set" and args and _flag_var(args[0].value):
        values = []
        for arg in args[1:]:
            if arg.value in ("CACHE", "PARENT_SCOPE"):
                break
            values.append(arg)
        return values
    if name in ("string", "list") and len(args) >= 2 and args[0].value in ("APPEND", "PREPEND", "INSERT") \
            and _flag_var(args[1].value):
        return args[2:] if args[0].value != "INSERT" else args[3:]
    if name in _OPTION_COMMANDS:
        return args
    if name in _TARGET_COMMANDS:
        return args[1:]
    if name in _PROPERTY_COMMANDS:
        values, taking = [], False
        for arg in args:
            if not arg.quoted and re.fullmatch(r"[A-Z_]+", arg.value):
                taking = arg.value in _PROPERTY_KEYS
                continue
            if taking:
                values.append(arg)
        return values
    return []


def groups(text: str) -> list[OptionGroup]:
    cmds = commands(text)
    file_families: list[str] = []
    for command in cmds:
        if command.name == "set" and len(command.args) >= 2 and _compiler_var(command.args[0].value):
            value = command.args[1].value.split()
            family = family_of(value[0]) if value else None
            if family and family not in file_families:
                file_families.append(family)
    fallback = tuple(file_families) or (UNKNOWN,)

    out: list[OptionGroup] = []
    stack: list[tuple[str, ...]] = []
    for command in cmds:
        name = command.name
        if name in ("if", "elseif"):
            condition = " ".join(a.value for a in command.args)
            families = condition_families(condition) if "COMPILER" in condition.upper() else ()
            if name == "if":
                stack.append(families)
            elif stack:
                stack[-1] = families
            if families:
                invoker = _condition_word(text, command, families)
                if invoker is not None:
                    out.append(OptionGroup((), families, invoker=invoker, invoker_family=families[0]))
            continue
        if name == "else":
            if stack:
                stack[-1] = ()
            continue
        if name == "endif":
            if stack:
                stack.pop()
            continue
        branch = next((f for f in reversed(stack) if f), ())
        if name == "set" and len(command.args) >= 2 and _compiler_var(command.args[0].value):
            ws = words(text, *command.args[1].inner, _SEPARATORS)
            family = family_of(ws[0].text) if ws else None
            if family:
                out.append(OptionGroup(tuple(ws[1:]), (family,), invoker=ws[0], invoker_family=family,
                                       assumed=ws[0].text if family == UNKNOWN else ""))
            continue
        pending: list = []  # consecutive arguments of one command form one group
        pending_families = None
        for arg in _value_args(command):
            families = _genex_families(arg) or branch or fallback
            if families != pending_families and pending:
                out.append(OptionGroup(tuple(pending), pending_families))
                pending = []
            pending_families = families
            pending.extend(_option_words(text, arg))
        if pending:
            out.append(OptionGroup(tuple(pending), pending_families))
    return out


def _condition_word(text: str, command: Command, families) -> Word | None:
    """The word of an if() condition that names the first family (``"Intel"``, ``ifx``)."""
    for arg in command.args:
        if families_in(arg.value)[:1] == families[:1] and "COMPILER" not in arg.value.upper():
            lo, hi = arg.inner
            for word in words(text, lo, hi, _SEPARATORS | frozenset("|")):
                if families_in(word.text)[:1] == families[:1]:
                    return word
    return None
