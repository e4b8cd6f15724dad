"""Where each string of a TOML document stands in its text: key paths with spans and decoded
strings with per-character offsets.

``tomllib`` says whether the document is valid and what it means, but not where things are; this
reader walks the same text (already validated) and records, for every string value, its key path
(table headers, dotted keys, inline tables; array items by index) and a ``Decoded`` string that
maps each decoded character to its offset (escapes of basic strings included).
"""
from __future__ import annotations

import re
from dataclasses import dataclass

from .tokens import Decoded

_BARE = re.compile(r"[A-Za-z0-9_-]+")
_ESCAPES = {"b": "\b", "t": "\t", "n": "\n", "f": "\f", "r": "\r", '"': '"', "\\": "\\", "e": "\x1b"}


@dataclass(frozen=True)
class Key:
    text: str
    start: int
    end: int


class _Reader:
    def __init__(self, text: str):
        self.text = text
        self.n = len(text)
        self.found: list[tuple[tuple[Key, ...], Decoded]] = []

    def skip(self, i: int, newlines: bool = True) -> int:
        t = self.text
        while i < self.n:
            c = t[i]
            if c in " \t" or (newlines and c in "\r\n"):
                i += 1
            elif c == "#" and newlines:
                newline = t.find("\n", i)
                i = self.n if newline < 0 else newline
            else:
                break
        return i

    def key(self, i: int) -> tuple[list[Key], int]:
        parts = []
        while True:
            i = self.skip(i, newlines=False)
            t = self.text
            if i < self.n and t[i] in "\"'":
                decoded, end = self.string(i)
                parts.append(Key(decoded.value, i, end))
                i = end
            else:
                m = _BARE.match(t, i)
                if not m:
                    break
                parts.append(Key(m.group(0), m.start(), m.end()))
                i = m.end()
            j = self.skip(i, newlines=False)
            if j < self.n and t[j] == ".":
                i = j + 1
                continue
            return parts, j
        return parts, i

    def string(self, i: int) -> tuple[Decoded, int]:
        t = self.text
        if t.startswith('"""', i) or t.startswith("'''", i):
            return self._multi(i)
        quote = t[i]
        j = i + 1
        chars: list[str] = []
        offsets: list[int] = []
        while j < self.n and t[j] != quote:
            if quote == '"' and t[j] == "\\":
                j = self._escape(j, chars, offsets)
                continue
            chars.append(t[j])
            offsets.append(j)
            j += 1
        return Decoded("".join(chars), tuple(offsets), j), min(j + 1, self.n)

    def _escape(self, j: int, chars: list, offsets: list) -> int:
        t = self.text
        code = t[j + 1] if j + 1 < self.n else ""
        if code in _ESCAPES:
            chars.append(_ESCAPES[code])
            offsets.append(j)
            return j + 2
        if code in ("u", "U"):
            width = 4 if code == "u" else 8
            try:
                chars.append(chr(int(t[j + 2:j + 2 + width], 16)))
            except ValueError:
                chars.append("?")
            offsets.append(j)
            return j + 2 + width
        if code == "x":  # TOML 1.1
            try:
                chars.append(chr(int(t[j + 2:j + 4], 16)))
            except ValueError:
                chars.append("?")
            offsets.append(j)
            return j + 4
        # line-ending backslash of a multi-line basic string: trims white space and newlines
        k = j + 1
        while k < self.n and t[k] in " \t\r\n":
            k += 1
        return k

    def _multi(self, i: int) -> tuple[Decoded, int]:
        t = self.text
        delimiter = t[i:i + 3]
        j = i + 3
        if t.startswith("\r\n", j):
            j += 2
        elif t.startswith("\n", j):
            j += 1
        chars: list[str] = []
        offsets: list[int] = []
        while j < self.n:
            if t.startswith(delimiter, j):
                run = 3
                while j + run < self.n and t[j + run] == delimiter[0] and run < 5:
                    run += 1
                for k in range(run - 3):  # up to two quotes before the closing ones are content
                    chars.append(delimiter[0])
                    offsets.append(j + k)
                return Decoded("".join(chars), tuple(offsets), j + run - 3), j + run
            if delimiter == '"""' and t[j] == "\\":
                j = self._escape(j, chars, offsets)
                continue
            chars.append(t[j])
            offsets.append(j)
            j += 1
        return Decoded("".join(chars), tuple(offsets), self.n), self.n

    def value(self, i: int, path: tuple[Key, ...]) -> int:
        t = self.text
        i = self.skip(i, newlines=False)
        if i >= self.n:
            return i
        c = t[i]
        if c in "\"'":
            decoded, end = self.string(i)
            self.found.append((path, decoded))
            return end
        if c == "{":
            i += 1
            while True:
                i = self.skip(i)
                if i >= self.n or t[i] == "}":
                    return i + 1
                keys, i = self.key(i)
                if i < self.n and t[i] == "=":
                    i = self.value(i + 1, path + tuple(keys))
                i = self.skip(i)
                if i < self.n and t[i] == ",":
                    i += 1
                elif not keys:
                    i += 1
        if c == "[":
            i += 1
            index = 0
            while True:
                i = self.skip(i)
                if i >= self.n or t[i] == "]":
                    return i + 1
                start = i
                i = self.value(i, path + (Key(str(index), i, i),))
                index += 1
                i = self.skip(i)
                if i < self.n and t[i] == ",":
                    i += 1
                elif i == start:
                    i += 1
        m = re.compile(r"[^,\]}\n#]*").match(t, i)
        return max(m.end(), i + 1)

    def read(self) -> list[tuple[tuple[Key, ...], Decoded]]:
        t = self.text
        table: tuple[Key, ...] = ()
        i = 0
        while True:
            i = self.skip(i)
            if i >= self.n:
                return self.found
            if t[i] == "[":
                double = t.startswith("[[", i)
                keys, i = self.key(i + (2 if double else 1))
                table = tuple(keys)
                end = t.find("\n", i)
                i = self.n if end < 0 else end
                continue
            keys, i = self.key(i)
            if keys and i < self.n and t[i] == "=":
                i = self.value(i + 1, table + tuple(keys))
            else:
                end = t.find("\n", i)
                i = self.n if end < 0 else end + 1


def strings(text: str) -> list[tuple[tuple[Key, ...], Decoded]]:
    """Every string value of a valid TOML document with its key path."""
    return _Reader(text).read()
