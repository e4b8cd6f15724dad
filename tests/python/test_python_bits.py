"""Rewritten Python, executed: the bit-for-bit edits keep every bit, the answer-changing ones change
answers only as their reasons say.

Each case is a small module of our own (heat-budget and reservoir style formulas, or plain
a, b, c). It is rewritten with ``rewrite_text``; the test first checks that the expected kind of
edit is there (so a tool that stops editing fails here), then ``exec``s the original and the
rewritten text into separate namespaces and calls both on hypothesis inputs (signed zeros,
subnormals, huge values, infinities and NaNs where they make sense).

The yardsticks are outside the tool: Python's own parser (``ast``), ``struct`` bit patterns,
``fractions.Fraction`` exact arithmetic, ``math.fsum``, numpy, and IEEE 754 facts. Each use has a
comment saying where it comes from.

The end of the file keeps the cases of tool bugs these tests once found (now fixed).
"""
from __future__ import annotations

import ast
import functools
import math
import struct
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, example, given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

from rewrite.api import rewrite_text

SETTINGS = settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])
FEW = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])

MAX = 1.7976931348623157e308  # largest finite binary64 (IEEE 754 fact; common practice, no source)
TINY = 5e-324  # smallest subnormal binary64, 2**-1074 (IEEE 754 fact)
NORMAL_MIN = 2.2250738585072014e-308  # smallest normal binary64, 2**-1022 (IEEE 754 fact)
U = Fraction(1, 2**53)  # unit roundoff of binary64 in round to nearest (IEEE 754 fact; common practice)


# -- helpers ---------------------------------------------------------------------------------
@functools.lru_cache(maxsize=None)
def rewritten(source: str):
    result = rewrite_text(source, language="python", path="bits_case.py")
    assert not result.problems, result.problems
    assert result.original == source
    return result


def load(text: str) -> dict:
    namespace = {"__name__": "bits_case"}
    exec(compile(text, "bits_case.py", "exec"), namespace)
    return namespace


@functools.lru_cache(maxsize=None)
def pair(source: str) -> tuple[dict, dict]:
    """(original namespace, rewritten namespace)."""
    return load(source), load(rewritten(source).text)


def f64_bits(x) -> int:
    # outside check: struct packs the IEEE 754 binary64 bit pattern of a Python float
    return struct.unpack("<Q", struct.pack("<d", float(x)))[0]


POSITIVE_ZERO_BITS = f64_bits(0.0)  # 0x0000000000000000 (IEEE 754 encoding of +0)


def fingerprint(value):
    """Type, shape and raw bits of a result (NaN payloads included)."""
    if isinstance(value, (tuple, list)):
        return type(value).__name__, tuple(fingerprint(v) for v in value)
    if isinstance(value, (np.ndarray, np.generic)):
        array = np.asarray(value)
        # outside check: numpy's raw buffer is the IEEE 754 bit pattern of each element
        return type(value).__name__, array.dtype.str, array.shape, array.tobytes()
    if isinstance(value, float):
        return "float", f64_bits(value)
    return type(value).__name__, repr(value)


def outcome(function, *args):
    """What a call gives: its bits, or the exception it raises."""
    with np.errstate(all="ignore"):
        try:
            return "value", fingerprint(function(*args))
        except (ArithmeticError, ValueError) as error:
            return "raises", type(error).__name__


def functions_of(source: str) -> list[str]:
    return [node.name for node in ast.parse(source).body if isinstance(node, ast.FunctionDef)]


def edits_inside(result, name: str):
    """The edits that fall inside the function ``name`` (by line)."""
    tree = ast.parse(result.original)
    node = next(n for n in tree.body if isinstance(n, ast.FunctionDef) and n.name == name)
    return [e for e in result.edits if node.lineno <= e.line <= node.end_lineno]


def returned(text: str, name: str) -> ast.expr:
    tree = ast.parse(text)
    node = next(n for n in tree.body if isinstance(n, ast.FunctionDef) and n.name == name)
    return node.body[-1].value


def without_imports(text: str) -> str:
    """``ast.dump`` of a module without its import statements (the rewrite may add one)."""
    tree = ast.parse(text)
    tree.body = [n for n in tree.body if not isinstance(n, (ast.Import, ast.ImportFrom))]
    return ast.dump(tree)


SPECIALS = [0.0, -0.0, TINY, -TINY, NORMAL_MIN, -NORMAL_MIN, MAX, -MAX, math.inf, -math.inf, math.nan,
            1.0, -1.0, 0.5, 3.0, 1e-300, 1e300]
# every float, with extra weight on the edge cases above and on ordinary magnitudes
any_float = st.one_of(st.floats(), st.sampled_from(SPECIALS), st.floats(-1e3, 1e3))
finite_float = st.floats(allow_nan=False, allow_infinity=False)


# ============================================================================================
# 1. bit-for-bit edits: chains
# ============================================================================================
CHAIN_SCALAR = '''
import math


def net_heat(sw: float, lw: float, sens: float, lat: float, albedo: float) -> float:
    return sw - albedo * sw + lw - sens - lat + sw * albedo * lw / sens / lat


def storage_change(inflow: float, outflow: float, rain: float, evap: float, area: float) -> float:
    return (inflow - outflow) * 3600.0 * 24.0 + rain * area / 1000.0 - evap * area / 1000.0 * 0.5 - -inflow * outflow * area


def mixed(a: float, b: float, c: float, d: float, e: float) -> float:
    return abs(a) * b * c + math.fabs(d) - e / a / b + math.copysign(c, d) * e * a - b + c


def profile(p: list[float], a: float, b: float, c: float, d: float) -> float:
    total = p[0] + p[1] * a + p[2] * a * a + p[3] * a * a * a
    total -= b * c * d - p[0] / b / c
    return total * a * b + -total - c - d
'''

CHAIN_ARRAY = '''
import numpy as np
import numpy.typing as npt


def column_flux(t: npt.NDArray[np.float64], s: npt.NDArray[np.float64], k: float) -> npt.NDArray[np.float64]:
    return k * t * s - t / s / k + t * t * t - s + np.abs(t) * s * k - -t * k * k


def layered(g: npt.NDArray[np.float64], k: float) -> npt.NDArray[np.float64]:
    return g[0] * g[1] * k + g[1] - g[0] - g.T[0] * k * k + g[:, 0] * g[:, 1] / k


def single(t: npt.NDArray[np.float32], s: npt.NDArray[np.float32]) -> npt.NDArray[np.float32]:
    return t * s * t - s / t / s + t - s - t
'''

CHAIN_MODULES = {"scalar": CHAIN_SCALAR, "array": CHAIN_ARRAY}


@pytest.mark.parametrize("source", list(CHAIN_MODULES.values()), ids=list(CHAIN_MODULES))
def test_chain_edits_are_bit_for_bit_and_keep_pythons_own_grouping(source):
    result = rewritten(source)
    for name in functions_of(source):
        chains = [e for e in edits_inside(result, name) if e.rule == "chain"]
        assert chains, f"{name}: no chain edit"  # the tool must still edit these chains
    assert {e.rule for e in result.edits} == {"chain"}
    assert {e.effect for e in result.edits} == {"bit-for-bit"}
    assert result.text != source
    # outside check: Python's own parser (ast) groups + - and * / left to right (Python language
    # reference, "Binary arithmetic operations"; from memory). Parentheses leave no node in the
    # tree, so pinning the written order must give exactly the original tree.
    assert without_imports(result.text) == without_imports(source)


@SETTINGS
@given(st.tuples(*[any_float] * 5), st.lists(any_float, min_size=4, max_size=4))
def test_scalar_chains_give_identical_bits(values, p):
    original, new = pair(CHAIN_SCALAR)
    for name, args in (("net_heat", values), ("storage_change", values), ("mixed", values),
                       ("profile", (p, *values[:4]))):
        # identical trees, so the same IEEE operations in the same order: every bit, NaN payloads
        # included, must agree (common practice, no source), and so must the exceptions
        assert outcome(new[name], *args) == outcome(original[name], *args), name


def float64_arrays(shape):
    return hnp.arrays(np.float64, shape, elements=any_float)


@FEW
@given(st.integers(2, 4).flatmap(lambda n: st.tuples(float64_arrays((n,)), float64_arrays((n,)),
                                                       float64_arrays((n, n)))),
       any_float,
       st.integers(1, 5).flatmap(lambda n: st.tuples(hnp.arrays(np.float32, (n,), elements=st.floats(width=32)),
                                                       hnp.arrays(np.float32, (n,), elements=st.floats(width=32)))))
def test_array_chains_give_identical_bits(arrays, k, singles):
    t, s, g = arrays
    original, new = pair(CHAIN_ARRAY)
    for name, args in (("column_flux", (t, s, k)), ("layered", (g, k)), ("single", singles)):
        before, after = outcome(original[name], *args), outcome(new[name], *args)
        assert after == before, name
    assert outcome(new["single"], *singles)[1][1] == np.dtype(np.float32).str  # stays float32


# random chains of our own: + - * / with unary minus, calls, subscripts and literals
LEAVES = ("a", "b", "c", "d", "p[0]", "p[1]", "abs(a)", "math.fabs(b)", "math.copysign(c, d)", "2.5", "0.1",
          "3.0")
ATOM, UNARY, MULTIPLICATIVE, ADDITIVE = 4, 3, 2, 1


@st.composite
def expressions(draw, depth=0, top=False):
    """(text, precedence) of a random expression written with as few parentheses as Python needs."""
    kinds = ["add", "mul"] if top else (["leaf", "leaf", "add", "mul", "neg", "paren"] if depth < 3 else ["leaf"])
    kind = draw(st.sampled_from(kinds))
    if kind == "leaf":
        return draw(st.sampled_from(LEAVES)), ATOM
    if kind in ("neg", "paren"):
        text, precedence = draw(expressions(depth + 1))
        if kind == "paren":
            return f"({text})", ATOM
        return "-" + (text if precedence >= UNARY else f"({text})"), UNARY
    level, operators = (ADDITIVE, "+-") if kind == "add" else (MULTIPLICATIVE, "*/")
    count = draw(st.integers(3 if top else 2, 5))
    parts = []
    for index in range(count):
        text, precedence = draw(expressions(depth + 1))
        if precedence <= level:  # a lower or equal level needs its own parentheses
            text = f"({text})"
        parts.append(text if index == 0 else f" {draw(st.sampled_from(operators))} {text}")
    return "".join(parts), level


def chain_module(expression: str) -> str:
    return ("import math\n\n\ndef f(a: float, b: float, c: float, d: float, p: list[float]) -> float:\n"
            f"    return {expression}\n")


@FEW
@given(expressions(top=True), st.lists(st.tuples(*[any_float] * 4), min_size=8, max_size=8),
       st.lists(any_float, min_size=2, max_size=2))
def test_random_chains_keep_tree_and_bits(expression, rows, p):
    source = chain_module(expression[0])
    result = rewrite_text(source, language="python")
    assert not result.problems
    # a chain of three or more typed float operands at the top; only x + x + x style chains (one
    # commutative operator, three equal operands: order-free) are rightly left alone
    assume(result.edits)
    assert {(e.rule, e.effect) for e in result.edits} == {("chain", "bit-for-bit")}
    assert ast.dump(ast.parse(result.text)) == ast.dump(ast.parse(source))  # outside check: Python's ast
    original, new = load(source)["f"], load(result.text)["f"]
    for row in rows:
        assert outcome(new, *row, p) == outcome(original, *row, p)
    assert not rewrite_text(result.text, language="python").edits  # idempotent


# ============================================================================================
# 2. power: answer-changing, close to exact, inf where pow raised OverflowError
# ============================================================================================
EXPONENTS = (2, 3, 4, 5, 6, 7, 8, -2, -3, -4, -5, -6, -7, -8)


def _tag(n: int) -> str:
    return f"p{n}" if n > 0 else f"m{-n}"


POWER = "import numpy as np\nimport numpy.typing as npt\n" + "".join(
    f"\n\ndef scalar_{_tag(n)}(x: float) -> float:\n    return x**{n}\n"
    f"\n\ndef array_{_tag(n)}(x: npt.NDArray[np.float64]) -> npt.NDArray[np.float64]:\n    return x**{n}\n"
    for n in EXPONENTS)


def product_shape(node: ast.expr) -> tuple[int, int] | None:
    """(leaves x, multiplications) of a tree made only of ``x`` and ``*``; None otherwise."""
    if isinstance(node, ast.Name) and node.id == "x":
        return 1, 0
    if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Mult):
        left, right = product_shape(node.left), product_shape(node.right)
        if left and right:
            return left[0] + right[0], left[1] + right[1] + 1
    return None


def roundings(n: int) -> int:
    """Rounded operations in the rewritten x**n, read from the rewritten tree (Python's ast)."""
    result = rewritten(POWER)
    node = returned(result.text, f"scalar_{_tag(n)}")
    if n < 0:
        assert isinstance(node, ast.BinOp) and isinstance(node.op, ast.Div)
        assert isinstance(node.left, ast.Constant) and node.left.value == 1.0
        node = node.right
    shape = product_shape(node)
    assert shape is not None, ast.dump(node)
    leaves, multiplications = shape
    assert leaves == abs(n)  # the product really is x**|n|
    assert multiplications == abs(n) - 1  # a binary tree with |n| leaves has |n| - 1 inner nodes
    return multiplications + (1 if n < 0 else 0)


def in_model(x: float, n: int) -> bool:
    """|x|, |x|**|n| and |x|**n all normal and at most MAX/2 (exact arithmetic): no operation of the
    rewritten product underflows or overflows, so the standard error model holds (every
    intermediate lies between |x| and |x|**|n|)."""
    limits = (Fraction(NORMAL_MIN), Fraction(MAX) / 2)
    return all(limits[0] <= abs(v) <= limits[1] for v in (Fraction(x), Fraction(x) ** abs(n), Fraction(x) ** n))


def gamma(k: int) -> Fraction:
    # gamma_k = k u / (1 - k u) bounds |prod (1 + d_i)^(+-1) - 1| for k factors with |d_i| <= u:
    # standard error analysis (Higham, "Accuracy and Stability of Numerical Algorithms", 2nd ed.,
    # Lemma 3.1; from memory). Each IEEE 754 * or / is correctly rounded: fl(a op b) = (a op b)(1 + d).
    return k * U / (1 - k * U)


@pytest.mark.parametrize("n", EXPONENTS)
def test_power_edits_are_answer_changing_with_the_documented_reason(n):
    result = rewritten(POWER)
    for name in (f"scalar_{_tag(n)}", f"array_{_tag(n)}"):
        edits = edits_inside(result, name)
        assert [(e.rule, e.effect) for e in edits] == [("power", "answer-changing")], name
        reason = edits[0].reason
        assert "pow" in reason and "OverflowError" in reason and "inf" in reason
    roundings(n)


def normal_range(n: int):
    """|x| such that |x|, every intermediate and |x|**n are normal (room of 2**22 either side)."""
    low, high = 2.0 ** (-1000 / abs(n)), 2.0 ** (1000 / abs(n))
    return st.tuples(st.floats(low, high), st.booleans()).map(lambda t: -t[0] if t[1] else t[0])


@pytest.mark.parametrize("n", EXPONENTS)
def test_power_is_within_the_error_bound_of_the_exact_value(n):
    k = roundings(n)
    original, new = pair(POWER)

    @settings(max_examples=60, deadline=None)
    @given(normal_range(n))
    def check(x):
        assert in_model(x, n)  # the strategy keeps inside the error model
        exact = Fraction(x) ** n  # outside check: fractions.Fraction exact arithmetic
        ulp = Fraction(math.ulp(float(exact)))  # outside check: math.ulp; float(Fraction) rounds correctly
        after = new[f"scalar_{_tag(n)}"](x)
        error = abs(Fraction(after) - exact)
        assert error <= gamma(k) * abs(exact)
        # in ULPs: u|y| < ulp(y) for normal y, so the bound is k ulps up to the factor 1/(1 - k u)
        assert error <= k * ulp / (1 - k * U)
        if n == 2:  # one IEEE 754 multiplication is correctly rounded (IEEE 754-2019 5.4.1, from memory)
            assert after == float(exact)
        before = original[f"scalar_{_tag(n)}"](x)
        if before != after:  # where they differ, the C library's pow is close to exact as well
            # from memory: common C libraries document pow to within 1 ulp
            assert abs(Fraction(before) - exact) <= max(k, 1) * ulp
        array = np.array([x, -x, x / 2.0 if n > 0 else x * 2.0])
        with np.errstate(all="ignore"):
            new_array = new[f"array_{_tag(n)}"](array)
            old_array = original[f"array_{_tag(n)}"](array)
        for value, got, numpy_got in zip(array.tolist(), new_array.tolist(), old_array.tolist()):
            if not in_model(value, n):
                continue
            exact_value = Fraction(value) ** n
            assert abs(Fraction(got) - exact_value) <= gamma(k) * abs(exact_value)
            # numpy's own x**n (outside: numpy) is close to exact too
            assert abs(Fraction(numpy_got) - exact_value) <= max(k, 1) * Fraction(math.ulp(float(exact_value)))

    check()


def overflow_range(n: int):
    """|x| with |x|**n >= 2**1025: beyond the largest finite binary64 for any rounding."""
    return st.tuples(st.floats(2.0 ** (1025 / n), math.inf), st.booleans()).map(
        lambda t: -t[0] if t[1] else t[0])


@pytest.mark.parametrize("n", [n for n in EXPONENTS if n > 0])
@FEW
@given(data=st.data())
def test_power_gives_inf_where_pow_raised_overflow(n, data):
    original, new = pair(POWER)
    x = data.draw(overflow_range(n))
    sign = -1.0 if (x < 0 and n % 2) else 1.0  # sign of x**n (exact arithmetic)
    if not math.isinf(x):
        with pytest.raises(OverflowError):  # outside check: CPython raises on float ** int overflow
            original[f"scalar_{_tag(n)}"](x)
    after = new[f"scalar_{_tag(n)}"](x)
    assert after == math.copysign(math.inf, sign)
    with np.errstate(all="ignore"):  # numpy's own x**n overflows to the same infinity
        assert original[f"array_{_tag(n)}"](np.array([x]))[0] == after
        assert new[f"array_{_tag(n)}"](np.array([x]))[0] == after


@pytest.mark.parametrize("n", EXPONENTS)
@FEW
@given(data=st.data())
def test_power_near_the_overflow_threshold(n, data):
    """Around |x|**|n| = 2**1024 (above, below; for n < 0 with x small, while x**|n| stays at
    least 2**-1070 so that the product does not vanish): where pow raised OverflowError, the
    product gives inf of the right sign; elsewhere both are finite and close."""
    original, new = pair(POWER)
    m = abs(n)
    centre = 1024 / m if n > 0 else -1024 / m
    if n > 0:
        low, high = 2.0 ** (centre - 2 / m), 2.0 ** (centre + 2 / m)
    else:
        low, high = 2.0 ** (-1070 / m), 2.0 ** (centre + 2 / m)
    x = data.draw(st.floats(low, high)) * data.draw(st.sampled_from([1.0, -1.0]))
    sign = -1.0 if (x < 0 and n % 2) else 1.0
    try:
        before = original[f"scalar_{_tag(n)}"](x)
    except OverflowError:
        assert new[f"scalar_{_tag(n)}"](x) == math.copysign(math.inf, sign)
        return
    after = new[f"scalar_{_tag(n)}"](x)
    assert math.copysign(1.0, after) == sign
    exact = Fraction(x) ** n
    if in_model(x, n):
        assert abs(Fraction(after) - exact) <= gamma(roundings(n)) * abs(exact)


@pytest.mark.parametrize("n", EXPONENTS)
def test_power_special_values(n):
    """inf, NaN and signed zeros: the product follows IEEE 754 products (and 1/x), the same value
    as pow where pow returns one."""
    original, new = pair(POWER)
    for x in (math.inf, -math.inf, math.nan, 0.0, -0.0, 1.0, -1.0):
        try:
            before = original[f"scalar_{_tag(n)}"](x)
        except ZeroDivisionError:  # 0.0 ** negative raises in Python (outside: CPython)
            with pytest.raises(ZeroDivisionError):  # and so does 1.0/0.0
                new[f"scalar_{_tag(n)}"](x)
            continue
        after = new[f"scalar_{_tag(n)}"](x)
        if math.isnan(before):
            assert math.isnan(after)
        else:  # C99 Annex F pow of +-inf, +-0, +-1 (from memory) equals the IEEE product here
            assert f64_bits(after) == f64_bits(before), x


# ============================================================================================
# 3. sums: exact sum rounded once (math.fsum, Fraction), mean = that sum / count
# ============================================================================================
SUMS = '''
import numpy as np
import numpy.typing as npt


def total_heat(cells: npt.NDArray[np.float64]) -> float:
    return np.sum(cells)


def total_heat_method(cells: npt.NDArray[np.float64]) -> float:
    return cells.sum()


def reduced_heat(cells: npt.NDArray[np.float64]) -> float:
    return np.add.reduce(cells)


def inflow_total(flows: list[float]) -> float:
    return sum(flows)


def inflow_as_array(flows: list[float]) -> float:
    volumes = np.asarray(flows, dtype=np.float64)
    return np.sum(volumes)


def inflow_buffer(flows: list[float]) -> float:
    buffer = np.zeros(len(flows))
    buffer[:] = flows
    return buffer.sum()


def column_totals(grid: npt.NDArray[np.float64]):
    return np.sum(grid, axis=0), grid.sum(axis=1)


def mean_temperature(cells: npt.NDArray[np.float64]) -> float:
    return np.mean(cells)


def mean_temperature_method(cells: npt.NDArray[np.float64]) -> float:
    return cells.mean()
'''
SUM_FUNCTIONS = ("total_heat", "total_heat_method", "reduced_heat", "inflow_total", "inflow_as_array",
                 "inflow_buffer")


def exact_rounded(values) -> float:
    """The exact sum rounded once, with IEEE 754 special-value rules for a sum."""
    values = [float(v) for v in values]
    if any(math.isnan(v) for v in values):
        return math.nan
    up, down = math.inf in values, -math.inf in values
    if up and down:
        return math.nan  # inf + (-inf) is invalid (IEEE 754-2019 7.2, from memory)
    if up or down:
        return math.inf if up else -math.inf
    total = sum((Fraction(v) for v in values), Fraction(0))  # outside check: Fraction exact arithmetic
    if total == 0:
        # the runtime documents +0.0 for an exact zero, -0.0 inputs included (rewrite/runtime/sums.py)
        return 0.0
    try:
        # outside check: float(Fraction) is int / int true division, correctly rounded in CPython
        # (from memory), and raises OverflowError beyond the binary64 range
        return float(total)
    except OverflowError:
        return math.inf if total > 0 else -math.inf


def same_sum(got, values):
    expected = exact_rounded(values)
    if math.isnan(expected):
        assert math.isnan(float(got))  # NaN payload is not specified by IEEE 754: NaN-ness only
        return
    assert f64_bits(got) == f64_bits(expected)
    finite = [float(v) for v in values]
    if all(math.isfinite(v) for v in finite) and expected != 0:
        try:
            reference = math.fsum(finite)  # outside check: math.fsum, correctly rounded
        except OverflowError:  # fsum's own intermediate overflow
            return
        assert f64_bits(got) == f64_bits(reference)


@st.composite
def cancelling(draw):
    """Large values and their negatives, plus a few small ones, shuffled: heavy cancellation."""
    big = draw(st.lists(st.floats(-1e300, 1e300), min_size=1, max_size=12))
    small = draw(st.lists(st.floats(-1e-3, 1e-3), max_size=6))
    scaled = draw(st.lists(st.floats(-1e16, 1e16), max_size=6))
    values = big + [-v for v in big[: draw(st.integers(0, len(big)))]] + small + scaled
    return draw(st.permutations(values))


sum_inputs = st.one_of(cancelling(), st.lists(any_float, max_size=20), st.lists(finite_float, max_size=20),
                       st.lists(st.sampled_from([MAX, -MAX, MAX / 2, 1.0, TINY, -0.0]), max_size=10))


def test_sum_edits_are_there():
    result = rewritten(SUMS)
    for name in SUM_FUNCTIONS + ("column_totals", "mean_temperature", "mean_temperature_method"):
        edits = [e for e in edits_inside(result, name) if e.rule == "sum"]
        assert edits and {e.effect for e in edits} == {"answer-changing"}, name
    assert "from rewrite.runtime import" in result.text


@SETTINGS
@given(sum_inputs)
def test_sums_equal_the_exact_sum_rounded_once(values):
    original, new = pair(SUMS)
    array = np.array(values, dtype=np.float64)
    with np.errstate(all="ignore"):
        for name in SUM_FUNCTIONS:
            argument = array if name.startswith(("total", "reduced")) else list(values)
            same_sum(new[name](argument), values)


@FEW
@given(sum_inputs, st.randoms(use_true_random=False))
def test_rewritten_sum_is_order_and_layout_free(values, random):
    _, new = pair(SUMS)
    array = np.array(values, dtype=np.float64)
    shuffled = array.copy()
    random.shuffle(shuffled)
    reference = fingerprint(new["total_heat"](array))
    for variant in (shuffled, array[::-1], np.stack([array, array], axis=1)[:, 0]):  # copy, reversed, strided
        got = new["total_heat"](variant)
        if math.isnan(float(got)):
            assert math.isnan(float(new["total_heat"](array)))
        else:
            assert fingerprint(got) == reference


def test_original_sum_differs_where_it_rounds_early():
    """The edit really changes answers: np.sum rounds after each addition (from memory: numpy
    adds fewer than 8 values in order), the exact sum does not."""
    original, new = pair(SUMS)
    values = [1.0, 1e100, 1.0, -1e100]
    assert math.fsum(values) == 2.0  # outside check: math.fsum
    assert new["total_heat"](np.array(values)) == 2.0
    assert original["total_heat"](np.array(values)) != 2.0


@FEW
@given(st.integers(1, 5).flatmap(lambda r: st.integers(1, 5).flatmap(
    lambda c: hnp.arrays(np.float64, (r, c), elements=st.one_of(finite_float, st.sampled_from(SPECIALS))))))
def test_axis_sums_equal_the_exact_sum_of_each_row_and_column(grid):
    _, new = pair(SUMS)
    columns, rows = new["column_totals"](grid)
    assert columns.shape == (grid.shape[1],) and rows.shape == (grid.shape[0],)
    for j in range(grid.shape[1]):
        same_sum(columns[j], grid[:, j].tolist())
    for i in range(grid.shape[0]):
        same_sum(rows[i], grid[i, :].tolist())


@SETTINGS
@given(st.one_of(cancelling(), st.lists(finite_float, min_size=1, max_size=20),
                 st.lists(any_float, min_size=1, max_size=10)))
def test_mean_is_the_exact_sum_divided_by_the_count(values):
    """rewrite/runtime/means.py documents exact_mean as exact_sum(values) / count: two roundings."""
    original, new = pair(SUMS)
    array = np.array(values, dtype=np.float64)
    total = exact_rounded(values)
    expected = total / len(values)  # IEEE 754 division, correctly rounded (Python float)
    with np.errstate(all="ignore"):
        for name in ("mean_temperature", "mean_temperature_method"):
            got = new[name](array)
            if math.isnan(expected):
                assert math.isnan(float(got))
                continue
            assert f64_bits(got) == f64_bits(expected), name
            if not math.isfinite(total):
                continue
            exact_mean = sum((Fraction(v) for v in values), Fraction(0)) / len(values)  # outside: Fraction
            if abs(exact_mean) >= NORMAL_MIN:
                # two roundings: within gamma_2 of the exact mean (standard error analysis, above)
                assert abs(Fraction(float(got)) - exact_mean) <= gamma(2) * abs(exact_mean)


# ============================================================================================
# 4. zero guards: answer-changing only in the sign of a zero result
# ============================================================================================
ZEROS = '''
import numpy as np
import numpy.typing as npt


def coldest(a: float, b: float) -> float:
    return min(a, b)


def warmest(a: float, b: float) -> float:
    return max(a, b)


def freezing_clip(t: float) -> float:
    return min(t, 0.0)


def thawing_clip(t: float) -> float:
    return max(0.0, t)


def layer_min(x: npt.NDArray[np.float64], y: npt.NDArray[np.float64]) -> npt.NDArray[np.float64]:
    return np.minimum(x, y)


def layer_max(x: npt.NDArray[np.float64], y: npt.NDArray[np.float64]) -> npt.NDArray[np.float64]:
    return np.maximum(x, y)


def layer_fmin(x: npt.NDArray[np.float64], y: npt.NDArray[np.float64]) -> npt.NDArray[np.float64]:
    return np.fmin(x, y)


def layer_fmax(x: npt.NDArray[np.float64], y: npt.NDArray[np.float64]) -> npt.NDArray[np.float64]:
    return np.fmax(x, y)


def extremes(x: npt.NDArray[np.float64]):
    return np.min(x), np.max(x), np.amin(x), np.amax(x), x.min(), x.max()
'''
PAIRWISE = ("coldest", "warmest")
ELEMENTWISE = ("layer_min", "layer_max", "layer_fmin", "layer_fmax")
zero_heavy = st.one_of(st.sampled_from([0.0, -0.0, 0.0, -0.0, math.nan, 1.0, -TINY]), any_float)


def test_zero_guards_are_there_with_their_reason():
    result = rewritten(ZEROS)
    for name in functions_of(ZEROS):
        edits = edits_inside(result, name)
        assert edits and all(e.rule == "zero" and e.effect == "answer-changing" for e in edits), name
        assert all("sign of a zero" in e.reason for e in edits)
    assert len(edits_inside(result, "extremes")) == 6


def guarded(before, after):
    """after == before, except that a zero is +0.0; NaN stays NaN."""
    before, after = float(before), float(after)
    if math.isnan(before):
        assert math.isnan(after)
    elif before != 0.0:
        assert f64_bits(after) == f64_bits(before)  # x + (+0) = x for x != 0 (IEEE 754 fact)
    else:
        # (-0) + (+0) = +0 and (+0) + (+0) = +0 in round to nearest (IEEE 754-2019 6.3, from memory)
        assert f64_bits(after) == POSITIVE_ZERO_BITS


@SETTINGS
@given(zero_heavy, zero_heavy)
def test_scalar_guards_change_only_the_sign_of_zero(a, b):
    original, new = pair(ZEROS)
    for name in PAIRWISE:
        for first, second in ((a, b), (b, a)):
            guarded(original[name](first, second), new[name](first, second))
        if not (math.isnan(a) or math.isnan(b)):
            # the guarded result no longer depends on the argument order
            assert f64_bits(new[name](a, b)) == f64_bits(new[name](b, a))
    for name in ("freezing_clip", "thawing_clip"):
        guarded(original[name](a), new[name](a))


def test_original_min_depends_on_argument_order():
    """What the guard is for: builtin min returns the first of equal items (Python docs, min()),
    so the zero's sign follows the argument order; the guarded one gives +0.0 both ways."""
    original, new = pair(ZEROS)
    assert f64_bits(original["coldest"](-0.0, 0.0)) != f64_bits(original["coldest"](0.0, -0.0))
    assert f64_bits(new["coldest"](-0.0, 0.0)) == f64_bits(new["coldest"](0.0, -0.0)) == POSITIVE_ZERO_BITS


@FEW
@given(st.integers(0, 6).flatmap(lambda n: st.tuples(hnp.arrays(np.float64, (n,), elements=zero_heavy),
                                                       hnp.arrays(np.float64, (n,), elements=zero_heavy))))
def test_array_guards_change_only_the_sign_of_zero(arrays):
    x, y = arrays
    original, new = pair(ZEROS)
    with np.errstate(all="ignore"):
        for name in ELEMENTWISE:
            for first, second in ((x, y), (y, x)):
                before, after = original[name](first, second), new[name](first, second)
                assert after.dtype == np.float64 and after.shape == before.shape
                for b, a in zip(before.tolist(), after.tolist()):
                    guarded(b, a)
            both = ~(np.isnan(x) | np.isnan(y))
            assert (new[name](x, y)[both].view(np.uint64) == new[name](y, x)[both].view(np.uint64)).all()
        if x.size:
            befores, afters = original["extremes"](x), new["extremes"](x)
            for b, a in zip(befores, afters):
                guarded(b, a)
            reversed_afters = new["extremes"](x[::-1].copy())
            for a, r in zip(afters, reversed_afters):  # any order of the data: same bits, or NaN both
                assert (math.isnan(a) and math.isnan(r)) or f64_bits(a) == f64_bits(r)


# ============================================================================================
# 5. idempotence: the rewritten text asks for nothing more
# ============================================================================================
ALL_MODULES = {"chain scalar": CHAIN_SCALAR, "chain array": CHAIN_ARRAY, "power": POWER, "sums": SUMS,
               "zeros": ZEROS}


@pytest.mark.parametrize("source", list(ALL_MODULES.values()), ids=list(ALL_MODULES))
def test_rewriting_the_rewritten_text_proposes_no_edits(source):
    first = rewritten(source)
    assert first.edits
    second = rewrite_text(first.text, language="python", path="bits_case.py")
    assert not second.problems
    assert second.edits == ()
    assert second.text == first.text


# ============================================================================================
# Once tool bugs: a method-call sum at the head of a chain, and negative powers of tiny bases
# ============================================================================================
METHOD_AT_CHAIN_HEAD = '''
import numpy as np
import numpy.typing as npt


def budget(cells: npt.NDArray[np.float64], inflow: float, rain: float) -> float:
    return cells.sum() + inflow + rain
'''

METHOD_WITH_AXIS_AT_CHAIN_HEAD = '''
import numpy as np
import numpy.typing as npt


def budget_columns(grid: npt.NDArray[np.float64], inflow: float, rain: float):
    return grid.sum(axis=0) + inflow + rain
'''


# was: cells.sum() + inflow + rain -> exact_sum((cells) + inflow) + rain (the chain's '(' inside the call)
def test_method_sum_at_chain_head_keeps_its_meaning():
    result = rewritten(METHOD_AT_CHAIN_HEAD)
    assert {"sum", "chain"} <= {e.rule for e in edits_inside(result, "budget")}
    cells, inflow, rain = np.array([1.0, 2.0, 3.0]), 10.0, 0.5
    # what the two edits say they do: the exact sum (math.fsum), then the chain left to right
    expected = (math.fsum(cells.tolist()) + inflow) + rain  # outside check: math.fsum
    assert load(result.text)["budget"](cells, inflow, rain) == expected


# was: grid.sum(axis=0) + inflow + rain -> the syntax error exact_sum((grid, axis=0) + inflow) + rain
def test_method_sum_with_axis_at_chain_head_stays_valid_python():
    result = rewritten(METHOD_WITH_AXIS_AT_CHAIN_HEAD)
    assert {"sum", "chain"} <= {e.rule for e in result.edits}
    compile(result.text, "bits_case.py", "exec")  # outside check: Python's compiler


# x**-n -> 1.0/(product): for tiny x the product underflows to zero and 1.0/0.0 raises
# ZeroDivisionError where pow raised OverflowError; the reason must say so (it once promised inf)
@pytest.mark.parametrize("n", [-2, -3])
@settings(max_examples=10, deadline=None)
@example(x=1e-200, negative=False)
@given(x=st.floats(TINY, 1e-200), negative=st.booleans())
def test_negative_power_of_tiny_base_does_what_the_reason_says(n, x, negative):
    original, new = pair(POWER)
    reasons = [e.reason for e in rewritten(POWER).edits if e.rule == "power" and f"**{n}" in e.before]
    assert reasons and all("ZeroDivisionError" in reason for reason in reasons)
    x = -x if negative else x
    with pytest.raises(OverflowError):  # |x|**n > 2**1024: outside check, CPython raises
        original[f"scalar_{_tag(n)}"](x)
    with pytest.raises(ZeroDivisionError):  # outside check: CPython float division by zero raises
        new[f"scalar_{_tag(n)}"](x)
