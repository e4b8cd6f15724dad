"""The numpy demo fixture (issue 5): fixtures/reservoir/heat_budget.py, once rewritten, runs,
and its global sums keep their bits when the input arrays are permuted, transposed or stored
in Fortran order, while the original's sums do not.

Both versions are fed the same arrays (made by the original's ``make_lake``), so the only
difference between them is the rewrite.
"""
from __future__ import annotations

import ast
import importlib.util
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from rewrite.api import rewrite_text

ROOT = Path(__file__).resolve().parents[2]
FIXTURE = ROOT / "fixtures" / "reservoir" / "heat_budget.py"
SEEDS = (2024, 1, 17, 99, 31337)
# forcing of our own, different from the file's defaults
FORCING = {"sw_down": 515.0, "lw_down": 305.0, "t_air": 19.5, "wind": 2.75, "humidity": 0.7}
BUDGET_KEYS = {"heat_content", "volume", "mean_temperature", "cell_mean_temperature", "surface_power",
               "mean_surface_flux", "coldest_surface"}
CELL_KEYS = {"heat_content", "volume", "mean_temperature", "cell_mean_temperature"}


def _load(name: str, text: str, directory: Path):
    path = directory / f"{name}.py"
    path.write_text(text, encoding="utf-8")
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def result():
    text = FIXTURE.read_text(encoding="utf-8")
    rewritten = rewrite_text(text, language="python", path=str(FIXTURE))
    assert not rewritten.problems, rewritten.problems
    assert rewritten.original == text
    assert rewritten.text != text
    return rewritten


@pytest.fixture(scope="module")
def work(tmp_path_factory) -> Path:
    return tmp_path_factory.mktemp("demo_fixture")


@pytest.fixture(scope="module")
def original(work):
    return _load("heat_budget_original", FIXTURE.read_text(encoding="utf-8"), work)


@pytest.fixture(scope="module")
def rewritten(result, work):
    return _load("heat_budget_rewritten", result.text, work)


def _bits(values: dict) -> dict[str, str]:
    return {name: float(value).hex() for name, value in values.items()}


def _column_layouts(arrays, seed: int):
    """The same lake with its columns in other orders and its arrays in other memory layouts
    (every array transformed the same way, so each column keeps its cells)."""
    rng = np.random.default_rng(seed + 1)
    columns = arrays[0].shape[1]
    layouts = {"fortran order": [np.asfortranarray(a) for a in arrays],
               "columns reversed (view)": [a[:, ::-1] for a in arrays]}
    for k in range(3):
        order = rng.permutation(columns)
        layouts[f"columns permuted {k}"] = [np.ascontiguousarray(a[:, order]) for a in arrays]
        layouts[f"columns permuted {k}, fortran order"] = [np.asfortranarray(a[:, order]) for a in arrays]
    return layouts


def _cell_layouts(arrays, seed: int):
    """The same multiset of cells in other places: transposed (C and Fortran order copies of
    arr.T) and with the flattened cells permuted."""
    rng = np.random.default_rng(seed + 2)
    layouts = {"transposed, C order": [np.ascontiguousarray(a.T) for a in arrays],
               "transposed, fortran order": [np.asfortranarray(a.T) for a in arrays]}
    for k in range(3):
        order = rng.permutation(arrays[0].size)
        layouts[f"cells permuted {k}"] = [a.ravel()[order].reshape(a.shape) for a in arrays]
    return layouts


def _layout_bits(module, arrays, seed: int) -> dict[str, dict[str, str]]:
    """Bits of the global sums for the reference layout and every other one."""
    found = {"reference": _bits(module.global_budget(*arrays, **FORCING))}
    for name, layout in _column_layouts(arrays, seed).items():
        found[name] = _bits(module.global_budget(*layout, **FORCING))
    # global_budget takes its cell keys from cell_totals, so the reference serves both
    assert {k: found["reference"][k] for k in CELL_KEYS} == _bits(module.cell_totals(*arrays))
    for name, layout in _cell_layouts(arrays, seed).items():
        found[name] = {**found["reference"], **_bits(module.cell_totals(*layout))}
    return found


@pytest.mark.parametrize("seed", SEEDS)
def test_rewritten_sums_do_not_depend_on_layout(original, rewritten, seed):
    arrays = original.make_lake(seed)
    found = _layout_bits(rewritten, arrays, seed)
    assert set(found["reference"]) == BUDGET_KEYS
    differing = {name: {k for k in BUDGET_KEYS if bits[k] != found["reference"][k]}
                 for name, bits in found.items()}
    # the exact sums depend only on the multiset of summed values (rewrite/runtime docs; checked
    # against math.fsum below, which is correctly rounded, Python docs of math.fsum)
    assert not any(differing.values()), {name: keys for name, keys in differing.items() if keys}


def test_original_sums_depend_on_layout(original):
    # np.sum adds in memory order in pairwise blocks, and the built-in sum left to right, so
    # permuting or re-laying the data changes the last bits (numpy docs of numpy.sum; common
    # practice, no source): at least one layout of one seed must show it, or the test above
    # proves nothing
    changed = {}
    for seed in SEEDS:
        found = _layout_bits(original, original.make_lake(seed), seed)
        for name, bits in found.items():
            keys = {k for k in BUDGET_KEYS if bits[k] != found["reference"][k]}
            if keys:
                changed[(seed, name)] = keys
    assert changed
    # and not only through the built-in sum: an array sum over the cells changes too
    assert any(keys & CELL_KEYS for keys in changed.values()), changed


@pytest.mark.parametrize("seed", SEEDS)
def test_rewritten_sums_are_correctly_rounded(original, rewritten, seed):
    t, h, a = original.make_lake(seed)
    budget = rewritten.global_budget(t, h, a, **FORCING)
    volume = h * a
    # math.fsum is the correctly rounded sum (Python docs of math.fsum)
    assert budget["volume"] == math.fsum(volume.ravel())
    # per-cell energy evaluated left to right, as Python does (language reference, "Evaluation
    # order"); the density comes from the rewritten file, the sum from math.fsum
    energy = rewritten.water_density(t) * rewritten.CP_WATER * h * (t + rewritten.KELVIN) * a
    assert budget["heat_content"] == math.fsum(energy.ravel())
    # a ratio of two correctly rounded sums, one IEEE division (IEEE 754-2019 5.4.1)
    assert budget["mean_temperature"] == math.fsum((volume * t).ravel()) / math.fsum(volume.ravel())
    # a mean is the correctly rounded sum divided by the count (rewrite/runtime/means.py
    # documents exact_mean so; the sum is checked against math.fsum)
    assert budget["cell_mean_temperature"] == math.fsum(t.ravel()) / t.size
    q_net = rewritten.surface_flux(t[0], **FORCING)
    assert budget["surface_power"] == math.fsum(float(q * area) for q, area in zip(q_net, a[0]))
    assert budget["mean_surface_flux"] == math.fsum(q_net) / q_net.size
    # no sum is involved: the smallest surface value or the air temperature (numpy docs of
    # ndarray.min; Python docs of min)
    assert budget["coldest_surface"] == min(float(np.min(t[0])), FORCING["t_air"])


@pytest.mark.parametrize("seed", SEEDS[:2])
def test_rewrite_changes_answers_by_rounding_only(original, rewritten, seed):
    arrays = original.make_lake(seed)
    before = original.global_budget(*arrays, **FORCING)
    after = rewritten.global_budget(*arrays, **FORCING)
    # pairwise summation errs by about log2(n) ulps of the sum of |x| (numpy docs of numpy.sum),
    # and pow by an ulp or so per power (common practice, no source): far below 1e-12 here,
    # where every sum has terms of one sign
    for name in BUDGET_KEYS:
        assert after[name] == pytest.approx(before[name], rel=1e-12, abs=0.0), name


def test_rewritten_file_runs_as_a_script(result, rewritten, tmp_path):
    script = tmp_path / "heat_budget.py"
    script.write_text(result.text, encoding="utf-8")
    run = subprocess.run([sys.executable, str(script)], cwd=tmp_path, capture_output=True, text=True,
                         timeout=120)
    assert run.returncode == 0, run.stderr
    printed = {}
    for line in run.stdout.splitlines():
        name, hex_value, shown = line.split()
        # float.hex round-trips exactly, and repr gives the shortest string that reads back
        # as the same double (Python docs of float.hex and of repr for floats)
        assert float.fromhex(hex_value) == float(shown), line
        printed[name] = hex_value
    expected = _bits(rewritten.global_budget(*rewritten.make_lake(rewritten.SEED)))
    assert printed == expected


def test_original_fixture_runs_as_a_script(tmp_path):
    run = subprocess.run([sys.executable, str(FIXTURE)], cwd=tmp_path, capture_output=True, text=True,
                         timeout=120)
    assert run.returncode == 0, run.stderr
    assert len(run.stdout.splitlines()) == len(BUDGET_KEYS)


def test_edits_and_their_effects(result):
    rules = {edit.rule for edit in result.edits}
    assert {"chain", "power", "sum", "zero"} <= rules, rules
    for edit in result.edits:
        assert edit.effect in ("bit-for-bit", "answer-changing"), edit
        if edit.rule in ("sum", "power"):
            # an exact sum or an explicit product is not what np.sum or pow computed
            assert edit.effect == "answer-changing", edit
        if edit.rule == "chain":
            # parentheses that pin Python's own left-to-right order (language reference,
            # "Evaluation order") change no bit
            assert edit.effect == "bit-for-bit", edit


def _order_dependent_sums(text: str) -> list[str]:
    """The np.sum, np.mean, arr.sum(), arr.mean() and built-in sum calls of a source (by ast)."""
    found = []
    for node in ast.walk(ast.parse(text)):
        if not isinstance(node, ast.Call):
            continue
        function = node.func
        if isinstance(function, ast.Attribute) and function.attr in ("sum", "mean"):
            found.append(ast.unparse(node))
        elif isinstance(function, ast.Name) and function.id == "sum":
            found.append(ast.unparse(node))
    return found


def test_every_sum_of_the_fixture_is_replaced(result):
    before = _order_dependent_sums(result.original)
    # the fixture holds np.sum twice, np.mean, arr.sum(), arr.mean() and a built-in sum
    assert len(before) == 6, before
    assert _order_dependent_sums(result.text) == []
    powers = [node for node in ast.walk(ast.parse(result.text))
              if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Pow)
              and isinstance(node.right, ast.Constant) and node.right.value in (2, 3, 4, 6)
              and isinstance(node.left, ast.Name)]
    # powers of a plain name become products; compound bases are reported, not edited
    assert powers == [], [ast.unparse(p) for p in powers]
