"""The fixtures of fixtures/build/: every flagged option is found where the fixture's own listing
says, nothing is found in the clean files, and the flagged files cover the whole table."""
from __future__ import annotations

import pytest

from build_helpers import CLEAN, COMPDB_EXPECTED, FLAGGED, KINDS, listed
from rewrite.build import RULES, scan_build_file, scan_build_text
from rewrite.build.flags import SAFE, VECTOR
from rewrite.build.tokens import LineIndex


def _scan(path, libm_in_loops=None):
    return scan_build_text(path.name, path.read_text(), libm_in_loops)


@pytest.mark.parametrize("name", [k for k in KINDS if k != "compile_commands.json"])
def test_flagged_file_gives_exactly_its_listing(name):
    path = FLAGGED / name
    expected = listed(path)
    assert expected, "the fixture lists its findings"
    text = path.read_text()
    findings = _scan(path)
    assert {(f.line, f.rule, f.option) for f in findings} == expected
    lines = text.splitlines()
    for f in findings:
        assert text[f.start:f.end] == f.option  # offsets point at the option as written
        assert lines[f.line - 1][f.column - 1:].startswith(f.option)
        assert f.message.startswith(f"{f.option}: ") and "; fix: " in f.message and "\n" not in f.message


def test_flagged_compile_commands_gives_the_reasoned_table():
    path = FLAGGED / "compile_commands.json"
    findings = _scan(path)
    assert {(f.line, f.rule, f.option, f.source) for f in findings} == COMPDB_EXPECTED
    text = path.read_text()
    for f in findings:
        assert text[f.start:f.end] == f.option
        assert LineIndex(text).line_col(f.start) == (f.line, f.column)
    by_rule = {f.rule: f for f in findings}
    assert by_rule["gnu-unsafe-math"].compiler == "unknown"
    assert "mpif90 does not say which compiler it runs: GCC rules applied" in by_rule["gnu-unsafe-math"].message
    assert by_rule["gnu-mfma"].compiler == "flang"


@pytest.mark.parametrize("name", KINDS)
def test_clean_file_has_no_finding(name):
    for libm in (None, True, False):
        assert _scan(CLEAN / name, libm) == []


def test_flagged_files_cover_every_finding_rule():
    seen = {f.rule for name in KINDS for f in _scan(FLAGGED / name)}
    assert seen == {rule.key for rule in RULES if rule.kind != SAFE}


def test_libm_in_loops_decides_the_vectorisation_findings():
    for name in KINDS:
        path = FLAGGED / name
        unknown, yes, no = (_scan(path, libm) for libm in (None, True, False))
        vector = {f.start for f in unknown if BY_KIND.get(f.rule) == VECTOR}
        assert all(f.severity == "note" for f in unknown if f.start in vector)
        assert {f.start for f in yes if BY_KIND.get(f.rule) == VECTOR} == vector
        assert all(f.severity == "warning" for f in yes if f.start in vector)
        assert not any(BY_KIND.get(f.rule) == VECTOR for f in no)
        assert [f for f in unknown if f.start not in vector] == [f for f in no]
        for f in unknown:
            if f.start in vector:
                assert "if the code calls sin/exp/log/pow in loops" in f.message


BY_KIND = {rule.key: rule.kind for rule in RULES}


def test_scan_build_file_reads_the_fixtures():
    result = scan_build_file(FLAGGED / "build.sh")
    assert result.problems == () and len(result.findings) == len(listed(FLAGGED / "build.sh"))
    assert scan_build_file(CLEAN / "fpm.toml").findings == ()
