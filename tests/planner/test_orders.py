"""Chain orders: balanced and accurate keep the value (exactly, in rational arithmetic), are
marked answer-changing, and accurate is never less accurate than the written order."""
import json
import random
import subprocess
import sys
from fractions import Fraction

from hypothesis import given, settings
from hypothesis import strategies as st

from rewrite.api import rewrite_text
from rewrite.config import Options
from rewrite.planner import orders

from conftest import module


def _text(tree, names, operators):
    shape = orders.layout(tree, operators)
    opens = [0] * len(names)
    closes = [0] * len(names)
    for a, b in shape.groups:
        opens[a] += 1
        closes[b] += 1
    pieces = []
    for index, name in enumerate(names):
        if index:
            pieces.append(shape.operators[index - 1])
        pieces.append("(" * opens[index] + name + ")" * closes[index])
    return "".join(pieces)


@settings(max_examples=300, deadline=None)
@given(st.integers(3, 7).flatmap(lambda n: st.tuples(
    st.just(n), st.sampled_from(["+", "*"]), st.lists(st.booleans(), min_size=n - 1, max_size=n - 1),
    st.integers(0, 10**6),
    st.lists(st.fractions(min_value=-50, max_value=50).filter(lambda f: f != 0), min_size=n, max_size=n))))
def test_every_order_has_the_written_value_in_exact_arithmetic(case):
    # outside check: fractions.Fraction evaluates Python's reading of the text exactly, and
    # Python groups + - * / left to right like Fortran (Python reference, operator precedence)
    n, kind, inverses, pick, values = case
    operators = [({"+": "-", "*": "/"}[kind] if inverse else kind) for inverse in inverses]
    trees = orders.all_trees(n)
    tree = trees[pick % len(trees)]
    names = [f"v{k}" for k in range(n)]
    scope = dict(zip(names, values))
    written = eval(_text(orders.written(n), names, operators), {}, scope)
    assert eval(_text(tree, names, operators), {}, scope) == written
    assert orders.evaluate(tree, values, operators, kind) == written


def test_orders_are_marked():
    source = module("x = a + b - c - d + e\ny = h(k) * a / b / c", "real(dp) :: a, b, c, d, e, x, y, h(9)\n    integer :: k")
    balanced = rewrite_text(source, options=Options(chain_order="balanced"))
    assert [e.after for e in balanced.edits] == ["(a + b) - (c + (d - e))", "(h(k) * a) / (b * c)"]
    assert {e.effect for e in balanced.edits} == {"answer-changing"}
    assert rewrite_text(balanced.text, options=Options(chain_order="balanced")).edits == ()
    accurate = rewrite_text(source, options=Options(chain_order="accurate"))
    assert {e.effect for e in accurate.edits} == {"bit-for-bit"}  # nothing to cancel, no samples
    written = rewrite_text(source)
    assert {e.effect for e in written.edits} == {"bit-for-bit"}


def test_cancelling_terms_of_one_array_are_combined_first():
    source = module("x = a + h(k) - h(k+1)", "real(dp) :: a, x, h(9)\n    integer :: k")
    result = rewrite_text(source, options=Options(chain_order="accurate"))
    assert [e.after for e in result.edits] == ["a + (h(k) - h(k+1))"]
    assert result.edits[0].effect == "answer-changing" and "likely to cancel" in result.edits[0].reason


def _cancellation_case(rng):
    """A chain whose written order loses the small terms: big + small... - big."""
    n = rng.randint(4, 6)
    names = [f"t{k}" for k in range(n)]
    big = 10.0 ** rng.randint(8, 17)
    columns = []
    big_at = rng.sample(range(n), 2)
    for k in range(n):
        if k == big_at[0]:
            columns.append({"range": [big, big * (1 + 1e-12)]})
        elif k == big_at[1]:
            columns.append({"range": [-big * (1 + 1e-12), -big]})
        else:
            columns.append({"range": [0.0, 1.0]})
    operators = ["+"] * (n - 1)
    return names, operators, columns


def test_accurate_is_never_worse_and_mostly_better():
    # outside check: errors measured against fractions.Fraction (exact)
    rng = random.Random(7)
    better = 0
    cases = 40
    for _ in range(cases):
        names, operators, columns = _cancellation_case(rng)
        rows = orders.sample_rows(columns, 200)
        tree, best, first = orders.most_accurate(len(names), rows, operators, "+")
        assert best <= first
        assert orders.worst_error(tree, rows, operators, "+") == best
        better += best < first
    assert better > cases // 2


def test_samples_file_through_the_command_line(tmp_path):
    (tmp_path / "samples.json").write_text(json.dumps({"variables": {
        "a": {"range": [1e16, 1.000001e16]}, "b": {"range": [-1.000001e16, -1e16]},
        "c": {"samples": [0.25, 0.5, 0.125]}}}))
    (tmp_path / "one.f90").write_text(module("x = c + a + b", "real(dp) :: a, b, c, x"))
    run = subprocess.run([sys.executable, "-m", "rewrite.cli", "check", "--chain-order", "accurate",
                          "--samples", "samples.json", "one.f90"], cwd=tmp_path, capture_output=True, text=True)
    assert run.returncode == 1
    assert "answer-changing: c + a + b -> c + (a + b)" in run.stdout and "ulp" in run.stdout
