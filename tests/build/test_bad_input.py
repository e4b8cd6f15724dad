"""Bad build files: malformed JSON or TOML, binary or undecodable bytes give no finding and one
clear problem; odd but readable text never crashes."""
from __future__ import annotations

import pytest
from hypothesis import given, settings, strategies as st

from rewrite.build import BuildFileError, scan_build_file, scan_build_text


@pytest.mark.parametrize("name,text,line,words", [
    ("compile_commands.json", '[\n  {"file": "a.f90",\n   "command": "gfortran -Ofast" \n  }\n', 5, "malformed JSON"),
    ("compile_commands.json", '{"file": "a.f90", "command": "gfortran -Ofast"}', 1, "JSON array"),
    ("compile_commands.json", "", 1, "malformed JSON"),
    ("fpm.toml", 'name = "lake"\n[profiles.release\nflags = "-Ofast"\n', 2, "malformed TOML"),
    ("fpm.toml", 'flags = "-Ofast\n', 1, "malformed TOML"),
    ("Makefile", "FFLAGS = -Ofast\n\x00\x01\x02", 2, "binary"),
])
def test_unreadable_text_raises_build_file_error(name, text, line, words):
    with pytest.raises(BuildFileError) as caught:
        scan_build_text(name, text)
    assert caught.value.line == line and words in caught.value.message


def test_scan_build_file_turns_errors_into_problems(tmp_path):
    cases = {
        "compile_commands.json": b'[{"command": "gfortran -Ofast",]',
        "fpm.toml": b"[profiles\nflags = 1\n",
        "Makefile": b"FFLAGS = -Ofast\n\x00ELF",
        "build.sh": b"#!/bin/sh\ngfortran -Ofast a.f90  # caf\xe9\n",
    }
    for name, data in cases.items():
        path = tmp_path / name
        path.write_bytes(data)
        result = scan_build_file(path)
        assert result.findings == () and len(result.problems) == 1, name
        problem = result.problems[0]
        assert problem.line >= 1 and problem.message
    assert "not UTF-8" in scan_build_file(tmp_path / "build.sh").problems[0].message
    assert "binary" in scan_build_file(tmp_path / "Makefile").problems[0].message


def test_odd_but_readable_files(tmp_path):
    long_line = "FFLAGS = " + " ".join(f"-DLAYER{i}=1" for i in range(20000)) + " -Ofast\n"
    assert [f.option for f in scan_build_text("Makefile", long_line)] == ["-Ofast"]
    assert scan_build_text("Makefile", "") == []
    assert scan_build_text("build.sh", "#!/bin/sh\n") == []
    assert scan_build_text("CMakeLists.txt", 'set(CMAKE_Fortran_FLAGS "-Ofast') != []  # unterminated string
    assert scan_build_text("CMakeLists.txt", "add_compile_options(-Ofast ((((") != []
    assert scan_build_text("build.sh", "#!/bin/sh\ngfortran 'unterminated -Ofast\n") != []
    assert scan_build_text("Makefile", "FFLAGS = -Ofast \\") != []  # continuation at the end of the file
    assert scan_build_text("compile_commands.json", "[]") == []
    assert scan_build_text("compile_commands.json", '[1, "x", {"file": "a.f90"}, {"arguments": []}]') == []
    assert scan_build_text("fpm.toml", "\ufeffname = 'x'\n") == []
    assert [f.start for f in scan_build_text("fpm.toml", "\ufeff[profiles]\nflags = '-Ofast'\n")] == [21]
    path = tmp_path / "CMakeLists.txt"
    path.write_bytes("\ufeffadd_compile_options(-Ofast)\r\n".encode())
    (finding,) = scan_build_file(path).findings
    assert finding.option == "-Ofast" and finding.line == 1


@settings(max_examples=100, deadline=None)
@given(text=st.text(max_size=300))
def test_any_text_never_crashes(text):
    for name in ("Makefile", "rules.mk", "CMakeLists.txt", "toolchain.cmake", "build.sh", "fpm.toml",
                 "compile_commands.json"):
        try:
            findings = scan_build_text(name, text)
        except BuildFileError as error:
            assert name in ("fpm.toml", "compile_commands.json") or "\x00" in text, (name, error)
            continue
        for f in findings:
            assert 0 <= f.start < f.end <= len(text) and f.line >= 1 and f.column >= 1


@settings(max_examples=100, deadline=None)
@given(flags=st.lists(st.sampled_from(["-Ofast", "-O2", "-fp-model", "fast", "-xHost", "-h", "fp3", "-g",
                                       '"', "\\", "\\u0041", "-ffast-math"]), max_size=8))
def test_json_strings_map_back_to_their_text(flags):
    import json
    text = json.dumps([{"directory": "/b", "file": "a.f90", "arguments": ["ifx", *flags]},
                       {"directory": "/b", "file": "b.f90", "command": " ".join(["gfortran", *flags])}])
    for f in scan_build_text("compile_commands.json", text):
        # the span holds the option's JSON source: one string, or argv strings separated by ", "
        assert " ".join(json.loads('["' + text[f.start:f.end] + '"]')) == f.option
