"""Flag variables, compiler variables and compiler command words, shared by the make and shell
readers: which assignments hold options, which commands run a compiler, and which compiler a
``$(FC)`` or ``${FC:-gfortran}`` stands for.
"""
from __future__ import annotations

import re

from .compilers import UNKNOWN, family_of, families_in
from .tokens import Word

_FLAG_VAR = re.compile(r"FLAGS|OPT", re.I)
_C_FLAG_VAR = re.compile(r"(?:CXX|CPP|C)FLAGS", re.I)
FORTRAN_VARS = frozenset("FC F77 F90 F95 FCOMP FCOMPILER FORTRAN MPIFC MPIF90 MPIF77".split())
C_VARS = frozenset("CC CXX MPICC MPICXX".split())
_REF = re.compile(r"\$(?:\{(\w+)(?::?[-=+?]([^}]*))?\}|\((\w+)\)|(\w+))")


def is_compiler_var(name: str) -> bool:
    upper = name.upper()
    return upper in FORTRAN_VARS or upper in C_VARS or upper.endswith(("_FC", "_COMPILER"))


def is_c_var(name: str) -> bool:
    return name.upper() in C_VARS or name.upper().endswith(("_CC", "_C_COMPILER", "_CXX_COMPILER"))


def is_flag_var(name: str) -> bool:
    return bool(_FLAG_VAR.search(name)) and not is_compiler_var(name)


def is_c_flag_var(name: str) -> bool:
    return bool(_C_FLAG_VAR.match(name))


def reference(text: str) -> tuple[str, str] | None:
    """``$(FC)``, ``${FC}``, ``$FC``, ``${FC:-gfortran}`` -> (name, default)."""
    m = _REF.fullmatch(text.strip("\"'"))
    if not m:
        return None
    return (m.group(1) or m.group(3) or m.group(4)), (m.group(2) or "")


class Variables:
    """The values assigned to each variable in one file."""

    def __init__(self):
        self.values: dict[str, list[str]] = {}

    def add(self, name: str, value: str) -> None:
        self.values.setdefault(name, []).append(value)

    def families(self, name: str, depth: int = 0) -> tuple[str, ...]:
        found: list[str] = []
        for value in self.values.get(name, []):
            for family in value_families(value, self, depth + 1):
                if family not in found:
                    found.append(family)
        return tuple(found)


def value_families(value: str, variables: Variables, depth: int = 0) -> tuple[str, ...]:
    """Families of the compiler a compiler variable's value runs (its first word)."""
    first = value.strip().split()[0] if value.strip() else ""
    first = first.strip("\"'")
    if not first or depth > 4:
        return ()
    family = family_of(first)
    if family:
        return (family,)
    ref = reference(first)
    if ref:
        name, default = ref
        found = variables.families(name, depth)
        if not found and default:
            found = value_families(default, variables, depth + 1)
        return found
    return ()


def command_families(word: Word, variables: Variables) -> tuple[tuple[str, ...], bool]:
    """The families a command word runs, and whether the word names the compiler itself
    (``ifx``) rather than through a variable (``$(FC)``). ``((), False)`` for other commands."""
    family = family_of(word.text)
    if family:
        return (family,), True
    ref = reference(word.text)
    if ref:
        name, default = ref
        found = variables.families(name)
        if not found and default:
            found = value_families(default, variables)
        if found:
            return found, False
        if is_compiler_var(name):
            return (UNKNOWN,), False
    return (), False


def condition_families(text: str) -> tuple[str, ...]:
    """Families a conditional names (``ifeq ($(FC),ifx)``, ``if(CMAKE_Fortran_COMPILER_ID
    MATCHES "Intel")``); none when the condition is negated."""
    if re.search(r"\bNOT\b|!=|ifneq|ifndef|ifdef", text):
        return ()
    return families_in(text)


_USE = re.compile(r"\$(?:\{(\w+)|\((\w+)\)|(\w+))")


def referenced(text: str) -> list[str]:
    """Names of the variables a piece of text refers to (``$(FFLAGS)``, ``${FFLAGS}``, ``$FFLAGS``)."""
    return [a or b or c for a, b, c in _USE.findall(text)]


def usage_families(uses: dict[str, list[str]], variables: Variables) -> dict[str, tuple[str, ...]]:
    """Families of the compilers each variable reaches: directly in a compiler command
    (``uses``: name -> families), or through another variable's value that a command uses
    (``FFLAGS = $(OPT) -g`` passes ``$(FFLAGS)``'s compilers on to ``OPT``)."""
    reach = {name: list(families) for name, families in uses.items()}
    for _ in range(6):
        changed = False
        for name, families in list(reach.items()):
            for value in variables.values.get(name, []):
                for inner in referenced(value):
                    target = reach.setdefault(inner, [])
                    for family in families:
                        if family not in target:
                            target.append(family)
                            changed = True
        if not changed:
            break
    return {name: tuple(families) for name, families in reach.items() if families}


def wrapper_name(variables: Variables) -> str:
    """The first compiler wrapper (``mpif90``) a compiler variable names, for messages."""
    for name, values in variables.values.items():
        if not is_compiler_var(name):
            continue
        for value in values:
            first = value.strip().split()[0].strip("\"'") if value.strip() else ""
            if family_of(first) == UNKNOWN:
                return first.rsplit("/", 1)[-1]
    return ""


def name_wrappers(groups: list, variables: Variables) -> list:
    """Groups under GCC rules for an unknown compiler say which wrapper hid it."""
    from dataclasses import replace
    wrapper = wrapper_name(variables)
    if not wrapper:
        return groups
    return [replace(g, assumed=wrapper) if UNKNOWN in g.families and not g.assumed else g for g in groups]


def default_families(name: str, reach: dict, c_families: list[str], fortran: list[str]) -> tuple[str, ...]:
    """The compiler families a flag variable is for: those of the commands that use it, else C
    compilers for a C flag variable, else the file's Fortran compilers (or its C ones)."""
    if name in reach:
        return reach[name]
    if is_c_flag_var(name) and c_families:
        return tuple(c_families)
    return tuple(fortran) or tuple(c_families) or (UNKNOWN,)


class FamilyLists:
    """The compiler families a file names, Fortran and C apart, in order of first mention."""

    def __init__(self):
        self.fortran: list[str] = []
        self.c: list[str] = []

    def note(self, families, c: bool = False) -> None:
        target = self.c if c else self.fortran
        for family in families:
            if family not in target:
                target.append(family)
