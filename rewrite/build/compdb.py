"""Option groups of a compilation database (``compile_commands.json``).

The JSON Compilation Database Format Specification (Clang documentation) defines a JSON array
of command objects, each with ``directory``, ``file``, and either ``arguments`` (the argv as a
list of strings) or ``command`` (one string, shell-quoted with ``"`` and ``\\`` as the only
special characters), optionally ``output``. Each entry is one compiler command and its own
scope; its ``file`` is the finding's ``source``. ``json`` checks the document first (malformed
JSON raises ``BuildFileError``); a small reader then finds where each string stands.
"""
from __future__ import annotations

import json
import re

from .audit import BuildFileError, read_guarded
from .compilers import LAUNCHERS, UNKNOWN, family_of
from .tokens import Decoded, OptionGroup, Word

_LITERAL = re.compile(r"-?\d+(?:\.\d+)?(?:[eE][-+]?\d+)?|true|false|null")
_ESCAPES = {'"': '"', "\\": "\\", "/": "/", "b": "\b", "f": "\f", "n": "\n", "r": "\r", "t": "\t"}


class _Reader:
    def __init__(self, text: str):
        self.text = text
        self.n = len(text)

    def skip(self, i: int) -> int:
        while i < self.n and self.text[i] in " \t\r\n":
            i += 1
        return i

    def string(self, i: int) -> tuple[Decoded, int]:
        t = self.text
        j = i + 1
        chars: list[str] = []
        offsets: list[int] = []
        while j < self.n and t[j] != '"':
            if t[j] == "\\":
                code = t[j + 1] if j + 1 < self.n else ""
                if code == "u":
                    value = int(t[j + 2:j + 6], 16)
                    width = 6
                    if 0xD800 <= value < 0xDC00 and t.startswith("\\u", j + 6):  # surrogate pair
                        low = int(t[j + 8:j + 12], 16)
                        value = 0x10000 + ((value - 0xD800) << 10) + (low - 0xDC00)
                        width = 12
                    chars.append(chr(value))
                    offsets.append(j)
                    j += width
                    continue
                chars.append(_ESCAPES.get(code, code))
                offsets.append(j)
                j += 2
                continue
            chars.append(t[j])
            offsets.append(j)
            j += 1
        return Decoded("".join(chars), tuple(offsets), j), j + 1

    def value(self, i: int):
        t = self.text
        i = self.skip(i)
        c = t[i]
        if c == '"':
            return self.string(i)
        if c == "{":
            out = {}
            i = self.skip(i + 1)
            while t[i] != "}":
                key, i = self.string(i)
                i = self.skip(i)
                value, i = self.value(i + 1)  # past ':'
                out[key.value] = value
                i = self.skip(i)
                if t[i] == ",":
                    i = self.skip(i + 1)
            return out, i + 1
        if c == "[":
            items = []
            i = self.skip(i + 1)
            while t[i] != "]":
                value, i = self.value(i)
                items.append(value)
                i = self.skip(i)
                if t[i] == ",":
                    i = self.skip(i + 1)
            return items, i + 1
        m = _LITERAL.match(t, i)
        return None, m.end()


def parse(text: str):
    try:
        data = json.loads(text)
    except json.JSONDecodeError as error:
        raise BuildFileError(error.lineno, f"malformed JSON: {error.msg}") from None
    if not isinstance(data, list):
        raise BuildFileError(1, "a compilation database is a JSON array of command objects")
    return _Reader(text).value(0)[0]


def _argv(entry: dict) -> list[Word]:
    arguments = entry.get("arguments")
    if isinstance(arguments, list):
        out = []
        for item in arguments:
            if isinstance(item, Decoded) and item.value:
                out.append(Word(item.value, item.offsets[0], item.stop))
        return out
    command = entry.get("command")
    if isinstance(command, Decoded):
        return command.words()
    return []


def groups(text: str) -> list[OptionGroup]:
    return read_guarded(_groups, text)


def _groups(text: str) -> list[OptionGroup]:
    out: list[OptionGroup] = []
    for index, entry in enumerate(parse(text)):
        if not isinstance(entry, dict):
            continue
        argv = _argv(entry)
        while argv and argv[0].text.rsplit("/", 1)[-1] in LAUNCHERS:
            argv = argv[1:]
        if not argv:
            continue
        family = family_of(argv[0].text)
        source = entry.get("file")
        out.append(OptionGroup(tuple(argv[1:]), (family or UNKNOWN,), scope=f"entry {index}",
                               invoker=argv[0] if family and family != UNKNOWN else None,
                               invoker_family=family if family != UNKNOWN else None,
                               source=source.value if isinstance(source, Decoded) else "",
                               assumed=argv[0].text.rsplit("/", 1)[-1] if family in (None, UNKNOWN) else ""))
    return out
