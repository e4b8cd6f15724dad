"""Which compiler family a command word, a CMake compiler ID or an fpm profile key names.

A family is the set of compilers that share option spellings and meanings:

| family   | commands                                              |
|----------|-------------------------------------------------------|
| gnu      | gfortran, gcc, g++, caf (OpenCoarrays wraps gfortran) |
| flang    | flang, flang-new (LLVM Flang)                         |
| intel    | ifx, ifort, icx, icc, mpiifx, mpiifort                |
| nvidia   | nvfortran, pgfortran, pgf90, pgf95, nvc, nvc++        |
| cray     | ftn, crayftn (HPE Cray Fortran; ftn may wrap another  |
|          | compiler under another programming environment)       |
| nag      | nagfor                                                |
| unknown  | wrappers that hide the compiler: mpif90, mpif77,      |
|          | mpifort, h5fc, h5pfc, f77, f90, f95; GCC rules apply  |

Versioned and cross names are the same command: ``gfortran-12``, ``x86_64-linux-gnu-gfortran``,
``/opt/gcc/bin/gfortran``, ``gfortran-mp-13``. (Common practice, no source.)
"""
from __future__ import annotations

import re

GNU, FLANG, INTEL, NVIDIA, CRAY, NAG, UNKNOWN = "gnu", "flang", "intel", "nvidia", "cray", "nag", "unknown"
FAMILIES = (GNU, FLANG, INTEL, NVIDIA, CRAY, NAG)

COMMANDS = {
    "gfortran": GNU, "gcc": GNU, "g++": GNU, "caf": GNU,
    "flang": FLANG, "flang-new": FLANG,
    "ifx": INTEL, "ifort": INTEL, "icx": INTEL, "icc": INTEL, "icpx": INTEL, "mpiifx": INTEL,
    "mpiifort": INTEL,
    "nvfortran": NVIDIA, "pgfortran": NVIDIA, "pgf90": NVIDIA, "pgf95": NVIDIA, "nvc": NVIDIA,
    "nvc++": NVIDIA,
    "ftn": CRAY, "crayftn": CRAY,
    "nagfor": NAG,
}
WRAPPERS = frozenset("mpif90 mpif77 mpifort mpifc h5fc h5pfc f77 f90 f95".split())
# launchers that run the real compiler named by the next word
LAUNCHERS = frozenset("ccache sccache distcc icecc env time nice".split())

# CMake documentation, CMAKE_<LANG>_COMPILER_ID: the IDs of these compilers
CMAKE_IDS = {
    "GNU": GNU, "LLVMFLANG": FLANG, "FLANG": FLANG, "INTEL": INTEL, "INTELLLVM": INTEL,
    "NVHPC": NVIDIA, "PGI": NVIDIA, "CRAY": CRAY, "NAG": NAG,
}
# words that name a family in conditions (ifeq ($(COMPILER),intel), if(... MATCHES "Intel"))
FAMILY_WORDS = {
    "gnu": GNU, "gcc": GNU, "gfortran": GNU, "llvmflang": FLANG, "flang": FLANG, "intel": INTEL,
    "intelllvm": INTEL, "oneapi": INTEL, "nvhpc": NVIDIA, "pgi": NVIDIA, "nvidia": NVIDIA,
    "cray": CRAY, "cce": CRAY, "nag": NAG,
}

_VERSION = re.compile(r"(?:-mp)?-\d+(?:\.\d+)*$")


def family_of(word: str) -> str | None:
    """The family of a command word (a path or a bare name), ``unknown`` for wrappers that hide
    the compiler, ``None`` when the word is not a compiler at all."""
    name = word.strip("\"'").replace("\\", "/").rsplit("/", 1)[-1]
    if name.lower().endswith(".exe"):
        name = name[:-4]
    if not name:
        return None
    candidates = [name, _VERSION.sub("", name)]
    for candidate in candidates:
        if candidate in COMMANDS:
            return COMMANDS[candidate]
        if candidate in WRAPPERS:
            return UNKNOWN
    for candidate in candidates:  # cross compilers: x86_64-linux-gnu-gfortran
        for command, family in COMMANDS.items():
            if len(command) > 3 and candidate.endswith("-" + command):
                return family
    return None


def families_in(text: str) -> tuple[str, ...]:
    """Families named anywhere in a condition or a value, in order of first appearance: compiler
    commands, CMake compiler IDs and family words (``intel``, ``GNU``, ``NVHPC``)."""
    found: list[str] = []
    for word in re.findall(r"[A-Za-z_][\w+.-]*", text):
        family = family_of(word)
        if family in (None, UNKNOWN):
            family = CMAKE_IDS.get(word.upper()) or FAMILY_WORDS.get(word.lower())
        if family and family not in found:
            found.append(family)
    return tuple(found)


def rules_family(family: str) -> str:
    """The family whose rules apply: GCC's for an unknown compiler."""
    return GNU if family == UNKNOWN else family
