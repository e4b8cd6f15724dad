"""A file of many constructs (fixtures/chains/constructs.f90): every chain found, unknowns named."""
from rewrite.api import rewrite_text

from conftest import FIXTURES

SOURCE = (FIXTURES / "chains" / "constructs.f90").read_text()


def _line_of(result, text):
    lines = SOURCE.splitlines()
    return [n for n, line in enumerate(lines, 1) if text in line][0]


def test_constructs_are_read():
    result = rewrite_text(SOURCE)
    assert result.problems == ()
    edited = {e.line for e in result.edits}
    for statement in ("stfun(x) = x*x + x + 1.0d0",          # statement function (implicit real*8)
                      "total = rr + rr*2.0_dp + total",        # associate name typed from its selector
                      "local = total * 2.0_dp * z",            # BLOCK local declaration
                      "forall (i = 1:3, w(i) > 0.0_dp)",       # FORALL statement
                      "w = w - z - 1.0_dp",                    # ELSEWHERE branch
                      "if (w(k) + z + total > 10.0_dp) exit",  # IF statement in a named DO
                      "z = q%re + q%im + abs(q)",              # complex parts, abs of complex
                      "20 a(1) = a(1) + e + 1.0d0",            # labelled statement
                      "t = t + t + 1.0d0"):                    # host association in a program
        assert _line_of(result, statement) in edited, statement
    unresolved = sorted(f.message for f in result.findings if "unresolved" in f.message)
    assert len(unresolved) == 2
    assert "'norm(w)'" in unresolved[1] and "'c(i)%area()'" in unresolved[0]


def test_untouchable_fixture_proposes_nothing():
    text = (FIXTURES / "chains" / "untouchable.f90").read_text()
    result = rewrite_text(text)
    assert result.problems == () and result.edits == () and result.text == text
