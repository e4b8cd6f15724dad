"""The language-neutral expression tree that front ends produce and the planner reads.

Every node carries a ``Span`` (offsets into the decoded source text, end exclusive, including
the node's own source parentheses when it has them) and a ``NumType``. The planner never looks
at syntax: only at these nodes.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from enum import Enum


class Category(str, Enum):
    INTEGER = "integer"
    REAL = "real"
    COMPLEX = "complex"
    LOGICAL = "logical"
    CHARACTER = "character"
    DERIVED = "derived"
    UNKNOWN = "unknown"


@dataclass(frozen=True)
class NumType:
    """A value's type: its category and its kind as the source spells it (None: default kind)."""

    category: Category
    kind: str | None = None

    @property
    def is_floating(self) -> bool:
        return self.category in (Category.REAL, Category.COMPLEX)

    @property
    def is_known(self) -> bool:
        return self.category is not Category.UNKNOWN

    def __str__(self) -> str:
        return self.category.value if self.kind is None else f"{self.category.value}({self.kind})"


UNKNOWN = NumType(Category.UNKNOWN)
INTEGER = NumType(Category.INTEGER)
REAL = NumType(Category.REAL)
LOGICAL = NumType(Category.LOGICAL)
CHARACTER = NumType(Category.CHARACTER)


def arithmetic_type(left: NumType, right: NumType) -> NumType:
    """Type of ``left op right`` for a numeric operator (Fortran and Python agree on this)."""
    cats = {left.category, right.category}
    if Category.UNKNOWN in cats or not cats <= {Category.INTEGER, Category.REAL, Category.COMPLEX}:
        return UNKNOWN
    if Category.COMPLEX in cats:
        category = Category.COMPLEX
    elif Category.REAL in cats:
        category = Category.REAL
    else:
        return NumType(Category.INTEGER, left.kind or right.kind)
    floating = [t for t in (left, right) if t.is_floating]
    kinds = [t.kind for t in floating if t.kind is not None]
    return NumType(category, kinds[0] if kinds else None)


class Level(str, Enum):
    """Precedence levels the planner cares about; everything else is OTHER."""

    ADDITIVE = "additive"
    MULTIPLICATIVE = "multiplicative"
    POWER = "power"
    OTHER = "other"


@dataclass(frozen=True)
class Span:
    start: int
    end: int


@dataclass(frozen=True)
class Node:
    span: Span
    type: NumType
    parenthesised: bool

    def children(self) -> tuple["Node", ...]:
        return ()


@dataclass(frozen=True)
class Operand(Node):
    """A primary. ``form`` says which: "name" (a variable), "element" (array element or
    component of variables, no call), "call" (function reference), "literal", "constructor",
    "section" (a subscript triplet) or "other". A call of a standard function that the code does
    not shadow names it in ``function`` with a language-neutral name (Fortran's ``sum``,
    Python's ``np.sum`` as ``array_sum``; see the front ends). ``key`` is its normalised source text (used to
    tell identical operands apart); ``parts`` are the expressions nested inside it (arguments,
    subscripts)."""

    key: str = ""
    parts: tuple[Node, ...] = field(default=())
    form: str = "other"
    function: str | None = None  # for a call of a standard function (not shadowed): its name
    function_span: Span | None = None  # where that name is written
    keywords: tuple[str | None, ...] = ()  # the keyword of each argument in ``parts`` (None: positional)
    rank: int = 0  # of a whole array named by a "name" operand; 0: scalar or not known
    method: bool = False  # a method call (arr.sum()): parts[0] is the receiver, function_span runs
    # from the receiver's end through the opening parenthesis of the arguments

    def children(self) -> tuple[Node, ...]:
        return self.parts


@dataclass(frozen=True)
class Operation(Node):
    operator: str = ""
    level: Level = Level.OTHER
    left: Node | None = None
    right: Node | None = None
    operator_span: Span | None = None

    def children(self) -> tuple[Node, ...]:
        return (self.left, self.right)


@dataclass(frozen=True)
class Unary(Node):
    operator: str = ""
    operand: Node | None = None

    def children(self) -> tuple[Node, ...]:
        return (self.operand,)


@dataclass(frozen=True)
class ImportAnchor:
    """Where the enclosing scoping unit can take a new import line, and what it imports
    from the runtime already ("*" for everything)."""

    unit: str  # identifies the unit, for adding an import once
    offset: int  # start of the line the import goes before
    indent: str
    newline: str
    runtime_names: frozenset[str] = frozenset()


@dataclass(frozen=True)
class Site:
    """One statement's expressions, as the planner sees them."""

    span: Span
    line: int
    roots: tuple[Node, ...]
    context: str
    anchor: ImportAnchor | None = None
    in_loop: bool = False  # inside a loop or array construct the compiler may vectorise


def walk(node: Node):
    """Every node of a tree, parents before children."""
    stack = [node]
    while stack:
        current = stack.pop()
        yield current
        stack.extend(reversed([c for c in current.children() if c is not None]))


def walk_with_parents(root: Node):
    """(node, parent) for every node of a tree, parents before children (the root's parent: None)."""
    stack: list[tuple[Node, Node | None]] = [(root, None)]
    while stack:
        node, parent = stack.pop()
        yield node, parent
        stack.extend((child, node) for child in reversed(node.children()) if child is not None)
