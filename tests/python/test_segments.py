"""The outline (top-level definitions without candidates cut down to their header) must not change
anything the front end finds: same edits, same findings, same rewritten text as when libcst sees
the whole file. Checked on random modules made of a pool of top-level statements."""
import ast

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rewrite.api import rewrite_text
from libcst.metadata import ByteSpanPositionProvider, MetadataWrapper

from rewrite.python import frontend, prescan, segments

HEADER = "import numpy as np\nimport numpy.typing as npt\nfrom functools import lru_cache\n"

STATEMENTS = [
    # definitions with candidates
    "def flux(a: float, b: float, c: float) -> float:\n    return a + b + c\n",
    "def cube(x: float) -> float:\n    \"\"\"Cube.\"\"\"\n    return x**3\n",
    "def total(v: npt.NDArray[np.float64]) -> float:\n    return np.sum(v)\n",
    "@lru_cache(maxsize=None)\ndef low(x: float, y: float) -> float:\n    return min(x, y)\n",
    "class Budget:\n    rate: float = 2.0\n\n    def net(self, a: float, b: float) -> float:\n"
    "        return a - b - self.rate * a * b\n",
    "async def later(a: float, b: float) -> float:\n    return a * b * a\n",
    # definitions without candidates (cut down), some whose header the others need
    "def area() -> float:\n    return 2.0\n",
    "def name_of(x) -> str:\n    # a comment\n    return 'n' + str(x) + '.nc'\n",
    "@property\ndef shape(\n    rows: int,\n    cols: int = 3,\n) -> tuple:\n    return (rows, cols)\n",
    "class Empty:\n    \"\"\"Nothing.\"\"\"\n\n    def label(self):\n        return 'empty'\n",
    "def one_line(): return 1\n",
    "def last(x): return x; y = 2\n",
    "def sum(values):\n    return 0\n",  # rebinds the built-in sum for the whole module
    "def Ünïcode(x: float) -> float:\n    return x  # é\n",
    # module-level statements
    "RATE = 0.5\n",
    "q = area() + area() + RATE\n",
    "w = sum([1.0, 2.0])\n",
    "if __name__ == '__main__':\n    print(flux(1.0, 2.0, 3.0) + cube(2.0) + 1.0)\n",
    "# a lone comment\n\n",
]


def _byte_positions(module):
    """libcst's public provider: UTF-8 byte spans after a full metadata visit."""
    return MetadataWrapper(module, unsafe_skip_copy=True).resolve(ByteSpanPositionProvider), True


def _run(text: str, whole: bool, public_provider: bool = False) -> tuple:
    with pytest.MonkeyPatch.context() as patch:
        if whole:
            patch.setattr(segments, "outline", lambda source, tree, flagged: segments.whole(source))
        if public_provider:
            patch.setattr(frontend, "_positions", _byte_positions)
        result = rewrite_text(text, language="python")
    return (result.text, [(e.rule, e.span, e.line, e.after, e.reason) for e in result.edits],
            [(f.span, f.line, f.rule, f.message) for f in result.findings],
            [(p.line, p.message) for p in result.problems])


@settings(max_examples=60, deadline=None)
@given(st.lists(st.sampled_from(STATEMENTS), min_size=1, max_size=8), st.sampled_from(["\n", "\r\n"]),
       st.booleans())
def test_outline_changes_nothing_the_front_end_finds(statements, newline, final_newline):
    text = HEADER + "\n".join(statements)
    if not final_newline:
        text = text.rstrip("\n")
    text = text.replace("\n", newline)
    ast.parse(text)  # outside check: the generated module is valid Python (CPython's own parser)
    assert _run(text, False) == _run(text, True)


@settings(max_examples=30, deadline=None)
@given(st.lists(st.sampled_from(STATEMENTS), min_size=1, max_size=6))
def test_own_span_pass_equals_libcsts_byte_span_provider(statements):
    # outside check: libcst's public ByteSpanPositionProvider (byte offsets, converted back to
    # characters) must place every edit and finding where the front end's own span pass does
    text = HEADER + "\n".join(statements)
    assert _run(text, False) == _run(text, False, public_provider=True)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.sampled_from(STATEMENTS), min_size=1, max_size=8))
def test_outline_parses_and_maps_kept_text_back(statements):
    text = HEADER + "\n".join(statements)
    scanned = prescan.scan(text)
    outline = segments.outline(text, scanned.tree, scanned.flagged)
    ast.parse(outline.text)  # outside check: CPython's parser accepts the outline
    for piece in outline.pieces:
        if not piece.stub:
            assert outline.text[piece.outline_start:piece.outline_start + piece.length] == \
                text[piece.original_start:piece.original_start + piece.length]
    # every flagged statement is in the outline as written
    for index in scanned.flagged:
        source = ast.get_source_segment(text, scanned.tree.body[index])
        assert source in outline.text


def test_definitions_without_candidates_are_cut_down():
    text = HEADER + STATEMENTS[0] + "\n" + STATEMENTS[7] + "\n" + STATEMENTS[9]
    scanned = prescan.scan(text)
    outline = segments.outline(text, scanned.tree, scanned.flagged)
    assert outline.shortened
    assert "return a + b + c" in outline.text
    assert "return 'n' + str(x)" not in outline.text and "return 'empty'" not in outline.text
    assert "def name_of(x) -> str:" in outline.text and "class Empty:" in outline.text


def test_chain_inside_a_call_is_a_candidate():
    # a call's own parenthesis right before the chain is not a parenthesis around its left operand
    assert prescan.scan("print(a + b + c)\n").flagged == {0}
    assert not prescan.scan("print((a + b) + c)\n").flagged
