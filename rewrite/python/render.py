"""Python spelling of edited text. Edits are insertions and replacements inside expressions, so
the rest of the file stays byte for byte; Python has no line limit to re-wrap for."""
from __future__ import annotations

from ..edits import TextChange, apply_changes
from ..spelling import Spelling

RUNTIME_MODULE = "rewrite.runtime"  # the package rewritten code imports from


def _code(line: str) -> str:
    """A physical line without its comment (a ``#`` outside strings)."""
    quote = None
    index = 0
    while index < len(line):
        char = line[index]
        if quote:
            if char == "\\":
                index += 2
                continue
            if line.startswith(quote, index):
                index += len(quote)
                quote = None
                continue
        elif char == "#":
            return line[:index]
        elif char in "'\"":
            quote = line[index:index + 3] if line[index:index + 3] in ('"""', "'''") else char
            index += len(quote)
            continue
        index += 1
    return line


def display(text: str, span, changes=()) -> str:
    """One-line text of ``span`` with ``changes`` applied: comments, backslash continuations and
    line breaks removed, for reasons and reports."""
    inside = [TextChange(c.start - span.start, c.end - span.start, c.text, c.order)
              for c in changes if span.start <= c.start and c.end <= span.end]
    edited = apply_changes(text[span.start:span.end], inside)
    parts = []
    for line in edited.splitlines():
        code = _code(line).strip()
        if code.endswith("\\"):
            code = code[:-1].rstrip()
        if code:
            parts.append(code)
    joined = " ".join(parts)
    return joined if "'" in joined or '"' in joined else " ".join(joined.split())


class PythonSpelling(Spelling):
    """How the planner's edits are spelt in Python (the planner knows no syntax)."""

    language = "python"
    sqrt = None  # x**0.5 is reported only: math.sqrt takes no arrays, numpy.sqrt needs numpy
    runtime_functions = frozenset({"exact_sum", "exact_mean", "exact_reduce"})
    guarded_functions = frozenset({"min", "max", "minval", "maxval"})
    sum_dim_ranks = None  # the Python runtime takes any axis
    order_note = ("Python already evaluates it left to right; the parentheses write that order down, so it "
                  "survives a port to Fortran or C and compilers (JIT or vectorising) that may reorder")
    power_note = ("Python computes float ** int with the C library's pow and numpy with its own power loop, "
                  "whose rounding differs between platforms and from any product, so the bits can change; "
                  "where pow raised OverflowError the product gives inf")
    reciprocal_note = ("where the product underflows, the reciprocal loses accuracy (subnormal product), and where "
                       "it is zero a Python float raises ZeroDivisionError (numpy gives inf) where pow raised "
                       "OverflowError")
    runtime_note = "from the samebits runtime package rewrite.runtime, installed with samebits"

    _display = staticmethod(display)

    @staticmethod
    def real_literal(value: str, type_) -> str:
        """A plain float literal: numpy keeps an array's or scalar's float32 dtype when a Python
        float meets it (NEP 50, numpy 2)."""
        return value

    @staticmethod
    def import_line(names: list[str], indent: str, newline: str) -> str:
        return f"{indent}from {RUNTIME_MODULE} import {', '.join(names)}{newline}"


def render(text: str, edits) -> str:
    return apply_changes(text, [change for edit in edits for change in edit.changes])
