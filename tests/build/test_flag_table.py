"""The flag table itself: well-formed rules, each example matched by its own rule, the spellings of
each compiler's manual recognised, and the look-alikes that are safe left alone."""
from __future__ import annotations

import re

import pytest

from rewrite.build.compilers import FAMILIES, family_of, families_in
from rewrite.build.flags import (DEFAULT, ERROR, GCC_FMA_MARCH, GCC_NO_FMA_MARCH, NOTE, RULES,
                                 SAFE, SEVERITY_RANK, UNSAFE, WARNING, match, units)
from rewrite.build.tokens import Word


def test_rules_are_well_formed():
    for rule in RULES:
        assert rule.severity in (ERROR, WARNING, NOTE), rule.key
        assert rule.source, rule.key
        assert set(rule.families) <= set(FAMILIES), rule.key
        if rule.kind != SAFE:
            assert rule.risk and rule.fix and "\n" not in rule.risk + rule.fix, rule.key
        if rule.kind == UNSAFE:
            assert rule.replacement is not None, f"{rule.key}: reproducible_flags must know what to put instead"
        if rule.kind == DEFAULT:
            assert not rule.pattern and rule.cleared_by and family_of(rule.example) == rule.families[0]


@pytest.mark.parametrize("rule", [r for r in RULES if r.kind != DEFAULT], ids=lambda r: r.key)
def test_example_is_found_by_its_own_rule(rule):
    for family in rule.families:
        matched = match(rule.example, family)
        assert rule in matched, (rule.key, family)
        if rule.kind == UNSAFE:  # and no other rule of the family outranks it
            assert all(SEVERITY_RANK[other.severity] <= SEVERITY_RANK[rule.severity]
                       for other in matched if other.kind == UNSAFE), rule.key


# Spellings from each compiler's manual (the rule's source) and their look-alikes.
SPELLINGS = [
    # Intel Fortran Developer Guide, fp-model: -fp-model=keyword (and the older -fp-model keyword)
    ("intel", "-fp-model fast", "intel-fp-model-fast"),
    ("intel", "-fp-model=fast", "intel-fp-model-fast"),
    ("intel", "-fp-model:fast", "intel-fp-model-fast"),
    ("intel", "-fp-model fast=2", "intel-fp-model-fast"),
    ("intel", "-fp-model=fast=1", "intel-fp-model-fast"),
    ("intel", "-fp-model precise", "intel-safe-fp-model"),
    ("intel", "-fp-model=consistent", "intel-safe-fp-model-nofma"),
    ("intel", "-fp-model strict", "intel-safe-fp-model-nofma"),
    # Intel: assume [no]protect_parens, alternate option of -f[no-]protect-parens
    ("intel", "-assume noprotect_parens", "intel-assume-noprotect-parens"),
    ("intel", "-assume byterecl,noprotect_parens", "intel-assume-noprotect-parens"),
    ("intel", "-assume protect_parens", None),
    ("intel", "-xHost", "intel-x-target"),
    ("intel", "-xCORE-AVX2", "intel-x-target"),
    ("intel", "-axCORE-AVX2,CORE-AVX512", "intel-x-target"),
    ("intel", "-xSAPPHIRERAPIDS", "intel-x-target"),
    ("intel", "-xSSE4.2", None),
    ("intel", "-no-fma", "intel-safe-no-fma"),
    ("intel", "-fma", "intel-fma"),
    ("intel", "-prec-div", None),
    # HPE Cray Fortran, Math Options: -h fpN; the joined and -O forms
    ("cray", "-h fp3", "cray-fp34"),
    ("cray", "-hfp3", "cray-fp34"),
    ("cray", "-O fp3", "cray-fp34"),
    ("cray", "-Ofp4", "cray-fp34"),
    ("cray", "-h fp0", "cray-safe-fp0"),
    ("cray", "-h omp", None),
    # NVIDIA HPC compilers (from memory): -tp <target>, -M[no]fma
    ("nvidia", "-tp haswell", "nvidia-tp-target"),
    ("nvidia", "-tp=zen3", "nvidia-tp-target"),
    ("nvidia", "-tp px", None),
    ("nvidia", "-Mnofma", "nvidia-safe-nofma"),
    ("nvidia", "-Mfprelaxed=rsqrt", "nvidia-fprelaxed"),
    # GCC: only off pins contraction; -mavx2 alone does not enable FMA (checked with gfortran -S)
    ("gnu", "-ffp-contract=off", "gnu-safe-fp-contract-off"),
    ("gnu", "-mavx2", None),
    ("gnu", "-march=x86-64-v2", None),
    ("gnu", "-march=x86-64-v3", "gnu-march-fma"),
    ("gnu", "-mavx512vl", "gnu-mfma"),
    ("gnu", "-O1", None),
    ("gnu", "-Os", None),
    ("gnu", "-O", None),
    ("gnu", "-O4", "gnu-vectorize-o3"),
    ("gnu", "-ftree-loop-vectorize", "gnu-vectorize-flag"),
    ("gnu", "-fprotect-parens", None),
    ("gnu", "-fsigned-zeros", None),
    ("gnu", "-mcpu=neoverse-v1", "gnu-aarch64"),
    ("flang", "-fveclib=none", None),
    ("flang", "-fveclib=ArmPL", "flang-veclib"),
    ("flang", "-ffp-contract=on", None),  # the Flang driver maps 'on' to 'off' (Flang.cpp)
    ("nag", "-ieee=full", None),
]


@pytest.mark.parametrize("family,text,key", SPELLINGS)
def test_spelling(family, text, key):
    words = [Word(part, i, i + 1) for i, part in enumerate(text.split(" "))]
    found = units(words)
    if key is None:
        assert all(match(unit.text, family) == [] for unit in found), text
        return
    assert len(found) == 1 and found[0].text == text
    assert [rule.key for rule in match(text, family)] == [key], text


def test_march_lists_do_not_overlap_and_non_fma_names_are_left_alone():
    assert not set(GCC_FMA_MARCH) & set(GCC_NO_FMA_MARCH)
    for name in GCC_NO_FMA_MARCH:
        assert match(f"-march={name}", "gnu") == []


def test_pairing_needs_an_argument():
    words = [Word(t, i, i + 1) for i, t in enumerate(["-fp-model", "-O2", "-h", "fp3", "-tp"])]
    assert [u.text for u in units(words)] == ["-fp-model", "-O2", "-h fp3", "-tp"]


@pytest.mark.parametrize("word,family", [
    ("gfortran", "gnu"), ("gfortran-12", "gnu"), ("/usr/bin/x86_64-linux-gnu-gfortran-13", "gnu"),
    ("flang-new", "flang"), ("flang-new-17", "flang"), ("ifx", "intel"), ("mpiifort", "intel"),
    ("nvfortran", "nvidia"), ("pgfortran", "nvidia"), ("ftn", "cray"), ("nagfor", "nag"),
    ("mpif90", "unknown"), ("mpifort", "unknown"), ("rm", None), ("$(FC)", None), ("gfortran.exe", "gnu"),
])
def test_family_of(word, family):
    assert family_of(word) == family


def test_families_in_conditions():
    assert families_in('CMAKE_Fortran_COMPILER_ID MATCHES "Intel|IntelLLVM"') == ("intel",)
    assert families_in("ifeq ($(FC),nvfortran)") == ("nvidia",)
    assert families_in('STREQUAL "GNU"') == ("gnu",)


def test_sources_name_a_manual_or_say_from_memory():
    for rule in RULES:
        assert re.search(r"manual|Manual|Guide|Reference|Flang\.cpp|wiki|memory", rule.source), rule.key


def test_table_file_is_the_table():
    from pathlib import Path

    from rewrite.build.flags import table_markdown
    path = Path(__file__).resolve().parents[2] / "rewrite" / "build" / "TABLE.md"
    assert path.read_text() == table_markdown(), "regenerate rewrite/build/TABLE.md from flags.table_markdown()"
