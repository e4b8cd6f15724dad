"""Which files are build files, and of which kind.

| kind   | names                                                                  |
|--------|------------------------------------------------------------------------|
| make   | Makefile, makefile, GNUmakefile, Makefile.* (Makefile.in, .am, .gnu),  |
|        | *.mk, *.make                                                           |
| cmake  | CMakeLists.txt, *.cmake                                                |
| fpm    | fpm.toml                                                               |
| compdb | compile_commands.json                                                  |
| shell  | *.sh, *.bash, configure.ac (its shell snippets), and any file whose   |
|        | first line is a sh/bash/dash/ksh/zsh shebang (build, compile, ...)     |

Decisions: an extensionless ``build`` or ``compile`` is a build file only with a shell shebang
(without one its language is unknown); ``configure.ac`` is read as shell, since the flags it sets
are shell assignments between m4 macros; meson, SCons and Bazel files are not read.
"""
from __future__ import annotations

import re

MAKE, CMAKE, FPM, COMPDB, SHELL = "make", "cmake", "fpm", "compdb", "shell"
KINDS = (MAKE, CMAKE, FPM, COMPDB, SHELL)

_SHEBANG = re.compile(r"#!\s*(?:\S*/)?(?:env\s+(?:-\S+\s+)*)?(?:\S*/)?(?:sh|bash|dash|ksh|zsh|ash)\b")


def kind_of(name: str, first_line: str = "") -> str | None:
    """The kind of build file ``name`` is (its first line decides for shebang scripts), or None."""
    base = name.replace("\\", "/").rsplit("/", 1)[-1]
    lower = base.lower()
    if base in ("Makefile", "makefile", "GNUmakefile") or base.startswith(("Makefile.", "makefile.")) \
            or lower.endswith((".mk", ".make")):
        return MAKE
    if base == "CMakeLists.txt" or lower.endswith(".cmake"):
        return CMAKE
    if base == "fpm.toml":
        return FPM
    if base == "compile_commands.json":
        return COMPDB
    if lower.endswith((".sh", ".bash")) or base == "configure.ac":
        return SHELL
    if _SHEBANG.match(first_line.lstrip("\ufeff")):
        return SHELL
    return None


def is_build_file(name: str, first_line: str = "") -> bool:
    """Whether the audit reads ``name`` (with ``first_line`` for scripts known by their shebang)."""
    return kind_of(name, first_line) is not None
