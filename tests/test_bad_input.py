"""Bad input: clear file:line messages, files left untouched, the batch goes on, no byte lost."""
import shutil
import subprocess
import sys

import pytest

from rewrite.api import rewrite_paths, rewrite_text

from conftest import FIXTURES, only_parentheses_inserted

BAD = FIXTURES / "bad"


def _run(*args, cwd):
    return subprocess.run([sys.executable, "-m", "rewrite.cli", *args], cwd=cwd, capture_output=True)


@pytest.fixture
def batch(tmp_path):
    target = tmp_path / "batch"
    shutil.copytree(BAD, target)
    return target


def test_apply_on_a_batch_with_bad_files(batch):
    before = {p.name: p.read_bytes() for p in batch.iterdir()}
    run = _run("apply", ".", cwd=batch)
    assert run.returncode == 2
    errors = run.stderr.decode()
    assert "syntax_error.f90:16: syntax error" in errors
    assert "binary.f90:1: binary file" in errors
    assert "long_line.f90:11: line is 140 characters long" in errors
    assert "fixed_form.f: fixed-form source is not supported yet" in errors
    after = {p.name: p.read_bytes() for p in batch.iterdir()}
    for untouched in ("syntax_error.f90", "binary.f90", "long_line.f90", "fixed_form.f", "empty.f90",
                      "only_comments.f90"):
        assert after[untouched] == before[untouched], untouched
    # the good files of the same batch were rewritten
    for rewritten in ("crlf.f90", "tabs.f90", "latin1.f90", "no_newline_at_end.f90"):
        assert after[rewritten] != before[rewritten], rewritten
    assert not [p for p in batch.iterdir() if p.name.endswith(".samebits")]


@pytest.mark.parametrize("name", ["crlf.f90", "tabs.f90", "latin1.f90", "no_newline_at_end.f90"])
def test_odd_encodings_keep_every_other_byte(batch, name):
    before = (batch / name).read_bytes()
    assert _run("apply", name, cwd=batch).returncode == 0
    after = (batch / name).read_bytes()
    assert after != before and only_parentheses_inserted(after, before)
    if name == "crlf.f90":
        assert after.count(b"\r\n") == before.count(b"\r\n") and after.count(b"\n") == before.count(b"\n")
    if name == "latin1.f90":
        assert b"\xe9" in after


def test_permissions_are_kept(batch):
    target = batch / "tabs.f90"
    target.chmod(0o640)
    assert _run("apply", "tabs.f90", cwd=batch).returncode == 0
    assert (target.stat().st_mode & 0o777) == 0o640


def test_empty_and_comment_only_files_propose_nothing():
    for name in ("empty.f90", "only_comments.f90"):
        results = rewrite_paths([str(BAD / name)])
        assert results[0].problems == () and results[0].edits == ()


def test_problems_leave_the_text_unchanged():
    source = "module m\ncontains\n  subroutine s()\n    x = a + b + c\n    y = (a + b\n  end subroutine\nend module\n"
    result = rewrite_text(source)
    assert result.text == source and result.edits == ()
    assert result.problems and result.problems[0].line == 5


def test_missing_end_is_a_problem():
    result = rewrite_text("module m\ncontains\n  subroutine s()\n    x = a + b + c\n")
    assert result.problems and "missing END" in result.problems[0].message


def test_file_that_changed_on_disk_is_not_overwritten(tmp_path):
    from rewrite.api import WriteError, write_result

    path = tmp_path / "race.f90"
    path.write_text("subroutine s()\n  x = a + b + c\nend subroutine\n")
    result = rewrite_paths([str(path)])[0]
    path.write_text("subroutine s()\n  x = a + b + c + d\nend subroutine\n")
    with pytest.raises(WriteError):
        write_result(result)
    assert "c + d" in path.read_text()
