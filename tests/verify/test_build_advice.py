"""Signed-zero guards and build-flag advice, checked by building and running with gfortran.

1. The zero rule: ``min``, ``max``, ``minval``, ``maxval`` and ``sign`` return -0.0 or +0.0
   depending on the argument order, the optimisation level and on whether the compiler folds
   them; the guarded source (``... + 0.0_dp``, written by ``rewrite_text``) gives +0.0 every
   time and the same bits as before for every other value. Fast-math options delete the guard,
   which is why the audit flags them.
2. The flag advice: the rewritten demo (fixtures/reservoir) built with unsafe flags prints other
   digits than at -O0; built with ``reproducible_flags(those flags)`` it prints the -O0 digits.

Outside checks: gfortran itself (every result below is measured from a program it built, through
raw stream files, so bits come back without decimal conversion); IEEE 754-2019 6.3 (an exact zero
sum of operands of opposite signs is +0 in round-to-nearest); the GCC manual (Optimize Options:
-ffp-contract, -fno-signed-zeros, -ffast-math, -Ofast). What the compiler does is probed first,
with the programs in fixtures/probes/, and a check is skipped where the probe shows this machine
cannot exhibit the effect.

Run with ``-rs`` for the skip reasons and ``-rP`` (or ``-s``) for the measured record.
"""
from __future__ import annotations

import os
import shutil
import subprocess
import tempfile
from concurrent.futures import ThreadPoolExecutor
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest

from rewrite.api import rewrite_paths, rewrite_text, write_result, write_runtime
from rewrite.verify.gfortran import CompileError, RunError, build_program, run_program

FIXTURES = Path(__file__).resolve().parents[2] / "fixtures"
PROBES = FIXTURES / "probes"

N_RESULTS = 10  # results per input row in the signed-zero probes (see the probe sources)
LABELS = ["min(p,q)", "min(q,p)", "max(p,q)", "max(q,p)", "minval([p,q])", "minval([q,p])",
          "maxval([p,q])", "maxval([q,p])", "sign(p,q)", "sign(q,p)"]
MIN_MAX = slice(0, 8)  # the columns of min, max, minval, maxval

# the rows (p, q) of both zeros in every order
ZERO_ROWS = np.array([[-0.0, 0.0], [0.0, -0.0], [-0.0, -0.0], [0.0, 0.0]])
# sign(+0, negative) is -|0| = -0.0 (Fortran 2018, ISO/IEC 1539-1:2018, intrinsic SIGN: "if B < 0,
# the result is -|A|"); gfortran supports signed zeros, so -|0| is -0.0 (observed on this machine)
SIGN_ROWS = np.array([[0.0, -1.0], [-1.0, 0.0], [0.0, -2.5e-300], [-0.0, -7.0]])

POSITIVE_ZERO = np.uint64(0)
SIGN_BIT = np.uint64(1 << 63)


def _is_zero(bits: np.ndarray) -> np.ndarray:
    return (bits & ~SIGN_BIT) == 0


# ------------------------------------------------------------------------------------------
# Building and running the probes (each source and flag set is compiled once per module)
# ------------------------------------------------------------------------------------------
class Programs:
    """Compiles a probe source once per flag set and runs it in a fresh folder each time."""

    def __init__(self, root: Path, compiler: str):
        self.root = root
        self.compiler = compiler
        self._built: dict[tuple[str, tuple[str, ...]], Path | CompileError] = {}

    def exe(self, name: str, text: str, flags: tuple[str, ...]) -> Path:
        key = (name, tuple(flags))
        if key not in self._built:
            folder = self.root / f"{name}-{len(self._built)}"
            try:
                self._built[key] = build_program([(f"{name}.f90", text)], list(flags), folder.resolve(),
                                                 compiler=self.compiler)
            except CompileError as error:
                self._built[key] = error
        built = self._built[key]
        if isinstance(built, CompileError):
            raise built
        return built

    def run(self, name: str, text: str, flags, inputs: dict[str, bytes], output: str) -> bytes:
        exe = self.exe(name, text, tuple(flags))
        with tempfile.TemporaryDirectory(prefix="samebits-probe-") as tmp:
            for file, data in inputs.items():
                (Path(tmp) / file).write_bytes(data)
            run_program(exe, cwd=tmp)
            return (Path(tmp) / output).read_bytes()


@pytest.fixture(scope="module")
def programs(tmp_path_factory, gfortran):
    return Programs(tmp_path_factory.mktemp("probes"), gfortran)


RUNTIME_SOURCE = (PROBES / "signed_zero_runtime.f90").read_text()
FOLDED_SOURCE = (PROBES / "signed_zero_folded.f90").read_text()
FMA_SOURCE = (PROBES / "fma_probe.f90").read_text()


def _zero_results(programs: Programs, name: str, text: str, flags, rows: np.ndarray) -> np.ndarray:
    """Bits (rows x 10) of the run-time probe ``text`` built with ``flags`` on the pairs ``rows``."""
    rows = np.ascontiguousarray(rows, dtype=np.float64)
    header = np.array([len(rows)], dtype=np.int64).tobytes()
    data = programs.run(name, text, flags, {"zero_in.bin": header + rows.tobytes()}, "zero_out.bin")
    return np.frombuffer(data, dtype=np.uint64).reshape(len(rows), N_RESULTS).copy()


def _folded_results(programs: Programs, name: str, text: str, flags) -> np.ndarray:
    data = programs.run(name, text, flags, {}, "zero_out.bin")
    return np.frombuffer(data, dtype=np.uint64).copy()


def _signs(bits: np.ndarray) -> str:
    return " ".join(f"{label}={'-0' if b == SIGN_BIT else '+0' if b == 0 else 'x'}"
                    for label, b in zip(LABELS, bits))


@pytest.fixture(scope="module")
def guarded_runtime():
    return rewrite_text(RUNTIME_SOURCE, language="fortran", path="signed_zero_runtime.f90")


@pytest.fixture(scope="module")
def guarded_folded():
    return rewrite_text(FOLDED_SOURCE, language="fortran", path="signed_zero_folded.f90")


# ------------------------------------------------------------------------------------------
# 1. The signed-zero guard
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("which", ["runtime", "folded"])
def test_zero_rule_guards_every_min_max_and_sign_in_the_probes(which, guarded_runtime, guarded_folded):
    result = guarded_runtime if which == "runtime" else guarded_folded
    assert not result.problems, result.problems
    zero_edits = [e for e in result.edits if e.rule == "zero"]
    # the probe has one min/max/minval/maxval/sign call on each of its ten result lines
    assert len(zero_edits) == N_RESULTS, [e.before for e in zero_edits]
    assert all(e.effect == "answer-changing" for e in zero_edits)
    for edit in zero_edits:
        assert "sign of a zero" in edit.reason and "-0.0" in edit.reason, edit.reason
    result_lines = [line.strip() for line in result.text.splitlines() if line.strip().startswith("r(")]
    assert len(result_lines) == N_RESULTS
    for line in result_lines:
        # the operands are real(dp), so the guard's literal is spelt with _dp
        assert line.endswith("+ 0.0_dp"), line


def test_zero_rule_spells_the_guard_in_the_operands_kind():
    source = ("subroutine s(a, b, c, y, z)\n  implicit none\n  double precision :: a, b, y\n"
              "  real :: c, z\n  y = min(a, b)\n  z = max(c, 0.0)\nend subroutine s\n")
    result = rewrite_text(source, language="fortran")
    assert not result.problems, result.problems
    assert "y = min(a, b) + 0.0d0" in result.text, result.text
    assert "z = max(c, 0.0) + 0.0\n" in result.text, result.text


@pytest.mark.parametrize("flags", [("-O0",), ("-O2",)], ids=["O0", "O2"])
def test_guarded_min_max_give_plus_zero_for_both_orders_at_run_time(flags, programs, guarded_runtime):
    plain = _zero_results(programs, "plain", RUNTIME_SOURCE, flags, ZERO_ROWS)
    # probe: the unguarded min/max return -0.0 for at least one order of (-0.0, +0.0)
    first_two = plain[:2, MIN_MAX]
    if not (first_two == SIGN_BIT).any():
        pytest.skip(f"gfortran {' '.join(flags)}: min/max/minval/maxval of -0.0 and +0.0 give +0.0 in "
                    "both orders here, so there is no -0.0 for the guard to remove")
    # observed on this machine (gfortran 12.2, x86-64): the order that gives -0.0 is not the same
    # at -O0 and -O2, so the unguarded program changes its answer with the optimisation level
    print(f"unguarded {' '.join(flags)}, (-0,+0): {_signs(plain[0])}")
    print(f"unguarded {' '.join(flags)}, (+0,-0): {_signs(plain[1])}")
    guarded = _zero_results(programs, "guarded", guarded_runtime.text, flags, ZERO_ROWS)
    # IEEE 754-2019 6.3: (-0) + (+0) is +0 in round-to-nearest, so every guarded zero is +0.0
    assert (guarded == POSITIVE_ZERO).all(), "\n".join(_signs(row) for row in guarded)


@pytest.mark.parametrize("flags", [("-O0",), ("-O2",)], ids=["O0", "O2"])
def test_guarded_sign_gives_plus_zero_where_the_plain_one_gives_minus_zero(flags, programs, guarded_runtime):
    plain = _zero_results(programs, "plain", RUNTIME_SOURCE, flags, SIGN_ROWS)
    sign_columns = plain[:, 8:10]
    zero = _is_zero(sign_columns)
    if not (sign_columns[zero] == SIGN_BIT).any():
        pytest.skip(f"gfortran {' '.join(flags)}: sign(0.0, negative) gives +0.0 here")
    guarded = _zero_results(programs, "guarded", guarded_runtime.text, flags, SIGN_ROWS)
    # IEEE 754-2019 6.3: -0 + +0 = +0; a nonzero x + 0.0 is x (exact, 6.1/6.3)
    assert (guarded[:, 8:10][zero] == POSITIVE_ZERO).all()
    assert (guarded[:, 8:10][~zero] == sign_columns[~zero]).all()


@pytest.mark.parametrize("flags", [("-O0",), ("-O2",)], ids=["O0", "O2"])
def test_guarded_min_max_of_folded_constants_give_plus_zero(flags, programs, guarded_folded):
    plain = _folded_results(programs, "plain_folded", FOLDED_SOURCE, flags)
    if not (plain == SIGN_BIT).any():
        pytest.skip(f"gfortran {' '.join(flags)}: the folded min/max/sign of -0.0_dp and 0.0_dp give +0.0 "
                    "for every order here")
    at_run_time = _zero_results(programs, "plain", RUNTIME_SOURCE, flags, ZERO_ROWS[:1])[0]
    # observed on this machine: folding picks another zero than the run-time code for some orders
    print(f"unguarded {' '.join(flags)}, folded:     {_signs(plain)}")
    print(f"unguarded {' '.join(flags)}, run time:   {_signs(at_run_time)}  (same pair (-0,+0))")
    guarded = _folded_results(programs, "guarded_folded", guarded_folded.text, flags)
    # IEEE 754-2019 6.3, applied by the compiler's constant folder: -0 + +0 = +0
    assert (guarded == POSITIVE_ZERO).all(), _signs(guarded)


def _nonzero_pairs(seed: int = 20240611) -> np.ndarray:
    """A few hundred pairs: random magnitudes over the whole range, both signs, ties, p == -q,
    subnormals, the largest finite numbers and infinities; and pairs with one zero."""
    rng = np.random.default_rng(seed)
    n = 300
    magnitude = 10.0 ** rng.uniform(-300, 300, size=(n, 2)) * rng.uniform(1, 10, size=(n, 2))
    pairs = magnitude * rng.choice([-1.0, 1.0], size=(n, 2))
    pairs[:20, 1] = pairs[:20, 0]           # ties
    pairs[20:40, 1] = -pairs[20:40, 0]      # opposite values
    tiny = np.finfo(np.float64).smallest_subnormal
    big = np.finfo(np.float64).max
    special = np.array([[tiny, -tiny], [-tiny, tiny], [tiny, 0.0], [-0.0, -tiny], [big, -big],
                        [np.inf, -np.inf], [-np.inf, 0.0], [np.inf, -0.0], [1.0, 0.0], [-1.0, -0.0],
                        [0.0, 3.0], [-0.0, -3.0], [5e-324 * 3, 1e-310], [2.0 ** -1074, 2.0 ** -1022]])
    return np.vstack([pairs, special, rng.standard_normal(size=(60, 2))])


@pytest.mark.parametrize("flags", [("-O0",), ("-O2",)], ids=["O0", "O2"])
def test_guard_changes_no_bits_but_the_sign_of_a_zero(flags, programs, guarded_runtime):
    rows = np.vstack([_nonzero_pairs(), ZERO_ROWS, SIGN_ROWS])
    plain = _zero_results(programs, "plain", RUNTIME_SOURCE, flags, rows)
    guarded = _zero_results(programs, "guarded", guarded_runtime.text, flags, rows)
    zero = _is_zero(plain)
    assert (~zero).sum() > 3000, "too few nonzero results to show anything"
    # IEEE 754-2019 6.3: x + (+0) is x for x != 0 (the sum is exact), and +0 for x = -0 or +0
    changed = (guarded != plain) & ~zero
    assert not changed.any(), f"bits changed for the pairs {rows[changed.any(axis=1)][:5].tolist()}"
    assert (guarded[zero] == POSITIVE_ZERO).all()
    print(f"{' '.join(flags)}: {(~zero).sum()} nonzero results identical, {zero.sum()} zero results "
          f"(of which {(plain[zero] == SIGN_BIT).sum()} were -0.0) all +0.0 after the guard")


FAST_MATH = [("-Ofast",), ("-O2", "-ffast-math"), ("-O2", "-fno-signed-zeros")]


@pytest.mark.parametrize("flags", FAST_MATH, ids=lambda f: "_".join(f).replace("-", ""))
def test_fast_math_options_delete_the_zero_guard(flags, programs, guarded_runtime):
    """Documents why the audit flags these options. GCC manual, Optimize Options,
    -fno-signed-zeros: "IEEE arithmetic specifies the behavior of distinct +0.0 and -0.0 values,
    which then prohibits simplification of expressions such as x+0.0"; the option allows it, and
    -ffast-math (which -Ofast turns on) sets -fno-signed-zeros."""
    guarded = _zero_results(programs, "guarded", guarded_runtime.text, flags, np.vstack([ZERO_ROWS, SIGN_ROWS]))
    minus = guarded == SIGN_BIT
    label = " ".join(flags)
    if not minus.any():
        pytest.skip(f"observed on this machine: {label} kept every +0.0 guard (all zero results are +0.0), "
                    "so it does not show the guard being deleted here")
    deleted = sorted({LABELS[c] for c in np.nonzero(minus)[1]})
    print(f"observed on this machine: {label} deletes the guard: -0.0 comes back from {', '.join(deleted)}")


@pytest.mark.parametrize("flags", FAST_MATH, ids=lambda f: "_".join(f).replace("-", ""))
def test_advised_flags_keep_the_zero_guard(flags, programs, guarded_runtime):
    reproducible_flags = _reproducible_flags()
    advised = reproducible_flags(list(flags))
    rows = np.vstack([ZERO_ROWS, SIGN_ROWS])
    guarded = _zero_results(programs, "guarded", guarded_runtime.text, tuple(advised), rows)
    zero = _is_zero(guarded)
    # GCC manual, Optimize Options: the default -fsigned-zeros prohibits simplifying x+0.0, so
    # every guarded zero stays +0.0 (IEEE 754-2019 6.3)
    assert (guarded[zero] == POSITIVE_ZERO).all(), f"{advised}: " + "\n".join(_signs(r) for r in guarded)


# ------------------------------------------------------------------------------------------
# 2. Build-flag advice on the demo fixture
# ------------------------------------------------------------------------------------------
# -mfpmath=387 (x86 only): GCC manual, x86 Options, -mfpmath: with 387 "the temporary results are
# computed in 80-bit precision instead of the precision specified by the type", so the bits differ
FLAGGED = ["-O2 -march=native", "-O3 -march=native", "-O2 -mfma", "-Ofast -march=native", "-O3 -ffast-math",
           "-O2 -mfpmath=387"]

# GCC manual, Optimize Options: -Ofast is -O3 plus -ffast-math; -ffast-math sets -fno-signed-zeros,
# -fassociative-math, -freciprocal-math, -ffinite-math-only, -fno-math-errno, -fno-trapping-math,
# -fcx-limited-range and -fexcess-precision=fast; none of them may stay in reproducible advice.
UNSAFE = {"-Ofast", "-ffast-math", "-fno-signed-zeros", "-fassociative-math", "-freciprocal-math",
          "-ffinite-math-only", "-funsafe-math-optimizations", "-ffp-contract=fast", "-fno-protect-parens"}

FMA_INPUTS = (1.0 + 2.0 ** -27, 1.0 - 2.0 ** -27, -1.0)
# a*b is exactly 1 - 2**-54, halfway between two doubles: round-to-nearest-even gives 1.0, so
# a*b + c rounded twice is 0 (IEEE 754-2019 4.3.1); fused, it is the exact -2**-54 (5.4.1 fusedMultiplyAdd)
UNFUSED = FMA_INPUTS[0] * FMA_INPUTS[1] + FMA_INPUTS[2]
FUSED = float(Fraction(FMA_INPUTS[0]) * Fraction(FMA_INPUTS[1]) + Fraction(FMA_INPUTS[2]))


def _reproducible_flags():
    try:
        from rewrite.build.flags import reproducible_flags
    except ImportError as error:  # feature B is written by others; a missing module fails these tests
        pytest.fail(f"rewrite.build.flags.reproducible_flags is not there: {error}")
    return reproducible_flags


def _fma_probe(programs: Programs, flags: str) -> str:
    """'fused', 'unfused', or why the probe could not tell (build or run failed). 'fused' means
    a*b + c was not rounded to binary64 in between: an FMA, or x87 extended precision (-mfpmath=387)."""
    assert UNFUSED == 0.0 and FUSED == -(2.0 ** -54)  # Python floats are binary64, not fused
    try:
        data = programs.run("fma", FMA_SOURCE, tuple(flags.split()),
                            {"fma_in.bin": np.array(FMA_INPUTS).tobytes()}, "fma_out.bin")
    except CompileError as error:
        return f"does not build: {error.diagnostics.strip()[:200]}"
    except RunError as error:
        return f"does not run (no FMA on this CPU?): status {error.returncode}"
    value = np.frombuffer(data, dtype=np.float64)[0]
    if value == FUSED:
        return "fused"
    if value == UNFUSED:
        return "unfused"
    return f"unexpected {value!r}"


def _build_reservoir(source: Path, out: Path, compiler: str, flags: str) -> subprocess.CompletedProcess:
    env = dict(os.environ, FC=compiler, FFLAGS=flags, LC_ALL="C")
    return subprocess.run(["sh", str(FIXTURES / "reservoir" / "build.sh"), str(source), str(out)],
                          capture_output=True, text=True, env=env, timeout=300)


@pytest.fixture(scope="module")
def reservoir(tmp_path_factory, gfortran):
    """The demo, fully rewritten and linked with the runtime, built once per flag set: -O0, the
    flagged sets and the advice for each (builds run side by side). Maps flags -> CompletedProcess."""
    tmp = tmp_path_factory.mktemp("reservoir")
    source = tmp / "src"
    shutil.copytree(FIXTURES / "reservoir", source)
    results = rewrite_paths([str(source)])
    assert not any(r.problems for r in results)
    for result in results:
        write_result(result)
    write_runtime("fortran", source)
    sets = ["-O0", *FLAGGED]
    try:
        from rewrite.build.flags import reproducible_flags
    except ImportError:
        reproducible_flags = None
    if reproducible_flags is not None:
        sets += [" ".join(reproducible_flags(flags.split())) for flags in FLAGGED]
    sets = list(dict.fromkeys(sets))
    with ThreadPoolExecutor(max_workers=max(1, os.cpu_count() or 1)) as pool:
        runs = pool.map(lambda item: _build_reservoir(source, tmp / f"b{item[0]}", gfortran, item[1]),
                        enumerate(sets))
        return dict(zip(sets, runs))


def _differing_lines(run: subprocess.CompletedProcess, reference: subprocess.CompletedProcess) -> int:
    mine, theirs = run.stdout.splitlines(), reference.stdout.splitlines()
    return sum(a != b for a, b in zip(mine, theirs)) + abs(len(mine) - len(theirs))


def test_demo_prints_every_result_with_enough_digits_to_show_a_last_bit_change():
    """17 significant decimal digits tell any two binary64 numbers apart (IEEE 754-2019 5.12.2:
    Pmin(binary64) = 17 for a conversion to decimal and back to give the same number), so equal
    printed text means equal bits of every printed value; es25.17 prints 18 significant digits."""
    text = (FIXTURES / "reservoir" / "main.f90").read_text() + (FIXTURES / "reservoir" / "heat_budget.f90").read_text()
    assert "es25.17" in text
    # every real value written by the demo goes through an es25.17 edit descriptor, except the
    # single-precision copy of Q_net shown with f10.3 next to its es25.17 value
    assert text.count("f10.3") == 1


@pytest.mark.parametrize("flagged", FLAGGED)
def test_advised_flags_give_the_O0_digits_of_the_demo(flagged, reservoir, programs):
    reproducible_flags = _reproducible_flags()
    reference = reservoir["-O0"]
    assert reference.returncode == 0, reference.stderr
    assert len(reference.stdout.splitlines()) > 20
    probe = _fma_probe(programs, flagged)
    if probe.startswith("does not build"):
        pytest.skip(f"{flagged}: this compiler rejects the flags ({probe})")
    run = reservoir[flagged]
    if probe.startswith("does not run"):
        pytest.skip(f"{flagged}: {probe}: the demo cannot run with these flags here")
    assert run.returncode == 0, f"{flagged} does not build the demo: {run.stderr[-2000:]}"
    advised = reproducible_flags(flagged.split())
    assert isinstance(advised, list) and all(isinstance(f, str) for f in advised)
    assert not UNSAFE & set(advised), advised
    fixed = reservoir[" ".join(advised)]
    assert fixed.returncode == 0, f"{advised} does not build the demo: {fixed.stderr[-2000:]}"
    changed = _differing_lines(run, reference)
    advised_probe = _fma_probe(programs, " ".join(advised))
    print(f"{flagged!r}: FMA probe {probe}; {changed} of {len(reference.stdout.splitlines())} lines differ "
          f"from -O0; advice {' '.join(advised)!r}: FMA probe {advised_probe}, "
          f"{_differing_lines(fixed, reference)} lines differ")
    # GCC manual, Optimize Options: -ffp-contract=off stops a*b + c being fused; and binary64
    # operations rounded to binary64 give the twice-rounded 0 (IEEE 754-2019 4.3.1, 5.4.1)
    problems = []
    if advised_probe != "unfused":
        problems.append(f"with {advised} a*b + c is {advised_probe} (not rounded to binary64 in between)")
    if fixed.stdout != reference.stdout:
        problems.append(f"with {advised} the demo prints {_differing_lines(fixed, reference)} of "
                        f"{len(reference.stdout.splitlines())} lines other than at -O0")
    assert not problems, "; ".join(problems)


def test_some_flagged_build_prints_other_digits_than_O0(reservoir, programs):
    reference = reservoir["-O0"]
    assert reference.returncode == 0, reference.stderr
    record = []
    fused_sets, differing, fused_differing = [], [], []
    for flagged in FLAGGED:
        probe = _fma_probe(programs, flagged)
        run = reservoir[flagged]
        if run.returncode != 0:
            record.append(f"  {flagged!r}: FMA probe {probe}; demo does not build or run")
            continue
        changed = _differing_lines(run, reference)
        record.append(f"  {flagged!r}: FMA probe {probe}; {changed} of {len(reference.stdout.splitlines())} "
                      "printed lines differ from -O0")
        if probe == "fused":
            fused_sets.append(flagged)
        if changed:
            differing.append(flagged)
            if probe == "fused":
                fused_differing.append(flagged)
    summary = "\n".join(record)
    print("observed on this machine:\n" + summary)
    if not differing:
        pytest.skip("no flagged build changed the demo's printed digits here:\n" + summary)
    if fused_sets and not fused_differing:
        pytest.skip("the FMA probe fuses with " + ", ".join(fused_sets) + " but the demo's digits do not "
                    "change with them:\n" + summary)
    if not fused_sets:
        print("no flag set contracts a*b + c into an FMA on this machine (CPU or compiler without FMA)")
