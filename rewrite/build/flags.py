"""The flag table: compiler options that break bit-for-bit reproducibility, what each risks, what
to use instead, and ``reproducible_flags``, which rewrites an option list by the table.

Each ``Rule`` matches one option *unit*: a command-line word, or an option and its separate
argument (``-fp-model fast``, ``-h fp3``, ``-assume noprotect_parens``, ``-tp haswell``,
``-O fp3``), joined by one space. Kinds:

- ``unsafe``: always a finding (``-Ofast``, ``-ffast-math``, ``-fp-model fast`` ...);
- ``target``: an FMA-capable target (``-march=native``, ``-xHost``, ``-tp zen3``); a finding
  only when no option of the same scope turns contraction off (tag ``no-fma``:
  ``-ffp-contract=off``, ``-no-fma``, ``-fp-model strict|consistent``, ``-Mnofma``);
- ``vector``: GCC vectorisation (``-O2``, ``-O3``, ``-ftree-vectorize``), which sends loops over
  sin/exp/log/pow to glibc's vector math library; depends on the source (``libm_in_loops``) and
  is cleared by ``-fno-tree-vectorize``;
- ``safe``: options that set tags and are never findings;
- ``default``: what a compiler does when an option is missing (ifx/ifort without any
  ``-fp-model``, nvfortran without ``-Mnofma``, ftn without ``-h fpN``), reported at the word
  that names the compiler.

Sources are named in ``Rule.source``; "(from memory)" marks what no stored manual page confirmed
here. Facts checked against gfortran itself are in ``implies`` (``gfortran -Q
--help=optimizers``) and in tests/build/test_gfortran_outside.py.

``reproducible_flags`` decisions (documented here because another helper proves them with
gfortran): unsafe options are dropped or replaced (``-Ofast`` -> ``-O3``,
``-ffp-contract=fast`` -> ``-ffp-contract=off``, ``-fp-model fast`` -> ``-fp-model
consistent``, ``-h fp3`` -> ``-h fp0``); for GCC and Flang ``-ffp-contract=off`` is always
appended once, because both default to ``-ffp-contract=fast`` and FMA is in the base
instruction set of AArch64 and POWER, so a list without any target option still contracts
there; at -O2 and above GCC lists get ``-fno-tree-vectorize`` when ``libm_in_loops``; Intel lists
without an ``-fp-model`` get ``-fp-model consistent`` (the Intel manual: value-safe, no FMA,
math functions consistent across microarchitectures; the 2023 manuals mark it "ifort only", the
2024.1 and later ones list it for ifx too), and ``-no-fma`` when an AVX2 target stays with
``-fp-model precise``; nvfortran lists get ``-Mnofma``; ftn lists without ``-h fpN`` get
``-h fp0``. The result is a fixed point: applying it twice gives the same list.
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Callable

from .compilers import CRAY, FAMILIES, FLANG, GNU, INTEL, NAG, NVIDIA, UNKNOWN, family_of, rules_family
from .tokens import Word

ERROR, WARNING, NOTE = "error", "warning", "note"
SEVERITY_RANK = {NOTE: 1, WARNING: 2, ERROR: 3}
UNSAFE, TARGET, VECTOR, SAFE, DEFAULT = "unsafe", "target", "vector", "safe", "default"

NO_FMA, NO_LOOP_VEC, NO_SLP_VEC = "no-fma", "no-loop-vec", "no-slp-vec"
FP_MODEL, CRAY_FP = "fp-model-any", "cray-fp"

GCC_OPT = "GCC manual, Optimize Options"
GFORTRAN_CG = "GNU Fortran manual, Code Gen Options (-fprotect-parens)"
GCC_X86 = "GCC manual, x86 Options; checked with gcc -S (vfmadd) in tests"
GCC_ARM = "GCC manual, AArch64 Options; FMA in the base ISA is common practice, no source"
FLANG_SRC = "LLVM Flang driver, clang/lib/Driver/ToolChains/Flang.cpp (addFloatingPointOptions)"
CLANG_FP = "Clang Users Manual, Controlling Floating Point Behavior (Flang shares the driver)"
INTEL_DOC = "Intel Fortran Compiler Developer Guide and Reference"
NVIDIA_DOC = "NVIDIA HPC Compilers Reference Guide"
CRAY_DOC = "HPE Cray Fortran Reference Manual, Math Options (-h fp)"
NAG_DOC = "NAG Fortran Compiler manual"
LIBMVEC = ("GCC manual, Optimize Options (-ftree-loop-vectorize on at -O2 from GCC 12, PR 103077); "
           "glibc wiki, libmvec (vector variants accurate to 4 ulp); checked with gfortran in tests")

_FMA_RISK = ("this target has FMA, so a*b + c is fused into one rounding (GCC and Flang default to "
             "-ffp-contract=fast): bits differ from builds for targets without FMA")
_FMA_FIX = "add -ffp-contract=off (or build for a target without FMA, such as -march=x86-64-v2)"
_LIBM = ("loops over sin/exp/log/pow may call glibc's vector math library (libmvec, accurate to 4 ulp), "
         "whose bits differ from the scalar calls")
_LIBM_FIX = "add -fno-tree-vectorize (vectorisation off; or build these files at -O1)"

# x86 -march values with FMA. Checked with gcc 12 (-S shows vfmadd) for the names it knows; the
# newer names are from later GCC releases and are FMA-capable by their vendors' documentation
# (from memory).
GCC_FMA_MARCH = (
    "haswell broadwell skylake skylake-avx512 cannonlake icelake-client icelake-server cascadelake "
    "cooperlake tigerlake sapphirerapids alderlake rocketlake raptorlake meteorlake gracemont arrowlake "
    "arrowlake-s lunarlake pantherlake graniterapids graniterapids-d emeraldrapids sierraforest "
    "grandridge clearwaterforest diamondrapids knl knm bdver2 bdver3 bdver4 znver1 znver2 znver3 "
    "znver4 znver5 x86-64-v3 x86-64-v4 core-avx2").split()
# x86 -march values without FMA, used by the tests as the other half of the check
GCC_NO_FMA_MARCH = "x86-64 x86-64-v2 nehalem westmere sandybridge ivybridge btver2 silvermont goldmont".split()
INTEL_FMA_CODES = ("AVX2 AVX512 HASWELL BROADWELL SKYLAKE CASCADELAKE COOPERLAKE ICELAKE TIGERLAKE "
                   "SAPPHIRERAPIDS ALDERLAKE ROCKETLAKE RAPTORLAKE METEORLAKE GRANITERAPIDS EMERALDRAPIDS "
                   "SIERRAFOREST ARROWLAKE LUNARLAKE").split()
INTEL_FMA_MARCH = ("core-avx2 haswell broadwell skylake skylake-avx512 cascadelake cooperlake icelake-client "
                   "icelake-server tigerlake sapphirerapids alderlake rocketlake raptorlake native").split()


def _alt(names) -> str:
    return "(?:" + "|".join(re.escape(n) for n in sorted(names, key=len, reverse=True)) + ")"


@dataclass(frozen=True)
class Rule:
    key: str
    families: tuple[str, ...]
    pattern: str  # full match over one option unit ("" for default rules)
    kind: str
    severity: str  # for vector rules: the severity when libm_in_loops is True
    risk: str
    fix: str
    example: str  # a spelling the rule matches (fixtures, property tests); the command for defaults
    source: str
    replacement: tuple[str, ...] | None = None  # reproducible_flags: None keeps the unit
    tags: frozenset = frozenset()
    cleared_by: tuple[frozenset, ...] = ()
    implies: tuple[str, ...] = ()  # GCC options it turns on, checked against gfortran -Q
    fixer: Callable[[tuple[str, ...]], tuple[str, ...]] | None = field(default=None, compare=False)

    @property
    def regex(self) -> re.Pattern:
        return _compiled(self.pattern)


_CACHE: dict[str, re.Pattern] = {}


def _compiled(pattern: str) -> re.Pattern:
    if pattern not in _CACHE:
        _CACHE[pattern] = re.compile(pattern)
    return _CACHE[pattern]


def _drop_noprotect(words: tuple[str, ...]) -> tuple[str, ...]:
    """``-assume noprotect_parens,byterecl`` keeps its other keywords: ``-assume byterecl``."""
    text = " ".join(words)
    m = re.fullmatch(r"(-assume[ =:])(\S*)", text)
    keep = [k for k in m.group(2).split(",") if k and k != "noprotect_parens"] if m else []
    if not keep:
        return ()
    if len(words) == 2:
        return (words[0], ",".join(keep))
    return (m.group(1) + ",".join(keep),)


GL = (GNU,)
GF = (GNU, FLANG)

RULES: tuple[Rule, ...] = (
    # ---- GCC (gfortran, gcc) and LLVM Flang: fast-math class ----
    Rule("gnu-ofast", GL, r"-Ofast", UNSAFE, ERROR,
         "implies -ffast-math and -fno-protect-parens: parentheses are no longer honoured, x + 0.0 guards "
         "are deleted and sums are reassociated",
         "use -O3 or -O2 without fast-math options", "-Ofast", f"{GCC_OPT} (-Ofast); {GFORTRAN_CG}",
         replacement=("-O3",),
         implies=("-ffast-math", "-funsafe-math-optimizations", "-fassociative-math", "-freciprocal-math",
                  "-fno-signed-zeros", "-ffinite-math-only")),
    Rule("flang-ofast", (FLANG,), r"-Ofast", UNSAFE, ERROR,
         "implies -ffast-math, -fstack-arrays and -fno-protect-parens: parentheses are no longer honoured, "
         "x + 0.0 guards are deleted and sums are reassociated",
         "use -O3 or -O2 without fast-math options", "-Ofast", FLANG_SRC, replacement=("-O3",)),
    Rule("gnu-fast-math", GL, r"-ffast-math", UNSAFE, ERROR,
         "turns on -funsafe-math-optimizations: x + 0.0 guards are deleted (-fno-signed-zeros), sums that "
         "parentheses do not pin are reassociated and divisions become reciprocal multiplications",
         "remove it (keep -O2 or -O3)", "-ffast-math", GCC_OPT, replacement=(),
         implies=("-funsafe-math-optimizations", "-fassociative-math", "-freciprocal-math", "-fno-signed-zeros",
                  "-ffinite-math-only")),
    Rule("flang-fast-math", (FLANG,), r"-ffast-math", UNSAFE, ERROR,
         "turns on reassociation, -fno-signed-zeros, reciprocal and approximate math and -ffp-contract=fast: "
         "x + 0.0 guards are deleted and sums are reassociated",
         "remove it (keep -O2 or -O3)", "-ffast-math", f"{FLANG_SRC}; {CLANG_FP}", replacement=()),
    Rule("gnu-unsafe-math", GL, r"-funsafe-math-optimizations", UNSAFE, ERROR,
         "turns on -fassociative-math, -freciprocal-math, -fno-signed-zeros and -fno-trapping-math: sums are "
         "reassociated and x + 0.0 guards are deleted",
         "remove it", "-funsafe-math-optimizations", GCC_OPT, replacement=(),
         implies=("-fassociative-math", "-freciprocal-math", "-fno-signed-zeros", "-fno-trapping-math")),
    Rule("gnu-associative-math", GF, r"-fassociative-math", UNSAFE, ERROR,
         "lets the compiler reassociate floating-point sums and products (in effect together with "
         "-fno-signed-zeros and -fno-trapping-math): a + b + c is summed in another order in each build",
         "remove it", "-fassociative-math", f"{GCC_OPT}; {FLANG_SRC}", replacement=()),
    Rule("gnu-no-signed-zeros", GF, r"-fno-signed-zeros", UNSAFE, ERROR,
         "lets the compiler ignore the sign of zero: x + 0.0 guards are deleted and -0.0 results survive",
         "remove it", "-fno-signed-zeros", f"{GCC_OPT}; {FLANG_SRC}", replacement=()),
    Rule("gnu-reciprocal-math", GF, r"-freciprocal-math", UNSAFE, WARNING,
         "allows x / y to become x * (1 / y): quotients differ in the last bit",
         "remove it", "-freciprocal-math", f"{GCC_OPT}; {FLANG_SRC}", replacement=()),
    Rule("gnu-no-protect-parens", GF, r"-fno-protect-parens", UNSAFE, ERROR,
         "lets the compiler reorder REAL and COMPLEX expressions across parentheses (once reassociation is "
         "allowed): the parentheses samebits writes are ignored",
         "remove it (-fprotect-parens is the default)", "-fno-protect-parens",
         f"{GFORTRAN_CG}; {FLANG_SRC}", replacement=()),
    Rule("gnu-fp-contract-fast", GF, r"-ffp-contract=fast", UNSAFE, WARNING,
         "fuses a*b + c into one fused multiply-add with a single rounding wherever the target has FMA: bits "
         "differ between machines with and without FMA",
         "use -ffp-contract=off", "-ffp-contract=fast", f"{GCC_OPT}; {FLANG_SRC}",
         replacement=("-ffp-contract=off",)),
    Rule("gnu-fp-contract-on", GL, r"-ffp-contract=on", UNSAFE, NOTE,
         "GCC up to 13 treats 'on' as 'off', later releases may contract within one expression: the rounding "
         "then depends on the GCC version",
         "use -ffp-contract=off", "-ffp-contract=on", GCC_OPT, replacement=("-ffp-contract=off",)),
    Rule("gnu-finite-math", GL, r"-ffinite-math-only", UNSAFE, NOTE,
         "assumes no NaN or infinity: NaN checks and comparisons may be folded away, so results with NaN or "
         "Inf change", "remove it", "-ffinite-math-only", GCC_OPT, replacement=()),
    Rule("gnu-cx-limited-range", GL, r"-fcx-limited-range", UNSAFE, NOTE,
         "complex multiplication and division skip range reduction and NaN checks: complex results near "
         "overflow or with Inf/NaN differ", "remove it", "-fcx-limited-range", GCC_OPT, replacement=()),
    Rule("gnu-veclibabi", GL, r"-mveclibabi=\S+", UNSAFE, WARNING,
         "vectorised loops call SVML or ACML vector math functions, whose bits differ from the scalar libm's",
         "remove it", "-mveclibabi=svml", "GCC manual, x86 Options (-mveclibabi)", replacement=()),
    Rule("gnu-mfpmath-387", GL, r"-mfpmath=(?:387|sse\+387|387\+sse|both|sse,387|387,sse)", UNSAFE, WARNING,
         "computes with the x87 unit, whose temporary results carry 80-bit precision instead of the type's: "
         "every expression may round differently", "use -mfpmath=sse (the x86-64 default)", "-mfpmath=387",
         "GCC manual, x86 Options (-mfpmath)", replacement=("-mfpmath=sse",)),
    Rule("flang-no-honor", (FLANG,), r"-fno-honor-(?:nans|infinities)", UNSAFE, NOTE,
         "assumes no NaN (or no infinity): checks and comparisons with them may be folded away",
         "remove it", "-fno-honor-nans", f"{FLANG_SRC}; {CLANG_FP}", replacement=()),
    Rule("flang-approx-func", (FLANG,), r"-fapprox-func", UNSAFE, WARNING,
         "lets the compiler replace math functions by approximations of other bits",
         "remove it", "-fapprox-func", f"{FLANG_SRC}; {CLANG_FP}", replacement=()),
    Rule("flang-veclib", (FLANG,), r"-fveclib=(?!none$)\S+", UNSAFE, WARNING,
         "vectorised loops call the named vector math library, whose bits differ from the scalar libm's",
         "remove it (or -fveclib=none)", "-fveclib=libmvec", CLANG_FP, replacement=()),
    # ---- GCC vectorisation with libm calls (depends on the source) ----
    Rule("gnu-vectorize-o2", GL, r"-O2", VECTOR, WARNING,
         "GCC 12 and later vectorise at -O2 (very-cheap cost model): " + _LIBM, _LIBM_FIX, "-O2", LIBMVEC,
         cleared_by=(frozenset({NO_LOOP_VEC, NO_SLP_VEC}),)),
    Rule("gnu-vectorize-o3", GL, r"-O(?:[3-9]|[1-9]\d+)", VECTOR, WARNING,
         "-O3 vectorises loops: " + _LIBM, _LIBM_FIX, "-O3", LIBMVEC,
         cleared_by=(frozenset({NO_LOOP_VEC, NO_SLP_VEC}),)),
    Rule("gnu-vectorize-flag", GL, r"-ftree-(?:loop-|slp-)?vectorize", VECTOR, WARNING,
         "turns vectorisation on: " + _LIBM, "remove it (or add -fno-tree-vectorize)", "-ftree-vectorize",
         LIBMVEC, replacement=(), cleared_by=(frozenset({NO_LOOP_VEC, NO_SLP_VEC}),)),
    # ---- GCC and Flang: FMA-capable targets ----
    Rule("gnu-march-native", GF, r"-march=native", TARGET, WARNING,
         "targets the build machine: where it has FMA, a*b + c is fused (GCC and Flang default to "
         "-ffp-contract=fast), so the bits change with the machine that builds",
         _FMA_FIX, "-march=native", GCC_X86, cleared_by=(frozenset({NO_FMA}),)),
    Rule("gnu-march-fma", GF, r"-march=" + _alt(GCC_FMA_MARCH), TARGET, WARNING, _FMA_RISK, _FMA_FIX,
         "-march=haswell", GCC_X86, cleared_by=(frozenset({NO_FMA}),)),
    Rule("gnu-mfma", GF, r"-mfma4?|-mavx512\w+", TARGET, WARNING,
         "enables FMA instructions (AVX-512 brings its own, even with -mno-fma): a*b + c is fused into one "
         "rounding", _FMA_FIX, "-mfma", GCC_X86, cleared_by=(frozenset({NO_FMA}),)),
    Rule("gnu-aarch64", GF, r"-march=armv[89]\S*|-mcpu=\S+", TARGET, NOTE,
         "on AArch64 (and POWER) FMA is in the base instruction set and GCC and Flang contract a*b + c by "
         "default: bits differ from x86-64 builds without FMA", "add -ffp-contract=off", "-march=armv8.2-a",
         GCC_ARM, cleared_by=(frozenset({NO_FMA}),)),
    Rule("gnu-safe-fp-contract-off", GF, r"-ffp-contract=off", SAFE, NOTE, "", "", "-ffp-contract=off",
         GCC_OPT, tags=frozenset({NO_FMA})),
    Rule("gnu-safe-no-vectorize", GL, r"-fno-tree-vectorize", SAFE, NOTE, "", "", "-fno-tree-vectorize",
         GCC_OPT, tags=frozenset({NO_LOOP_VEC, NO_SLP_VEC})),
    Rule("gnu-safe-no-loop-vectorize", GL, r"-fno-tree-loop-vectorize", SAFE, NOTE, "", "",
         "-fno-tree-loop-vectorize", GCC_OPT, tags=frozenset({NO_LOOP_VEC})),
    Rule("gnu-safe-no-slp-vectorize", GL, r"-fno-tree-slp-vectorize", SAFE, NOTE, "", "",
         "-fno-tree-slp-vectorize", GCC_OPT, tags=frozenset({NO_SLP_VEC})),
    # ---- Intel ifx / ifort ----
    Rule("intel-fast", (INTEL,), r"-fast", UNSAFE, ERROR,
         "sets -O3, -ipo, -static and -fp-model fast (ifort also -no-prec-div and -xHost): value-unsafe "
         "optimisations, reassociation and FMA for the build machine",
         "use -O3 with -fp-model consistent", "-fast", f"{INTEL_DOC}, fast", replacement=("-O3",),
         tags=frozenset({FP_MODEL})),
    Rule("intel-ofast", (INTEL,), r"-Ofast", UNSAFE, ERROR,
         "sets -O3, -no-prec-div and -fp-model fast=2: value-unsafe optimisations and reassociation",
         "use -O3 with -fp-model consistent", "-Ofast", f"{INTEL_DOC}, Ofast", replacement=("-O3",),
         tags=frozenset({FP_MODEL})),
    Rule("intel-fp-model-fast", (INTEL,), r"-fp-model[ =:]fast(?:=[12])?", UNSAFE, ERROR,
         "enables value-unsafe optimisations (reassociation, reciprocal division, fast math functions), and "
         "parentheses are not honoured (-fno-protect-parens is the default)",
         "use -fp-model consistent (or precise)", "-fp-model fast",
         f"{INTEL_DOC}, fp-model; fprotect-parens", replacement=("-fp-model", "consistent"),
         tags=frozenset({FP_MODEL})),
    Rule("intel-no-protect-parens", (INTEL,), r"-fno-protect-parens", UNSAFE, ERROR,
         "lets the optimizer reorder floating-point expressions without regard for parentheses",
         "remove it; use -fp-model consistent or precise", "-fno-protect-parens",
         f"{INTEL_DOC}, fprotect-parens", replacement=()),
    Rule("intel-assume-noprotect-parens", (INTEL,), r"-assume[ =:](?:\S*,)?noprotect_parens(?:,\S*)?", UNSAFE,
         ERROR, "lets the optimizer reorder floating-point expressions without regard for parentheses",
         "remove noprotect_parens; use -fp-model consistent or precise", "-assume noprotect_parens",
         f"{INTEL_DOC}, assume; fprotect-parens", replacement=(), fixer=_drop_noprotect),
    Rule("intel-no-prec-div", (INTEL,), r"-no-prec-div", UNSAFE, WARNING,
         "allows A/B to become A*(1/B), also in some vector iterations only: quotients differ in the last bit",
         "remove it (-fp-model precise or consistent implies -prec-div)", "-no-prec-div",
         f"{INTEL_DOC}, prec-div", replacement=()),
    Rule("intel-no-prec-sqrt", (INTEL,), r"-no-prec-sqrt", UNSAFE, NOTE,
         "uses a faster, less precise square root", "remove it", "-no-prec-sqrt", f"{INTEL_DOC}, prec-sqrt",
         replacement=()),
    Rule("intel-fma", (INTEL,), r"-fma", UNSAFE, WARNING,
         "asks for fused multiply-add on CORE-AVX2 and later targets: a*b + c gets one rounding",
         "use -no-fma", "-fma", f"{INTEL_DOC}, fma", replacement=("-no-fma",)),
    Rule("intel-fimf-precision", (INTEL,), r"-fimf-precision[=:](?:low|medium)(?::\S+)?", UNSAFE, WARNING,
         "selects less accurate math library functions of other bits", "remove it", "-fimf-precision=low",
         f"{INTEL_DOC}, fimf-precision (from memory)", replacement=()),
    Rule("intel-fast-transcendentals", (INTEL,), r"-fast-transcendentals", UNSAFE, WARNING,
         "lets the compiler call faster transcendental functions of other bits", "remove it",
         "-fast-transcendentals", f"{INTEL_DOC}, fast-transcendentals (from memory)", replacement=()),
    Rule("intel-ftz", (INTEL,), r"-ftz", UNSAFE, NOTE,
         "flushes subnormal results to zero", "remove it (or -no-ftz)", "-ftz", f"{INTEL_DOC}, ftz",
         replacement=()),
    Rule("intel-fast-math", (INTEL,), r"-ffast-math", UNSAFE, ERROR,
         "asks ifx for fast floating-point semantics like -fp-model fast (ifx takes GCC-style options; from "
         "memory)", "remove it; use -fp-model consistent", "-ffast-math", f"{INTEL_DOC} (from memory)",
         replacement=()),
    Rule("intel-x-target", (INTEL,),
         r"-a?x(?:Host|[A-Z0-9,-]*" + _alt(INTEL_FMA_CODES) + r"[A-Z0-9,-]*)", TARGET, WARNING,
         "targets CORE-AVX2 or later, where the default -fma fuses a*b + c into one rounding",
         "add -no-fma, or use -fp-model consistent (or strict)", "-xHost", f"{INTEL_DOC}, fma; x, Qx",
         cleared_by=(frozenset({NO_FMA}),)),
    Rule("intel-march-target", (INTEL,), r"-march=" + _alt(INTEL_FMA_MARCH), TARGET, WARNING,
         "targets CORE-AVX2 or later, where the default -fma fuses a*b + c into one rounding",
         "add -no-fma, or use -fp-model consistent (or strict)", "-march=core-avx2",
         f"{INTEL_DOC}, fma; march", cleared_by=(frozenset({NO_FMA}),)),
    Rule("intel-safe-no-fma", (INTEL,), r"-no-fma", SAFE, NOTE, "", "", "-no-fma", f"{INTEL_DOC}, fma",
         tags=frozenset({NO_FMA})),
    Rule("intel-safe-fp-model-nofma", (INTEL,), r"-fp-model[ =:](?:strict|consistent)", SAFE, NOTE, "", "",
         "-fp-model consistent", f"{INTEL_DOC}, fp-model; fma", tags=frozenset({NO_FMA, FP_MODEL})),
    Rule("intel-safe-fp-model", (INTEL,), r"-fp-model[ =:](?:precise|source|except|no-except)", SAFE, NOTE,
         "", "", "-fp-model precise", f"{INTEL_DOC}, fp-model", tags=frozenset({FP_MODEL})),
    Rule("intel-default-fp-model", (INTEL,), "", DEFAULT, ERROR,
         "ifx and ifort default to -fp-model fast (value-unsafe optimisations) and -fno-protect-parens "
         "(parentheses not honoured)", "add -fp-model consistent (or precise, with -no-fma on AVX2 targets)",
         "ifx", f"{INTEL_DOC}, fp-model; fprotect-parens", cleared_by=(frozenset({FP_MODEL}),)),
    # ---- NVIDIA nvfortran / pgfortran ----
    Rule("nvidia-fast", (NVIDIA,), r"-fast", UNSAFE, ERROR,
         "selects -O2 with SIMD vectorisation, flush-to-zero and, where the target has it, FMA (from memory): "
         "bits change with the target and the vector width", "use -O2 with -Mnofma", "-fast",
         f"{NVIDIA_DOC}, -fast (from memory)", replacement=("-O2",)),
    Rule("nvidia-fma", (NVIDIA,), r"-Mfma", UNSAFE, WARNING,
         "generates fused multiply-add: a*b + c gets one rounding, also across parentheses", "use -Mnofma",
         "-Mfma", f"{NVIDIA_DOC}, -M[no]fma (from memory)", replacement=("-Mnofma",)),
    Rule("nvidia-fprelaxed", (NVIDIA,), r"-Mfprelaxed(?:=\S+)?", UNSAFE, WARNING,
         "uses relaxed precision for division, square root and some intrinsics", "remove it", "-Mfprelaxed",
         f"{NVIDIA_DOC}, -M[no]fprelaxed (from memory)", replacement=()),
    Rule("nvidia-flushz", (NVIDIA,), r"-Mflushz", UNSAFE, NOTE,
         "flushes subnormal results to zero", "remove it (or -Mnoflushz)", "-Mflushz",
         f"{NVIDIA_DOC}, -M[no]flushz (from memory)", replacement=()),
    Rule("nvidia-tp-target", (NVIDIA,), r"-tp[ =](?!(?:px|sandybridge)$)\S+", TARGET, WARNING,
         "targets a processor with FMA, which nvfortran uses for a*b + c unless told not to (from memory)",
         "add -Mnofma", "-tp haswell", f"{NVIDIA_DOC}, -tp (from memory)", cleared_by=(frozenset({NO_FMA}),)),
    Rule("nvidia-safe-nofma", (NVIDIA,), r"-Mnofma", SAFE, NOTE, "", "", "-Mnofma",
         f"{NVIDIA_DOC}, -M[no]fma (from memory)", tags=frozenset({NO_FMA})),
    Rule("nvidia-default-fma", (NVIDIA,), "", DEFAULT, WARNING,
         "nvfortran targets the build machine (-tp) and generates FMA there by default (from memory): a*b + c "
         "is fused on FMA machines", "add -Mnofma", "nvfortran", f"{NVIDIA_DOC}, -M[no]fma, -tp (from memory)",
         cleared_by=(frozenset({NO_FMA}),)),
    # ---- HPE Cray ftn (CCE) ----
    Rule("cray-fp34", (CRAY,), r"-[hO] ?fp[34]", UNSAFE, ERROR,
         "trades IEEE conformance for speed (the manual rates its safety moderate or low): reassociation and "
         "approximations change the bits", "use -h fp0", "-h fp3", CRAY_DOC, replacement=("-h", "fp0"),
         tags=frozenset({CRAY_FP})),
    Rule("cray-fp2", (CRAY,), r"-[hO] ?fp2", UNSAFE, WARNING,
         "(the default) lets floating-point reductions be vectorised and divisions become reciprocal "
         "multiplications: sums are reassociated by vector width", "use -h fp0", "-h fp2", CRAY_DOC,
         replacement=("-h", "fp0"), tags=frozenset({CRAY_FP})),
    Rule("cray-fp1", (CRAY,), r"-[hO] ?fp1", UNSAFE, NOTE,
         "still allows some non-IEEE optimisations; the manual says only fp0 disables vectorisation of "
         "floating-point reductions", "use -h fp0", "-h fp1", CRAY_DOC, replacement=("-h", "fp0"),
         tags=frozenset({CRAY_FP})),
    Rule("cray-safe-fp0", (CRAY,), r"-[hO] ?fp0", SAFE, NOTE, "", "", "-h fp0", CRAY_DOC,
         tags=frozenset({CRAY_FP})),
    Rule("cray-default-fp", (CRAY,), "", DEFAULT, WARNING,
         "ftn defaults to -h fp2: floating-point reductions may be vectorised (reassociated) and divisions "
         "rewritten as reciprocal multiplications (under another programming environment ftn wraps another "
         "compiler, whose rules then apply)", "add -h fp0", "ftn", CRAY_DOC,
         cleared_by=(frozenset({CRAY_FP}),)),
    # ---- NAG nagfor ----
    Rule("nag-ounsafe", (NAG,), r"-Ounsafe", UNSAFE, ERROR,
         "permits optimisations whose results depend on the numerical stability of the program (from memory "
         "of the nagfor manual)", "use -O2 (or -O4)", "-Ounsafe", f"{NAG_DOC}, nagfor options (from memory)",
         replacement=("-O2",)),
    Rule("nag-ieee-nonstd", (NAG,), r"-ieee=nonstd", UNSAFE, NOTE,
         "turns gradual underflow off: results that would be subnormal become zero", "use -ieee=stop (the "
         "default) or -ieee=full", "-ieee=nonstd", f"{NAG_DOC}, IEEE 754 arithmetic support",
         replacement=("-ieee=stop",)),
)

BY_KEY = {rule.key: rule for rule in RULES}
assert len(BY_KEY) == len(RULES), "rule keys must be unique"
DEFAULTS = {rule.families[0]: rule for rule in RULES if rule.kind == DEFAULT}

# options whose argument may be the next word: option -> pattern the argument must match
PAIRED = {"-fp-model": r"[\w=-]+", "-h": r"fp\d", "-assume": r"\S+", "-tp": r"\S+", "-O": r"fp\d"}


@dataclass(frozen=True)
class Unit:
    """One option: a word, or an option word and its argument word."""

    words: tuple[Word, ...]

    @property
    def text(self) -> str:
        return " ".join(w.text for w in self.words)

    @property
    def start(self) -> int:
        return self.words[0].start

    @property
    def end(self) -> int:
        return self.words[-1].end


def units(words) -> list[Unit]:
    """Pair each option that takes a separate argument with the word after it."""
    words = list(words)
    out = []
    i = 0
    while i < len(words):
        word = words[i]
        arg = PAIRED.get(word.text)
        if arg and i + 1 < len(words) and not words[i + 1].text.startswith("-") \
                and re.fullmatch(arg, words[i + 1].text):
            out.append(Unit((word, words[i + 1])))
            i += 2
            continue
        out.append(Unit((word,)))
        i += 1
    return out


def rules_for(family: str) -> tuple[Rule, ...]:
    family = rules_family(family)
    return tuple(rule for rule in RULES if family in rule.families)


def match(text: str, family: str) -> list[Rule]:
    """The rules of ``family`` (GCC's for ``unknown``) whose pattern matches the option unit."""
    if not text.startswith("-"):
        return []
    return [rule for rule in rules_for(family) if rule.pattern and rule.regex.fullmatch(text)]


def cleared(rule: Rule, tags) -> bool:
    return any(need <= tags for need in rule.cleared_by)


def effective_severity(rule: Rule, tags, libm_in_loops: bool | None) -> str | None:
    """The severity a matched rule reports in a scope with ``tags``, or None for no finding."""
    if rule.kind == SAFE or cleared(rule, tags):
        return None
    if rule.kind == VECTOR:
        if libm_in_loops is False:
            return None
        return rule.severity if libm_in_loops else NOTE
    return rule.severity


# ---------------------------------------------------------------- reproducible_flags

def _family(compiler: str) -> str:
    if compiler in FAMILIES or compiler == UNKNOWN:
        return rules_family(compiler)
    return rules_family(family_of(compiler) or UNKNOWN)


def _tags(flags: list[str], family: str) -> set:
    tags: set = set()
    for unit in units(Word(f, i, i + 1) for i, f in enumerate(flags)):
        for rule in match(unit.text, family):
            tags |= rule.tags
    return tags


def _has_kind(flags: list[str], family: str, kind: str) -> bool:
    return any(rule.kind == kind for unit in units(Word(f, i, i + 1) for i, f in enumerate(flags))
               for rule in match(unit.text, family))


def _contains(flags: list[str], words: tuple[str, ...]) -> bool:
    n = len(words)
    return n > 0 and any(tuple(flags[i:i + n]) == tuple(words) for i in range(len(flags) - n + 1))


def _one_pass(flags: list[str], family: str, libm_in_loops: bool) -> list[str]:
    out: list[str] = []
    for unit in units(Word(f, i, i + 1) for i, f in enumerate(flags)):
        words = tuple(w.text for w in unit.words)
        rules = match(unit.text, family)
        unsafe = [r for r in rules if r.kind == UNSAFE]
        if unsafe:
            rule = max(unsafe, key=lambda r: SEVERITY_RANK[r.severity])
            instead = rule.fixer(words) if rule.fixer else rule.replacement
            if not _contains(out, instead):  # two -ffp-contract=fast give one -ffp-contract=off
                out.extend(instead)
            continue
        dropped = [r for r in rules if r.kind == VECTOR and r.replacement is not None]
        if dropped and libm_in_loops:
            out.extend(dropped[0].replacement)
            continue
        if any(r.kind == SAFE for r in rules) and _contains(out, words):
            continue  # a safe option stands once
        out.extend(words)
    tags = _tags(out, family)
    if family in (GNU, FLANG) and NO_FMA not in tags:
        out.append("-ffp-contract=off")
    if family == GNU and libm_in_loops and _has_kind(out, family, VECTOR) \
            and not {NO_LOOP_VEC, NO_SLP_VEC} <= tags:
        out.append("-fno-tree-vectorize")
    if family == INTEL:
        if FP_MODEL not in tags:
            out.extend(["-fp-model", "consistent"])
        elif NO_FMA not in tags and _has_kind(out, family, TARGET):
            out.append("-no-fma")
    if family == NVIDIA and NO_FMA not in tags:
        out.append("-Mnofma")
    if family == CRAY and CRAY_FP not in tags:
        out.extend(["-h", "fp0"])
    return out


def reproducible_flags(flags: list[str], compiler: str = "gfortran", libm_in_loops: bool = True) -> list[str]:
    """The same option list with every unsafe option removed or replaced and the needed safe options
    appended once (see the module docstring for each decision). ``compiler`` is a command
    (``gfortran``, ``ifx``, ``/opt/bin/nvfortran``) or a family (``gnu``, ``intel`` ...); an
    unknown compiler gets GCC's rules. Idempotent: a fixed point of the rewrite."""
    family = _family(compiler)
    current = [str(f) for f in flags]
    for _ in range(8):
        following = _one_pass(current, family, libm_in_loops)
        if following == current:
            break
        current = following
    return current


def table_markdown() -> str:
    """The table as Markdown (rewrite/build/TABLE.md is this text; a test keeps them equal)."""
    lines = ["# The build audit's flag table", "",
             "Generated from `rewrite/build/flags.py` (`table_markdown()`); a test keeps this file equal to it.",
             "Kinds: unsafe (always a finding), target (FMA-capable; cleared by an option that turns contraction",
             "off in the same scope), vector (GCC vectorisation with libm calls; depends on `libm_in_loops`),",
             "safe (never a finding; sets tags), default (a compiler's default, reported at its name).", ""]
    for family in FAMILIES:
        lines += [f"## {family}", "", "| rule | kind | severity | example | instead | risk | source |",
                  "| --- | --- | --- | --- | --- | --- | --- |"]
        for rule in RULES:
            if rule.families[0] != family:
                continue
            also = f" (also {', '.join(rule.families[1:])})" if len(rule.families) > 1 else ""
            instead = "keep" if rule.replacement is None else (" ".join(rule.replacement) or "drop")
            if rule.fixer:
                instead = "drop noprotect_parens"
            lines.append(f"| {rule.key}{also} | {rule.kind} | {rule.severity if rule.kind != SAFE else '-'} | "
                         f"`{rule.example}` | {instead} | {rule.risk or '-'} | {rule.source} |")
        lines.append("")
    return "\n".join(lines)
