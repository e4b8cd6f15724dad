"""reproducible_flags: every unsafe option removed or replaced, the safe options appended once,
the other options kept in order, and applying it twice changes nothing."""
from __future__ import annotations

import shlex

import pytest
from hypothesis import given, settings, strategies as st

from rewrite.build import reproducible_flags, scan_build_text
from rewrite.build.flags import DEFAULT, RULES, UNSAFE, match, rules_for, units
from rewrite.build.tokens import Word

COMMAND = {"gnu": "gfortran", "flang": "flang-new", "intel": "ifx", "nvidia": "nvfortran", "cray": "ftn",
           "nag": "nagfor"}
NEUTRAL = ["-g", "-c", "-Wall", "-I/opt/lake/include", "-fopenmp", "-DLAYERS=16", "-o", "heat.o", "heat_budget.f90",
           "-funroll-loops", "-std=f2008"]


def _split(option):
    return option.split(" ")


@pytest.mark.parametrize("flags,compiler,libm,expected", [
    # -Ofast -> -O3; GCC always gets -ffp-contract=off; -O3 with libm calls gets -fno-tree-vectorize
    (["-Ofast", "-march=native", "-g"], "gfortran", True,
     ["-O3", "-march=native", "-g", "-ffp-contract=off", "-fno-tree-vectorize"]),
    (["-O3", "-march=native"], "gfortran", False, ["-O3", "-march=native", "-ffp-contract=off"]),
    (["-O2", "-ffp-contract=fast", "-ftree-vectorize"], "gcc", True,
     ["-O2", "-ffp-contract=off", "-fno-tree-vectorize"]),
    (["-O1", "-ffast-math"], "gfortran", True, ["-O1", "-ffp-contract=off"]),
    (["-Ofast"], "flang-new", True, ["-O3", "-ffp-contract=off"]),
    # Intel: fast models become consistent; other -assume keywords stay
    (["-fast"], "ifx", True, ["-O3", "-fp-model", "consistent"]),
    (["-O2", "-fp-model=fast=2", "-assume", "noprotect_parens,byterecl"], "ifort", True,
     ["-O2", "-fp-model", "consistent", "-assume", "byterecl"]),
    (["-O2", "-fp-model", "precise", "-xHost"], "ifx", True, ["-O2", "-fp-model", "precise", "-xHost", "-no-fma"]),
    (["-O2", "-fma"], "/opt/intel/bin/ifx", True, ["-O2", "-no-fma", "-fp-model", "consistent"]),
    (["-fast", "-Mfma", "-tp", "zen3"], "nvfortran", True, ["-O2", "-Mnofma", "-tp", "zen3"]),
    (["-O2", "-hfp3"], "ftn", True, ["-O2", "-h", "fp0"]),
    (["-O2"], "crayftn", True, ["-O2", "-h", "fp0"]),
    (["-Ounsafe", "-ieee=nonstd"], "nagfor", True, ["-O2", "-ieee=stop"]),
    (["-O3", "-funsafe-math-optimizations"], "mpif90", True,
     ["-O3", "-ffp-contract=off", "-fno-tree-vectorize"]),
])
def test_examples(flags, compiler, libm, expected):
    assert reproducible_flags(flags, compiler, libm) == expected


def _pool(family):
    pool = []
    for rule in rules_for(family):
        if rule.kind != DEFAULT:
            pool.append(_split(rule.example))
    return pool + [[n] for n in NEUTRAL]


@st.composite
def flag_lists(draw):
    family = draw(st.sampled_from(sorted(COMMAND)))
    pieces = draw(st.lists(st.sampled_from(_pool(family)), max_size=12))
    return family, [word for piece in pieces for word in piece]


def _unsafe_units(flags, family):
    found = []
    for unit in units(Word(f, i, i + 1) for i, f in enumerate(flags)):
        found += [rule.key for rule in match(unit.text, family) if rule.kind == UNSAFE]
    return found


@settings(max_examples=200, deadline=None)
@given(case=flag_lists(), libm=st.booleans(), by_family=st.booleans())
def test_idempotent_and_safe(case, libm, by_family):
    family, flags = case
    compiler = family if by_family else COMMAND[family]
    fixed = reproducible_flags(flags, compiler, libm)
    assert reproducible_flags(fixed, compiler, libm) == fixed
    assert _unsafe_units(fixed, family) == []
    # the audit agrees: a command with the advice has no finding at all
    script = "#!/bin/sh\n" + " ".join([COMMAND[family]] + [shlex.quote(f) for f in fixed]) + "\n"
    assert scan_build_text("build.sh", script, libm) == []
    # options the table does not know keep their order
    neutral = [f for f in flags if f in NEUTRAL]
    assert [f for f in fixed if f in NEUTRAL] == neutral
    # safe options are appended once
    for option in ("-ffp-contract=off", "-fno-tree-vectorize", "-Mnofma", "-no-fma"):
        assert fixed.count(option) <= max(1, flags.count(option))


@settings(max_examples=100, deadline=None)
@given(flags=st.lists(st.text(alphabet="-fOphxmMt=:,a0123 ", max_size=12), max_size=8),
       compiler=st.sampled_from(sorted(COMMAND.values()) + ["mpif90", "cc"]))
def test_any_words_give_a_fixed_point(flags, compiler):
    fixed = reproducible_flags(flags, compiler)
    assert reproducible_flags(fixed, compiler) == fixed


def test_every_unsafe_rule_is_removed_by_itself():
    for rule in RULES:
        if rule.kind != UNSAFE:
            continue
        for family in rule.families:
            fixed = reproducible_flags(_split(rule.example), family)
            assert _unsafe_units(fixed, family) == [], (rule.key, fixed)
