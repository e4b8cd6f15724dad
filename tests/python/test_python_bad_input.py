"""Bad Python input: clear ``file:line: message`` errors on stderr, exit status 2, the file left
byte for byte as it was, and the rest of the batch (Python and Fortran) still processed.

Where a line number is checked it is compared with what CPython itself reports (``compile``
for syntax errors, the UTF-8 codec for undecodable bytes), not with a number copied from
the tool. Byte-level inputs (non-UTF-8, NUL bytes, CR LF, form feeds) are written here into
``tmp_path``; the text ones are in fixtures/python/bad/.
"""
from __future__ import annotations

import re
import shutil
import subprocess
import sys

import pytest

from rewrite.api import WriteError, decode, rewrite_paths, rewrite_text, write_result

from conftest import FIXTURES, only_parentheses_inserted

BAD = FIXTURES / "python" / "bad"
GOOD = b"def storage(inflow: float, rain: float, outflow: float) -> float:\n    return inflow + rain - outflow\n"
PROBLEM_LINE = re.compile(r"^(?P<file>[^:\s][^:]*\.(?:py|f90)):(?P<line>\d+): (?P<message>\S.*)$")
APPLIED_LINE = re.compile(r"^[^:]+: \d+ edit\(s\) applied( \(\d+ ANSWER-CHANGING\))?$")


def _run(*args, cwd):
    return subprocess.run([sys.executable, "-m", "rewrite.cli", *args], cwd=cwd, capture_output=True, timeout=120)


def _python_syntax_error(data: bytes) -> SyntaxError:
    """CPython's own verdict on the bytes (outside check)."""
    try:
        compile(data, "<bad>", "exec", dont_inherit=True)
    except SyntaxError as error:
        return error
    raise AssertionError("CPython compiles this source")


def _first_bad_utf8_line(data: bytes) -> int:
    """The line of the first byte the UTF-8 codec refuses (outside check: Python's codec)."""
    try:
        data.decode("utf-8")
    except UnicodeDecodeError as error:
        return data.count(b"\n", 0, error.start) + 1
    raise AssertionError("valid UTF-8")


def _stderr_lines(run) -> list[str]:
    lines = run.stderr.decode("utf-8", "replace").splitlines()
    for line in lines:
        # every line on stderr is a located problem or an "applied" note
        assert PROBLEM_LINE.match(line) or APPLIED_LINE.match(line), line
    return lines


def _problems(run) -> dict[str, tuple[int, str]]:
    found = {}
    for line in _stderr_lines(run):
        match = PROBLEM_LINE.match(line)
        if match:
            found[match["file"].split("/")[-1]] = (int(match["line"]), match["message"])
    return found


@pytest.fixture
def batch(tmp_path):
    """The committed bad files, plus byte-level ones written here."""
    target = tmp_path / "batch"
    shutil.copytree(BAD, target)
    (target / "latin1.py").write_bytes(b"# Sortie du barrage (invented data)\n"
                                       b"def sortie(q: float, r: float) -> float:\n"
                                       b"    label = 'd\xe9bit'  # Latin-1 e acute: not UTF-8\n"
                                       b"    return q + r + 1.0\n")
    (target / "binary.py").write_bytes(b"\x7fELF\x00\x00\x00\x00" + bytes(range(256)) + b"x = a + b + c\n")
    return target


# -- the batch ---------------------------------------------------------------------------------
def test_apply_on_a_batch_with_bad_python_files(batch):
    before = {p.name: p.read_bytes() for p in batch.iterdir()}
    run = _run("apply", ".", cwd=batch)
    assert run.returncode == 2
    problems = _problems(run)
    # syntax errors: at the line CPython reports, with CPython's message
    for name in ("syntax_error.py", "python2_print.py"):
        error = _python_syntax_error(before[name])
        assert problems[name] == (error.lineno, f"syntax error: {error.msg}"), name
    assert problems["python2_print.py"][1].startswith("syntax error: Missing parentheses in call to 'print'")
    assert problems["latin1.py"][0] == _first_bad_utf8_line(before["latin1.py"]) == 3
    assert "not valid UTF-8" in problems["latin1.py"][1]
    assert problems["binary.py"] == (1, "binary file (contains NUL bytes): not processed")
    # empty and comment-only files are no problem; nothing else was reported
    assert set(problems) == {"syntax_error.py", "python2_print.py", "latin1.py", "binary.py"}
    after = {p.name: p.read_bytes() for p in batch.iterdir()}
    for untouched in ("syntax_error.py", "python2_print.py", "latin1.py", "binary.py", "empty.py",
                      "only_comments.py"):
        assert after[untouched] == before[untouched], untouched
    # the good file of the same batch was rewritten, with parentheses only
    assert after["good_neighbour.py"] != before["good_neighbour.py"]
    assert only_parentheses_inserted(after["good_neighbour.py"], before["good_neighbour.py"])
    compile(after["good_neighbour.py"], "good_neighbour.py", "exec")
    assert "good_neighbour.py: 1 edit(s) applied" in _stderr_lines(run)
    # atomic writes: no temporary file is left behind
    assert set(after) == set(before)


def test_check_and_diff_report_the_same_problems(batch):
    applied = _problems(_run("apply", ".", cwd=batch))
    for command in ("check", "diff"):
        run = _run(command, ".", cwd=batch)
        assert run.returncode == 2
        assert _problems(run) == applied, command


def test_syntax_error_leaves_the_text_and_reports_no_edit():
    data = (BAD / "syntax_error.py").read_bytes()
    result = rewrite_text(decode(data), language="python", path="syntax_error.py")
    error = _python_syntax_error(data)
    assert result.text == result.original == decode(data)
    assert result.edits == () and not result.changed
    assert [(p.line, p.message) for p in result.problems] == [(error.lineno, f"syntax error: {error.msg}")]


SYNTAX_ERRORS = {
    "eof_in_bracket.py": b"def f(a: float, b: float) -> float:\n    return a + b + 1.0\n\n\nx = (1.0 +\n",
    "no_newline_at_end.py": b"def f(a: float, b: float) -> float:\n    return a + b +",
    "crlf.py": b"def f(a: float, b: float) -> float:\r\n    s = a + b + 1.0\r\n\r\n    return (s\r\n",
    "tabs_and_spaces.py": b"def f(a: float, b: float) -> float:\n\tx = a + b + 1.0\n        return x\n",
    "unexpected_indent.py": b"def f(a: float, b: float) -> float:\n    return a + b + 1.0\n  x = 2.0\n",
    "unterminated_string.py": b'def f(a: float, b: float) -> float:\n    return a + b + 1.0\n"""never closed\n\n',
    "after_astral.py": "# \U0001f30a \u6c34\u4f4d\ndef f(a: float) -> float:\n    return a + 2.0 +* 1.0\n".encode(),
    "deep_in_file.py": b"x = 1.0\n" * 150 + b"def f(a: float, b: float) -> float:\n    return a + b + 1.0 )\n",
    "f_string_conversion.py": b"def f(a: float, b: float) -> float:\n    return f'{a + b + 1.0=!z}'\n",
}


def test_syntax_error_lines_are_the_ones_python_reports(tmp_path):
    for name, source in SYNTAX_ERRORS.items():
        (tmp_path / name).write_bytes(source)
    (tmp_path / "good.py").write_bytes(GOOD)
    run = _run("apply", ".", cwd=tmp_path)
    assert run.returncode == 2
    expected = {}
    for name, source in SYNTAX_ERRORS.items():
        error = _python_syntax_error(source)
        expected[name] = (error.lineno, f"syntax error: {error.msg}")
    assert _problems(run) == expected
    for name, source in SYNTAX_ERRORS.items():
        assert (tmp_path / name).read_bytes() == source, name
    assert (tmp_path / "good.py").read_bytes() != GOOD  # the batch went on
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([*SYNTAX_ERRORS, "good.py"])


# -- bytes that are not UTF-8 text ---------------------------------------------------------------
NOT_UTF8 = {
    "latin1_comment_line_1.py": b"# d\xe9bit\ndef f(a: float, b: float) -> float:\n    return a + b + 1.0\n",
    "latin1_string_line_5.py": b"def f(a: float, b: float) -> float:\n    x = a + b + 1.0\n\n\n    s = '\xb0C'\n"
                               b"    return x\n",
    "encoded_surrogate.py": b"def f(a: float, b: float) -> float:\n    return a + b + 1.0  # \xed\xa0\x80\n",
    "truncated_at_end.py": b"def f(a: float, b: float) -> float:\n    return a + b + 1.0\n# cut \xe6\xb0",
    "crlf.py": b"x = 1.0\r\n# \xff\xfe\r\ny = x + x * 2.0 + 1.0\r\n",
    # PEP 263: Python would read this one as Latin-1; samebits reads UTF-8 only and says so
    "latin1_declared.py": b"# -*- coding: latin-1 -*-\ns = 'caf\xe9'\ndef f(a: float, b: float) -> float:\n"
                          b"    return a + b + 1.0\n",
}


def test_non_utf8_files_are_refused_at_their_line(tmp_path):
    for name, source in NOT_UTF8.items():
        (tmp_path / name).write_bytes(source)
    (tmp_path / "good.py").write_bytes(GOOD)
    message = "not valid UTF-8 (Python source must be UTF-8 here): not processed"
    expected = {name: (_first_bad_utf8_line(source), message) for name, source in NOT_UTF8.items()}
    assert expected["latin1_string_line_5.py"][0] == 5 and expected["truncated_at_end.py"][0] == 3
    for command in ("check", "diff", "apply"):
        run = _run(command, ".", cwd=tmp_path)
        assert run.returncode == 2, command
        assert _problems(run) == expected, command
        for name, source in NOT_UTF8.items():
            assert (tmp_path / name).read_bytes() == source, (command, name)
    assert (tmp_path / "good.py").read_bytes() != GOOD


BINARY = {
    "one_nul.py": b"\x00",
    "every_byte.py": bytes(range(256)) * 4,
    "utf16.py": "def f(a: float, b: float) -> float:\n    return a + b + 1.0\n".encode("utf-16"),
    "nul_in_code.py": b"def f(a: float, b: float) -> float:\n    return a + b + 1.0\x00\n",
}


def test_binary_files_named_py_are_refused(tmp_path):
    for name, source in BINARY.items():
        (tmp_path / name).write_bytes(source)
        # CPython refuses these too (outside check): NUL bytes are not source text
        with pytest.raises((SyntaxError, ValueError)):
            compile(source, name, "exec")
    (tmp_path / "good.py").write_bytes(GOOD)
    run = _run("apply", ".", cwd=tmp_path)
    assert run.returncode == 2
    assert _problems(run) == {name: (1, "binary file (contains NUL bytes): not processed") for name in BINARY}
    for name, source in BINARY.items():
        assert (tmp_path / name).read_bytes() == source, name
    assert (tmp_path / "good.py").read_bytes() != GOOD


# -- files with nothing to do ------------------------------------------------------------------
def test_empty_and_comment_only_files_propose_nothing(tmp_path):
    names = ["empty.py", "only_comments.py"]
    for name in names:
        shutil.copyfile(BAD / name, tmp_path / name)
        [result] = rewrite_paths([str(tmp_path / name)])
        assert result.problems == () and result.edits == () and not result.changed
    before = {name: (tmp_path / name).read_bytes() for name in names}
    check = _run("check", *names, cwd=tmp_path)
    assert (check.returncode, check.stdout, check.stderr) == (0, b"", b"")
    apply = _run("apply", *names, cwd=tmp_path)
    assert (apply.returncode, apply.stderr) == (0, b"")
    assert {name: (tmp_path / name).read_bytes() for name in names} == before


@pytest.mark.parametrize("source", [b"\n\n\n", b"   \n\t\n", b"#!/usr/bin/env python3\n", b"pass", b"\r\n\r\n"])
def test_blank_files_propose_nothing(source):
    result = rewrite_text(decode(source), language="python", path="blank.py")
    assert result.problems == () and result.edits == () and result.text == decode(source)


def test_python2_print_statement():
    data = (BAD / "python2_print.py").read_bytes()
    result = rewrite_text(decode(data), language="python", path="python2_print.py")
    error = _python_syntax_error(data)
    # the chain in the statement is not "fixed" into Python 3: the file is left alone
    assert result.text == decode(data) and result.edits == ()
    assert [(p.line, p.message) for p in result.problems] == [(error.lineno, f"syntax error: {error.msg}")]


def test_expression_too_deep_for_python(tmp_path):
    """A chain that CPython itself cannot compile (its recursion limit) is a problem of that
    file only."""
    source = ("def f(a: float) -> float:\n    return a + " + " + ".join(["1.0"] * 4000) + "\n").encode()
    with pytest.raises(RecursionError):  # outside check: CPython gives up too
        compile(source, "deep.py", "exec")
    (tmp_path / "deep.py").write_bytes(source)
    (tmp_path / "good.py").write_bytes(GOOD)
    run = _run("apply", ".", cwd=tmp_path)
    assert run.returncode == 2
    assert list(_problems(run)) == ["deep.py"] and _problems(run)["deep.py"][0] == 1
    assert (tmp_path / "deep.py").read_bytes() == source
    assert (tmp_path / "good.py").read_bytes() != GOOD


# -- a mixed directory ---------------------------------------------------------------------------
FORTRAN_GOOD = b"module m\n  implicit none\ncontains\n  subroutine s(a, b, c)\n    real :: a, b, c\n" \
               b"    a = a + b + c\n  end subroutine\nend module\n"
FORTRAN_BAD = b"subroutine s()\n  x = (a\nend subroutine\n"


def test_mixed_directory_goes_on_past_one_bad_file_of_each_language(tmp_path):
    (tmp_path / "sub").mkdir()
    files = {
        "good.f90": FORTRAN_GOOD,
        "bad.f90": FORTRAN_BAD,
        "good.py": GOOD,
        "sub/bad.py": (BAD / "syntax_error.py").read_bytes(),
        "sub/also_good.py": (BAD / "good_neighbour.py").read_bytes(),
        "notes.txt": b"a + b + c\n",
    }
    for name, data in files.items():
        (tmp_path / name).write_bytes(data)
    run = _run("apply", ".", cwd=tmp_path)
    assert run.returncode == 2
    lines = _stderr_lines(run)
    error = _python_syntax_error(files["sub/bad.py"])
    assert f"sub/bad.py:{error.lineno}: syntax error: {error.msg}" in lines
    assert any(line.startswith("bad.f90:2: ") for line in lines), lines
    for name in ("bad.f90", "sub/bad.py", "notes.txt"):
        assert (tmp_path / name).read_bytes() == files[name], name
    for name in ("good.f90", "good.py", "sub/also_good.py"):
        after = (tmp_path / name).read_bytes()
        assert after != files[name] and only_parentheses_inserted(after, files[name]), name
    # no temporary file anywhere
    assert sorted(str(p.relative_to(tmp_path)) for p in tmp_path.rglob("*") if p.is_file()) == sorted(files)
    # a second run: the bad files are still bad, the good ones have nothing left to propose
    again = _run("check", ".", cwd=tmp_path)
    assert again.returncode == 2 and again.stdout == b""


def test_permissions_and_on_disk_changes(tmp_path):
    path = tmp_path / "kept.py"
    path.write_bytes(GOOD)
    path.chmod(0o640)
    assert _run("apply", "kept.py", cwd=tmp_path).returncode == 0
    assert (path.stat().st_mode & 0o777) == 0o640
    # a file that changed after it was read is not overwritten
    path.write_bytes(GOOD)
    [result] = rewrite_paths([str(path)])
    path.write_bytes(GOOD + b"# edited meanwhile\n")
    with pytest.raises(WriteError):
        write_result(result)
    assert path.read_bytes() == GOOD + b"# edited meanwhile\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["kept.py"]


# -- tool bugs found here, now fixed: the tests stay so that they cannot come back -----------------
# once a bug (fixed): a UTF-8 BOM is reported as 'syntax error: invalid non-printable character
# U+FEFF'; Python reads a file that starts with the BOM as UTF-8 (Language Reference 2.1.4, Encoding
# declarations)
def test_bom_file_is_processed(tmp_path):
    source = b"\xef\xbb\xbfdef f(a: float, b: float) -> float:\n    return a + b + 1.0\n"
    compile(source, "bom.py", "exec")  # outside check: CPython accepts it
    (tmp_path / "bom.py").write_bytes(source)
    run = _run("apply", "bom.py", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    after = (tmp_path / "bom.py").read_bytes()
    assert after.startswith(b"\xef\xbb\xbf") and only_parentheses_inserted(after, source)


# once a bug (fixed): a form feed before the first token of a line (allowed: Language Reference
# 2.1.8, Indentation) is dropped by libcst 1.0's positions, so every later edit lands one character
# early and apply writes a file that no longer compiles: 'return( a + )b + 1.0'
@pytest.mark.parametrize("source", [
    pytest.param(b"\x0cdef f(a: float, b: float) -> float:\n    return a + b + 1.0\n", id="first-line"),
    pytest.param(b"x = 1.0\n\x0cdef f(a: float, b: float) -> float:\n    return a + b + 1.0\n", id="later-line"),
])
def test_form_feed_before_a_statement(source, tmp_path):
    compile(source, "ff.py", "exec")  # outside check: CPython accepts it
    (tmp_path / "ff.py").write_bytes(source)
    run = _run("apply", "ff.py", cwd=tmp_path)
    after = (tmp_path / "ff.py").read_bytes()
    # whatever the tool decides, it must never write a file that does not compile
    compile(after, "ff.py", "exec")
    assert run.returncode == 0 and only_parentheses_inserted(after, source) and after != source


# once a bug (fixed): a file with both CR LF and LF line ends (valid: Language Reference 2.1.2,
# Physical lines) is reported as 'syntax error: Internal error while parsing whitespace: ...' at
# line 1 (a libcst 1.0 message)
def test_mixed_line_endings_are_not_a_syntax_error(tmp_path):
    source = b"x = 1.0\r\ndef f(a: float, b: float) -> float:\n    return a + b + 1.0\r\n"
    compile(source, "mixed.py", "exec")  # outside check: CPython accepts it
    (tmp_path / "mixed.py").write_bytes(source)
    run = _run("apply", "mixed.py", cwd=tmp_path)
    assert b"syntax error" not in run.stderr, run.stderr
    after = (tmp_path / "mixed.py").read_bytes()
    assert run.returncode == 0 and only_parentheses_inserted(after, source) and after != source


def test_cr_only_file_is_rewritten_with_its_line_ends(tmp_path):
    # old Macintosh line ends: Python accepts a lone CR as a line end (Language Reference 2.1.2)
    source = b"def f(a: float, b: float) -> float:\r    s = a + b + 1.0\r    return s\r"
    compile(source, "cr.py", "exec")
    (tmp_path / "cr.py").write_bytes(source)
    assert _run("apply", "cr.py", cwd=tmp_path).returncode == 0
    after = (tmp_path / "cr.py").read_bytes()
    assert after != source and only_parentheses_inserted(after, source) and b"\n" not in after


# once a bug (fixed): line numbers counted LF only: in a file with lone-CR line ends (Language
# Reference 2.1.2) the edit on line 2 was reported as cr.py:1:45
def test_cr_only_file_reports_python_line_numbers(tmp_path):
    source = b"def f(a: float, b: float) -> float:\r    s = a + b + 1.0\r    return s\r"
    (tmp_path / "cr.py").write_bytes(source)
    run = _run("check", "cr.py", cwd=tmp_path)
    assert run.returncode == 1
    assert run.stdout.decode().startswith("cr.py:2:9: chain: bit-for-bit"), run.stdout
