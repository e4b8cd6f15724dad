"""The build audit: compiler options in build files that let the compiler ignore parentheses, delete
``x + 0.0`` guards, reassociate sums, fuse multiply-adds or swap in a vector math library.

Public entry points:

- ``scan_build_text(name, text, libm_in_loops=None) -> list[BuildFinding]``: findings of one
  build file's text, sorted by offset. ``name`` says the kind (``Makefile``, ``*.mk``,
  ``CMakeLists.txt``, ``*.cmake``, ``fpm.toml``, ``compile_commands.json``, shell scripts; see
  ``files.py``); a name that is no build file gives ``[]``. ``libm_in_loops`` tells whether the
  code calls sin/exp/log/pow in loops: ``None`` (unknown) reports GCC vectorisation as a note,
  ``True`` as a warning, ``False`` not at all. Raises ``BuildFileError(line, message)`` when
  the text cannot be read as its kind: malformed JSON or TOML, a compilation database that is no
  array, binary content (a NUL character). Nothing else raises: odd text (CRLF, tabs, very long
  lines, stray quotes) is read as well as it can be.
- ``scan_build_file(path, libm_in_loops=None) -> BuildScan``: reads the file; undecodable bytes
  (not UTF-8), binary content and malformed JSON/TOML give no findings and one ``Problem``
  (``rewrite.edits.Problem``: line, message). Never raises for a readable path.
- ``is_build_file(name, first_line="") -> bool``.
- ``reproducible_flags(flags, compiler="gfortran", libm_in_loops=True) -> list[str]``
  (``flags.py``).

The flag table and its sources are in ``flags.py``.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from ..edits import Problem
from . import cmake, compdb, fpm, makefile, shell
from .audit import BuildFileError, BuildFinding, audit
from .files import CMAKE, COMPDB, FPM, MAKE, SHELL, is_build_file, kind_of
from .flags import RULES, Rule, reproducible_flags

__all__ = ["BuildFileError", "BuildFinding", "BuildScan", "RULES", "Rule", "is_build_file", "kind_of",
           "reproducible_flags", "scan_build_file", "scan_build_text"]

_READERS = {MAKE: makefile.groups, CMAKE: cmake.groups, FPM: fpm.groups, COMPDB: compdb.groups,
            SHELL: shell.groups}


@dataclass(frozen=True)
class BuildScan:
    """The audit of one file: findings, or the problems that kept it from being read."""

    path: str
    findings: tuple[BuildFinding, ...]
    problems: tuple[Problem, ...] = ()


def scan_build_text(name: str, text: str, libm_in_loops: bool | None = None) -> list[BuildFinding]:
    """Findings of one build file's text (see the module docstring)."""
    first_line = text.split("\n", 1)[0]
    kind = kind_of(name, first_line)
    if kind is None:
        return []
    if "\x00" in text:
        raise BuildFileError(text.count("\n", 0, text.index("\x00")) + 1, "binary content (a NUL character)")
    if text.startswith("\ufeff"):  # a byte order mark reads as a space: offsets stay the text's
        text = " " + text[1:]
    return audit(text, _READERS[kind](text), libm_in_loops)


def scan_build_file(path, libm_in_loops: bool | None = None) -> BuildScan:
    """Read and audit one file; problems instead of exceptions (see the module docstring)."""
    path = Path(path)
    data = path.read_bytes()
    if b"\x00" in data:
        line = data.count(b"\n", 0, data.index(b"\x00")) + 1
        return BuildScan(str(path), (), (Problem(line, "binary file (a NUL byte): not read"),))
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as error:
        line = data.count(b"\n", 0, error.start) + 1
        return BuildScan(str(path), (), (Problem(line, f"not UTF-8 (byte {error.start}): not read"),))
    try:
        return BuildScan(str(path), tuple(scan_build_text(path.name, text, libm_in_loops)))
    except BuildFileError as error:
        return BuildScan(str(path), (), (Problem(error.line, error.message),))
