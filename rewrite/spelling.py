"""What every language's spelling shares: the planner asks a spelling, never the syntax.

A front end's spelling subclasses ``Spelling`` and sets the language facts the rules consult
(``sqrt``, ``runtime_functions``, ``guarded_functions``, ``sum_dim_ranks``, ``order_note``,
``power_note``, ``reciprocal_note``, ``runtime_note``) and provides ``_display``,
``real_literal`` and ``import_line``.
"""
from __future__ import annotations


class Spelling:
    language = ""
    sqrt: str | None = None
    runtime_functions: frozenset = frozenset()
    guarded_functions: frozenset = frozenset()
    names_ignore_case = False  # Fortran names are case-insensitive
    fma_note = ""  # set where the language's compilers contract a*b + c into an FMA
    vector_libm_note = ""  # set where compilers swap libm for a vector library in vectorised loops
    sum_dim_ranks: tuple | None = None
    order_note = ""  # why pinning the written order of a chain matters in this language
    power_note = ""
    reciprocal_note = ""  # what 1/(x*...*x) does where the product underflows
    runtime_note = ""

    def __init__(self, text: str):
        self.text = text

    def display(self, span, changes=()) -> str:
        """One-line text of ``span`` with ``changes`` applied, for reasons and reports."""
        return self._display(self.text, span, changes)

    @staticmethod
    def _display(text: str, span, changes) -> str:
        raise NotImplementedError

    def spans_lines(self, span) -> bool:
        """True when the span crosses a line break (replacing it could drop a comment)."""
        return "\n" in self.text[span.start:span.end]

    @staticmethod
    def call(function: str, arguments: list[str]) -> str:
        return f"{function}({', '.join(arguments)})"
