"""Differential checks of the chain rule: rewritten Fortran must give the same bits.

The rule puts explicit parentheses into ambiguous arithmetic chains
(``a + b + c`` -> ``(a + b) + c``), following the left-to-right
interpretation the standard gives to such chains (Fortran 2018, 10.1.5.2.4
and the grammar of level-2 expressions in 10.1.2.4, which makes ``+ -`` and
``* /`` left-associative).  Checks here use things outside the rewriting
core:

* gfortran (compile the original and the rewritten code, run both on the
  same inputs read from a file, compare the float64 bits),
* fparser2 (an independent Fortran parser: the rewritten code must parse,
  and its tree without parentheses must be the original's tree),
* NumPy float64 arithmetic (IEEE 754 correctly rounded operations) evaluating
  the generated expression tree in the standard's left-to-right order.
"""

from __future__ import annotations

import random
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np
import pytest
from fparser.common.readfortran import FortranStringReader
from fparser.two import Fortran2003 as F2003
from fparser.two.parser import ParserFactory
from fparser.two.utils import Base
from hypothesis import HealthCheck, Phase, given, settings
from hypothesis import strategies as st

from rewrite.config import Options
from rewrite.api import rewrite_text
from rewrite.verify.gfortran import evaluate_expressions
from rewrite.verify.textdiff import classify_insertions, join_continuations

CHAINS_ONLY = Options(rules=("chain",))  # this file checks the chain rule alone

SCALARS = ["a", "b", "c", "d", "e", "f", "g", "h"]
ARRAY = ("v", 4)
VARIABLES = SCALARS + [f"{ARRAY[0]}({ARRAY[1]})"]
NCOLS = len(SCALARS) + ARRAY[1]
COLUMN = {name: k for k, name in enumerate(SCALARS)}

# Real(8) literals (value = the Python float of the same decimal text, both
# correctly rounded) and small integer literals (integer arithmetic where
# both operands are integers, Fortran 2018 10.1.5.2.1 and 10.9.5.2.1).
REAL_LITERALS = ["0.5d0", "3.0d0", "1.0d-3", "2.5d0", "0.1d0", "7.0d0", "1.5d-8", "1.0d10", "4.0d0"]
INT_LITERALS = ["2", "3", "5", "10"]


# --------------------------------------------------------------------------
# Expression trees: render to Fortran, evaluate left to right with NumPy
# --------------------------------------------------------------------------


@dataclass
class Ctx:
    """Evaluation context: input columns and rows whose bits are not certain.

    ``unsure``: a non-finite intermediate or a MAX case below (the reference
    is not compared there).  ``max_odd``: a MAX saw a NaN or two equal values.
    """

    cols: np.ndarray
    unsure: np.ndarray
    max_odd: np.ndarray = None

    def __post_init__(self):
        if self.max_odd is None:
            self.max_odd = np.zeros(len(self.cols), dtype=bool)

    def note(self, value):
        if isinstance(value, np.ndarray):
            self.unsure |= ~np.isfinite(value)
        return value


def _arith(op, x, y, ctx):
    """Fortran intrinsic operation on (kind, value) pairs, integer or real(8)."""
    kx, vx = x
    ky, vy = y
    if kx == "i" and ky == "i":
        if op == "+":
            return ("i", vx + vy)
        if op == "-":
            return ("i", vx - vy)
        if op == "*":
            return ("i", vx * vy)
        q = abs(vx) // abs(vy)  # integer division truncates toward zero
        return ("i", q if (vx >= 0) == (vy >= 0) else -q)
    fx = np.float64(vx) if kx == "i" else vx
    fy = np.float64(vy) if ky == "i" else vy
    with np.errstate(all="ignore"):
        if op == "+":
            r = fx + fy
        elif op == "-":
            r = fx - fy
        elif op == "*":
            r = fx * fy
        else:
            r = fx / fy
    n = len(ctx.cols)
    return ("r", ctx.note(np.broadcast_to(np.asarray(r, dtype=np.float64), (n,)).copy()))


class Node:
    kind = "r"

    def render(self) -> str:
        raise NotImplementedError

    def evaluate(self, ctx: Ctx):
        raise NotImplementedError

    def chains(self):
        return []


@dataclass
class Var(Node):
    name: str
    kind = "r"

    def render(self):
        return self.name

    def evaluate(self, ctx):
        return ("r", ctx.cols[:, COLUMN[self.name]])


@dataclass
class Elem(Node):
    index: int
    kind = "r"

    def render(self):
        return f"{ARRAY[0]}({self.index})"

    def evaluate(self, ctx):
        return ("r", ctx.cols[:, len(SCALARS) + self.index - 1])


@dataclass
class Lit(Node):
    text: str

    @property
    def kind(self):
        return "r" if "d" in self.text else "i"

    def render(self):
        return self.text

    def evaluate(self, ctx):
        if self.kind == "i":
            return ("i", int(self.text))
        return ("r", np.full(len(ctx.cols), float(self.text.replace("d", "e"))))


@dataclass
class Square(Node):
    base: Node
    kind = "r"

    def render(self):
        return f"{self.base.render()}**2"

    def evaluate(self, ctx):
        # gfortran expands x**2 to x*x (one correctly rounded product)
        x = self.base.evaluate(ctx)
        return _arith("*", x, x, ctx)


@dataclass
class Call(Node):
    name: str  # "sqrt_abs", "abs", "max"
    args: list

    @property
    def kind(self):
        return "r" if self.name != "abs" else self.args[0].kind

    def render(self):
        inner = ", ".join(a.render() for a in self.args)
        if self.name == "sqrt_abs":
            return f"sqrt(abs({inner}))"
        return f"{self.name}({inner})"

    def evaluate(self, ctx):
        vals = [a.evaluate(ctx) for a in self.args]
        if self.name == "abs":
            k, v = vals[0]
            return (k, abs(v) if k == "i" else np.abs(v))
        if self.name == "sqrt_abs":
            with np.errstate(all="ignore"):
                return ("r", ctx.note(np.sqrt(np.abs(vals[0][1]))))
        x, y = vals[0][1], vals[1][1]
        # MAX with a NaN, or of two equal values (which zero's sign?), is
        # processor dependent.  Observed with gfortran 12 at -O0: MAX becomes
        # GCC's MAX_EXPR, whose result for a NaN operand is unspecified; on
        # x86-64 it is maxsd, which returns its second operand, and which
        # operand comes second depends on the surrounding code.  So the same
        # MAX(NaN, y) gives NaN in one expression and y in another, even at
        # -O0.  Such rows are left out of every bit comparison.
        odd = np.isnan(x) | np.isnan(y) | (x == y)
        ctx.max_odd |= odd
        ctx.unsure |= odd
        return ("r", np.where(x > y, x, y))

    def chains(self):
        return [c for a in self.args for c in a.chains()]


@dataclass
class Paren(Node):
    inner: Node

    @property
    def kind(self):
        return self.inner.kind

    def render(self):
        return f"({self.inner.render()})"

    def evaluate(self, ctx):
        return self.inner.evaluate(ctx)

    def chains(self):
        return self.inner.chains()


@dataclass
class Chain(Node):
    """``[-] x1 op x2 op ... xn`` at one precedence level, as the source writes it."""

    level: str  # "add" or "mul"
    operands: list
    ops: list
    lead_minus: bool = False
    spaces: list = field(default_factory=list)

    def render(self):
        out = "-" if self.lead_minus else ""
        out += self.operands[0].render()
        for k, (op, x) in enumerate(zip(self.ops, self.operands[1:])):
            sp = self.spaces[k] if k < len(self.spaces) else ""
            out += f"{sp}{op}{sp}{x.render()}"
        return out

    def _kinds(self):
        kinds = [x.kind for x in self.operands]
        acc = kinds[0]
        real_op = False
        for k in kinds[1:]:
            if acc == "r" or k == "r":
                real_op = True
                acc = "r"
        return acc, real_op

    @property
    def kind(self):
        return self._kinds()[0]

    @property
    def has_real_operation(self):
        return self._kinds()[1]

    def evaluate(self, ctx):
        acc = self.operands[0].evaluate(ctx)
        if self.lead_minus:
            # "-x*y + z" is "(-(x*y)) + z": the sign applies to the first term
            k, v = acc
            acc = (k, -v)
        for op, x in zip(self.ops, self.operands[1:]):
            acc = _arith(op, acc, x.evaluate(ctx), ctx)
        return acc

    def chains(self):
        return [self] + [c for x in self.operands for c in x.chains()]


def _unparenthesised(node: Node) -> Node:
    while isinstance(node, Paren):
        node = node.inner
    return node


def expected_pairs(node: Node):
    """Parenthesis pairs the rule should insert, or None when not predictable.

    A chain of n >= 3 operands with a real operation gets n - 2 pairs
    (``a+b+c+d`` -> ``((a+b)+c)+d``).  By design ``x+x+x`` and ``x*x*x``
    (three equal operands, one commutative operator) are left alone: their
    two groupings differ only by commutativity, which IEEE 754 arithmetic
    keeps exact.  For a variable that is predictable; for other repeated
    operands it is not, and then no prediction is made.
    """
    total = 0
    for ch in node.chains():
        if len(ch.operands) < 3:
            continue
        bare = [_unparenthesised(x) for x in ch.operands]
        texts = {x.render() for x in bare}
        if len(ch.operands) == 3 and len(texts) == 1 and len(set(ch.ops)) == 1 and ch.ops[0] in "+*":
            if isinstance(bare[0], Var):  # x, or (x): the same value
                continue
            return None
        if ch.has_real_operation:
            total += len(ch.operands) - 2
    return total


# ---- generators ----------------------------------------------------------
# One grammar, two drivers: ``pick`` is either hypothesis's ``draw`` (single
# expressions that shrink) or a seeded ``random.Random`` (big batches, one
# compile each, reproducible from the seed).

MAX_DEPTH = 2
MAX_LEN = 120  # free-form lines hold 132 characters (Fortran 2018 6.3.2.1); "    r = " takes 8


class DrawPicker:
    def __init__(self, draw):
        self.draw = draw

    def choice(self, options):
        return self.draw(st.sampled_from(options))


def gen_real(pick, depth):
    """An add-level expression of real type (SQRT and MAX want real arguments)."""
    for _ in range(20):
        node = gen_add(pick, depth)
        if node.kind == "r":
            return node
    return Var(pick.choice(SCALARS))


def gen_primary(pick, depth):
    leaves = ["var", "var", "var", "elem", "lit", "lit", "square"]
    nested = ["call", "paren", "paren"] if depth < MAX_DEPTH else []
    what = pick.choice(leaves + nested)
    if what == "var":
        return Var(pick.choice(SCALARS))
    if what == "elem":
        return Elem(pick.choice(range(1, ARRAY[1] + 1)))
    if what == "lit":
        return Lit(pick.choice(REAL_LITERALS + INT_LITERALS))
    if what == "square":
        return Square(Var(pick.choice(SCALARS)))
    if what == "paren":
        return Paren(gen_add(pick, depth + 1))
    name = pick.choice(["sqrt_abs", "abs", "max"])
    if name == "max":
        return Call(name, [gen_real(pick, depth + 1), gen_real(pick, depth + 1)])
    if name == "sqrt_abs":
        return Call(name, [gen_real(pick, depth + 1)])
    return Call(name, [gen_add(pick, depth + 1)])


def gen_mul(pick, depth):
    n = pick.choice([1, 1, 2, 3, 4] if depth == 0 else [1, 1, 1, 2, 3])
    operands = [gen_primary(pick, depth) for _ in range(n)]
    if n == 1:
        return operands[0]
    ops = [pick.choice(["*", "*", "/"]) for _ in range(n - 1)]
    spaces = [pick.choice(["", " "]) for _ in range(n - 1)]
    return Chain("mul", operands, ops, spaces=spaces)


def gen_add(pick, depth=0):
    n = pick.choice([2, 3, 3, 4, 5, 6] if depth == 0 else [1, 2, 3, 3, 4])
    operands = [gen_mul(pick, depth) for _ in range(n)]
    lead = pick.choice([False, False, False, True])
    if n == 1 and not lead:
        return operands[0]
    ops = [pick.choice(["+", "-"]) for _ in range(n - 1)]
    spaces = [pick.choice(["", " ", " "]) for _ in range(n - 1)]
    return Chain("add", operands, ops, lead_minus=lead, spaces=spaces)


def gen_top(pick):
    for _ in range(50):
        node = gen_add(pick, 0)
        if len(node.render()) <= MAX_LEN:
            return node
    return Chain("add", [Var("a"), Var("b"), Var("c")], ["+", "+"], spaces=[" ", " "])


@st.composite
def top_expressions(draw):
    return gen_top(DrawPicker(draw))


def random_batch(seed: int, size: int):
    rng = random.Random(seed)
    return [gen_top(rng) for _ in range(size)]


# --------------------------------------------------------------------------
# Wrapping an expression in a module, and the text-level checks
# --------------------------------------------------------------------------

MODULE = """\
module sb_chk
  implicit none
contains
  subroutine calc(a, b, c, d, e, f, g, h, v, r)
    real(8), intent(in) :: a, b, c, d, e, f, g, h
    real(8), intent(in) :: v(4)
    real(8), intent(out) :: r
    r = {expr}
  end subroutine calc
end module sb_chk
"""
EXPR_LINE = 8  # 1-based line of "r = ..."
EXPR_PREFIX = "    r = "


def wrap(expr: str) -> str:
    return MODULE.format(expr=expr)


def unwrap(text: str, extra_lines: int = 0) -> str:
    """The expression of ``r = ...``, continued lines joined."""
    lines = text.splitlines(keepends=True)[EXPR_LINE - 1 : EXPR_LINE + extra_lines]
    line = join_continuations("".join(lines)).rstrip("\n")
    assert line.startswith(EXPR_PREFIX), line
    return line[len(EXPR_PREFIX):]


def fparser_tree(text: str):
    # outside check: fparser2, an independent Fortran 2003/2008 parser
    parser = ParserFactory().create(std="f2008")
    return parser(FortranStringReader(text, ignore_comments=False))


def shape_without_parens(node):
    """The parse tree as nested tuples, every Parenthesis node replaced by its content."""
    if isinstance(node, F2003.Parenthesis):
        return shape_without_parens(node.items[1])
    if isinstance(node, Base):
        return (type(node).__name__, tuple(shape_without_parens(c) for c in node.children))
    if isinstance(node, (tuple, list)):
        return tuple(shape_without_parens(c) for c in node)
    return node


def check_text_level(expr: str, tree: Node | None = None):
    """Checks (a)-(d) (and the pair count when ``tree`` is given).

    Returns the rewritten expression and the result.
    """
    source = wrap(expr)
    result = rewrite_text(source, language="fortran", options=CHAINS_ONLY, path="gen.f90")
    assert not result.problems, (expr, result.problems)
    out = result.text

    # (b) pure insertion of parentheses, nothing else touched (except that
    # a line pushed past 132 characters may be continued with "&")
    found = classify_insertions(source, out)
    assert found is not None, f"not a pure parenthesis insertion:\n{source}\n->\n{out}"
    ins, extra = found.parens, len(found.breaks)
    assert bool(ins) == bool(result.edits), (expr, out, result.edits)
    assert all(EXPR_LINE <= out.count("\n", 0, j) + 1 <= EXPR_LINE + extra for j in ins), (expr, out)
    assert all(len(line) <= 132 for line in out.splitlines()), out

    # (a) fparser2 parses the rewritten module, and removing parentheses
    # from both trees gives the same tree: the inserted parentheses group
    # exactly as the language's left-to-right rule does.
    tree_in = fparser_tree(source)
    tree_out = fparser_tree(out)
    assert shape_without_parens(tree_in) == shape_without_parens(tree_out), (
        f"grouping changed:\n  {expr}\n  {unwrap(out, extra)}"
    )

    # (c) a second pass proposes nothing
    again = rewrite_text(out, language="fortran", options=CHAINS_ONLY, path="gen.f90")
    assert not again.problems, (out, again.problems)
    assert again.text == out and not again.edits, (
        f"second pass still edits:\n{out}\n->\n{again.text}"
    )

    # (d) every edit is bit-for-bit, on the expression's line
    for ed in result.edits:
        assert ed.effect == "bit-for-bit", (expr, ed)
        assert ed.line == EXPR_LINE, (expr, ed)
        assert 1 <= ed.column <= len(source.splitlines()[EXPR_LINE - 1]) + 1, (expr, ed)

    # the generator knows every chain it built: each needs n - 2 pairs
    want = expected_pairs(tree) if tree is not None else None
    if want is not None:
        got = len(ins) // 2
        assert got == want, f"expected {want} inserted pairs, got {got}:\n  {expr}\n  {unwrap(out, extra)}"
    return unwrap(out, extra), result


# --------------------------------------------------------------------------
# Inputs: wide magnitudes, both signs, cancellation
# --------------------------------------------------------------------------


CANONICAL_NAN = np.uint64(0x7FF8000000000000)


def canonical_nan(bits: np.ndarray) -> np.ndarray:
    """Replace every NaN bit pattern by one quiet NaN."""
    out = bits.copy()
    out[np.isnan(bits.view(np.float64))] = CANONICAL_NAN
    return out


def make_inputs(seed: int, rows: int = 1200) -> np.ndarray:
    rng = np.random.default_rng(seed)
    n = rows
    x = np.empty((n, NCOLS))
    sign = rng.choice([-1.0, 1.0], size=(n, NCOLS))
    kind = rng.choice(6, size=n, p=[0.3, 0.12, 0.23, 0.1, 0.1, 0.15])
    moderate = sign * 10.0 ** rng.uniform(-8, 8, size=(n, NCOLS))
    extreme = sign * 10.0 ** rng.uniform(-300, 300, size=(n, NCOLS))
    small_int = rng.integers(-10, 11, size=(n, NCOLS)).astype(np.float64)
    small_int[rng.random((n, NCOLS)) < 0.05] = -0.0
    pow2 = sign * np.ldexp(1.0, rng.integers(-60, 61, size=(n, NCOLS)))
    # cancellation: big values and their negations (or near-negations),
    # with some small values beside them, in random columns
    big = rng.choice([-1.0, 1.0], size=n) * 10.0 ** rng.uniform(0, 17, size=n)
    pool = np.column_stack(
        [big, -big, big * (1 + 2.0**-52), -big * (1 - 2.0**-50), np.ones(n), -np.ones(n),
         np.full(n, 1e-3), big * 1e-8, -big, big, np.full(n, 0.5), np.full(n, 1e16)]
    )
    cancel = np.take_along_axis(pool, rng.permuted(np.tile(np.arange(NCOLS), (n, 1)), axis=1), axis=1)
    per_col = rng.choice(5, size=(n, NCOLS))
    mixed = np.choose(per_col, [moderate, extreme, small_int, pow2, cancel])
    for k, src in enumerate([moderate, extreme, cancel, small_int, pow2, mixed]):
        x[kind == k] = src[kind == k]
    return x


# --------------------------------------------------------------------------
# Tests
# --------------------------------------------------------------------------


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(tree=top_expressions())
def test_chain_rewrite_text_level(tree):
    """(a)-(d) on one expression at a time (no compiler; shrinks fast)."""
    check_text_level(tree.render(), tree)


@settings(
    max_examples=6,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
    # each example compiles a program: no shrinking, the message names the
    # failing expression and row instead
    phases=[Phase.explicit, Phase.reuse, Phase.generate],
)
@given(tree_seed=st.integers(0, 2**32 - 1), size=st.integers(40, 60), seed=st.integers(0, 2**32 - 1))
def test_chain_rewrite_same_bits_gfortran_O0(gfortran, tree_seed, size, seed):
    """(e): original and rewritten give identical bits, and the standard's order."""
    trees = random_batch(tree_seed, size)
    exprs = [t.render() for t in trees]
    rewritten = [check_text_level(e, t)[0] for e, t in zip(exprs, trees)]
    inputs = make_inputs(seed)
    # outside check: gfortran 12 at -O0 on x86-64 (SSE2, no FMA contraction),
    # one program, inputs from a stream file read at run time.
    bits = evaluate_expressions(exprs + rewritten, VARIABLES, inputs, ["-O0"], compiler=gfortran)
    # IEEE 754-2008 6.3: the sign of a NaN result is not specified, and which
    # operand's NaN an addition passes on depends on operand order in the
    # machine code, which the compiler may swap for a commutative operation.
    # So every NaN counts as one value; all other bits must match.
    bits = canonical_nan(bits)
    orig_bits, new_bits = bits[:, : len(exprs)], bits[:, len(exprs):]
    checked = 0
    for k, tree in enumerate(trees):
        # reference: NumPy float64 (IEEE 754 correctly rounded + - * / sqrt)
        # evaluating the tree left to right, Fortran 2018 10.1.5.2.4 / 10.1.2.4
        ctx = Ctx(inputs, np.zeros(len(inputs), dtype=bool))
        kind, value = tree.evaluate(ctx)
        want = np.broadcast_to(np.float64(value) if kind == "i" else value, (len(inputs),))

        # original and rewritten: identical bits on every row (NaN and
        # infinity included) except where a MAX met a NaN or a tie
        rows = ~ctx.max_odd
        bad = np.nonzero(rows & (orig_bits[:, k] != new_bits[:, k]))[0]
        assert bad.size == 0, (
            f"bits differ at -O0 for\n  {exprs[k]}\n  {rewritten[k]}\nrow {inputs[bad[0]].tolist()}: "
            f"{orig_bits[bad[0], k].view(np.float64)} vs {new_bits[bad[0], k].view(np.float64)}"
        )
        # rewritten code computes exactly the left-to-right value, on rows
        # where every intermediate is finite and MAX is not at a tie
        sure = ~ctx.unsure & np.isfinite(want)
        got = new_bits[sure, k]
        ref = np.ascontiguousarray(want[sure]).view(np.uint64)
        bad = np.nonzero(got != ref)[0]
        assert bad.size == 0, (
            f"rewritten code differs from left-to-right evaluation:\n  {exprs[k]}\n  {rewritten[k]}\n"
            f"row {inputs[sure][bad[0]].tolist()}: {got[bad[0]].view(np.float64)} vs {ref[bad[0]].view(np.float64)}"
        )
        checked += int(sure.sum())
    assert checked > 0


# ---- seed fact -------------------------------------------------------------


def test_seed_fact_absorption(gfortran):
    # common practice, no source: (1e-20 + 1) - 1 == 0 while 1e-20 + (1 - 1) == 1e-20
    assert (1e-20 + 1.0) - 1.0 == 0.0
    assert 1e-20 + (1.0 - 1.0) == 1e-20
    # outside check: Python fractions.Fraction: the exact sum is not 0, so the
    # 0 is the rounding of the first addition
    assert Fraction(1e-20) + Fraction(1) - Fraction(1) == Fraction(1e-20)
    new_expr, result = check_text_level("a + b + c")
    assert result.edits and all(ed.rule == "chain" for ed in result.edits)
    assert new_expr.replace(" ", "") == "(a+b)+c"
    row = np.zeros((1, NCOLS))
    row[0, :3] = [1e-20, 1.0, -1.0]
    # outside check: gfortran 12, -O0 and -O2 -ffast-math (parentheses kept,
    # GCC manual, -fprotect-parens)
    for flags in (["-O0"], ["-O2", "-ffast-math"]):
        bits = evaluate_expressions([new_expr], VARIABLES, row, flags, compiler=gfortran)
        assert bits[0, 0] == np.float64(0.0).view(np.uint64), flags


# ---- reassociation probe -----------------------------------------------------

PROBE_SHAPES = [
    "a + b + c + d",
    "a + b + c + d + e + f + g + h",
    "a - b + c - d + e - f",
    "a + 1.0d0 + b - 1.0d0",
    "a + b - a + c",
    "v(1) + v(2) + v(3) + v(4)",
    "a*b*c*d",
    "a*0.1d0*10.0d0",
    "a*b + c*d + e*f + g*h",
    "-a + b + c + d",
]


def probe_inputs(seed: int = 7, rows: int = 4000) -> np.ndarray:
    """Cancellation-heavy inputs with no subnormal values or results.

    -ffast-math makes the program flush subnormals to zero, which would
    differ from -O0 for reasons other than the order of operations.
    """
    rng = np.random.default_rng(seed)
    n = rows
    sign = rng.choice([-1.0, 1.0], size=(n, NCOLS))
    x = sign * 10.0 ** rng.uniform(-20, 16, size=(n, NCOLS))
    big = 10.0 ** rng.uniform(8, 17, size=n)
    for col in range(NCOLS):
        pick = rng.random(n) < 0.35
        x[pick, col] = rng.choice([1.0, -1.0], size=pick.sum()) * big[pick]
        pick = rng.random(n) < 0.15
        x[pick, col] = rng.choice([1.0, -1.0, 1e-3, 0.5], size=pick.sum())
    return x


def test_reassociation_probe(gfortran, gfortran_banner):
    """Where -O2 -ffast-math reorders a chain, the rewritten chain must not change."""
    inputs = probe_inputs()
    # outside check: gfortran 12; -O0 keeps the source order, -ffast-math
    # allows reassociation (GCC manual, -fassociative-math) except across
    # parentheses (GCC manual, -fprotect-parens, on unless -Ofast).
    base = evaluate_expressions(PROBE_SHAPES, VARIABLES, inputs, ["-O0"], compiler=gfortran)
    scalar = evaluate_expressions(
        PROBE_SHAPES, VARIABLES, inputs, ["-O2", "-ffast-math", "-fno-inline"], compiler=gfortran
    )
    # same shapes inlined into the row loop of one unit, where -O3 may vectorise
    looped = evaluate_expressions(
        PROBE_SHAPES, VARIABLES, inputs, ["-O3", "-ffast-math"], separate_unit=False, compiler=gfortran
    )
    reordered = sorted(
        {k for k in range(len(PROBE_SHAPES)) if (base[:, k] != scalar[:, k]).any()}
        | {k for k in range(len(PROBE_SHAPES)) if (base[:, k] != looped[:, k]).any()}
    )
    if not reordered:
        pytest.skip("this compiler does not reorder here")
    shapes = [PROBE_SHAPES[k] for k in reordered]
    rewritten = [check_text_level(s)[0] for s in shapes]
    for s, r in zip(shapes, rewritten):
        assert r != s, f"a chain that -ffast-math reorders was not edited: {s}"
    # The rewritten chains are kept in scalar code: separate compilation unit
    # and -fno-inline, one call per row.  Inlined into a vectorised loop under
    # -O3 -ffast-math the vectoriser may still reassociate (reductions), so
    # that case is not claimed here.
    new_o0 = evaluate_expressions(rewritten, VARIABLES, inputs, ["-O0"], compiler=gfortran)
    new_fast = evaluate_expressions(
        rewritten, VARIABLES, inputs, ["-O2", "-ffast-math", "-fno-inline"], compiler=gfortran
    )
    # Observation only (printed, not asserted): the same rewritten chains
    # inlined into the row loop of one unit.  Seen with gfortran 12.2: when
    # -O3 -ffast-math vectorises that loop, ((a*b)*c)*d comes out as
    # (a*b)*(c*d) all the same (parentheses not kept by the vectorised
    # code); with -fno-tree-loop-vectorize, or in scalar code, they are kept.
    new_loop = evaluate_expressions(
        rewritten, VARIABLES, inputs, ["-O3", "-ffast-math"], separate_unit=False, compiler=gfortran
    )
    print(f"probe compiler: {gfortran_banner}")
    for j, k in enumerate(reordered):
        print(
            f"probe {shapes[j]!r}: original differs from -O0 in "
            f"{int((scalar[:, k] != base[:, k]).sum())} rows (-O2 -ffast-math, scalar), "
            f"{int((looped[:, k] != base[:, k]).sum())} rows (-O3 -ffast-math, loop); "
            f"rewritten in a vectorised loop: {int((new_loop[:, j] != new_o0[:, j]).sum())} rows"
        )
    for j, k in enumerate(reordered):
        assert np.array_equal(new_o0[:, j], base[:, k]), (shapes[j], rewritten[j])
        bad = np.nonzero(new_o0[:, j] != new_fast[:, j])[0]
        assert bad.size == 0, (
            f"rewritten {rewritten[j]!r} still differs under -O2 -ffast-math, "
            f"row {inputs[bad[0]].tolist()}"
        )
