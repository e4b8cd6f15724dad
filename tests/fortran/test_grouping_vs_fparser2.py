"""Our expression parser against fparser2, an independent Fortran parser.

Outside check: fparser2 (the fparser package) implements the Fortran 2003/2008 expression
grammar of the standard (Fortran 2018, 10.1.2: levels, left-to-right grouping of + - * /,
right-to-left grouping of **, a leading sign applying to the whole add-operand). For random
expressions, both must agree on every grouping; and the rewritten statement, parsed by fparser2,
must have the same tree as the original once parentheses are set aside.
"""
from __future__ import annotations

import re

from hypothesis import given, settings
from hypothesis import strategies as st

from rewrite.api import rewrite_text
from rewrite.config import Options
from rewrite.fortran.expr import ExpressionParser
from rewrite.fortran.lexer import tokenize
from rewrite.ir import Operand, Operation, Unary, UNKNOWN

from conftest import module


def _fparser2_classes():
    from fparser.two import Fortran2003
    from fparser.two.parser import ParserFactory

    ParserFactory().create(std="f2008")
    return Fortran2003


def _render_fparser2(node, keep_parentheses: bool) -> str:
    from fparser.two.utils import BinaryOpBase, UnaryOpBase

    name = type(node).__name__
    if name == "Parenthesis":
        inner = _render_fparser2(node.items[1], keep_parentheses)
        if type(node.items[1]).__name__ == "Parenthesis":
            return inner  # ((e)) groups like (e): our tree keeps one flag
        return f"[{inner}]" if keep_parentheses else inner
    if isinstance(node, BinaryOpBase):
        left, operator, right = node.items
        return f"({_render_fparser2(left, keep_parentheses)}{operator.lower()}{_render_fparser2(right, keep_parentheses)})"
    if isinstance(node, UnaryOpBase):
        operator, operand = node.items
        return f"({operator}{_render_fparser2(operand, keep_parentheses)})"
    return re.sub(r"\s+", "", str(node)).lower()


def _render_ours(node) -> str:
    if isinstance(node, Operation):
        text = f"({_render_ours(node.left)}{node.operator}{_render_ours(node.right)})"
    elif isinstance(node, Unary):
        text = f"({node.operator}{_render_ours(node.operand)})"
    else:
        text = node.key
    return f"[{text}]" if node.parenthesised else text


class _AnyReal:
    def name_type(self, name):
        from rewrite.ir import REAL
        return REAL

    def reference_type(self, name, arguments):
        return UNKNOWN

    def component_type(self, base, component):
        return UNKNOWN

    def is_variable(self, name):
        return False

    def intrinsic_name(self, name):
        return None

    def rank_of(self, name):
        return 0


_leaves = st.sampled_from(["a", "b", "c", "d", "x1", "2.0", "1.5d0", "3"])


def _expressions():
    def extend(inner):
        binary = st.tuples(inner, st.sampled_from(["+", "-", "*", "/", "**"]), inner).map(
            lambda t: f"{t[0]} {t[1]} {t[2]}")
        return st.one_of(binary, inner.map(lambda e: f"({e})"))

    return st.recursive(_leaves, extend, max_leaves=10)


def _leading(expression: st.SearchStrategy) -> st.SearchStrategy:
    return st.tuples(st.sampled_from(["", "-", "+"]), expression).map(lambda t: t[0] + t[1])


@settings(max_examples=300, deadline=None)
@given(_leading(_expressions()))
def test_grouping_agrees_with_fparser2(expression):
    f2003 = _fparser2_classes()
    theirs = f2003.Assignment_Stmt(f"r = {expression}").items[2]
    tokens = tokenize(expression)
    parser = ExpressionParser(tokens, tuple(range(len(expression))), _AnyReal())
    ours = parser.parse_expression()
    assert parser.pos == len(tokens)
    assert _render_ours(ours) == _render_fparser2(theirs, keep_parentheses=True)


@settings(max_examples=200, deadline=None)
@given(_leading(_expressions()))
def test_rewrite_keeps_fparser2_tree_and_a_second_run_proposes_nothing(expression):
    f2003 = _fparser2_classes()
    source = module(f"x = {expression}")
    result = rewrite_text(source, options=Options(rules=("chain",)))
    assert result.problems == ()
    assert all(e.effect == "bit-for-bit" for e in result.edits)
    # only parentheses were inserted
    stripped = result.text
    for edit in result.edits:
        for change in edit.changes:
            assert change.start == change.end and set(change.text) <= set("()")
    statement = [line for line in result.text.splitlines() if line.strip().startswith("x =")][0].strip()
    before = f2003.Assignment_Stmt(f"x = {expression}").items[2]
    after = f2003.Assignment_Stmt(statement).items[2]
    # same interpretation (fparser2's tree) once parentheses are set aside
    assert _render_fparser2(after, keep_parentheses=False) == _render_fparser2(before, keep_parentheses=False)
    again = rewrite_text(stripped, options=Options(rules=("chain",)))
    assert again.edits == () and again.text == result.text
