"""Fortran spelling of edited text: a free-form line pushed past the line limit is re-wrapped
with ``&`` continuation at token boundaries, outside strings and comments. An edit whose line
cannot be wrapped is refused, never written."""
from __future__ import annotations

from ..edits import Edit, TextChange, apply_changes
from ..spelling import Spelling
from .source import code_length, physical_lines


class WrapError(ValueError):
    pass


def _break_points(line: str) -> list[int]:
    """Positions in a line's code part where a break is safe: after a comma, or before a
    + - * / operator that is not part of ** // /= (/ /) or of a literal's exponent."""
    points = []
    quote = None
    for index, char in enumerate(line):
        if quote:
            if char == quote:
                quote = None
            continue
        if char == "!":
            break
        if char in "'\"":
            quote = char
        elif char == ",":
            points.append(index + 1)
        elif char in "+-*/" and index > 0:
            before, after = line[index - 1], line[index + 1:index + 2]
            if char in "*/" and (before in "*/(" or after in "*/=)"):
                continue
            if char in "+-" and before in "eEdDqQ" and index > 1 and (line[index - 2].isdigit()
                                                                    or line[index - 2] == "."):
                continue
            points.append(index)
    return points


def wrap_line(line: str, limit: int) -> list[str]:
    """Split one physical line into continued lines within ``limit`` columns."""
    indent = line[: len(line) - len(line.lstrip())]
    continuation_indent = indent + "    "
    if len(continuation_indent) >= limit // 2:
        continuation_indent = "  "
    pieces = []
    rest = line
    while code_length(rest)[0] > limit:
        candidates = [p for p in _break_points(rest)
                      if len(rest[:p].rstrip()) + 2 <= limit and rest[:p].strip() and rest[p:].strip()
                      and not rest[p:].lstrip().startswith("!")]
        if not candidates or (pieces and len(continuation_indent + rest[candidates[-1]:].lstrip()) >= len(rest)):
            raise WrapError("the edited line cannot be wrapped within the line limit")
        point = candidates[-1]
        pieces.append(rest[:point].rstrip() + " &")
        rest = continuation_indent + rest[point:].lstrip()
    pieces.append(rest)
    return pieces


def render(text: str, edits: list[Edit], limit: int) -> tuple[str, list[Edit]]:
    """The text with ``edits`` applied and long lines re-wrapped (limit 0: no limit), and the
    edits refused because their line could not be wrapped."""
    accepted = list(edits)
    refused: list[Edit] = []
    lines = physical_lines(text)
    while True:
        changes = sorted((c for e in accepted for c in e.changes), key=lambda c: (c.start, c.end, c.order))
        replacements: dict[int, str] = {}
        failed = None
        index = 0
        for line in lines:
            end = line.start + len(line.text)
            on_line = []
            while index < len(changes) and changes[index].start <= end:
                if changes[index].start >= line.start:
                    on_line.append(changes[index])
                index += 1
            if not on_line:
                continue
            edited = apply_changes(text[line.start:end],
                                   [TextChange(c.start - line.start, c.end - line.start, c.text, c.order) for c in on_line])
            if limit and code_length(edited)[0] > limit:
                try:
                    pieces = wrap_line(edited, limit)
                except WrapError:
                    failed = line
                    break
                newline = "\r\n" if text.startswith("\r\n", end) else "\n"
                edited = newline.join(pieces)
            replacements[line.start] = edited
        if failed is None:
            break
        dropped = [e for e in accepted
                   if any(failed.start <= c.start <= failed.start + len(failed.text) for c in e.changes)]
        refused.extend(dropped)
        accepted = [e for e in accepted if e not in dropped]
    pieces = []
    position = 0
    for line in lines:
        if line.start in replacements:
            pieces.append(text[position:line.start])
            pieces.append(replacements[line.start])
            position = line.start + len(line.text)
    pieces.append(text[position:])
    return "".join(pieces), refused


def display(text: str, span, changes) -> str:
    """One-line text of ``span`` with ``changes`` applied: comments, ``&`` continuation marks
    and line breaks removed, for reasons and reports."""
    inside = [TextChange(c.start - span.start, c.end - span.start, c.text, c.order)
              for c in changes if span.start <= c.start and c.end <= span.end]
    edited = apply_changes(text[span.start:span.end], inside)
    parts = []
    for line in edited.splitlines():
        code = line[:code_length(line)[0]].strip()
        if code.startswith("&"):
            code = code[1:].lstrip()
        if code.endswith("&"):
            code = code[:-1].rstrip()
        if code:
            parts.append(code)
    return " ".join(" ".join(parts).split())


class FortranSpelling(Spelling):
    """How the planner's edits are spelt in Fortran (the planner knows no syntax)."""

    language = "fortran"
    sqrt = "sqrt"
    runtime_functions = frozenset({"exact_sum", "exact_dot", "sb_power"})
    # results that may be -0.0 depending on argument order or layout (and sign with a zero first argument)
    guarded_functions = frozenset({"min", "max", "minval", "maxval", "amin1", "amax1", "dmin1", "dmax1",
                                   "sign", "dsign"})
    names_ignore_case = True
    libm_severity = "note"  # a scalar call outside loops: libm's own rounding only
    fma_note = ("a target with FMA (-march=native, -mfma, every aarch64) may fuse a product and the addition "
                "into one rounding, its choice which; fix: build with -ffp-contract=off (docs/audit.md)")
    vector_libm_note = ("where gfortran vectorises (-O3, and -O2 from GCC 12) it calls a vector math library "
                        "here, with other bits than the scalar one, so a value can depend on the loop length; "
                        "fix: -fno-tree-vectorize")
    sum_dim_ranks = (2, 3)  # exact_sum of samebits_runtime takes dim for whole arrays of these ranks
    order_note = "unparenthesised, the compiler may evaluate it in any mathematically equivalent order"
    power_note = ("how x**n is computed is left to the processor (gfortran groups x**5 and x**6 differently "
                  "at -O0 and -O2, pow differs from products), so the bits can change")
    reciprocal_note = ("where the product underflows, the reciprocal loses accuracy (subnormal product) or is "
                       "inf (product zero)")
    runtime_note = "from the samebits runtime module (write it out with: samebits runtime fortran --out DIR)"

    _display = staticmethod(display)

    @staticmethod
    def real_literal(value: str, type_) -> str:
        """``value`` (like "1.0") as a literal of the kind of ``type_``: 1.0_dp, 1.0d0, 1.0."""
        kind = type_.kind
        if kind is None:
            return value
        if kind == "d":
            return value.replace("e", "d") if "e" in value else value + "d0"
        return f"{value}_{kind}"

    @staticmethod
    def import_line(names: list[str], indent: str, newline: str) -> str:
        return f"{indent}use samebits_runtime, only: {', '.join(names)}{newline}"
