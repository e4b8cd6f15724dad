"""Outside checks with gfortran itself: what the flag table says about GCC options is what the
installed compiler does. Skipped when gfortran is missing.

- ``gfortran -Q --help=optimizers`` shows which options -Ofast, -ffast-math and
  -funsafe-math-optimizations turn on (each rule's ``implies``; GCC manual, Optimize Options);
- small programs show the behaviour the risk texts name: parentheses ignored under -Ofast, the
  ``x + 0.0`` guard deleted under -fno-signed-zeros, a*b + c fused for FMA targets, vector sin
  and exp of other bits at -O2 and -O3;
- ``gfortran -S`` shows that every -march value of the table that this GCC knows emits FMA
  instructions, and that the non-FMA values and -mavx2 do not;
- ``reproducible_flags`` applied to unsafe lists gives the -O0 bits again.
"""
from __future__ import annotations

import platform
import re
import shutil
from concurrent.futures import ThreadPoolExecutor

import pytest

from build_helpers import assembly, compile_and_run, enabled, optimizer_states, run
from rewrite.build import reproducible_flags
from rewrite.build.flags import BY_KEY, GCC_FMA_MARCH, GCC_NO_FMA_MARCH, RULES
from rewrite.verify.gfortran import find_gfortran

X86 = platform.machine() in ("x86_64", "AMD64")


@pytest.fixture(scope="module")
def gfortran():
    exe = find_gfortran() or shutil.which("gfortran")
    if exe is None:
        pytest.skip("gfortran is not installed")
    return exe


@pytest.fixture(scope="module")
def major(gfortran):
    out = run([gfortran, "-dumpversion"], ".").stdout.strip()
    return int(out.split(".")[0])


@pytest.fixture(scope="module")
def work(tmp_path_factory):
    return tmp_path_factory.mktemp("outside")


def _write(work, name, text):
    path = work / name
    path.write_text(text)
    return path


# (a + b) - b and x + 0.0, with inputs read at run time so nothing folds at compile time
PARENS = """program parens
  implicit none
  real(8) :: a, b, x
  character(len=40) :: arg
  call get_command_argument(1, arg); read(arg, *) a
  call get_command_argument(2, arg); read(arg, *) b
  call get_command_argument(3, arg); read(arg, *) x
  write(*, '(z16.16, 1x, z16.16)') (a + b) - b, x + 0.0d0
end program
"""

FUSED = """program fused
  implicit none
  real(8) :: a, b, c
  character(len=40) :: arg
  call get_command_argument(1, arg); read(arg, *) a
  call get_command_argument(2, arg); read(arg, *) b
  call get_command_argument(3, arg); read(arg, *) c
  write(*, '(z16.16)') a*b + c
end program
"""
# a = 1 + 2**-30, b = 1 - 2**-30: a*b = 1 - 2**-60 rounds to 1, so a*b - 1 is 0 unfused and
# -2**-60 fused
FMA_ARGS = ["1.0000000009313225746154785156250", "0.9999999990686774253845214843750", "-1.0"]

WAVES = """program waves
  implicit none
  integer, parameter :: n = 4096
  real(8) :: x(n), y(n)
  integer :: i
  do i = 1, n
    x(i) = 0.37d0 * i - 11.0d0
  end do
  call heat(x, y)
  write(*, '(z16.16)') y
contains
  subroutine heat(x, y)
    real(8), intent(in) :: x(n)
    real(8), intent(out) :: y(n)
    integer :: i
    do i = 1, n
      y(i) = sin(x(i)) + exp(x(i) * 0.01d0)
    end do
  end subroutine
end program
"""

MULADD = """subroutine muladd(a, b, c, r)
  real(8), intent(in) :: a, b, c
  real(8), intent(out) :: r
  r = a*b + c
end subroutine
"""


@pytest.mark.parametrize("key", [r.key for r in RULES if r.implies])
def test_rule_implies_what_gfortran_reports(gfortran, work, key):
    # GCC manual, Optimize Options: -Ofast enables -ffast-math; -ffast-math sets
    # -funsafe-math-optimizations and -ffinite-math-only; -funsafe-math-optimizations enables
    # -fno-signed-zeros, -fno-trapping-math, -fassociative-math and -freciprocal-math.
    rule = BY_KEY[key]
    base = ["-O3"] if rule.example == "-Ofast" else ["-O2"]
    with_option = optimizer_states(gfortran, base + [rule.example], work)
    without = optimizer_states(gfortran, base, work)
    for option in rule.implies:
        if option == "-ffast-math":
            continue  # an umbrella with no state of its own; its parts are listed too
        assert enabled(with_option, option), f"{rule.example} should imply {option}"
        assert not enabled(without, option), f"{option} already holds at {base}: the check proves nothing"


def test_gfortran_contracts_by_default(gfortran, work):
    # the reason reproducible_flags always appends -ffp-contract=off for GCC
    assert optimizer_states(gfortran, ["-O2"], work)["-ffp-contract"] == "fast"


def test_o2_vectorises_from_gcc_12(gfortran, work, major):
    # GCC manual, Optimize Options (PR 103077): -ftree-loop-vectorize is on at -O2 from GCC 12
    states = optimizer_states(gfortran, ["-O2"], work)
    assert enabled(states, "-ftree-loop-vectorize") == (major >= 12)
    assert enabled(optimizer_states(gfortran, ["-O3"], work), "-ftree-loop-vectorize")
    assert not enabled(optimizer_states(gfortran, ["-O2", "-fno-tree-vectorize"], work), "-ftree-loop-vectorize")


def test_ofast_ignores_parentheses_and_deletes_the_guard(gfortran, work):
    source = _write(work, "parens.f90", PARENS)
    args = ["1.0", "1.0e30", "-0.0"]

    def bits(flags):
        return compile_and_run(gfortran, source, flags, args, work).split()

    zero, one, minus_zero = "0000000000000000", "3FF0000000000000", "8000000000000000"
    assert bits(["-O0"]) == [zero, zero]  # (1 + 1e30) - 1e30 = 0, -0.0 + 0.0 = +0.0
    assert bits(["-O2"]) == [zero, zero]
    assert bits(["-Ofast"]) == [one, minus_zero]  # gnu-ofast: parentheses ignored, guard deleted
    # gnu-fast-math: gfortran still honours parentheses under -ffast-math, but the guard goes
    assert bits(["-O2", "-ffast-math"]) == [zero, minus_zero]
    assert bits(["-O2", "-fno-signed-zeros"]) == [zero, minus_zero]  # gnu-no-signed-zeros
    # gnu-no-protect-parens: in effect once reassociation is allowed
    assert bits(["-O2", "-fno-protect-parens"]) == [zero, zero]
    assert bits(["-O2", "-fno-protect-parens", "-fassociative-math", "-fno-signed-zeros",
                 "-fno-trapping-math"]) == [one, minus_zero]


@pytest.mark.skipif(not X86, reason="x86-64 -march values")
def test_fma_targets_fuse_and_fp_contract_off_does_not(gfortran, work):
    source = _write(work, "muladd.f90", MULADD)

    def fused(flags):
        return bool(re.search(r"vfn?m(add|sub)", assembly(gfortran, source, ["-O2", *flags], work)))

    assert not fused([])
    for flags in (["-march=haswell"], ["-mfma"], ["-mavx512f"], ["-march=x86-64-v4", "-mno-fma"]):
        assert fused(flags), flags  # gnu-march-fma, gnu-mfma: AVX-512 fuses even with -mno-fma
    for flags in (["-march=haswell", "-ffp-contract=off"], ["-march=x86-64-v4", "-ffp-contract=off"],
                  ["-mavx2"]):
        assert not fused(flags), flags


@pytest.mark.skipif(not X86, reason="x86-64 -march values")
def test_every_fma_march_of_the_table_fuses(gfortran, work):
    source = _write(work, "muladd.f90", MULADD)
    names = GCC_FMA_MARCH + GCC_NO_FMA_MARCH
    with ThreadPoolExecutor(4) as pool:
        results = list(pool.map(lambda name: run([gfortran, "-O2", f"-march={name}", "-S", str(source), "-o", "-"],
                                                 work, check=False), names))
    known = 0
    for name, result in zip(names, results):
        if result.returncode != 0:
            continue  # a newer name than this GCC knows
        known += 1
        fused = bool(re.search(r"vfn?m(add|sub)", result.stdout))
        assert fused == (name in GCC_FMA_MARCH), name
        matched = BY_KEY["gnu-march-fma"].regex.fullmatch(f"-march={name}") is not None
        assert matched == fused, name
    assert known >= 20


@pytest.mark.skipif(not X86, reason="needs an x86-64 machine with FMA to run fused code")
def test_fused_results_differ_and_fp_contract_off_restores(gfortran, work):
    if "fma" not in open("/proc/cpuinfo").read():
        pytest.skip("this machine has no FMA")
    source = _write(work, "fused.f90", FUSED)
    reference = compile_and_run(gfortran, source, ["-O0"], FMA_ARGS, work)
    assert compile_and_run(gfortran, source, ["-O2", "-march=haswell"], FMA_ARGS, work) != reference
    assert compile_and_run(gfortran, source, ["-O2", "-march=haswell", "-ffp-contract=off"], FMA_ARGS,
                           work) == reference
    # GCC 12 and 13 treat -ffp-contract=on as off (gnu-fp-contract-on)
    on = compile_and_run(gfortran, source, ["-O2", "-march=haswell", "-ffp-contract=on"], FMA_ARGS, work)
    major = int(run([gfortran, "-dumpversion"], work).stdout.split(".")[0])
    if major <= 13:
        assert on == reference


def test_vector_libm_changes_bits_and_no_tree_vectorize_restores(gfortran, work, major):
    source = _write(work, "waves.f90", WAVES)
    reference = compile_and_run(gfortran, source, ["-O0"], [], work)
    vectorised = compile_and_run(gfortran, source, ["-O3"], [], work)
    if "_ZGV" not in assembly(gfortran, source, ["-O3"], work):
        pytest.skip("this glibc gives gfortran no vector sin/exp (libmvec)")
    assert vectorised != reference  # gnu-vectorize-o3
    if major >= 12:
        assert compile_and_run(gfortran, source, ["-O2"], [], work) != reference  # gnu-vectorize-o2
    for level in ("-O2", "-O3"):
        assert compile_and_run(gfortran, source, [level, "-fno-tree-vectorize"], [], work) == reference


@pytest.fixture(scope="module")
def programs(gfortran, work):
    """The three probe programs with their arguments and -O0 output."""
    cases = []
    for name, text, args in (("parens.f90", PARENS, ["1.0", "1.0e30", "-0.0"]), ("waves.f90", WAVES, []),
                             ("fused.f90", FUSED, FMA_ARGS)):
        source = _write(work, name, text)
        cases.append((source, args, compile_and_run(gfortran, source, ["-O0"], args, work)))
    return cases


@pytest.mark.parametrize("flags", [
    ["-Ofast", "-march=native"],
    ["-O3", "-mfma", "-ffp-contract=fast", "-funroll-loops"],
    ["-O2", "-funsafe-math-optimizations", "-ftree-vectorize"],
    ["-O3", "-ffast-math", "-fno-protect-parens", "-march=haswell"],
])
def test_reproducible_flags_restore_the_o0_bits(gfortran, work, programs, flags):
    if not X86 or "fma" not in open("/proc/cpuinfo").read():
        pytest.skip("the FMA targets of these lists need an x86-64 machine with FMA to run")
    fixed = reproducible_flags(flags, "gfortran", libm_in_loops=True)
    changed = []
    for source, args, reference in programs:
        assert compile_and_run(gfortran, source, fixed, args, work) == reference, (source.name, fixed)
        changed.append(compile_and_run(gfortran, source, flags, args, work) != reference)
    assert any(changed), f"{flags} changes no bit of the probes: the check proves nothing"


def test_reproducible_flags_leave_no_fast_math_option_on(gfortran, work):
    for flags in (["-Ofast"], ["-O2", "-ffast-math", "-funsafe-math-optimizations", "-fassociative-math",
                                "-freciprocal-math", "-fno-signed-zeros", "-ffinite-math-only"]):
        states = optimizer_states(gfortran, reproducible_flags(flags), work)
        for option in ("-fno-associative-math", "-fno-reciprocal-math", "-fsigned-zeros",
                       "-fno-unsafe-math-optimizations", "-fno-finite-math-only"):
            assert enabled(states, option), (flags, option)
        assert states["-ffp-contract"] == "off"
        assert enabled(states, "-fno-tree-loop-vectorize") and enabled(states, "-fno-tree-slp-vectorize")
