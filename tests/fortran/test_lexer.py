"""Tokens: the traps of Fortran's lexical rules."""
import pytest

from rewrite.fortran.lexer import LexError, tokenize


def kinds(text):
    return [(t.kind, t.text) for t in tokenize(text)]


def test_dot_operators_after_integers():
    # Fortran 2018 10.1.5.5: 1.eq.2 is the integer 1, .eq., 2 (common practice, no source)
    assert kinds("1.eq.2") == [("int", "1"), ("dotop", ".eq."), ("int", "2")]


def test_real_literals_with_exponents_and_kinds():
    assert [t.kind for t in tokenize("1.e5 + .5d0 + 2.0_dp + 3_8 + 1.5e-3")] == \
        ["real", "op", "real", "op", "real", "op", "int", "op", "real"]


def test_array_constructor_and_operator_slash():
    assert [t.kind for t in tokenize("(/ 1.0, 2.0 /)")] == ["(/", "real", ",", "real", "/)"]
    assert [t.kind for t in tokenize("interface operator(/)")][-3:] == ["(", "op", ")"]


def test_strings_with_doubled_quotes_and_kind_prefix():
    assert kinds("'it''s' // ucs_'x'") == [("string", "'it''s'"), ("op", "//"), ("string", "ucs_'x'")]


def test_unknown_character_is_an_error():
    with pytest.raises(LexError):
        tokenize("x = a $ b")
