"""Specification statements read from tokens: type specifications, entity lists, IMPLICIT,
USE, and the other statements that give names a type or an attribute."""
from __future__ import annotations

from dataclasses import dataclass

from ..ir import Category, NumType
from .lexer import Token

_TYPE_WORDS = {
    "integer": Category.INTEGER, "real": Category.REAL, "complex": Category.COMPLEX,
    "logical": Category.LOGICAL, "character": Category.CHARACTER,
}
PROCEDURE_PREFIXES = {"pure", "elemental", "recursive", "impure", "module", "non_recursive"}


@dataclass(frozen=True)
class TypeSpec:
    type: NumType
    end: int  # index of the first token after the specification


@dataclass(frozen=True)
class Entity:
    name: str
    is_array: bool
    rank: int = 0  # 0: scalar or not known


def _rank(tokens: list[Token], open_index: int) -> int:
    """Rank of the array specification in parentheses at ``open_index``."""
    close = matching(tokens, open_index)
    return len(split_top_level(tokens, open_index + 1, close))


def matching(tokens: list[Token], index: int) -> int:
    """Index of the token closing the bracket at ``index`` (len(tokens) if unclosed)."""
    depth = 0
    for position in range(index, len(tokens)):
        kind = tokens[position].kind
        if kind in ("(", "(/", "["):
            depth += 1
        elif kind in (")", "/)", "]"):
            depth -= 1
            if depth == 0:
                return position
    return len(tokens)


def _kind_from_selector(tokens: list[Token], start: int, end: int, category: Category) -> str | None:
    """Kind text from the tokens inside ``( ... )`` of a type specification."""
    inner = tokens[start:end]
    if category is Category.CHARACTER:
        return None
    groups: list[list[Token]] = [[]]
    depth = 0
    for token in inner:
        if token.kind in ("(", "(/", "["):
            depth += 1
        elif token.kind in (")", "/)", "]"):
            depth -= 1
        if token.kind == "," and depth == 0:
            groups.append([])
        else:
            groups[-1].append(token)
    for group in groups:
        if len(group) >= 2 and group[0].lower == "kind" and group[1].kind == "=":
            return "".join(t.lower for t in group[2:])
    if groups and groups[0] and not (len(groups[0]) > 1 and groups[0][1].kind == "="):
        return "".join(t.lower for t in groups[0])
    return None


def type_spec(tokens: list[Token], index: int) -> TypeSpec | None:
    """A declaration type specification starting at ``index``, or None."""
    if index >= len(tokens) or tokens[index].kind != "name":
        return None
    word = tokens[index].lower
    following = tokens[index + 1].lower if index + 1 < len(tokens) else ""
    if word in ("doubleprecision", "doublecomplex") or (word == "double" and following in ("precision", "complex")):
        end = index + (1 if word.startswith("double") and word != "double" else 2)
        category = Category.COMPLEX if "complex" in (word + following) else Category.REAL
        return TypeSpec(NumType(category, "d"), end)
    if word in ("type", "class") and following == "(":
        close = matching(tokens, index + 1)
        name = "".join(t.lower for t in tokens[index + 2:close])
        if name in _TYPE_WORDS or name.split("(")[0] in _TYPE_WORDS:
            return type_spec(tokens, index + 2) and TypeSpec(type_spec(tokens, index + 2).type, close + 1)
        return TypeSpec(NumType(Category.DERIVED, name), close + 1)
    category = _TYPE_WORDS.get(word)
    if category is None:
        return None
    end = index + 1
    kind = None
    if end < len(tokens) and tokens[end].kind == "(":
        close = matching(tokens, end)
        kind = _kind_from_selector(tokens, end + 1, close, category)
        end = close + 1
    elif end < len(tokens) and tokens[end].text == "*":
        if end + 1 < len(tokens) and tokens[end + 1].kind == "(":
            end = matching(tokens, end + 1) + 1
        else:
            if category is not Category.CHARACTER and end + 1 < len(tokens):
                size = tokens[end + 1].lower
                kind = str(int(size) // 2) if category is Category.COMPLEX and size.isdigit() else size
            end += 2
    return TypeSpec(NumType(category, kind), end)


def split_top_level(tokens: list[Token], start: int, end: int) -> list[tuple[int, int]]:
    """Ranges [a, b) between top-level commas."""
    ranges = []
    depth = 0
    begin = start
    for position in range(start, end):
        kind = tokens[position].kind
        if kind in ("(", "(/", "["):
            depth += 1
        elif kind in (")", "/)", "]"):
            depth -= 1
        elif kind == "," and depth == 0:
            ranges.append((begin, position))
            begin = position + 1
    if begin < end:
        ranges.append((begin, end))
    return ranges


def find_top_level(tokens: list[Token], kind: str, start: int = 0) -> int:
    depth = 0
    for position in range(start, len(tokens)):
        token = tokens[position]
        if token.kind in ("(", "(/", "["):
            depth += 1
        elif token.kind in (")", "/)", "]"):
            depth -= 1
        elif token.kind == kind and depth == 0:
            return position
    return -1


@dataclass(frozen=True)
class Declaration:
    type: NumType | None
    attributes: tuple[str, ...]
    entities: tuple[Entity, ...]


def entities(tokens: list[Token], start: int, end: int, array_by_default: bool = False,
             default_rank: int = 0) -> tuple[Entity, ...]:
    found = []
    for begin, stop in split_top_level(tokens, start, end):
        if tokens[begin].kind != "name":
            continue
        own = begin + 1 < stop and tokens[begin + 1].kind == "("
        rank = _rank(tokens, begin + 1) if own else (default_rank if array_by_default else 0)
        found.append(Entity(tokens[begin].lower, array_by_default or own, rank))
    return tuple(found)


def declaration(tokens: list[Token], spec: TypeSpec) -> Declaration:
    """``type-spec [, attr]... [::] entity-list``."""
    position = spec.end
    attributes: list[str] = []
    dimension_rank = 0
    colons = find_top_level(tokens, "::", position)
    if colons >= 0:
        for begin, stop in split_top_level(tokens, position, colons):
            if tokens[begin].kind == "name":
                attributes.append(tokens[begin].lower)
                if tokens[begin].lower == "dimension" and begin + 1 < stop and tokens[begin + 1].kind == "(":
                    dimension_rank = _rank(tokens, begin + 1)
        position = colons + 1
    elif position < len(tokens) and tokens[position].kind == ",":
        position += 1
    found = entities(tokens, position, len(tokens), "dimension" in attributes, dimension_rank)
    return Declaration(spec.type, tuple(attributes), found)


def implicit_mapping(tokens: list[Token]) -> dict[str, NumType] | None:
    """Letters to types from ``IMPLICIT type (letter-spec-list), ...``; None for IMPLICIT NONE."""
    if len(tokens) > 1 and tokens[1].lower == "none":
        return None
    mapping: dict[str, NumType] = {}
    position = 1
    while position < len(tokens):
        spec = type_spec(tokens, position)
        if spec is None:
            raise ValueError("IMPLICIT statement not understood")
        # the letter list is the last parenthesised group of this item
        if spec.end >= len(tokens) or tokens[spec.end].kind != "(":
            # kind selector was taken as the letter list: re-read without it
            letters_open = position + 1
            spec = TypeSpec(NumType(spec.type.category), position + 1)
        else:
            letters_open = spec.end
        close = matching(tokens, letters_open)
        for begin, stop in split_top_level(tokens, letters_open + 1, close):
            letters = [t.lower for t in tokens[begin:stop] if t.kind == "name"]
            if len(letters) == 2:
                low, high = letters
            elif len(letters) == 1:
                low = high = letters[0]
            else:
                continue
            for code in range(ord(low[0]), ord(high[0]) + 1):
                mapping[chr(code)] = spec.type
        position = close + 1
        if position < len(tokens) and tokens[position].kind == ",":
            position += 1
    return mapping


def use_statement(tokens: list[Token]) -> tuple[str, dict[str, str] | None, dict[str, str]] | None:
    """(module, only-map or None, renames) of ``USE [, nature ::] name [, ONLY: list | rename-list]``."""
    position = 1
    colons = find_top_level(tokens, "::")
    if colons >= 0:
        position = colons + 1
    if position >= len(tokens) or tokens[position].kind != "name":
        return None
    module = tokens[position].lower
    position += 1
    only: dict[str, str] | None = None
    renames: dict[str, str] = {}
    if position < len(tokens) and tokens[position].kind == ",":
        position += 1
        target = renames
        if position + 1 < len(tokens) and tokens[position].lower == "only" and tokens[position + 1].kind == ":":
            only = {}
            target = only
            position += 2
        for begin, stop in split_top_level(tokens, position, len(tokens)):
            names = [t.lower for t in tokens[begin:stop] if t.kind == "name"]
            arrow = any(t.kind == "=>" for t in tokens[begin:stop])
            if arrow and len(names) >= 2:
                target[names[0]] = names[-1]
            elif names and names[0] not in ("operator", "assignment"):
                target[names[0]] = names[0]
    return module, only, renames
