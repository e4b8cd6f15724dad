"""The command line: exit codes, check lines, diffs that git apply accepts, JSON."""
import json
import shutil
import subprocess
import sys

import pytest

from conftest import FIXTURES

SOURCE = "module m\n  implicit none\ncontains\n  subroutine s(a, b, c)\n    real :: a, b, c\n    a = a + b + c\n  end subroutine\nend module\n"


def _run(*args, cwd):
    return subprocess.run([sys.executable, "-m", "rewrite.cli", *args], cwd=cwd, capture_output=True, text=True)


def test_check_exit_codes_and_line_format(tmp_path):
    (tmp_path / "one.f90").write_text(SOURCE)
    run = _run("check", "one.f90", cwd=tmp_path)
    assert run.returncode == 1
    assert run.stdout.startswith("one.f90:6:9: chain: bit-for-bit: pins the written left-to-right order: (a + b) + c")
    (tmp_path / "two.f90").write_text(SOURCE.replace("a + b + c", "(a + b) + c"))
    assert _run("check", "two.f90", cwd=tmp_path).returncode == 0
    (tmp_path / "bad.f90").write_text("subroutine s()\n  x = (a\nend subroutine\n")
    run = _run("check", "bad.f90", "one.f90", cwd=tmp_path)
    assert run.returncode == 2 and "bad.f90:2: unbalanced parentheses" in run.stderr
    assert "one.f90:6:9" in run.stdout  # the batch went on


def test_diff_is_accepted_by_git_apply(tmp_path):
    # outside check: git apply, the reference consumer of unified diffs
    if shutil.which("git") is None:
        pytest.skip("git is not installed")
    work = tmp_path / "repo"
    shutil.copytree(FIXTURES / "reservoir", work / "reservoir")
    shutil.copytree(FIXTURES / "chains", work / "chains")
    shutil.copy(FIXTURES / "bad" / "crlf.f90", work / "crlf.f90")
    shutil.copy(FIXTURES / "bad" / "no_newline_at_end.f90", work / "no_newline_at_end.f90")
    shutil.copy(FIXTURES / "bad" / "latin1.f90", work / "latin1.f90")
    # form feeds (a page break line, and one in a line's indentation) and lone-CR line ends: a
    # unified diff splits lines at LF only, as git does
    (work / "pages.py").write_bytes(b"x = 1.0\n\x0c\n\x0cdef f(a: float, b: float) -> float:\n"
                                    b"    return a + b + x\n")
    (work / "old_mac.py").write_bytes(b"def f(a: float, b: float) -> float:\r    return a + b + 1.0\r")
    subprocess.run(["git", "init", "-q"], cwd=work, check=True)
    diff = subprocess.run([sys.executable, "-m", "rewrite.cli", "diff", "."], cwd=work, capture_output=True)
    assert diff.returncode == 0 and diff.stdout.count(b"\n--- a/") + diff.stdout.startswith(b"--- a/") >= 1
    (tmp_path / "change.diff").write_bytes(diff.stdout)
    applied = subprocess.run(["git", "apply", "--whitespace=nowarn", str(tmp_path / "change.diff")], cwd=work,
                             capture_output=True, text=True)
    assert applied.returncode == 0, applied.stderr
    assert (work / "pages.py").read_bytes().endswith(b"\x0cdef f(a: float, b: float) -> float:\n"
                                                     b"    return (a + b) + x\n")
    assert (work / "old_mac.py").read_bytes() == b"def f(a: float, b: float) -> float:\r    return (a + b) + 1.0\r"
    # after git applied it, nothing is left to propose
    check_again = _run("check", ".", cwd=work)
    assert check_again.returncode == 0, check_again.stdout


def test_diff_header_counts_effects(tmp_path):
    (tmp_path / "one.f90").write_text(SOURCE)
    run = _run("diff", "one.f90", cwd=tmp_path)
    assert run.stdout.splitlines()[0] == "# samebits: one.f90: 1 edit(s): 1 bit-for-bit, 0 answer-changing"


def test_effect_filter(tmp_path):
    (tmp_path / "one.f90").write_text(SOURCE)
    run = _run("check", "--effect", "answer-changing", "one.f90", cwd=tmp_path)
    assert run.returncode == 0 and run.stdout == ""


def test_json_report(tmp_path):
    (tmp_path / "one.f90").write_text(SOURCE)
    run = _run("check", "--format", "json", "one.f90", cwd=tmp_path)
    report = json.loads(run.stdout)
    edit = report["files"][0]["edits"][0]
    assert (edit["rule"], edit["effect"], edit["line"], edit["column"]) == ("chain", "bit-for-bit", 6, 9)
    assert SOURCE[edit["start"]:edit["end"]] == "a + b + c"
    assert [c["text"] for c in edit["changes"]] == ["(", ")"]
    assert report["summary"]["bit-for-bit"] == 1 and report["summary"]["answer-changing"] == 0


def test_config_from_pyproject(tmp_path):
    (tmp_path / "pyproject.toml").write_text("[tool.samebits]\nline-length = 20\n")
    (tmp_path / "one.f90").write_text(SOURCE)
    run = _run("check", "one.f90", cwd=tmp_path)
    assert run.returncode == 2 and "over the limit of 20" in run.stderr
    (tmp_path / "pyproject.toml").write_text("[tool.samebits]\nno-such-option = 1\n")
    run = _run("check", "one.f90", cwd=tmp_path)
    assert run.returncode == 2 and "unknown option" in run.stderr


def test_modules_are_found_beside_a_single_file(tmp_path):
    (tmp_path / "kinds.f90").write_text("module kinds\n  implicit none\n  integer, parameter :: dp = kind(1.0d0)\n"
                                        "  real(dp), parameter :: g = 9.81_dp\nend module kinds\n")
    (tmp_path / "use_it.f90").write_text("module user\n  use kinds\n  implicit none\ncontains\n"
                                         "  subroutine s(a)\n    real(dp) :: a\n    a = a + g + 1.0_dp\n"
                                         "  end subroutine\nend module user\n")
    run = _run("check", "use_it.f90", cwd=tmp_path)
    assert run.returncode == 1 and "use_it.f90:7:9: chain: bit-for-bit" in run.stdout
    (tmp_path / "lib").mkdir()
    (tmp_path / "kinds.f90").rename(tmp_path / "lib" / "kinds.f90")
    run = _run("check", "use_it.f90", cwd=tmp_path)
    assert run.returncode == 0 and "unresolved" in run.stdout
    (tmp_path / "samebits.toml").write_text('module-path = ["lib"]\n')
    run = _run("check", "use_it.f90", cwd=tmp_path)
    assert run.returncode == 1 and "bit-for-bit" in run.stdout


def test_chain_order_per_file_from_config(tmp_path):
    body = "module m\n  implicit none\ncontains\n  subroutine s(a, b, c, d)\n    real :: a, b, c, d\n" \
           "    a = a + b + c + d\n  end subroutine\nend module\n"
    (tmp_path / "legacy").mkdir()
    (tmp_path / "legacy" / "old.f90").write_text(body)
    (tmp_path / "new.f90").write_text(body)
    (tmp_path / "samebits.toml").write_text('chain-order-files = { "legacy/*.f90" = "balanced" }\n')
    run = _run("check", ".", cwd=tmp_path)
    assert "legacy/old.f90:6:9: chain: answer-changing: a + b + c + d -> (a + b) + (c + d)" in run.stdout
    assert "new.f90:6:9: chain: bit-for-bit" in run.stdout
    diff = _run("diff", ".", cwd=tmp_path)
    assert "# ANSWER-CHANGING legacy/old.f90:6: chain:" in diff.stdout
    only = _run("check", "--effect", "bit-for-bit", ".", cwd=tmp_path)
    assert "legacy/old.f90" not in only.stdout and "new.f90:6:9" in only.stdout
    (tmp_path / "samebits.toml").write_text('chain-order = "fastest"\n')
    assert _run("check", ".", cwd=tmp_path).returncode == 2


def test_runtime_command_writes_a_module_that_compiles(tmp_path):
    run = _run("runtime", "fortran", "--out", "rt", cwd=tmp_path)
    assert run.returncode == 0 and (tmp_path / "rt" / "samebits_runtime.f90").is_file()
    if shutil.which("gfortran"):
        # outside check: gfortran accepts it as standard Fortran 2008 with warnings as errors
        compiled = subprocess.run(["gfortran", "-std=f2008", "-Wall", "-Werror", "-c", "samebits_runtime.f90"],
                                  cwd=tmp_path / "rt", capture_output=True, text=True)
        assert compiled.returncode == 0, compiled.stderr
