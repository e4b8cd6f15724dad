"""The fixture sources, rewritten, still compile, and a fixture program gives the same output.

Every free-form Fortran file under ``fixtures/`` (except ``fixtures/bad/``,
which holds files the tool must refuse) is globbed at test time, so new
fixtures are picked up.  Each top-level fixture folder is one set of files
(its modules may ``use`` each other); files directly under ``fixtures/`` form
a set of their own.
"""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path

import pytest

from rewrite.config import Options
from rewrite.edits import BIT_FOR_BIT
from rewrite.api import write_runtime
from rewrite.api import rewrite_paths, rewrite_text
from rewrite.verify.gfortran import check_syntax
from rewrite.verify.textdiff import classify_insertions

ROOT = Path(__file__).resolve().parents[2]
FIXTURES = ROOT / "fixtures"
FREE_FORM = {".f90", ".f95", ".f03", ".f08", ".F90", ".F95", ".F03", ".F08"}
EXCLUDED = {"bad"}
BUILD_ARTIFACTS = {".mod", ".smod", ".o"}


def fixture_sets() -> dict[str, list[Path]]:
    sets: dict[str, list[Path]] = {}
    if not FIXTURES.is_dir():
        return sets
    for path in sorted(FIXTURES.rglob("*")):
        if not path.is_file() or path.suffix not in FREE_FORM:
            continue
        rel = path.relative_to(FIXTURES)
        if rel.parts[0] in EXCLUDED:
            continue
        key = rel.parts[0] if len(rel.parts) > 1 else "."
        sets.setdefault(key, []).append(path)
    return sets


SETS = fixture_sets()


def copy_set(name: str, dest: Path) -> list[Path]:
    """Copy one fixture folder (without build leftovers such as stale .mod files)."""
    src = FIXTURES if name == "." else FIXTURES / name
    dest.mkdir(parents=True, exist_ok=True)
    copied = []
    for path in sorted(src.rglob("*") if name != "." else src.iterdir()):
        if not path.is_file() or path.suffix in BUILD_ARTIFACTS:
            continue
        rel = path.relative_to(src)
        if name == "." and rel.parts[0] in EXCLUDED:
            continue
        target = dest / rel
        target.parent.mkdir(parents=True, exist_ok=True)
        shutil.copy2(path, target)
        if path.suffix in FREE_FORM:
            copied.append(target)
    return copied


def failures(results) -> str:
    return "\n".join(f"{r.path}:\n{r.output}" for r in results if not r.ok)


@pytest.mark.skipif(not SETS, reason="no free-form Fortran fixtures under fixtures/")
@pytest.mark.parametrize("name", sorted(SETS))
def test_rewritten_fixtures_compile(name, tmp_path, gfortran):
    originals = copy_set(name, tmp_path / "original")
    assert originals

    # sanity: the set as written compiles
    # outside check: gfortran 12 -fsyntax-only, modules before their users
    before = check_syntax(originals, compiler=gfortran)
    assert all(r.ok for r in before), "original fixtures do not compile:\n" + failures(before)

    rewritten_dir = tmp_path / "rewritten"
    shutil.copytree(tmp_path / "original", rewritten_dir)
    rewritten = []
    for path in originals:
        text = path.read_text(encoding="utf-8", errors="surrogateescape")
        result = rewrite_text(text, language="fortran", path=str(path))
        assert not result.problems, (path.name, result.problems)
        assert all(ed.rule != "chain" or ed.effect == "bit-for-bit" for ed in result.edits)
        # the bit-for-bit edits alone insert parentheses (and line breaks) and nothing else
        pinned = rewrite_text(text, language="fortran", options=Options(effects=(BIT_FOR_BIT,)), path=str(path))
        if pinned.text != text:
            found = classify_insertions(text, pinned.text)
            assert found is not None, f"{path.name}: more than parentheses and line breaks changed"
        target = rewritten_dir / path.relative_to(tmp_path / "original")
        target.write_text(result.text, encoding="utf-8", errors="surrogateescape")
        rewritten.append(target)

        # a second pass proposes nothing
        again = rewrite_text(result.text, language="fortran", path=str(target))
        assert not again.problems, (path.name, again.problems)
        assert again.text == result.text and not again.edits, (
            f"{path.name}: second pass still edits: {[e.after for e in again.edits]}"
        )

    if any("use samebits_runtime" in p.read_text(errors="replace") for p in rewritten):
        # the rewrite calls the bundled runtime: compile it with the set
        rewritten.append(write_runtime("fortran", rewritten_dir))
    after = check_syntax(rewritten, compiler=gfortran)
    assert all(r.ok for r in after), "rewritten fixtures do not compile:\n" + failures(after)


BUILD_SCRIPTS = sorted(
    p for p in FIXTURES.glob("*/build.sh") if p.parent.name not in EXCLUDED
) if FIXTURES.is_dir() else []


def run_build(script: Path, src: Path, out: Path, gfortran: str, flags: str) -> str:
    env = dict(os.environ, FC=gfortran, FFLAGS=flags, LC_ALL="C")
    proc = subprocess.run(
        ["sh", str(script), str(src), str(out)],
        capture_output=True, text=True, env=env, timeout=300,
    )
    assert proc.returncode == 0, f"{script} {src} failed:\n{proc.stdout}\n{proc.stderr}"
    return proc.stdout


@pytest.mark.skipif(not BUILD_SCRIPTS, reason="no fixture folder has a build.sh")
@pytest.mark.parametrize("script", BUILD_SCRIPTS, ids=lambda p: p.parent.name)
def test_rewritten_fixture_program_prints_the_same(script, tmp_path, gfortran):
    """Build and run a fixture program, original and rewritten, at -O0: same output.

    The files are rewritten together (``rewrite_paths``, which resolves
    ``use`` between them), as the command line does for a folder.
    """
    name = script.parent.name
    copy_set(name, tmp_path / "original")
    shutil.copytree(tmp_path / "original", tmp_path / "rewritten")
    # bit-for-bit edits only: answer-changing ones (powers) may change the printed digits
    results = rewrite_paths([str(tmp_path / "rewritten")], Options(effects=(BIT_FOR_BIT,)))
    assert results and not any(r.problems for r in results), [
        (r.path, r.problems) for r in results if r.problems
    ]
    changed = 0
    for r in results:
        if r.changed:
            Path(r.path).write_text(r.text, encoding="utf-8", errors="surrogateescape")
            changed += 1
    assert changed, f"nothing in fixtures/{name} was rewritten"
    # idempotent over the whole set too
    assert not any(r.edits for r in rewrite_paths([str(tmp_path / "rewritten")], Options(effects=(BIT_FOR_BIT,))))

    # outside check: gfortran 12 at -O0 keeps the written order, so the
    # bit-for-bit edits must leave every printed digit as it was
    orig = run_build(script, tmp_path / "original", tmp_path / "b0", gfortran, "-O0")
    new = run_build(script, tmp_path / "rewritten", tmp_path / "b1", gfortran, "-O0")
    assert orig.strip(), "the fixture program printed nothing"
    assert new == orig
