"""Tokens of one logical Fortran statement, each with its place in the statement text."""
from __future__ import annotations

import re
from dataclasses import dataclass


@dataclass(frozen=True)
class Token:
    kind: str  # name int real string boz logical dotop op ( ) [ ] (/ /) , = => % : :: label
    text: str
    start: int  # index into the statement text
    end: int

    @property
    def lower(self) -> str:
        return self.text.lower()


class LexError(Exception):
    def __init__(self, message: str, position: int):
        super().__init__(message)
        self.position = position


_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_]*")
_DOTWORD = re.compile(r"\.([A-Za-z]+)\.")
_NUMBER = re.compile(
    r"(?:\d+\.\d*|\.\d+|\d+)(?:[eEdDqQ][+-]?\d+)?(?:_(?:[A-Za-z][A-Za-z0-9_]*|\d+))?"
)
_DIGITS = re.compile(r"\d+")
_KIND = re.compile(r"_(?:[A-Za-z][A-Za-z0-9_]*|\d+)")
_OPERATORS = ("**", "//", "/=", "==", "=>", "<=", ">=", "::")
_SINGLE = "*/+-=<>(),%:[]"


def _string_end(text: str, start: int) -> int:
    quote = text[start]
    index = start + 1
    while index < len(text):
        if text[index] == quote:
            if index + 1 < len(text) and text[index + 1] == quote:
                index += 2
                continue
            return index + 1
        index += 1
    raise LexError("character literal is not closed", start)


def _number(text: str, start: int) -> tuple[str, int]:
    """A numeric literal; '1.eq.2' is 1 .eq. 2, not the real 1. followed by 'eq'."""
    digits = _DIGITS.match(text, start)
    if digits and digits.end() < len(text) and text[digits.end()] == ".":
        word = _DOTWORD.match(text, digits.end())
        if word and not re.fullmatch(r"[eEdDqQ]\d*", word.group(1)):
            end = digits.end()
            kind = _KIND.match(text, end)
            return "int", (kind.end() if kind else end)
    match = _NUMBER.match(text, start)
    literal = match.group(0)
    body = literal.split("_")[0]
    kind = "real" if ("." in body or re.search(r"[eEdDqQ]", body)) else "int"
    return kind, match.end()


def tokenize(text: str) -> list[Token]:
    tokens: list[Token] = []
    index = 0
    length = len(text)
    constructor_depth = 0
    while index < length:
        char = text[index]
        if char.isspace() or char == "\ufeff":
            index += 1
            continue
        start = index
        if char.isalpha():
            match = _NAME.match(text, index)
            end = match.end()
            if end < length and text[end] in "'\"":
                word = match.group(0).lower()
                if word in ("b", "o", "z"):
                    end = _string_end(text, end)
                    tokens.append(Token("boz", text[start:end], start, end))
                    index = end
                    continue
                if word.endswith("_"):
                    end = _string_end(text, end)
                    tokens.append(Token("string", text[start:end], start, end))
                    index = end
                    continue
            tokens.append(Token("name", text[start:end], start, end))
            index = end
            continue
        if char.isdigit() or (char == "." and index + 1 < length and text[index + 1].isdigit()):
            kind, end = _number(text, index)
            if kind == "int" and end < length and text[end] in "'\"" and text[end - 1] == "_":
                end = _string_end(text, end)
                kind = "string"
            tokens.append(Token(kind, text[start:end], start, end))
            index = end
            continue
        if char in "'\"":
            end = _string_end(text, index)
            tokens.append(Token("string", text[start:end], start, end))
            index = end
            continue
        if char == ".":
            match = _DOTWORD.match(text, index)
            if not match:
                raise LexError("unexpected '.'", index)
            end = match.end()
            word = match.group(1).lower()
            if word in ("true", "false"):
                kind = _KIND.match(text, end)
                if kind:
                    end = kind.end()
                tokens.append(Token("logical", text[start:end], start, end))
            else:
                tokens.append(Token("dotop", text[start:end], start, end))
            index = end
            continue
        if text.startswith("(/", index) and not text[index + 2:].lstrip().startswith(")"):
            constructor_depth += 1
            tokens.append(Token("(/", "(/", start, index + 2))
            index += 2
            continue
        if constructor_depth and text.startswith("/)", index):
            constructor_depth -= 1
            tokens.append(Token("/)", "/)", start, index + 2))
            index += 2
            continue
        pair = text[index:index + 2]
        if pair in _OPERATORS:
            kind = pair if pair in ("=>", "::") else "op"
            tokens.append(Token(kind, pair, start, index + 2))
            index += 2
            continue
        if char in _SINGLE:
            kind = "op" if char in "*/+-<>" else char
            tokens.append(Token(kind, char, start, index + 1))
            index += 1
            continue
        raise LexError(f"unexpected character {char!r}", index)
    return tokens
