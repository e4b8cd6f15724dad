"""Each reader on the forms its format allows: where options live, which compiler applies, and
offsets through continuations, CRLF, tabs, quotes and escapes."""
from __future__ import annotations

import pytest

from rewrite.build import is_build_file, kind_of, scan_build_text


def found(name, text, libm=None):
    out = scan_build_text(name, text, libm)
    for f in out:
        if f.option == text[f.start:f.end]:
            continue
        assert name.endswith((".json", ".toml")), (f, text[f.start:f.end])
    return [(f.line, f.column, f.option, f.rule, f.compiler) for f in out]


# ---------------------------------------------------------------- make

def test_make_assignment_forms():
    text = ("FC := gfortran\n"
            "override FFLAGS += -Ofast\n"
            "export OPTFLAGS ?= -ffast-math\n"
            "heat.o: FFLAGS += -fno-signed-zeros\n"
            "LIBS = -lm -fopenmp\n"  # not a flag variable by name
            "SRC = a.f90 # -Ofast\n")
    assert [(f[0], f[2], f[3]) for f in found("Makefile", text)] == [
        (2, "-Ofast", "gnu-ofast"), (3, "-ffast-math", "gnu-fast-math"), (4, "-fno-signed-zeros", "gnu-no-signed-zeros")]


def test_make_continuation_crlf_and_tabs():
    text = "FC = gfortran\r\nFFLAGS = -g \\\r\n\t-Ofast\t\\\r\n  -march=native\r\n"
    assert found("Makefile", text) == [(3, 2, "-Ofast", "gnu-ofast", "gnu"),
                                       (4, 3, "-march=native", "gnu-march-native", "gnu")]


def test_make_escaped_hash_is_not_a_comment_and_comment_continues():
    text = "FFLAGS = -DMARK=\\# -Ofast # -ffast-math \\\n   -fno-signed-zeros\n"
    assert [f[2] for f in found("Makefile", text)] == ["-Ofast"]


def test_make_recipe_with_literal_compiler_and_conditional_blocks():
    text = ("ifeq ($(COMPILER),intel)\n"
            "  FFLAGS = -O2 -xHost\n"
            "else ifeq ($(COMPILER),nvhpc)\n"
            "  FFLAGS = -fast\n"
            "else\n"
            "  FFLAGS = -fast\n"
            "endif\n"
            "a.o:\n"
            "\t@ifx -c a.f90\n")
    out = found("Makefile", text)
    assert (2, 16, "-xHost", "intel-x-target", "intel") in out
    assert (4, 12, "-fast", "nvidia-fast", "nvidia") in out
    # the else branch names no compiler: ifx (the file's compiler) gets its rules; its -fast sets
    # -fp-model fast, which is reported there and not again as ifx's default
    assert (6, 12, "-fast", "intel-fast", "intel") in out
    assert not any(f[3] == "intel-default-fp-model" for f in out)
    assert found("Makefile", "a.o:\n\t@ifx -O2 -c a.f90\n") == [(2, 3, "ifx", "intel-default-fp-model", "intel")]


def test_make_flag_variable_takes_the_compiler_that_uses_it():
    text = ("FC = nvfortran\nCC = gcc\nGPU_FLAGS = -fast -Mnofma\nCFLAGS = -ffast-math\n"
            "a.o:\n\t$(FC) $(GPU_FLAGS) -c a.f90\n")
    out = found("Makefile", text)
    assert [(f[2], f[4]) for f in out] == [("-fast", "nvidia"), ("-ffast-math", "gnu")]


def test_make_unknown_wrapper_says_gcc_rules():
    text = "FC = mpif90\nFFLAGS = -Ofast\n"
    (finding,) = scan_build_text("Makefile", text)
    assert finding.compiler == "unknown" and "mpif90 does not say which compiler it runs" in finding.message


# ---------------------------------------------------------------- CMake

def test_cmake_forms_and_comments():
    text = ('#[[ set(CMAKE_Fortran_FLAGS "-Ofast") ]]\n'
            'set(CMAKE_Fortran_FLAGS "-g" CACHE STRING "not -Ofast" FORCE)\n'
            'set(MY_FLAGS -O1 -ffast-math)  # -fno-signed-zeros\n'
            'string(APPEND CMAKE_Fortran_FLAGS_RELEASE " -fno-protect-parens")\n'
            'list(APPEND CMAKE_Fortran_FLAGS -freciprocal-math)\n'
            'set_source_files_properties(heat_budget.f90 PROPERTIES COMPILE_FLAGS "-funsafe-math-optimizations" '
            'LABELS "-Ofast")\n'
            'set_property(SOURCE a.f90 APPEND PROPERTY COMPILE_OPTIONS -fassociative-math)\n'
            'message(STATUS "-Ofast is no option here")\n')
    assert [f[3] for f in found("CMakeLists.txt", text)] == [
        "gnu-fast-math", "gnu-no-protect-parens", "gnu-reciprocal-math", "gnu-unsafe-math", "gnu-associative-math"]


def test_cmake_generator_expressions_and_compiler_blocks():
    text = ('if(CMAKE_Fortran_COMPILER_ID STREQUAL "NVHPC")\n'
            '  add_compile_options(-Mfma)\n'
            'elseif(NOT CMAKE_Fortran_COMPILER_ID STREQUAL "GNU")\n'
            '  add_compile_options(-fast)\n'
            'endif()\n'
            'target_compile_options(lake PRIVATE "$<$<CONFIG:Release>:-Ofast>" '
            '$<$<Fortran_COMPILER_ID:Cray>:-h;fp3>)\n')
    out = found("CMakeLists.txt", text)
    assert (2, 23, "-Mfma", "nvidia-fma", "nvidia") in out
    assert (1, 40, "NVHPC", "nvidia-default-fma", "nvidia") in out  # the block never says -Mnofma
    assert (6, 58, "-Ofast", "gnu-ofast", "unknown") in out
    assert (6, 97, "-h;fp3", "cray-fp34", "cray") in out  # a CMake list: two arguments, one option
    assert not any(f[2] == "-fast" for f in out)  # a negated condition names no compiler: GCC rules


def test_cmake_toolchain_compiler_with_quotes_and_paths():
    text = 'set(CMAKE_Fortran_COMPILER "/opt/intel/oneapi/bin/ifx")\nset(CMAKE_Fortran_FLAGS_INIT "-O2 -xHost")\n'
    out = found("toolchain.cmake", text)
    assert [(f[3], f[4]) for f in out] == [("intel-default-fp-model", "intel"), ("intel-x-target", "intel")]
    assert out[0][2] == "/opt/intel/oneapi/bin/ifx"


# ---------------------------------------------------------------- shell

def test_shell_assignments_defaults_heredocs_and_make_arguments():
    text = ("#!/bin/bash\n"
            "export FFLAGS='-O1 -Ofast'\n"
            "opts=${OPTS:-\"-ffast-math\"}\n"
            "cat <<EOF\n"
            "gfortran -Ofast a.f90\n"
            "EOF\n"
            "make FFLAGS=\"-fno-signed-zeros\" all\n"
            "cmake -DCMAKE_Fortran_FLAGS=\"-fno-protect-parens\" ..\n"
            "echo -Ofast  # echo is no compiler\n")
    out = found("build.sh", text)
    assert [(f[0], f[2]) for f in out] == [(2, "-Ofast"), (3, "-ffast-math"), (7, "-fno-signed-zeros"),
                                           (8, "-fno-protect-parens")]


def test_shell_compiler_through_variables():
    text = ('#!/bin/sh\nFC="${FC:-ifort}"\nif [ -n "$X" ]; then "$FC" -O2 -xHost -c a.f90; fi\n'
            '/usr/local/bin/ftn -h fp3 -c b.f90 && echo ok\n')
    out = found("build.sh", text)
    assert ("-xHost", "intel-x-target") in [(f[2], f[3]) for f in out]
    assert ("-h fp3", "cray-fp34") in [(f[2], f[3]) for f in out]


def test_shell_tabs_continuation_and_crlf():
    text = "#!/bin/sh\r\ngfortran\t-g \\\r\n\t-Ofast \\\r\n -c a.f90\r\n"
    assert found("build.sh", text) == [(3, 2, "-Ofast", "gnu-ofast", "gnu")]


# ---------------------------------------------------------------- fpm

def test_fpm_profiles_files_inline_tables_and_escapes():
    text = ('name = "lake"\n'
            '[profiles.release]\n'
            'gfortran.linux.flags = "-O1 \\u002dffast-math"\n'
            'ifx = { flags = "-fp-model consistent" }\n'
            '[profiles.debug.gfortran.linux.files]\n'
            '"heat_budget.f90" = \'\'\'\n-fno-signed-zeros\'\'\'\n'
            '[[executable]]\nname = "-Ofast"\n')
    out = scan_build_text("fpm.toml", text)
    assert [(f.line, f.option, f.rule) for f in out] == [(3, "-ffast-math", "gnu-fast-math"),
                                                         (7, "-fno-signed-zeros", "gnu-no-signed-zeros")]
    escaped = out[0]
    assert text[escaped.start:escaped.end] == "\\u002dffast-math"  # the escape, as written


def test_fpm_default_compiler_is_gfortran():
    (finding,) = scan_build_text("fpm.toml", '[profiles.release]\nflags = "-Ofast"\n')
    assert finding.compiler == "gnu"


# ---------------------------------------------------------------- compile_commands.json

def test_compdb_command_and_arguments_with_escapes():
    text = ('[{"directory": "/b", "command": "ifx -fp-model fast -DNAME=\\"a b\\" -c a.f90", "file": "a.f90"},\n'
            ' {"directory": "/b", "arguments": ["gfortran", "-O1", "-f\\u0061st-math", "-ffast-math"], '
            '"file": "b.f90"},\n'
            ' {"directory": "/b", "arguments": ["ifort", "-fp-model", "fast", "-c", "c.f90"], "file": "c.f90"}]\n')
    out = scan_build_text("compile_commands.json", text)
    assert [(f.line, f.option, f.rule, f.source) for f in out] == [
        (1, "-fp-model fast", "intel-fp-model-fast", "a.f90"),
        (2, "-ffast-math", "gnu-fast-math", "b.f90"),
        (3, "-fp-model fast", "intel-fp-model-fast", "c.f90")]
    split = out[2]
    assert text[split.start:split.end] == '-fp-model", "fast'  # one option over two argv strings


# ---------------------------------------------------------------- which files

@pytest.mark.parametrize("name,first,kind", [
    ("Makefile", "", "make"), ("makefile", "", "make"), ("GNUmakefile", "", "make"), ("Makefile.intel", "", "make"),
    ("src/rules.mk", "", "make"), ("x.make", "", "make"), ("CMakeLists.txt", "", "cmake"),
    ("cmake/toolchain.cmake", "", "cmake"), ("fpm.toml", "", "fpm"), ("compile_commands.json", "", "compdb"),
    ("build.sh", "", "shell"), ("run.bash", "", "shell"), ("configure.ac", "", "shell"),
    ("build", "#!/bin/sh", "shell"), ("compile", "#!/usr/bin/env bash", "shell"), ("build", "", None),
    ("build", "#!/usr/bin/env python3", None), ("Cargo.toml", "", None), ("heat_budget.f90", "", None),
    ("cmakelists.txt", "", None),
])
def test_which_files_are_build_files(name, first, kind):
    assert kind_of(name, first) == kind
    assert is_build_file(name, first) == (kind is not None)
    if kind is None:
        assert scan_build_text(name, "FFLAGS = -Ofast\n") == []
