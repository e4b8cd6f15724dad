"""Helpers of the build-audit tests: fixture paths, the expected-findings listing of the flagged
fixtures, and small gfortran drivers for the outside checks."""
from __future__ import annotations

import itertools
import re
import subprocess
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
BUILD = ROOT / "fixtures" / "build"
FLAGGED = BUILD / "flagged"
CLEAN = BUILD / "clean"
KINDS = ("Makefile", "rules.mk", "CMakeLists.txt", "toolchain.cmake", "fpm.toml", "compile_commands.json",
         "build.sh")

# flagged/compile_commands.json cannot hold comments: its expected findings, reasoned from the
# entries (see fixtures/build/README.md): (line, rule, option, entry's file)
COMPDB_EXPECTED = {
    (4, "gnu-vectorize-o2", "-O2", "../heat_budget.f90"),
    (9, "intel-default-fp-model", "ifort", "../reservoir_state.f90"),
    (9, "intel-x-target", "-xCORE-AVX512", "../reservoir_state.f90"),
    (19, "gnu-fp-contract-fast", "-ffp-contract=fast", "../main.f90"),
    (19, "gnu-mfma", "-mfma", "../main.f90"),
    (24, "gnu-vectorize-o3", "-O3", "../legacy inflow.f90"),
    (24, "gnu-mfpmath-387", "-mfpmath=387", "../legacy inflow.f90"),
    (24, "gnu-unsafe-math", "-funsafe-math-optimizations", "../legacy inflow.f90"),
    (29, "intel-fp-model-fast", "-fp-model=fast=2", "../heat_budget.f90"),
}

_COUNTER = itertools.count()
_LISTING = re.compile(r"#\s+L(\d+)\s+([\w-]+)\s+(.+?)\s*$")


def listed(path: Path) -> set[tuple[int, str, str]]:
    """The (line, rule, option) list in the first comment block of a flagged fixture."""
    out = set()
    for line in path.read_text().splitlines():
        if not line.startswith("#"):
            break
        m = _LISTING.match(line)
        if m:
            out.add((int(m.group(1)), m.group(2), m.group(3)))
    return out


def run(cmd, cwd, check=True) -> subprocess.CompletedProcess:
    result = subprocess.run([str(c) for c in cmd], cwd=cwd, capture_output=True, text=True, timeout=120)
    if check and result.returncode != 0:
        raise AssertionError(f"{' '.join(map(str, cmd))} failed:\n{result.stderr}")
    return result


def optimizer_states(gfortran: str, flags, cwd) -> dict[str, str]:
    """``gfortran -Q --help=optimizers <flags>``: option -> state ([enabled], [disabled], a value)."""
    out = run([gfortran, "-Q", "--help=optimizers", *flags], cwd).stdout
    states = {}
    for line in out.splitlines():
        parts = line.split()
        if len(parts) >= 2 and parts[0].startswith("-"):
            states[parts[0].split("=")[0] if parts[0].endswith("]") else parts[0]] = parts[-1]
    return states


def enabled(states: dict[str, str], option: str) -> bool:
    """Whether ``-fX`` (or ``-fno-X``, meaning X off) holds in the states gfortran printed."""
    negative = option.startswith("-fno-")
    name = "-f" + option[5:] if negative else option
    state = states[name]
    return (state == "[disabled]") if negative else (state == "[enabled]")


def compile_and_run(gfortran: str, source: Path, flags, args, cwd) -> str:
    exe = cwd / f"prog{next(_COUNTER)}"
    run([gfortran, *flags, str(source), "-o", str(exe)], cwd)
    return run([exe, *args], cwd).stdout


def assembly(gfortran: str, source: Path, flags, cwd) -> str:
    return run([gfortran, *flags, "-S", str(source), "-o", "-"], cwd).stdout
