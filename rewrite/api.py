"""The one entry point that the command line, editors and tests use.

``rewrite_text`` turns one source text into a ``Result``: the rewritten text, the edits (each
marked bit-for-bit or answer-changing), the findings (reported, not edited) and the problems
(errors: the text is then returned unchanged). ``rewrite_paths`` does the same for files and
directories, resolving USE between the Fortran files of one batch and auditing the build files
found there (``audit_build_text``: results with findings only, never written), and
``write_result`` puts a result on disk atomically.
"""
from __future__ import annotations

import bisect
import os
import re
import stat
import tempfile
from dataclasses import dataclass, field, replace
from pathlib import Path

from . import parallel, planner
from .config import DEFAULT, Options
from .edits import Edit, Finding, Problem
from .ir import Span
from .python import frontend as python_frontend
from .python.render import PythonSpelling
from .python.render import render as python_render
from .python.segments import line_starts
from .fortran.source import FIXED_FORM_SUFFIXES, FREE_FORM_SUFFIXES, code_length, physical_lines


@dataclass(frozen=True)
class Result:
    path: str
    original: str
    text: str
    edits: tuple[Edit, ...] = ()
    findings: tuple[Finding, ...] = ()
    problems: tuple[Problem, ...] = ()
    notice: str = ""  # set when the file was skipped
    data: bytes | None = field(default=None, repr=False)  # the bytes read, for the write check

    @property
    def changed(self) -> bool:
        return not self.problems and self.text != self.original


class _Lines:
    def __init__(self, text: str, starts: list[int] | None = None):
        self.starts = starts or [line.start for line in physical_lines(text)] or [0]

    def position(self, offset: int) -> tuple[int, int]:
        index = bisect.bisect_right(self.starts, offset) - 1
        return index + 1, offset - self.starts[index] + 1


def _line_problems(text: str, options: Options) -> list[Problem]:
    if options.line_length <= 0:
        return []
    problems = []
    for line in physical_lines(text):
        if line.text.startswith("#"):
            continue
        length = code_length(line.text)[0]
        if length > options.line_length:
            problems.append(Problem(line.number, f"line is {length} characters long, over the limit of "
                                                 f"{options.line_length} (set line-length to allow longer lines)"))
    return problems


def rewrite_text(text: str, language: str = "fortran", options: Options | None = None,
                 path: str = "<text>", known_modules: dict | None = None) -> Result:
    options = options or DEFAULT
    if language == "python":
        return _rewrite_python(text, options, path)
    if language != "fortran":
        raise ValueError(f"unknown language {language!r}")
    from .fortran import frontend  # imported here: a Python-only run does not pay for fparser
    from .fortran.render import FortranSpelling, render
    problems = _line_problems(text, options)
    if problems:
        return Result(path, text, text, problems=tuple(problems))
    analysed = frontend.analyse(text, known_modules)
    if analysed.problems:
        return Result(path, text, text, findings=tuple(analysed.findings), problems=tuple(analysed.problems))
    edits, findings = planner.plan(analysed.sites, text, options, FortranSpelling(text))
    edits = [e for e in edits if e.effect in options.effects]
    new_text, refused = render(text, edits, options.line_length)
    findings = list(analysed.findings) + findings
    for edit in refused:
        findings.append(Finding(edit.span, edit.rule, f"not edited: {edit.after} would not fit within "
                                                      f"{options.line_length} columns"))
    edits = [e for e in edits if e not in refused]
    return _placed(path, text, new_text, edits, findings)


def _rewrite_python(text: str, options: Options, path: str) -> Result:
    analysed = python_frontend.analyse(text, frozenset(name.rpartition(".")[2] for name in options.guard_functions))
    if analysed.problems:
        return Result(path, text, text, problems=tuple(analysed.problems))
    if analysed.skipped:
        return Result(path, text, text)
    edits, findings = planner.plan(analysed.sites, text, options, PythonSpelling(text))
    edits = [e for e in edits if e.effect in options.effects]
    return _placed(path, text, python_render(text, edits), edits, list(analysed.findings) + findings,
                   line_starts(text))  # Python counts a lone CR as a line end too


def _placed(path: str, text: str, new_text: str, edits: list[Edit], findings: list[Finding],
            starts: list[int] | None = None) -> Result:
    """The result, with line and column on every edit and finding."""
    lines = _Lines(text, starts)
    placed_edits = tuple(sorted((replace(e, line=lines.position(e.span.start)[0],
                                         column=lines.position(e.span.start)[1]) for e in edits),
                                key=lambda e: (e.span.start, e.span.end)))
    placed_findings = tuple(sorted((replace(f, line=lines.position(f.span.start)[0],
                                            column=lines.position(f.span.start)[1]) for f in findings),
                                   key=lambda f: (f.span.start, f.rule)))
    return Result(path, text, new_text, placed_edits, placed_findings)


# -- files -----------------------------------------------------------------------------------
def decode(data: bytes) -> str:
    """Bytes to text without loss: invalid UTF-8 bytes survive as surrogates."""
    return data.decode("utf-8", "surrogateescape")


def encode(text: str) -> bytes:
    return text.encode("utf-8", "surrogateescape")


def _read(path: Path) -> tuple[bytes | None, Problem | None]:
    try:
        data = path.read_bytes()
    except OSError as error:
        return None, Problem(0, f"cannot read: {error.strerror or error}")
    if b"\x00" in data:
        return data, Problem(1, "binary file (contains NUL bytes): not processed")
    return data, None


def language_of(path: Path) -> str | None:
    if path.suffix in FREE_FORM_SUFFIXES:
        return "fortran"
    if path.suffix == ".py":
        return "python"
    return None


def _first_line(path: Path) -> str:
    try:
        with path.open("rb") as handle:
            return handle.readline(200).decode("utf-8", "replace")
    except OSError:
        return ""


def is_build_file(path: Path) -> bool:
    """Makefiles, CMake, fpm.toml, compile_commands.json and shell build scripts (rewrite.build)."""
    from .build import is_build_file as by_name
    return by_name(path.name, _first_line(path) if not path.suffix else "")


def collect(paths: list[str], options: Options) -> tuple[list[Path], list[Result], list[Path]]:
    """Source files to process from the given paths, notices for those skipped, and the build
    files to audit (only when the audit's build check runs)."""
    files: list[Path] = []
    skipped: list[Result] = []
    builds: list[Path] = []
    audit_builds = "audit" in options.rules and "build" in options.audit_checks
    for given in paths:
        path = Path(given)
        if path.is_dir():
            for root, dirs, names in os.walk(path):
                dirs[:] = sorted(d for d in dirs if not d.startswith("."))
                for name in sorted(names):
                    candidate = Path(root) / name
                    if options.excluded(str(candidate)):
                        continue
                    if language_of(candidate):
                        files.append(candidate)
                    elif candidate.suffix in FIXED_FORM_SUFFIXES:
                        skipped.append(Result(str(candidate), "", "", notice="fixed-form source is not "
                                              "supported yet: skipped"))
                    elif audit_builds and is_build_file(candidate):
                        builds.append(candidate)
        elif path.exists():
            if language_of(path):
                files.append(path)
            elif path.suffix in FIXED_FORM_SUFFIXES:
                skipped.append(Result(str(path), "", "", notice="fixed-form source is not supported yet: skipped"))
            elif is_build_file(path):
                if audit_builds:
                    builds.append(path)
                else:
                    skipped.append(Result(str(path), "", "", notice="a build file, and the audit's build check "
                                          "is off: skipped"))
            else:
                skipped.append(Result(str(path), "", "", notice="not a free-form Fortran, Python or build file: "
                                      "skipped"))
        else:
            skipped.append(Result(str(path), "", "", problems=(Problem(0, "no such file or directory"),)))
    return files, skipped, builds


def audit_build_text(text: str, path: str = "Makefile", libm_in_loops: bool | None = None) -> Result:
    """The build audit of one build file's text, as a Result with findings (rule "build")."""
    from .build import BuildFileError, scan_build_text
    try:
        found = scan_build_text(Path(path).name, text, libm_in_loops)
    except BuildFileError as error:
        return Result(path, text, text, problems=(Problem(error.line, f"{error.message}: not audited"),))
    findings = [Finding(Span(f.start, f.end), "build", f.message, f.severity, kind="build") for f in found]
    return _placed(path, text, text, [], findings)


def _libm_in_loops(results: list[Result]) -> bool | None:
    """Whether the Fortran of the run calls libm in vectorisable loops (None: no Fortran in the run)."""
    fortran = [r for r in results if language_of(Path(r.path)) == "fortran" and not r.problems]
    if not fortran:
        return None
    return any(f.kind == "libm-loop" for r in fortran for f in r.findings)


def _rewrite_file(item: tuple, batch: tuple) -> Result:
    """One file of a batch; errors become problems (a bug of ours must not stop the batch)."""
    path, data, problem = item
    options, modules = batch
    if problem is not None:
        return Result(str(path), "", "", problems=(problem,), data=data)
    text = decode(data)
    try:
        result = rewrite_text(text, language_of(path), options.for_path(str(path)), str(path), modules)
    except RecursionError:
        result = Result(str(path), text, text, problems=(Problem(1, "expression nesting too deep"),))
    except (Exception, SystemExit) as error:  # fparser can exit on odd input: the file is left as it is
        result = Result(str(path), text, text,
                        problems=(Problem(1, f"internal error, file left as it is: {error!r}"),))
    return replace(result, data=data)


def rewrite_paths(paths: list[str], options: Options | None = None) -> list[Result]:
    """Results for every file under ``paths``, in order; a bad file never stops the batch."""
    options = options or DEFAULT
    files, results, builds = collect(paths, options)
    contents: list[tuple[Path, bytes | None, Problem | None]] = [(f, *_read(f)) for f in files]
    fortran = [(path, data) for path, data, problem in contents
               if problem is None and data is not None and language_of(path) == "fortran"]
    modules = _batch_modules([decode(data) for _path, data in fortran], [path for path, _data in fortran], options)
    results.extend(parallel.ordered_map(_rewrite_file, contents, (options, modules), options.jobs))
    libm_in_loops = _libm_in_loops(results)
    for path in builds:
        data, problem = _read(path)
        if problem is not None:
            results.append(Result(str(path), "", "", problems=(problem,), data=data))
            continue
        text = decode(data)
        try:
            result = audit_build_text(text, str(path), libm_in_loops)
        except Exception as error:  # a bug of ours must not stop the batch
            result = Result(str(path), text, text, problems=(Problem(1, f"internal error, not audited: {error!r}"),))
        results.append(replace(result, data=data))
    return results


_MODULE_LINE = re.compile(r"^[ \t]*module[ \t]+([a-z][a-z0-9_]*)[ \t]*(?:!.*)?$", re.IGNORECASE | re.MULTILINE)
_USE_LINE = re.compile(r"^[ \t]*use\b(?:[ \t]*,[ \t]*(?:non_)?intrinsic)?[ \t]*(?:::)?[ \t]*([a-z][a-z0-9_]*)",
                       re.IGNORECASE | re.MULTILINE)


def _modules_of(text: str) -> dict:
    from .fortran import frontend
    try:
        return frontend.collect_modules(text)
    except Exception:  # a file that trips the declaration pass is reported when it is rewritten
        return {}


def _batch_modules(texts: list[str], paths: list[Path], options: Options) -> dict:
    """Modules that the files of a run can USE: those they define, and those found in the
    files' own directories and the configured module path."""
    defined = {name.lower() for text in texts for name in _MODULE_LINE.findall(text)}
    used = {name.lower() for text in texts for name in _USE_LINE.findall(text)}
    modules: dict = {}
    if len(texts) > 1:
        for text in texts:
            modules.update(_modules_of(text))
    missing = used - defined
    if not missing:
        return modules
    seen = {path.resolve() for path in paths}
    candidates: list[Path] = []
    for directory in dict.fromkeys([path.parent for path in paths]):
        candidates.extend(sorted(p for p in directory.iterdir() if language_of(p) == "fortran" and p.is_file()))
    for directory in options.module_path:
        for root, dirs, names in os.walk(directory):
            dirs[:] = sorted(d for d in dirs if not d.startswith("."))
            candidates.extend(Path(root) / n for n in sorted(names) if language_of(Path(root) / n) == "fortran")
    for candidate in candidates:
        if not missing:
            break
        if candidate.resolve() in seen:
            continue
        seen.add(candidate.resolve())
        data, problem = _read(candidate)
        if problem is not None or data is None:
            continue
        text = decode(data)
        if not {n.lower() for n in _MODULE_LINE.findall(text)} & missing:
            continue
        found = _modules_of(text)
        modules.update(found)
        defined |= set(found)
        missing = (missing | {n.lower() for n in _USE_LINE.findall(text)}) - defined
    return modules


class WriteError(OSError):
    pass


def write_result(result: Result) -> bool:
    """Write a changed result in place, atomically (temporary file + rename), keeping the
    file's permissions. Refuses when the file changed since it was read. True if written."""
    if not result.changed:
        return False
    path = Path(result.path)
    current = path.read_bytes()
    if result.data is not None and current != result.data:
        raise WriteError(f"{path}: changed on disk while it was being processed; not written")
    mode = stat.S_IMODE(path.stat().st_mode)
    descriptor, temporary = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".samebits", dir=path.parent)
    try:
        with os.fdopen(descriptor, "wb") as handle:
            handle.write(encode(result.text))
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(temporary, mode)
        os.replace(temporary, path)
    except BaseException:
        if os.path.exists(temporary):
            os.unlink(temporary)
        raise
    return True


def write_runtime(language: str, directory: Path) -> Path:
    """Write the runtime module for ``language`` into ``directory`` (atomically)."""
    from importlib import resources

    if language != "fortran":
        raise ValueError(f"no runtime for {language!r}")
    data = resources.files("rewrite.runtime").joinpath("fortran/samebits_runtime.f90").read_bytes()
    directory.mkdir(parents=True, exist_ok=True)
    target = directory / "samebits_runtime.f90"
    descriptor, temporary = tempfile.mkstemp(prefix=".samebits_runtime.", dir=directory)
    with os.fdopen(descriptor, "wb") as handle:
        handle.write(data)
    os.chmod(temporary, 0o644)
    os.replace(temporary, target)
    return target
