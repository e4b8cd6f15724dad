"""The fast pre-scan: does a Python file hold anything the rules could touch?

The standard library's ``ast`` parses about ten times faster than libcst, so every file is
first read with it; only files with a candidate go through the libcst front end. The scan is
conservative: it may send a file with nothing to do to libcst, never the other way round.
Candidates: chains of three or more operands of one precedence level with no string piece
among them (a left operand in parentheses starts after the chain does, so it ends the chain), powers, the
matrix operator, and calls of the functions the rules know (sums, means, min/max and friends,
libm- and BLAS-dependent functions).
"""
from __future__ import annotations

import ast
from dataclasses import dataclass

CALLS = frozenset("""sum mean min max minimum maximum fmin fmax amin amax reduce dot matmul einsum inner
tensordot vdot sin cos tan asin acos atan atan2 arcsin arccos arctan arctan2 sinh cosh tanh asinh acosh
atanh arcsinh arccosh arctanh exp exp2 expm1 log log2 log10 log1p erf erfc gamma lgamma cbrt hypot pow
power float_power solve inv lstsq""".split())
_ADDITIVE = (ast.Add, ast.Sub)
_MULTIPLICATIVE = (ast.Mult, ast.Div)


def _level(operator: ast.operator) -> int:
    if isinstance(operator, _ADDITIVE):
        return 1
    if isinstance(operator, _MULTIPLICATIVE):
        return 2
    return 0


def _is_string_piece(node: ast.expr) -> bool:
    return isinstance(node, ast.JoinedStr) or (isinstance(node, ast.Constant) and isinstance(node.value, (str, bytes)))


def _chain_operands(node: ast.BinOp):
    level = _level(node.op)
    current: ast.expr = node
    while isinstance(current, ast.BinOp) and _level(current.op) == level:
        yield current.right
        current = current.left
    yield current


_LEAVES = (ast.expr_context, ast.operator, ast.unaryop, ast.cmpop, ast.boolop, ast.Name, ast.Constant, ast.alias)
_CHILD_FIELDS: dict[type, tuple[str, ...]] = {}


def _nodes(tree: ast.AST):
    """Every node that can hold a candidate: ``ast.walk`` without names, constants, operators
    and contexts (a third of all nodes), and with each type's fields looked up once."""
    stack = [tree]
    while stack:
        node = stack.pop()
        yield node
        kind = type(node)
        fields = _CHILD_FIELDS.get(kind)
        if fields is None:
            fields = _CHILD_FIELDS[kind] = tuple(f for f in kind._fields if f != "ctx")
        for name in fields:
            value = getattr(node, name, None)
            if isinstance(value, list):
                stack.extend(item for item in value if isinstance(item, ast.AST) and not isinstance(item, _LEAVES))
            elif isinstance(value, ast.AST) and not isinstance(value, _LEAVES):
                stack.append(value)


def has_candidates(tree: ast.AST, calls: frozenset = CALLS) -> bool:
    for node in _nodes(tree):
        if isinstance(node, ast.BinOp):
            if isinstance(node.op, (ast.Pow, ast.MatMult)):
                return True
            level = _level(node.op)
            left = node.left
            if level and isinstance(left, ast.BinOp) and _level(left.op) == level \
                    and (left.lineno, left.col_offset) == (node.lineno, node.col_offset):  # left not in parentheses
                if not any(_is_string_piece(operand) for operand in _chain_operands(node)):
                    return True
        elif isinstance(node, ast.Call):
            function = node.func
            name = function.attr if isinstance(function, ast.Attribute) else getattr(function, "id", None)
            if name in calls:
                return True
    return False


@dataclass(frozen=True)
class Scan:
    tree: ast.Module | None = None
    flagged: frozenset[int] = frozenset()  # indexes of the top-level statements that hold a candidate
    error: tuple[int, str] | None = None  # syntax error as (line, message)


def scan(text: str, extra_calls: frozenset = frozenset()) -> Scan:
    """Parse with ast and find the top-level statements that hold a candidate (``extra_calls``:
    further function names that count, such as the user's guard-functions)."""
    try:
        tree = ast.parse(text)
    except SyntaxError as error:
        message = error.msg or "invalid syntax"
        return Scan(error=(error.lineno or 1, f"syntax error: {message}"))
    except (ValueError, MemoryError, RecursionError) as error:
        return Scan(error=(1, f"cannot parse: {error}"))
    calls = CALLS | extra_calls
    return Scan(tree, frozenset(index for index, statement in enumerate(tree.body)
                                if has_candidates(statement, calls)))
