"""Property tests: for any subset of the table's options written into a Makefile, CMake or shell
line (in any order, with tabs, continuations and CRLF line ends), exactly those options are
found, at the line and column where the generator put them."""
from __future__ import annotations

from hypothesis import given, settings, strategies as st

from rewrite.build import scan_build_text
from rewrite.build.flags import TARGET, UNSAFE, VECTOR, rules_for

COMMAND = {"gnu": "gfortran", "flang": "flang-new", "intel": "ifx", "nvidia": "nvfortran", "cray": "ftn",
           "nag": "nagfor"}
# options that keep each compiler's default rule quiet (they are findings of no rule)
QUIET = {"intel": "-fp-model precise", "nvidia": "-Mnofma", "cray": "-h fp0"}
SEPARATORS = [" ", "  ", "\t", " \t "]
CONTINUED = " \\\n\t"


def _examples(family, kind):
    return [(rule.example, rule.key) for rule in rules_for(family) if rule.kind == kind]


class Text:
    """Builds a file and remembers where each option went (line, column: 1-based)."""

    def __init__(self, newline):
        self.parts: list[str] = []
        self.newline = newline
        self.placed: set[tuple[int, int, str]] = set()

    @property
    def text(self):
        return "".join(self.parts)

    def add(self, piece):
        self.parts.append(piece.replace("\n", self.newline))

    def option(self, option):
        text = self.text
        line = text.count("\n") + 1
        column = len(text) - (text.rfind("\n") + 1) + 1
        self.placed.add((line, column, option))
        self.parts.append(option)


def _layout(draw, options):
    seps = [draw(st.sampled_from(SEPARATORS + [CONTINUED])) for _ in options]
    return list(zip(options, seps))


families = st.sampled_from(sorted(COMMAND))


def _subset(draw, family, kind):
    pool = _examples(family, kind)
    chosen = draw(st.lists(st.sampled_from(pool), unique=True, max_size=len(pool)))
    return draw(st.permutations(chosen)) if chosen else []


def _expected(placed, chosen):
    keys = dict(chosen)
    return {(line, column, option, keys[option]) for line, column, option in placed}


def _found(name, text, libm=False):
    return {(f.line, f.column, f.option, f.rule) for f in scan_build_text(name, text, libm)}


@settings(max_examples=80, deadline=None)
@given(data=st.data(), family=families, newline=st.sampled_from(["\n", "\r\n"]))
def test_makefile_assignment(data, family, newline):
    chosen = _subset(data.draw, family, UNSAFE)
    doc = Text(newline)
    doc.add(f"# generated\nFC = {COMMAND[family]}\nFFLAGS = {QUIET.get(family, '-g')}")
    for option, sep in _layout(data.draw, [o for o, _ in chosen]):
        doc.add(sep)
        doc.option(option)
    doc.add("   # -Ofast in a comment\nall:\n\t$(FC) $(FFLAGS) -c a.f90\n")
    assert _found("Makefile", doc.text) == _expected(doc.placed, chosen)


@settings(max_examples=80, deadline=None)
@given(data=st.data(), family=families, quoted=st.booleans(), newline=st.sampled_from(["\n", "\r\n"]))
def test_cmake_flags(data, family, quoted, newline):
    chosen = _subset(data.draw, family, UNSAFE)
    doc = Text(newline)
    doc.add(f"set(CMAKE_Fortran_COMPILER {COMMAND[family]})\n")
    doc.add('set(CMAKE_Fortran_FLAGS_RELEASE "' if quoted else "add_compile_options(")
    doc.add(QUIET.get(family, "-g"))
    for option, sep in _layout(data.draw, [o for o, _ in chosen]):
        doc.add(sep.replace(" \\\n", "\n"))
        doc.option(option)
    doc.add('")  # -Ofast\n' if quoted else ")  # -Ofast\n")
    assert _found("CMakeLists.txt", doc.text) == _expected(doc.placed, chosen)


@settings(max_examples=80, deadline=None)
@given(data=st.data(), family=families, newline=st.sampled_from(["\n", "\r\n"]), in_variable=st.booleans())
def test_shell_command(data, family, newline, in_variable):
    chosen = _subset(data.draw, family, UNSAFE)
    doc = Text(newline)
    doc.add("#!/bin/sh\nset -eu  # -Ofast\n")
    doc.add('FFLAGS="' if in_variable else f"{COMMAND[family]} ")
    doc.add(QUIET.get(family, "-g"))
    for option, sep in _layout(data.draw, [o for o, _ in chosen]):
        doc.add(sep)
        doc.option(option)
    doc.add(f'"\n{COMMAND[family]} $FFLAGS -c a.f90\n' if in_variable else " -c a.f90\n")
    assert _found("build.sh", doc.text) == _expected(doc.placed, chosen)


@settings(max_examples=60, deadline=None)
@given(data=st.data(), family=st.sampled_from(["gnu", "flang", "intel", "nvidia"]),
       neutraliser=st.sampled_from([None, "same line", "other line"]))
def test_fma_targets_are_findings_only_without_a_neutraliser(data, family, neutraliser):
    chosen = _subset(data.draw, family, TARGET)
    off = {"gnu": "-ffp-contract=off", "flang": "-ffp-contract=off", "intel": "-no-fma",
           "nvidia": "-Mnofma"}[family]
    doc = Text("\n")
    quiet = "-g" if family == "nvidia" else QUIET.get(family, "-g")  # -Mnofma would neutralise
    doc.add(f"FC = {COMMAND[family]}\nFFLAGS = {quiet}")
    for option, sep in _layout(data.draw, [o for o, _ in chosen]):
        doc.add(sep)
        doc.option(option)
    if neutraliser == "same line":
        doc.add(" " + off)
    doc.add("\n")
    if neutraliser == "other line":
        doc.add(f"FFLAGS += {off}\n")
    expected = _expected(doc.placed, chosen) if neutraliser is None else set()
    found = {x for x in _found("Makefile", doc.text) if x[3] != "nvidia-default-fma"}
    assert found == expected


@settings(max_examples=60, deadline=None)
@given(data=st.data(), libm=st.sampled_from([None, True, False]), off=st.booleans())
def test_vectorisation_depends_on_libm_in_loops(data, libm, off):
    chosen = _subset(data.draw, "gnu", VECTOR)
    doc = Text("\n")
    doc.add("FFLAGS =")
    for option, sep in _layout(data.draw, [o for o, _ in chosen]):
        doc.add(sep)
        doc.option(option)
    doc.add(" -fno-tree-vectorize\n" if off else "\n")
    findings = scan_build_text("Makefile", doc.text, libm)
    expected = set() if off or libm is False else _expected(doc.placed, chosen)
    assert {(f.line, f.column, f.option, f.rule) for f in findings} == expected
    assert all(f.severity == ("warning" if libm else "note") for f in findings)
    assert all(f.compiler == "unknown" and "GCC rules applied" in f.message for f in findings)


@settings(max_examples=60, deadline=None)
@given(text=st.text(alphabet=st.sampled_from(list(" \t\r\n\\\"'#$(){}[];:=,-+@<>|&fFOhpxXm0123gcnt")),
                    max_size=200))
def test_odd_text_never_crashes_and_offsets_hold(text):
    for name in ("Makefile", "CMakeLists.txt", "build.sh"):
        for finding in scan_build_text(name, text):
            assert text[finding.start:finding.end] == finding.option
