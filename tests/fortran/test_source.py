"""Logical statements: continuation, comments, ';', strings, character map."""
from rewrite.fortran.source import logical_statements


def _texts(source):
    statements, problems = logical_statements(source)
    return [s.text for s in statements], problems


def test_continuation_with_comment_lines_between():
    source = "x = a + &   ! first\n! a comment line\n\n    & b + c\n"
    statements, problems = logical_statements(source)
    assert problems == []
    assert [s.text for s in statements] == ["x = a +  b + c"]
    # every character maps back to the same character of the file
    statement = statements[0]
    assert all(source[o] == ch for o, ch in zip(statement.offsets, statement.text))
    assert (statement.line, statement.end_line) == (1, 4)


def test_semicolons_split_but_not_inside_strings():
    texts, _ = _texts("a = 1; s = 'x;y' ; b = 2\n")
    assert texts == ["a = 1", "s = 'x;y'", "b = 2"]


def test_exclamation_inside_string_is_not_a_comment():
    texts, _ = _texts("s = \"hello ! world\" ! real comment\n")
    assert texts == ['s = "hello ! world"']


def test_string_continued_across_lines():
    texts, _ = _texts("s = 'ab&\n    &cd'\n")
    assert texts == ["s = 'abcd'"]


def test_crlf_and_tabs():
    texts, problems = _texts("\tx = a +\tb\r\ny = 1\r\n")
    assert problems == [] and texts == ["x = a +\tb", "y = 1"]


def test_preprocessor_line_inside_statement_is_marked():
    statements, _ = logical_statements("x = a + &\n#ifdef FAST\n  b + c\ny = 1\n")
    assert statements[0].interrupted and not statements[1].interrupted


def test_unclosed_string_and_dangling_continuation_are_problems():
    _, problems = logical_statements("s = 'abc\n")
    assert problems and problems[0].line == 1
    _, problems = logical_statements("x = a + &\n")
    assert problems and "continued" in problems[0].message
