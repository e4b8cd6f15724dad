"""Option groups of an fpm manifest (``fpm.toml``).

The fpm manifest reference (Fortran package manager, manifest specification, "Compiler flags
profiles") puts options in string values named ``flags``, ``c-flags``, ``cxx-flags`` and
``link-time-flags`` of ``[profiles.<profile>.<compiler>.<os>]`` tables (profile, compiler and OS
may each be left out), and in the ``files`` subtable of a profile (file name = flags). Keys of
that name are read wherever they stand, so newer tables with the same keys count too.

The compiler is the profile's compiler key (``gfortran``, ``ifx``, ``nvfortran`` ...); without
one fpm uses its default compiler, gfortran (fpm source, fpm_manifest_profile:
DEFAULT_COMPILER). The scope is the profile up to its compiler key, and the compiler key is
the word that compiler defaults are reported at. ``tomllib`` checks the document first:
malformed TOML raises ``BuildFileError``.
"""
from __future__ import annotations

import re
import tomllib

from .audit import BuildFileError, read_guarded
from .compilers import CRAY, FLANG, GNU, INTEL, NAG, NVIDIA, UNKNOWN
from .tokens import OptionGroup, Word
from .toml_text import strings

FLAG_KEYS = frozenset({"flags", "c-flags", "cxx-flags", "link-time-flags"})
FPM_COMPILERS = {
    "gfortran": GNU, "caf": GNU, "ifort": INTEL, "ifx": INTEL, "nvfortran": NVIDIA, "nvfrotran": NVIDIA,
    "pgfortran": NVIDIA, "flang": FLANG, "flang-new": FLANG, "nagfor": NAG, "crayftn": CRAY,
    "lfortran": UNKNOWN, "lfc": UNKNOWN, "xlf90": UNKNOWN, "ftn95": UNKNOWN, "f95": UNKNOWN,
}


def parse(text: str) -> dict:
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        m = re.search(r"line (\d+)", str(error))
        raise BuildFileError(int(m.group(1)) if m else 1, f"malformed TOML: {error}") from None


def groups(text: str) -> list[OptionGroup]:
    return read_guarded(_groups, text)


def _groups(text: str) -> list[OptionGroup]:
    parse(text)
    out: list[OptionGroup] = []
    for path, decoded in strings(text):
        keys = [k.text for k in path]
        if not keys:
            continue
        in_files = "files" in keys[:-1] and "profiles" in keys
        if keys[-1] not in FLAG_KEYS and not in_files:
            continue
        compiler = next((k for k in path[:-1] if k.text in FPM_COMPILERS), None)
        family = FPM_COMPILERS[compiler.text] if compiler else GNU
        if compiler is not None:
            scope_keys = keys[:keys.index(compiler.text) + 1]
        else:
            scope_keys = keys[:keys.index("files")] if in_files else keys[:-1]
        invoker = Word(compiler.text, compiler.start, compiler.end) if compiler is not None else None
        out.append(OptionGroup(tuple(decoded.words()), (family,), scope="/".join(scope_keys),
                               invoker=invoker if family != UNKNOWN else None,
                               invoker_family=family if invoker else None,
                               assumed=compiler.text if compiler is not None and family == UNKNOWN else ""))
    return out
