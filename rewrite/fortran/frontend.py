"""Free-form Fortran text to sites: the front end's one entry point, ``analyse``.

Pass 1 walks the logical statements, keeps the scopes (program units, interface bodies,
derived types, blocks) and records declarations. Pass 2 parses the expressions of every
executable statement with the completed tables and produces one ``Site`` per statement.
Declarations, FORMAT statements, strings and comments never become sites.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from ..edits import Finding, Problem
from ..ir import UNKNOWN, ImportAnchor, Node, Site, Span
from . import intrinsics
from .declarations import (
    PROCEDURE_PREFIXES, declaration, entities, find_top_level, implicit_mapping, matching,
    split_top_level, type_spec, use_statement,
)
from .expr import ExpressionParser, ParseError, Unsupported
from .lexer import LexError, Token, tokenize
from .parse import is_valid_statement
from .source import Statement, line_starts, logical_statements
from .symbols import RUNTIME_MODULE, DerivedType, Program, Resolver, Scope, Symbol, Use

_IMPORTING_UNITS = {"program", "module", "submodule", "subroutine", "function"}
_UNIT_KINDS = {"program", "module", "submodule", "subroutine", "function", "blockdata"}
_SPEC_ONLY = {
    "dimension", "parameter", "external", "intrinsic", "common", "allocatable", "pointer", "target",
    "save", "data", "equivalence", "namelist", "intent", "optional", "public", "private", "value",
    "volatile", "protected", "asynchronous", "bind", "sequence", "import", "procedure", "generic",
    "final", "enumerator", "enum", "format", "entry", "contiguous", "codimension",
}
_NOT_ANALYSED = {
    "continue", "cycle", "exit", "goto", "go", "return", "stop", "error", "allocate", "deallocate",
    "nullify", "open", "close", "read", "inquire", "rewind", "backspace", "endfile", "flush", "wait",
    "case", "else", "sync", "lock", "unlock", "pause", "assign", "critical", "fail", "event", "form",
    "change", "team",
}


@dataclass
class FrontEndResult:
    sites: list[Site] = field(default_factory=list)
    findings: list[Finding] = field(default_factory=list)
    problems: list[Problem] = field(default_factory=list)
    modules: dict[str, Scope] = field(default_factory=dict)


@dataclass
class _Pending:
    statement: Statement
    tokens: list[Token]
    scope: Scope
    in_loop: bool = False


@dataclass
class _Loop:
    """An open DO loop, FORALL or WHERE construct; ``label`` ends a labelled DO."""

    keyword: str  # do | forall | where
    label: str = ""
    vectorisable: bool = True  # DO WHILE and a bare DO are not counted loops


class _NotUnderstood(Exception):
    pass


def _strip_label_and_name(tokens: list[Token]) -> list[Token]:
    if len(tokens) > 1 and tokens[0].kind == "int" and tokens[0].text.isdigit():
        tokens = tokens[1:]
    if len(tokens) > 2 and tokens[0].kind == "name" and tokens[1].kind == ":" and tokens[2].kind == "name":
        tokens = tokens[2:]
    return tokens


def _designator_end(tokens: list[Token], start: int) -> int:
    """Index after a designator (name, (...), %name ...) starting at ``start``, or -1."""
    if start >= len(tokens) or tokens[start].kind != "name":
        return -1
    position = start + 1
    while position < len(tokens):
        kind = tokens[position].kind
        if kind == "(":
            position = matching(tokens, position) + 1
        elif kind == "%" and position + 1 < len(tokens) and tokens[position + 1].kind == "name":
            position += 2
        else:
            break
    return position


def _assignment_kind(tokens: list[Token], start: int = 0) -> str | None:
    end = _designator_end(tokens, start)
    if end < 0 or end >= len(tokens):
        return None
    if tokens[end].kind == "=":
        return "assignment"
    if tokens[end].kind == "=>":
        return "pointer"
    return None


def _word(tokens: list[Token], index: int) -> str:
    return tokens[index].lower if index < len(tokens) and tokens[index].kind == "name" else ""


def _end_kind(tokens: list[Token]) -> str | None:
    """What an END statement closes: '' for a bare END, the keyword otherwise; None if not END."""
    word = _word(tokens, 0)
    if not word.startswith("end") or _assignment_kind(tokens) or (len(tokens) > 1 and tokens[1].kind == "("):
        return None
    rest = word[3:]
    if rest == "":
        rest = _word(tokens, 1)
        if rest == "block" and _word(tokens, 2) == "data":
            return "blockdata"
    if rest in ("", "program", "module", "submodule", "subroutine", "function", "blockdata",
                "procedure", "interface", "type", "block", "associate", "select", "do", "if", "where",
                "forall", "critical", "enum", "team", "file"):
        if rest == "file":
            return None
        return rest
    return None


@dataclass(frozen=True)
class _UnitHeader:
    kind: str
    name: str
    result: str | None
    type: object  # NumType | None


def _unit_header(tokens: list[Token]) -> _UnitHeader | None:
    word = _word(tokens, 0)
    if word == "program" and len(tokens) >= 2:
        return _UnitHeader("program", _word(tokens, 1), None, None)
    if word == "module" and _word(tokens, 1) not in ("procedure", "function", "subroutine", "") \
            and len(tokens) == 2:
        return _UnitHeader("module", _word(tokens, 1), None, None)
    if word == "submodule" and len(tokens) > 1 and tokens[1].kind == "(":
        close = matching(tokens, 1)
        return _UnitHeader("submodule", _word(tokens, close + 1), None, None)
    if word in ("blockdata",) or (word == "block" and _word(tokens, 1) == "data"):
        return _UnitHeader("blockdata", "", None, None)
    position = 0
    prefix_type = None
    while position < len(tokens):
        current = _word(tokens, position)
        if current in PROCEDURE_PREFIXES:
            position += 1
            continue
        spec = type_spec(tokens, position)
        if spec is not None and prefix_type is None:
            prefix_type = spec.type
            position = spec.end
            continue
        break
    keyword = _word(tokens, position)
    if keyword not in ("subroutine", "function") or position + 1 >= len(tokens):
        return None
    name = _word(tokens, position + 1)
    if not name:
        return None
    result = None
    for index in range(position + 2, len(tokens) - 2):
        if _word(tokens, index) == "result" and tokens[index + 1].kind == "(":
            result = _word(tokens, index + 2)
    return _UnitHeader(keyword, name, result, prefix_type)


class _Builder:
    """Pass 1: scopes and declarations."""

    def __init__(self, program: Program, result: FrontEndResult, text: str = ""):
        self.program = program
        self.result = result
        self.text = text
        self.line_starts = line_starts(text)
        self.stack: list[Scope] = [program.file]
        self.select_is_type: list[bool] = []
        self.in_type_contains = False
        self.pending: list[_Pending] = []
        self.loops: list[_Loop] = []

    @property
    def scope(self) -> Scope:
        return self.stack[-1]

    def problem(self, statement: Statement, message: str) -> None:
        self.result.problems.append(Problem(statement.line, message))

    def push(self, scope: Scope) -> None:
        self.stack.append(scope)

    def statement(self, statement: Statement, tokens: list[Token]) -> None:
        label = tokens[0].text if len(tokens) > 1 and tokens[0].kind == "int" and tokens[0].text.isdigit() else ""
        self._statement(statement, _strip_label_and_name(tokens))
        if label:  # a labelled DO ends with the statement that carries its label (shared ends too)
            while self.loops and self.loops[-1].label == label:
                self.loops.pop()

    def _statement(self, statement: Statement, tokens: list[Token]) -> None:
        if not tokens:
            return
        scope = self.scope
        if scope.kind == "type" and self.in_type_contains:
            if _end_kind(tokens) == "type":
                self.end_type()
            return
        if _assignment_kind(tokens):
            self.executable(statement, tokens)
            return
        end = _end_kind(tokens)
        if end is not None:
            self.end(statement, end)
            return
        word = _word(tokens, 0)
        header = _unit_header(tokens)
        if header is not None:
            self.begin_unit(header)
            self.anchor_after(self.scope, statement, own_indent=False)
            return
        if word == "contains":
            if scope.kind == "type":
                self.in_type_contains = True
            return
        if word == "interface" or (word == "abstract" and _word(tokens, 1) == "interface"):
            generic = _word(tokens, 1) if word == "interface" else ""
            if generic and len(tokens) == 2:
                symbol = scope.symbol(generic)
                symbol.is_function = True
            self.push(Scope("interface", generic, scope))
            return
        if word == "type" and not (len(tokens) > 1 and tokens[1].kind == "(") and _word(tokens, 1) != "is":
            self.begin_type(tokens)
            return
        if word in ("use",):
            parsed = use_statement(tokens)
            if parsed:
                module, only, renames = parsed
                scope.uses.append(Use(module, only, renames))
                self.anchor_after(scope, statement, own_indent=True)
            return
        if word == "implicit":
            try:
                scope.set_implicit(implicit_mapping(tokens))
            except ValueError as error:
                self.problem(statement, str(error))
            return
        if word == "include":
            scope.opaque = True
            return
        spec = type_spec(tokens, 0)
        if spec is not None:
            self.declare(tokens, spec)
            return
        if word in _SPEC_ONLY:
            self.attribute_statement(word, tokens)
            return
        if word == "block" and len(tokens) == 1:
            self.push(Scope("block", "", scope))
            return
        if word == "associate":
            self.begin_associate(statement, tokens)
            return
        if word in ("select", "selectcase", "selecttype"):
            is_type = word == "selecttype" or _word(tokens, 1) == "type"
            self.select_is_type.append(is_type)
            if is_type:
                block = Scope("block", "", scope)
                self.push(block)
                open_index = 2 if word == "select" else 1
                name = _word(tokens, open_index + 1)
                if name:
                    block.symbol(name).type = UNKNOWN
                return
        if word == "module" and _word(tokens, 1) == "procedure":
            return
        if scope.kind == "file":
            # executable statements outside any unit: an unnamed main program
            self.push(Scope("program", "", scope))
        self.executable(statement, tokens)

    # -- structure -------------------------------------------------------------------------
    def anchor_after(self, scope: Scope, statement: Statement, own_indent: bool) -> None:
        """Record where a new USE line can go: the line after this statement."""
        if scope.kind not in _IMPORTING_UNITS or statement.end_line >= len(self.line_starts):
            return
        if scope.import_at is not None and not own_indent:
            return
        start = self.line_starts[statement.line - 1]
        line = self.text[start:self.line_starts[statement.line] if statement.line < len(self.line_starts) else None]
        indent = line[: len(line) - len(line.lstrip(" \t"))]
        scope.import_at = self.line_starts[statement.end_line]
        scope.indent = indent if own_indent else indent + "  "

    def begin_unit(self, header: _UnitHeader) -> None:
        parent = self.scope
        kind = header.kind
        if parent.kind == "interface":
            kind = "interface-body"
        unit = Scope(kind if kind != "interface-body" else "interface-body", header.name, parent)
        if header.kind == "module":
            self.program.modules[header.name] = unit
            self.result.modules[header.name] = unit
        if header.kind == "function":
            result_name = header.result or header.name
            unit.result_name = result_name
            unit.symbol(result_name).type = header.type
            owner = parent.parent if parent.kind == "interface" else parent
            symbol = Symbol(header.name, header.type, is_function=True)
            if owner.kind == "file":
                self.program.procedures[header.name] = symbol
            else:
                owner.symbols[header.name] = symbol
            unit.procedure_symbol = symbol  # type: ignore[attr-defined]
        elif header.kind == "subroutine":
            owner = parent.parent if parent.kind == "interface" else parent
            symbol = Symbol(header.name, None, is_function=True)
            if owner.kind == "file":
                self.program.procedures[header.name] = symbol
            else:
                owner.symbols.setdefault(header.name, symbol)
        self.push(unit)

    def end(self, statement: Statement, kind: str) -> None:
        scope = self.scope
        if kind in ("do", "where", "forall"):
            for index in range(len(self.loops) - 1, -1, -1):
                if self.loops[index].keyword == kind:
                    del self.loops[index:]
                    break
        if kind in ("do", "if", "where", "forall", "critical", "enum", "team"):
            if scope.kind == "file":
                self.problem(statement, f"END {kind.upper()} outside any program unit")
            return
        if kind == "select":
            if not self.select_is_type:
                self.problem(statement, "END SELECT without SELECT")
                return
            if self.select_is_type.pop() and scope.kind == "block":
                self.stack.pop()
            return
        if kind in ("block", "associate"):
            if scope.kind != "block":
                self.problem(statement, f"END {kind.upper()} without {kind.upper()}")
                return
            self.stack.pop()
            return
        if kind == "interface":
            if scope.kind != "interface":
                self.problem(statement, "END INTERFACE without INTERFACE")
                return
            self.stack.pop()
            return
        if kind == "type":
            if scope.kind != "type":
                self.problem(statement, "END TYPE without TYPE")
                return
            self.end_type()
            return
        # END of a program unit or procedure
        if scope.kind in ("file", "interface", "type", "block"):
            self.problem(statement, "END statement does not close a program unit here")
            return
        self.finish_unit(scope)
        self.stack.pop()

    def finish_unit(self, unit: Scope) -> None:
        symbol = getattr(unit, "procedure_symbol", None)
        if symbol is None or unit.result_name is None:
            return
        result = unit.symbols.get(unit.result_name)
        if result is not None and result.type is not None:
            symbol.type = result.type
        elif symbol.type is None:
            implicit = Resolver(self.program, unit, intrinsics.result_type).implicit_type(unit.result_name)
            symbol.type = implicit if implicit.is_known else None
            if result is not None and symbol.type is not None:
                result.type = symbol.type

    def begin_type(self, tokens: list[Token]) -> None:
        colons = find_top_level(tokens, "::")
        name = _word(tokens, colons + 1) if colons >= 0 else _word(tokens, 1)
        parent = None
        for index in range(1, max(colons, 1)):
            if _word(tokens, index) == "extends" and index + 2 < len(tokens):
                parent = _word(tokens, index + 2)
        self.push(Scope("type", name, self.scope))
        self.scope.type_parent = parent  # type: ignore[attr-defined]
        self.in_type_contains = False

    def end_type(self) -> None:
        scope = self.stack.pop()
        self.in_type_contains = False
        derived = DerivedType(scope.name, scope.symbols, getattr(scope, "type_parent", None))
        self.scope.types[scope.name] = derived

    def begin_associate(self, statement: Statement, tokens: list[Token]) -> None:
        block = Scope("block", "", self.scope)
        if len(tokens) > 1 and tokens[1].kind == "(":
            close = matching(tokens, 1)
            for begin, stop in split_top_level(tokens, 2, close):
                name = _word(tokens, begin)
                if name and begin + 1 < stop and tokens[begin + 1].kind == "=>":
                    block.symbol(name).type = self.selector_type(statement, tokens[begin + 2:stop])
        self.push(block)

    def selector_type(self, statement: Statement, tokens: list[Token]):
        try:
            parser = ExpressionParser(tokens, statement.offsets,
                                      Resolver(self.program, self.scope, intrinsics.result_type))
            node = parser.parse_expression()
            return node.type if parser.pos == len(tokens) else UNKNOWN
        except ParseError:
            return UNKNOWN

    # -- declarations ----------------------------------------------------------------------
    def declare(self, tokens: list[Token], spec) -> None:
        found = declaration(tokens, spec)
        for entity in found.entities:
            symbol = self.scope.symbol(entity.name)
            symbol.type = found.type
            symbol.is_array = symbol.is_array or entity.is_array
            symbol.rank = entity.rank or symbol.rank
            if "parameter" in found.attributes:
                symbol.is_parameter = True
            if "external" in found.attributes:
                symbol.is_function = True
            if "intrinsic" in found.attributes:
                symbol.is_intrinsic = True

    def attribute_statement(self, word: str, tokens: list[Token]) -> None:
        scope = self.scope
        if word in ("dimension", "allocatable", "pointer", "target", "codimension"):
            colons = find_top_level(tokens, "::")
            for entity in entities(tokens, colons + 1 if colons >= 0 else 1, len(tokens)):
                symbol = scope.symbol(entity.name)
                symbol.is_array = symbol.is_array or entity.is_array
                symbol.rank = entity.rank or symbol.rank
        elif word == "parameter" and len(tokens) > 1 and tokens[1].kind == "(":
            close = matching(tokens, 1)
            for begin, _stop in split_top_level(tokens, 2, close):
                name = _word(tokens, begin)
                if name:
                    scope.symbol(name).is_parameter = True
        elif word in ("external", "intrinsic"):
            colons = find_top_level(tokens, "::")
            for entity in entities(tokens, colons + 1 if colons >= 0 else 1, len(tokens)):
                symbol = scope.symbol(entity.name)
                if word == "external":
                    symbol.is_function = True
                else:
                    symbol.is_intrinsic = True
        elif word == "common":
            position = 1
            while position < len(tokens):
                if tokens[position].text == "/" or tokens[position].text == "//":
                    if tokens[position].text == "/":
                        position += 1
                        while position < len(tokens) and tokens[position].text != "/":
                            position += 1
                    position += 1
                    continue
                if tokens[position].kind == "name":
                    symbol = scope.symbol(tokens[position].lower)
                    if position + 1 < len(tokens) and tokens[position + 1].kind == "(":
                        symbol.is_array = True
                        position = matching(tokens, position + 1)
                position += 1
        elif word == "procedure":
            colons = find_top_level(tokens, "::")
            if colons >= 0:
                for entity in entities(tokens, colons + 1, len(tokens)):
                    scope.symbol(entity.name).is_function = True

    # -- executable statements ---------------------------------------------------------------
    def executable(self, statement: Statement, tokens: list[Token]) -> None:
        scope = self.scope
        if not scope.seen_executable and _assignment_kind(tokens) == "assignment" and len(tokens) > 1 \
                and tokens[1].kind == "(":
            name = tokens[0].lower
            resolver = Resolver(self.program, scope, intrinsics.result_type)
            existing = resolver.lookup(name)
            if not (isinstance(existing, Symbol) and existing.is_array):
                statement_function = scope.symbol(name)
                statement_function.is_function = True
                if statement_function.type is None:
                    implicit = resolver.implicit_type(name)
                    statement_function.type = implicit if implicit.is_known else None
        else:
            scope.seen_executable = True
        in_loop = any(loop.vectorisable for loop in self.loops)
        word = _word(tokens, 0)
        if word in ("forall", "where") and len(tokens) > 1 and tokens[1].kind == "(":
            close = matching(tokens, 1)
            if close == len(tokens) - 1:
                self.loops.append(_Loop(word))  # the construct form: up to END FORALL / END WHERE
            else:
                in_loop = True  # the statement form is an array statement itself
        elif not _assignment_kind(tokens):
            self._begin_do(word, tokens)
        self.pending.append(_Pending(statement, tokens, scope, in_loop))

    def _begin_do(self, word: str, tokens: list[Token]) -> None:
        """DO [label] [,] var = ..., DO [label] [,] WHILE (...), DO CONCURRENT (...), or a bare DO."""
        if word not in ("do", "dowhile", "doconcurrent"):
            return
        position, label = 1, ""
        if word == "do" and position < len(tokens) and tokens[position].kind == "int":
            label = tokens[position].text
            position += 1
        if position < len(tokens) and tokens[position].kind == ",":
            position += 1
        following = _word(tokens, position)
        if word == "dowhile" or following == "while":
            counted = False
        else:
            counted = word == "doconcurrent" or following == "concurrent" or position < len(tokens)
        self.loops.append(_Loop("do", label, counted))


# -- pass 2 ----------------------------------------------------------------------------------
class _Statement:
    """Parses the expressions of one executable statement."""

    def __init__(self, tokens: list[Token], parser: ExpressionParser):
        self.tokens = tokens
        self.parser = parser

    def done(self) -> bool:
        return self.parser.pos >= len(self.tokens)

    def finish(self) -> None:
        if not self.done():
            raise ParseError(f"unexpected {self.tokens[self.parser.pos].text!r}", self.parser.pos)

    def expression(self) -> Node:
        return self.parser.parse_expression()

    def action(self, start: int) -> tuple[str, list[Node]]:
        parser = self.parser
        tokens = self.tokens
        parser.pos = start
        kind = _assignment_kind(tokens, start)
        if kind is not None:
            target = parser._designator()
            parser.pos += 1
            value = parser.parse_expression()
            self.finish()
            return kind, [target, value]
        word = _word(tokens, start)
        following = tokens[start + 1].kind if start + 1 < len(tokens) else ""
        if word == "if" and following == "(":
            parser.pos = start + 2
            condition = parser.parse_expression()
            parser.expect(")")
            if self.done():
                raise ParseError("IF statement without an action", parser.pos)
            if _word(tokens, parser.pos) == "then" and parser.pos == len(tokens) - 1:
                return "if-then", [condition]
            if tokens[parser.pos].kind == "int":
                return "arithmetic-if", [condition]
            _, nested = self.action(parser.pos)
            return "if", [condition] + nested
        if word in ("elseif",) or (word == "else" and _word(tokens, start + 1) == "if"):
            parser.pos = start + (1 if word == "elseif" else 2)
            parser.expect("(")
            condition = parser.parse_expression()
            parser.expect(")")
            parser.expect("then")
            return "else-if", [condition]
        if word == "do":
            return "do", self.do_statement(start + 1)
        if word == "where" and following == "(":
            parser.pos = start + 2
            mask = parser.parse_expression()
            parser.expect(")")
            if self.done():
                return "where", [mask]
            _, nested = self.action(parser.pos)
            return "where", [mask] + nested
        if word in ("elsewhere",) or (word == "else" and _word(tokens, start + 1) == "where"):
            parser.pos = start + (1 if word == "elsewhere" else 2)
            if self.done() or parser.at("name"):
                return "elsewhere", []
            parser.expect("(")
            mask = parser.parse_expression()
            parser.expect(")")
            return "elsewhere", [mask]
        if word in ("select", "selectcase") and (word == "selectcase" or _word(tokens, start + 1) == "case"):
            parser.pos = start + (1 if word == "selectcase" else 2)
            parser.expect("(")
            selector = parser.parse_expression()
            parser.expect(")")
            self.finish()
            return "select-case", [selector]
        if word == "call":
            parser.pos = start + 1
            callee = parser._designator()
            self.finish()
            return "call", [callee]
        if word == "print":
            comma = find_top_level(tokens, ",", start + 1)
            if comma < 0:
                return "print", []
            parser.pos = comma + 1
            return "print", self.output_items()
        if word == "write" and following == "(":
            close = matching(tokens, start + 1)
            parser.pos = close + 1
            return "write", self.output_items()
        if word == "forall" and following == "(":
            return "forall", self.forall_statement(start + 1)
        if word in _NOT_ANALYSED or word.startswith("end"):
            return "other", []
        if word in ("select", "selecttype", "type", "class", "associate", "block", "contains"):
            return "other", []
        raise _NotUnderstood()

    def output_items(self) -> list[Node]:
        parser = self.parser
        items = []
        while not self.done():
            items.append(parser._value_or_implied_do())
            if self.done():
                break
            parser.expect(",")
        return items

    def do_statement(self, position: int) -> list[Node]:
        parser = self.parser
        tokens = self.tokens
        if position < len(tokens) and tokens[position].kind == "int":
            position += 1
        if position < len(tokens) and tokens[position].kind == ",":
            position += 1
        parser.pos = position
        if self.done():
            return []
        if _word(tokens, position) == "while":
            parser.pos = position + 1
            parser.expect("(")
            condition = parser.parse_expression()
            parser.expect(")")
            self.finish()
            return [condition]
        if _word(tokens, position) == "concurrent":
            raise Unsupported("DO CONCURRENT headers are not analysed", position)
        variable = parser._designator()
        parser.expect("=")
        bounds = [variable, parser.parse_expression()]
        while parser.at(","):
            parser.pos += 1
            bounds.append(parser.parse_expression())
        self.finish()
        return bounds

    def forall_statement(self, open_index: int) -> list[Node]:
        parser = self.parser
        tokens = self.tokens
        close = matching(tokens, open_index)
        parser.pos = open_index + 1
        nodes: list[Node] = []
        while parser.pos < close:
            token, following = parser.peek(), parser.peek(1)
            if token is not None and token.kind == "name" and following is not None and following.kind == "=":
                parser.pos += 2
                argument = parser._subscript(None)
                if argument.value is not None:
                    nodes.append(argument.value)
            else:
                nodes.append(parser.parse_expression())
            if parser.at(","):
                parser.pos += 1
        parser.expect(")")
        if not self.done():
            _, nested = self.action(parser.pos)
            nodes.extend(nested)
        return nodes


def _site(pending: _Pending, program: Program, result: FrontEndResult, text: str) -> None:
    statement = pending.statement
    tokens = pending.tokens
    parser = ExpressionParser(tokens, statement.offsets, Resolver(program, pending.scope, intrinsics.result_type))
    reader = _Statement(tokens, parser)
    span = Span(statement.offsets[0], statement.offsets[-1] + 1)
    try:
        context, roots = reader.action(0)
    except Unsupported as error:
        result.findings.append(Finding(span, "not-analysed", f"statement left as it is: {error}"))
        return
    except (ParseError, _NotUnderstood) as error:
        if is_valid_statement(statement.text[tokens[0].start:]):
            reason = str(error) if isinstance(error, ParseError) else "statement form not analysed"
            result.findings.append(Finding(span, "not-analysed", f"statement left as it is: {reason}"))
        else:
            detail = f": {error}" if isinstance(error, ParseError) else ""
            result.problems.append(Problem(statement.line, f"syntax error{detail}"))
        return
    if statement.interrupted:
        result.findings.append(Finding(span, "not-analysed",
                                       "statement left as it is: a preprocessor line interrupts it"))
        return
    if roots:
        result.sites.append(Site(span, statement.line, tuple(roots), context, _anchor(pending.scope, text),
                                 pending.in_loop))


def _anchor(scope: Scope, text: str) -> ImportAnchor | None:
    unit = scope
    while unit is not None and unit.kind not in _IMPORTING_UNITS:
        unit = unit.parent
    if unit is None or unit.import_at is None:
        return None
    names: set[str] = set()
    host: Scope | None = scope
    while host is not None:
        for use in host.uses:
            if use.module == RUNTIME_MODULE:
                names |= {"*"} if use.only is None else set(use.only)
        host = host.parent
    newline = "\r\n" if text[max(unit.import_at - 2, 0):unit.import_at] == "\r\n" else "\n"
    return ImportAnchor(f"{unit.kind}:{unit.name}:{unit.import_at}", unit.import_at, unit.indent, newline,
                        frozenset(names))


def analyse(text: str, known_modules: dict[str, Scope] | None = None) -> FrontEndResult:
    """Sites, findings and problems of one free-form source text."""
    result = FrontEndResult()
    statements, source_problems = logical_statements(text)
    result.problems.extend(Problem(p.line, p.message) for p in source_problems)
    program = Program(known_modules)
    builder = _Builder(program, result, text)
    for statement in statements:
        try:
            tokens = tokenize(statement.text)
        except LexError as error:
            result.problems.append(Problem(statement.line, str(error)))
            continue
        depth = 0
        for token in tokens:
            depth += token.kind in ("(", "(/", "[")
            depth -= token.kind in (")", "/)", "]")
            if depth < 0:
                break
        if depth != 0:
            result.problems.append(Problem(statement.line, "unbalanced parentheses"))
            continue
        builder.statement(statement, tokens)
    open_units = [s for s in builder.stack[1:] if s.kind not in ("block",)]
    if open_units:
        unit = open_units[-1]
        last = statements[-1].end_line if statements else 1
        result.problems.append(Problem(last, f"file ends inside {unit.kind} {unit.name}".rstrip()
                                       + " (missing END statement)"))
    if result.problems:
        return result
    for pending in builder.pending:
        _site(pending, program, result, text)
    return result


def collect_modules(text: str) -> dict[str, Scope]:
    """Module scopes defined in ``text`` (pass 1 only; for USE across the files of a batch)."""
    result = FrontEndResult()
    statements, _ = logical_statements(text)
    program = Program()
    builder = _Builder(program, result)
    for statement in statements:
        try:
            tokens = tokenize(statement.text)
        except LexError:
            continue
        builder.statement(statement, tokens)
    return result.modules
