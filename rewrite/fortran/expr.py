"""Fortran expressions (Fortran 2018, 10.1) from tokens to the typed tree of ``rewrite.ir``.

The grammar follows the standard's levels: defined binary operators, .eqv./.neqv., .or.,
.and., .not., relational, //, level-2 (optional leading sign, + and -, left to right), * and /
(left to right), ** (right to left), defined unary operators, primaries. Types come from a
``Resolver`` that knows the declarations. A unary sign after a binary operator (a compiler
extension whose grouping differs between compilers) is refused.
"""
from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Protocol

from ..ir import (
    CHARACTER, INTEGER, LOGICAL, UNKNOWN, Category, Level, Node, NumType, Operand, Operation,
    Span, Unary, arithmetic_type,
)
from .lexer import Token

_RELATIONAL = {"==", "/=", "<", "<=", ">", ">=", ".eq.", ".ne.", ".lt.", ".le.", ".gt.", ".ge."}
_INTRINSIC_DOTOPS = {".and.", ".or.", ".not.", ".eqv.", ".neqv.", ".xor."} | _RELATIONAL


class ParseError(Exception):
    def __init__(self, message: str, token_index: int):
        super().__init__(message)
        self.token_index = token_index


class Unsupported(ParseError):
    """Valid (or extension) syntax the rewriter does not analyse."""


@dataclass(frozen=True)
class Argument:
    keyword: str | None
    value: Node | None  # None for a bare ':' section


class Resolver(Protocol):
    def name_type(self, name: str) -> NumType: ...

    def reference_type(self, name: str, arguments: list[Argument]) -> NumType: ...

    def component_type(self, base: NumType, component: str) -> NumType: ...

    def is_variable(self, name: str) -> bool: ...

    def intrinsic_name(self, name: str) -> str | None: ...

    def rank_of(self, name: str) -> int: ...


def literal_type(token: Token) -> NumType:
    text = token.lower
    if token.kind == "int":
        return NumType(Category.INTEGER, text.split("_", 1)[1] if "_" in text else None)
    if token.kind == "real":
        if "_" in text:
            return NumType(Category.REAL, text.split("_", 1)[1])
        if "d" in text:
            return NumType(Category.REAL, "d")
        return NumType(Category.REAL)
    if token.kind == "logical":
        return LOGICAL
    if token.kind == "string":
        return CHARACTER
    if token.kind == "boz":
        return INTEGER
    return UNKNOWN


class ExpressionParser:
    """Parses expressions from a token list; ``offsets`` maps statement indexes to file offsets."""

    def __init__(self, tokens: list[Token], offsets: tuple[int, ...], resolver: Resolver):
        self.tokens = tokens
        self.offsets = offsets
        self.resolver = resolver
        self.pos = 0

    # -- token helpers ---------------------------------------------------------------------
    def peek(self, ahead: int = 0) -> Token | None:
        index = self.pos + ahead
        return self.tokens[index] if index < len(self.tokens) else None

    def at(self, *texts: str) -> bool:
        token = self.peek()
        return token is not None and (token.lower in texts or token.kind in texts)

    def expect(self, text: str) -> Token:
        token = self.peek()
        if token is None or (token.lower != text and token.kind != text):
            found = "end of statement" if token is None else repr(token.text)
            raise ParseError(f"expected {text!r}, found {found}", self.pos)
        self.pos += 1
        return token

    def span(self, first: int, last: int) -> Span:
        """File span of tokens first..last (inclusive)."""
        return Span(self.offsets[self.tokens[first].start], self.offsets[self.tokens[last].end - 1] + 1)

    def key(self, first: int, last: int) -> str:
        return "".join(t.lower for t in self.tokens[first:last + 1])

    # -- levels ----------------------------------------------------------------------------
    def parse_expression(self) -> Node:
        left = self._equivalence()
        while self._at_defined_binary():
            self.pos += 1
            right = self._equivalence()
            left = self._binary(left, "defined", Level.OTHER, right, UNKNOWN)
        return left

    def _at_defined_binary(self) -> bool:
        token = self.peek()
        return token is not None and token.kind == "dotop" and token.lower not in _INTRINSIC_DOTOPS

    def _binary(self, left: Node, operator: str, level: Level, right: Node, type_: NumType,
                operator_index: int | None = None) -> Node:
        operator_span = None if operator_index is None else self.span(operator_index, operator_index)
        return Operation(Span(left.span.start, right.span.end), type_, False, operator, level, left, right,
                         operator_span)

    def _fold(self, left: Node, operators: set[str], inner, level: Level, result) -> Node:
        """Operators of one level, grouped left to right."""
        while self.peek() is not None and self.peek().kind != "string" and self.peek().lower in operators:
            operator = self.peek().lower
            operator_index = self.pos
            self.pos += 1
            right = inner()
            left = self._binary(left, operator, level, right, result(left.type, right.type), operator_index)
        return left

    def _logical_level(self, operators: set[str], inner) -> Node:
        return self._fold(inner(), operators, inner, Level.OTHER, lambda _l, _r: LOGICAL)

    def _equivalence(self) -> Node:
        return self._logical_level({".eqv.", ".neqv.", ".xor."}, self._disjunction)

    def _disjunction(self) -> Node:
        return self._logical_level({".or."}, self._conjunction)

    def _conjunction(self) -> Node:
        return self._logical_level({".and."}, self._negation)

    def _negation(self) -> Node:
        if self.at(".not."):
            first = self.pos
            self.pos += 1
            operand = self._negation()
            return Unary(Span(self.offsets[self.tokens[first].start], operand.span.end), LOGICAL, False,
                         ".not.", operand)
        return self._relational()

    def _relational(self) -> Node:
        left = self._concatenation()
        token = self.peek()
        if token is not None and token.lower in _RELATIONAL:
            self.pos += 1
            right = self._concatenation()
            return self._binary(left, token.lower, Level.OTHER, right, LOGICAL)
        return left

    def _concatenation(self) -> Node:
        return self._fold(self._level2(), {"//"}, self._level2, Level.OTHER, lambda _l, _r: CHARACTER)

    def _level2(self) -> Node:
        first = self.pos
        if self.at("+", "-"):
            sign = self.peek().text
            self.pos += 1
            operand = self._add_operand()
            left: Node = Unary(Span(self.offsets[self.tokens[first].start], operand.span.end),
                               operand.type, False, sign, operand)
        else:
            left = self._add_operand()
        return self._fold(left, {"+", "-"}, self._add_operand, Level.ADDITIVE, arithmetic_type)

    def _add_operand(self) -> Node:
        return self._fold(self._mult_operand(), {"*", "/"}, self._mult_operand, Level.MULTIPLICATIVE,
                          arithmetic_type)

    def _mult_operand(self) -> Node:
        base = self._level1()
        if self.at("**"):
            operator_index = self.pos
            self.pos += 1
            exponent = self._mult_operand()
            type_ = base.type
            if base.type.category is Category.INTEGER and exponent.type.is_floating:
                type_ = exponent.type
            elif not exponent.type.is_known:
                type_ = UNKNOWN if not base.type.is_floating else base.type
            elif base.type.category is Category.REAL and exponent.type.category is Category.COMPLEX:
                type_ = exponent.type
            return self._binary(base, "**", Level.POWER, exponent, type_, operator_index)
        return base

    def _level1(self) -> Node:
        token = self.peek()
        if token is not None and token.kind == "dotop" and token.lower not in _INTRINSIC_DOTOPS:
            first = self.pos
            self.pos += 1
            operand = self._primary()
            return Unary(Span(self.offsets[self.tokens[first].start], operand.span.end), UNKNOWN, False,
                         token.lower, operand)
        if self.at("+", "-"):
            raise Unsupported("a sign after a binary operator is a compiler extension; "
                              "compilers group it differently", self.pos)
        return self._primary()

    # -- primaries -------------------------------------------------------------------------
    def _primary(self) -> Node:
        token = self.peek()
        if token is None:
            raise ParseError("expression ends early", self.pos)
        first = self.pos
        if token.kind in ("int", "real", "string", "logical", "boz"):
            self.pos += 1
            node: Node = Operand(self.span(first, first), literal_type(token), False, token.lower, (), "literal")
            if token.kind == "string" and self.at("("):
                node = self._substring(node, first)
            return node
        if token.kind == "name":
            return self._designator()
        if token.kind == "(":
            return self._parenthesised()
        if token.kind in ("(/", "["):
            return self._constructor()
        raise ParseError(f"unexpected {token.text!r} in expression", self.pos)

    def _parenthesised(self) -> Node:
        first = self.pos
        self.pos += 1
        inner = self.parse_expression()
        if self.at(","):
            self.pos += 1
            imaginary = self.parse_expression()
            self.expect(")")
            kinds = [t.kind for t in (inner.type, imaginary.type) if t.category is Category.REAL and t.kind]
            type_ = NumType(Category.COMPLEX, kinds[0] if kinds else None)
            if not (inner.type.is_known and imaginary.type.is_known):
                type_ = UNKNOWN
            return Operand(self.span(first, self.pos - 1), type_, False, self.key(first, self.pos - 1),
                           (inner, imaginary), "constructor")
        self.expect(")")
        return replace(inner, span=self.span(first, self.pos - 1), parenthesised=True)

    def _substring(self, node: Node, first: int) -> Node:
        self.pos += 1
        parts = self._section_list(")")
        return Operand(self.span(first, self.pos - 1), CHARACTER, False, self.key(first, self.pos - 1),
                       tuple(p.value for p in parts if p.value is not None))

    def _designator(self) -> Node:
        first = self.pos
        name = self.peek().lower
        self.pos += 1
        parts: list[Node] = []
        keywords: list[str | None] = []
        form = "name"
        function = None
        if self.at("("):
            self.pos += 1
            arguments = self._section_list(")")
            parts.extend(a.value for a in arguments if a.value is not None)
            keywords.extend(a.keyword for a in arguments if a.value is not None)
            type_ = self.resolver.reference_type(name, arguments)
            form = "element" if self.resolver.is_variable(name) else "call"
            function = self.resolver.intrinsic_name(name) if form == "call" else None
        else:
            type_ = self.resolver.name_type(name)
        while True:
            if self.at("%"):
                self.pos += 1
                component = self.expect("name").lower
                type_ = self.resolver.component_type(type_, component)
                form = "element" if form == "name" else form
                if self.at("("):
                    self.pos += 1
                    arguments = self._section_list(")")
                    parts.extend(a.value for a in arguments if a.value is not None)
            elif self.at("(") and type_.category is Category.CHARACTER:
                self.pos += 1
                arguments = self._section_list(")")
                parts.extend(a.value for a in arguments if a.value is not None)
            elif self.at("["):
                raise Unsupported("coarray image selectors are not analysed", self.pos)
            else:
                break
        if self.pos - 1 > first and self.tokens[self.pos - 1].kind != ")" or "%" in self.key(first, self.pos - 1):
            function = None  # a component or a substring follows: not a plain call
        rank = self.resolver.rank_of(name) if form == "name" else 0
        return Operand(self.span(first, self.pos - 1), type_, False, self.key(first, self.pos - 1), tuple(parts),
                       form, function, self.span(first, first) if function else None,
                       tuple(keywords) if function else (), rank)

    def _section_list(self, closing: str) -> list[Argument]:
        """Arguments or section subscripts up to the closing token (consumed)."""
        arguments: list[Argument] = []
        if self.at(closing):
            self.pos += 1
            return arguments
        while True:
            keyword = None
            token, following = self.peek(), self.peek(1)
            if token is not None and token.kind == "name" and following is not None and following.kind == "=":
                keyword = token.lower
                self.pos += 2
            if self.at("*") and self.peek(1) is not None and self.peek(1).kind == "int":
                self.pos += 2  # alternate return label
                arguments.append(Argument(keyword, None))
            else:
                arguments.append(self._subscript(keyword))
            if self.at(","):
                self.pos += 1
                continue
            self.expect(closing)
            return arguments

    def _subscript(self, keyword: str | None) -> Argument:
        """An expression or a triplet ``[lower] : [upper] [: stride]``."""
        bounds: list[Node] = []
        triplet = False
        if not self.at(":"):
            bounds.append(self.parse_expression())
        while self.at(":"):
            triplet = True
            self.pos += 1
            if not self.at(":", ",", ")"):
                bounds.append(self.parse_expression())
        if not triplet:
            return Argument(keyword, bounds[0])
        if not bounds:
            return Argument(keyword, None)
        span = Span(bounds[0].span.start, bounds[-1].span.end)
        return Argument(keyword, Operand(span, INTEGER, False, ":", tuple(bounds), "section"))

    def _constructor(self) -> Node:
        first = self.pos
        closing = "/)" if self.peek().kind == "(/" else "]"
        self.pos += 1
        declared = self._constructor_type_spec(closing)
        items = []
        while not self.at(closing):
            items.append(self._value_or_implied_do())
            if not self.at(","):
                break
            self.pos += 1
        self.expect(closing)
        type_ = declared or (items[0].type if items else UNKNOWN)
        return Operand(self.span(first, self.pos - 1), type_, False, self.key(first, self.pos - 1), tuple(items))

    def _constructor_type_spec(self, closing: str) -> NumType | None:
        depth = 0
        for index in range(self.pos, len(self.tokens)):
            token = self.tokens[index]
            if token.kind in ("(", "(/", "["):
                depth += 1
            elif token.kind in (")", "/)", "]"):
                if depth == 0:
                    return None
                depth -= 1
            elif token.kind == "::" and depth == 0:
                raise Unsupported("array constructors with a type specification are not analysed", self.pos)
            elif token.kind == "," and depth == 0:
                return None
        return None

    def _value_or_implied_do(self) -> Node:
        if self.at("(") and self._is_implied_do():
            return self._implied_do()
        return self.parse_expression()

    def _is_implied_do(self) -> bool:
        depth = 0
        for index in range(self.pos, len(self.tokens)):
            token = self.tokens[index]
            if token.kind in ("(", "(/", "["):
                depth += 1
            elif token.kind in (")", "/)", "]"):
                depth -= 1
                if depth == 0:
                    return False
            elif depth == 1 and token.kind == "," and index + 2 < len(self.tokens):
                if self.tokens[index + 1].kind == "name" and self.tokens[index + 2].kind == "=":
                    return True
        return False

    def _implied_do(self) -> Node:
        first = self.pos
        self.pos += 1
        items: list[Node] = []
        while True:
            token, following = self.peek(), self.peek(1)
            if token is not None and token.kind == "name" and following is not None and following.kind == "=":
                self.pos += 2
                break
            items.append(self._value_or_implied_do())
            self.expect(",")
        items.append(self.parse_expression())
        while self.at(","):
            self.pos += 1
            items.append(self.parse_expression())
        self.expect(")")
        type_ = items[0].type if items else UNKNOWN
        return Operand(self.span(first, self.pos - 1), type_, False, self.key(first, self.pos - 1), tuple(items))
