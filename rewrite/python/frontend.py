"""The Python front end: libcst tree -> sites of the language-neutral IR with exact spans and types.

Spans come from libcst's span-recording code generation (the machinery of its
``ByteSpanPositionProvider``, counting characters) and include the node's own parentheses.
Calls of functions the rules know are named in ``Operand.function`` with a language-neutral name (``array_sum`` for ``np.sum``
and ``arr.sum()``, ``minval`` for ``np.min``, ``exp`` for ``math.exp`` and ``np.exp``, ...),
found through qualified names, so aliases and ``from numpy import sum as npsum`` are one thing.
Files without a candidate (``prescan``) never reach libcst, and in the others the top-level
definitions without one reach it only as their header (``segments``).
"""
from __future__ import annotations

import bisect
import re
from dataclasses import dataclass, field

import libcst as cst

from ..edits import Finding, Problem
from ..ir import CHARACTER, LOGICAL, UNKNOWN, Category, ImportAnchor, Level, Node, Operand, Operation, Site, Span, Unary
from . import prescan, segments
from .names import Scope, scopes_of
from .render import RUNTIME_MODULE
from .segments import Outline
from .types import Typer


_OPERATORS = {"Add": "+", "Subtract": "-", "Multiply": "*", "Divide": "/", "FloorDivide": "//",
              "Modulo": "%", "Power": "**", "MatrixMultiply": "@", "LeftShift": "<<", "RightShift": ">>",
              "BitAnd": "&", "BitOr": "|", "BitXor": "^"}
_COMPARISONS = {"LessThan": "<", "LessThanEqual": "<=", "GreaterThan": ">", "GreaterThanEqual": ">=",
                "Equal": "==", "NotEqual": "!="}
_LEVELS = {"+": Level.ADDITIVE, "-": Level.ADDITIVE, "*": Level.MULTIPLICATIVE, "/": Level.MULTIPLICATIVE,
           "**": Level.POWER}

_LIBM = set("""sin cos tan asin acos atan atan2 sinh cosh tanh asinh acosh atanh exp exp2 expm1 log log2
log10 log1p erf erfc gamma lgamma cbrt hypot""".split())
_NUMPY_SPELLING = {"arcsin": "asin", "arccos": "acos", "arctan": "atan", "arctan2": "atan2",
                   "arcsinh": "asinh", "arccosh": "acosh", "arctanh": "atanh"}
_BLAS = {"dot": "dot", "matmul": "matmul", "einsum": "einsum", "inner": "inner", "tensordot": "tensordot",
         "vdot": "vdot"}
_FUNCTIONS = {"numpy.sum": "array_sum", "numpy.mean": "array_mean", "numpy.add.reduce": "add_reduce",
              "builtins.sum": "iterable_sum", "numpy.minimum": "min", "numpy.fmin": "min",
              "numpy.maximum": "max", "numpy.fmax": "max", "numpy.min": "minval", "numpy.amin": "minval",
              "numpy.max": "maxval", "numpy.amax": "maxval", "math.pow": "power", "numpy.float_power": "power",
              "builtins.abs": "abs", "numpy.abs": "abs", "numpy.absolute": "abs", "numpy.fabs": "abs",
              "math.fabs": "abs"}
_METHODS = {"sum": "array_sum", "mean": "array_mean", "min": "minval", "max": "maxval", "dot": "dot"}


def canonical_function(qualified: str | None, positional: int) -> str | None:
    """The neutral name the planner knows for a qualified function name, or None."""
    if qualified is None:
        return None
    if qualified in ("builtins.min", "builtins.max"):
        return qualified[9:] if positional >= 2 else qualified[9:] + "val"
    if qualified in _FUNCTIONS:
        return _FUNCTIONS[qualified]
    module, _, name = qualified.rpartition(".")
    if module in ("math", "numpy", "cmath"):
        name = _NUMPY_SPELLING.get(name, name)
        if name in _LIBM:
            return name
    if module == "numpy" and name in _BLAS:
        return _BLAS[name]
    if module == "numpy" and name == "power":
        return "power"
    if module == "numpy.linalg":
        return "linalg"
    return None


@dataclass
class Analysis:
    sites: list[Site] = field(default_factory=list)
    findings: list[Finding] = field(default_factory=list)
    problems: list[Problem] = field(default_factory=list)
    skipped: bool = False  # no candidate: libcst was not run


class _Offsets:
    """Offsets of the outline libcst parsed (characters, or UTF-8 bytes when the positions came
    from libcst's ByteSpanPositionProvider) -> offsets of the file's text."""

    def __init__(self, outline: Outline, in_bytes: bool):
        self.outline = outline
        text = outline.text
        self.identity = not in_bytes or len(text.encode("utf-8", "surrogateescape")) == len(text)
        if not self.identity:
            self.starts = []
            position = 0
            for char in text:
                self.starts.append(position)
                position += len(char.encode("utf-8", "surrogateescape"))
            self.starts.append(position)

    def __call__(self, unit: int, end: bool = False) -> int:
        offset = unit if self.identity else bisect.bisect_left(self.starts, unit)
        return self.outline.original_offset(offset, end) if self.outline.shortened else offset


class _Spans:
    """Stands in for a metadata provider: libcst's span-recording code generation fills
    ``_computed`` with character spans of every node (one pass, no visitor)."""

    def __init__(self):
        self._computed: dict = {}


def _positions(module: cst.Module) -> tuple[dict, bool]:
    """Spans of every node, and whether they count bytes. libcst's own ByteSpanPositionProvider
    runs a full metadata visit first, which costs three times the code generation itself."""
    try:
        from libcst.metadata.span_provider import SpanProvidingCodegenState
        spans = _Spans()
        module._codegen(SpanProvidingCodegenState(default_indent=module.default_indent,
                                                  default_newline=module.default_newline,
                                                  provider=spans, get_length=len))
        return spans._computed, False
    except (ImportError, AttributeError, TypeError):  # a libcst without these internals
        from libcst.metadata import ByteSpanPositionProvider, MetadataWrapper
        return MetadataWrapper(module, unsafe_skip_copy=True).resolve(ByteSpanPositionProvider), True


class _Converter:
    """libcst expressions -> IR nodes, with spans and types."""

    def __init__(self, text: str, positions, typer: Typer, offsets: _Offsets):
        self.text = text
        self.positions = positions
        self.typer = typer
        self.offsets = offsets

    # -- spans -------------------------------------------------------------------------------
    def _raw(self, node: cst.CSTNode) -> Span:
        span = self.positions[node]
        return Span(self.offsets(span.start), self.offsets(span.start + span.length, end=True))

    def span(self, node: cst.CSTNode) -> Span:
        inner = self._raw(node)
        lpar, rpar = getattr(node, "lpar", ()), getattr(node, "rpar", ())
        if lpar and rpar:
            return Span(self._raw(lpar[0]).start, self._raw(rpar[-1]).end)
        return inner

    def key(self, node: cst.CSTNode) -> str:
        span = self._raw(node)
        return "".join(self.text[span.start:span.end].split())

    # -- nodes -------------------------------------------------------------------------------
    def convert(self, node: cst.BaseExpression, scope: Scope, local: dict | None = None) -> Node:
        pytype = self.typer.expression(node, scope, local)
        numtype = pytype.element if pytype.shape != "rng" else UNKNOWN
        span = self.span(node)
        parenthesised = bool(getattr(node, "lpar", ()))
        if isinstance(node, cst.BinaryOperation):
            operator = _OPERATORS.get(type(node.operator).__name__, "?")
            return Operation(span, numtype, parenthesised, operator, _LEVELS.get(operator, Level.OTHER),
                             self.convert(node.left, scope, local), self.convert(node.right, scope, local),
                             self._raw(node.operator))
        if isinstance(node, cst.UnaryOperation) and isinstance(node.operator, (cst.Minus, cst.Plus)):
            return Unary(span, numtype, parenthesised, "-" if isinstance(node.operator, cst.Minus) else "+",
                         self.convert(node.expression, scope, local))
        if isinstance(node, cst.Name):
            return Operand(span, numtype, parenthesised, node.value, (), "name")
        if isinstance(node, (cst.Integer, cst.Float, cst.Imaginary)):
            return Operand(span, numtype, parenthesised, _literal_key(node), (), "literal")
        if isinstance(node, cst.SimpleString):
            return Operand(span, CHARACTER, parenthesised, self.key(node), (), "literal")
        if isinstance(node, (cst.FormattedString, cst.ConcatenatedString)):
            return Operand(span, CHARACTER, parenthesised, self.key(node), tuple(self._parts(node, scope, local)),
                           "other")
        if isinstance(node, cst.Attribute):
            if _is_dotted(node):
                return Operand(span, numtype, parenthesised, self.key(node), (), "element")
            return Operand(span, numtype, parenthesised, self.key(node),
                           (self.convert(node.value, scope, local),), "other")
        if isinstance(node, cst.Subscript):
            parts = [self.convert(node.value, scope, local)] + self._slices(node, scope, local)
            plain = _is_dotted(node.value) and not any(isinstance(p, Operand) and p.form == "call" for p in parts)
            return Operand(span, numtype, parenthesised, self.key(node), tuple(parts), "element" if plain else "other")
        if isinstance(node, cst.Call):
            return self._call(node, span, numtype, parenthesised, scope, local)
        if isinstance(node, cst.Comparison) and len(node.comparisons) == 1 \
                and type(node.comparisons[0].operator).__name__ in _COMPARISONS:
            target = node.comparisons[0]  # one comparison: an operation the rules can see (a < b)
            return Operation(span, LOGICAL, parenthesised, _COMPARISONS[type(target.operator).__name__],
                             Level.OTHER, self.convert(node.left, scope, local),
                             self.convert(target.comparator, scope, local), self._raw(target.operator))
        return Operand(span, numtype if node is not None else UNKNOWN, parenthesised, self.key(node),
                       tuple(self._parts(node, scope, local)), "other")

    def _slices(self, node: cst.Subscript, scope, local) -> list[Node]:
        parts = []
        for element in node.slice:
            inner = element.slice
            if isinstance(inner, cst.Index):
                parts.append(self.convert(inner.value, scope, local))
            else:
                parts.extend(self.convert(v, scope, local) for v in (inner.lower, inner.upper, inner.step) if v)
        return parts

    def _call(self, node: cst.Call, span, numtype, parenthesised, scope, local) -> Operand:
        arguments = [a for a in node.args]
        positional = sum(1 for a in arguments if a.keyword is None and not a.star)
        qualified = scope.qualify(node.func) if isinstance(node.func, (cst.Name, cst.Attribute)) else None
        function = canonical_function(qualified, positional)
        function_span = self.span(node.func) if function else None
        parts: list[Node] = []
        keywords: list[str | None] = []
        method = False
        if function is None and isinstance(node.func, cst.Attribute) and qualified is None:
            receiver_type = self.typer.expression(node.func.value, scope, local)
            name = _METHODS.get(node.func.attr.value)
            if name and receiver_type.shape == "array" and receiver_type.known:
                function, method = name, True
                receiver = self.convert(node.func.value, scope, local)
                parts.append(receiver)
                keywords.append(None)
                opening = self.text.index("(", self._raw(node.func).end)
                function_span = Span(receiver.span.end, opening + 1)
        if not method and function is None and not isinstance(node.func, cst.Name):
            parts.append(self.convert(node.func, scope, local))  # (a + b + c).real(), f(x)(y): may hold chains
            keywords.append("*func")
        for argument in arguments:
            parts.append(self.convert(argument.value, scope, local))
            keywords.append(argument.star or (argument.keyword.value if argument.keyword else None))
        if function == "power" and qualified == "numpy.power" and len(parts) >= 2 and isinstance(parts[1], Operand) \
                and parts[1].form == "literal" and parts[1].type.category is Category.INTEGER:
            function = None  # np.power(x, 3): an integer exponent is not libm's pow
        return Operand(span, numtype, parenthesised, self.key(node), tuple(parts), "call", function,
                       function_span, tuple(keywords), method=method)

    def _parts(self, node: cst.CSTNode, scope: Scope, local) -> list[Node]:
        """The expressions nested in a node that is not arithmetic (displays, comprehensions,
        comparisons, conditionals, f-strings, lambdas)."""
        if isinstance(node, (cst.ListComp, cst.GeneratorExp, cst.SetComp, cst.DictComp)):
            inner = self.typer.comprehension_names(node.for_in, scope, local)
            parts = []
            clause = node.for_in
            first = True
            while clause is not None:
                parts.append(self.convert(clause.iter, scope, local if first else inner))
                parts.extend(self.convert(condition.test, scope, inner) for condition in clause.ifs)
                first = False
                clause = clause.inner_for_in
            elements = (node.key, node.value) if isinstance(node, cst.DictComp) else (node.elt,)
            return [self.convert(e, scope, inner) for e in elements] + parts
        if isinstance(node, cst.Lambda):
            params = node.params
            defaults = [p.default for p in (*params.posonly_params, *params.params, *params.kwonly_params)
                        if p.default is not None]  # evaluated where the lambda is, as a def's are
            return [self.convert(d, scope, local) for d in defaults] + \
                [self.convert(node.body, self.typer.scopes.get(node, scope), None)]
        if isinstance(node, cst.FormattedStringExpression) and node.equal is not None:
            return []  # f"{a + b + c=}" prints the expression's own text: leave it exactly as written
        parts: list[Node] = []
        for child in node.children:
            if isinstance(node, cst.Arg) and child is not node.value:
                continue
            if isinstance(child, cst.BaseExpression):
                parts.append(self.convert(child, scope, local))
            else:
                parts.extend(self._parts(child, scope, local))
        return parts


def _is_dotted(node: cst.BaseExpression) -> bool:
    while isinstance(node, cst.Attribute):
        node = node.value
    return isinstance(node, cst.Name)


def _literal_key(node) -> str:
    text = node.value.replace("_", "").lower()
    if isinstance(node, cst.Integer):
        try:
            return str(int(text, 0))
        except ValueError:
            return text
    return text


# -- sites -----------------------------------------------------------------------------------
class _Sites:
    """Walks statements: every simple statement line, and the header of every compound
    statement (with its decorators and parameter defaults), is a site."""

    _SKIP = (cst.Import, cst.ImportFrom, cst.Global, cst.Nonlocal, cst.Annotation)
    _CLAUSES = (cst.If, cst.Else, cst.Finally, cst.ExceptHandler, cst.ExceptStarHandler, cst.MatchCase)

    def __init__(self, converter: _Converter, scopes, lines: list[int], anchor: ImportAnchor | None):
        self.converter = converter
        self.scopes = scopes
        self.lines = lines
        self.anchor = anchor
        self.sites: list[Site] = []

    def block(self, node: cst.CSTNode, scope: Scope) -> None:
        if isinstance(node, cst.SimpleStatementSuite):
            self.statement(node, scope)
            return
        for statement in node.body:
            self.statement(statement, scope)

    def statement(self, node: cst.CSTNode, scope: Scope) -> None:
        roots: list[Node] = []
        inner = self.scopes.get(node, scope) if isinstance(node, (cst.FunctionDef, cst.ClassDef)) else scope
        for child in node.children:
            if isinstance(child, cst.BaseSuite):
                self.block(child, inner)
            elif isinstance(child, self._CLAUSES):
                self.statement(child, scope)
            elif isinstance(node, (cst.FunctionDef, cst.ClassDef)) and child is node.name:
                continue
            else:
                self.expressions(child, scope, roots)
        if roots:
            span = self.converter._raw(node)
            self.sites.append(Site(span, bisect.bisect_right(self.lines, span.start), tuple(roots),
                                   type(node).__name__.lower(), self.anchor))

    def expressions(self, node: cst.CSTNode, scope: Scope, roots: list[Node]) -> None:
        if isinstance(node, self._SKIP):
            return
        if isinstance(node, cst.BaseExpression):
            roots.append(self.converter.convert(node, scope))
            return
        for child in node.children:
            self.expressions(child, scope, roots)


def _anchor(module: cst.Module, converter: _Converter, text: str, scope: Scope) -> ImportAnchor | None:
    """The conventional place for the runtime import: after the module's leading imports (or its
    docstring and ``from __future__`` imports)."""
    newline = module.default_newline
    body = list(module.body)
    offset = None
    index = 0
    if body and isinstance(body[0], cst.SimpleStatementLine) and len(body[0].body) == 1 and \
            isinstance(body[0].body[0], cst.Expr) and isinstance(body[0].body[0].value,
                                                                 (cst.SimpleString, cst.ConcatenatedString)):
        index = 1
    last_import = None
    for statement in body[index:]:
        if isinstance(statement, cst.SimpleStatementLine) and all(
                isinstance(item, (cst.Import, cst.ImportFrom)) for item in statement.body):
            last_import = statement
            continue
        break
    if last_import is not None or index == 1:
        after = last_import if last_import is not None else body[0]
        end = converter._raw(after).end
        line_end = text.find("\n", end)
        if line_end < 0:
            return None
        offset = line_end + 1
    elif body:
        offset = converter._raw(body[0]).start
        offset = text.rfind("\n", 0, offset) + 1
    else:
        return None
    runtime = frozenset(name.rpartition(".")[2] for local, name in scope.imports.items()
                        if name.startswith(RUNTIME_MODULE + ".") and local == name.rpartition(".")[2])
    if scope.star:
        runtime = runtime | {"*"}
    return ImportAnchor("module", offset, "", newline, runtime)


def _file_line(outline: Outline, text: str, line: int) -> int:
    """The file's line number of a line of the outline."""
    starts = segments.line_starts(outline.text)
    offset = outline.original_offset(starts[min(max(line, 1), len(starts)) - 1])
    return bisect.bisect_right(segments.line_starts(text), offset)


def analyse(text: str, extra_calls: frozenset = frozenset()) -> Analysis:
    """Sites of a Python text; ``extra_calls`` are further function names the pre-scan must not
    pass over (the user's guard-functions)."""
    result = Analysis()
    try:
        text.encode("utf-8")
    except UnicodeEncodeError as error:
        line = text.count("\n", 0, error.start) + 1
        result.problems.append(Problem(line, "not valid UTF-8 (Python source must be UTF-8 here): not processed"))
        return result
    bom = 1 if text.startswith("\ufeff") else 0  # Python reads a file that starts with one as UTF-8
    scanned = prescan.scan(text[bom:], extra_calls)
    if scanned.error is not None:
        result.problems.append(Problem(*scanned.error))
        return result
    if not scanned.flagged:
        result.skipped = True
        return result
    outline = segments.outline(text, scanned.tree, scanned.flagged)
    try:
        module = cst.parse_module(outline.text)
    except cst.ParserSyntaxError as error:
        # the standard library's parser accepted the file: this is libcst's limit, not the user's error
        result.problems.append(Problem(_file_line(outline, text, error.raw_line), "not processed: libcst cannot "
                                       f"parse this file ({error.message.splitlines()[0]})"))
        return result
    positions, in_bytes = _positions(module)
    size = len(outline.text.encode("utf-8")) if in_bytes else len(outline.text)
    expected = size + (not outline.text.endswith(("\n", "\r")))  # libcst counts a missing final line break;
    if positions[module].length != expected:  # anything else is a character it dropped
        line = next((i + 1 for i, (a, b) in enumerate(zip(module.code.splitlines(), outline.text.splitlines()))
                     if a != b), 1)
        line = _file_line(outline, text, line)
        result.problems.append(Problem(line, "not processed: libcst does not keep this file byte for byte, so "
                                             "edits could not be placed exactly"))
        return result
    scopes = scopes_of(module)
    typer = Typer(scopes)
    converter = _Converter(text, positions, typer, _Offsets(outline, in_bytes))
    lines = [0] + [match.end() for match in re.finditer("\n", text)]
    module_scope = scopes[module]
    sites = _Sites(converter, scopes, lines, _anchor(module, converter, text, module_scope))
    sites.block(module, module_scope)
    result.sites = sorted(sites.sites, key=lambda s: s.span.start)
    return result
