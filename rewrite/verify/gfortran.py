"""Drive gfortran for differential checks.

Everything here is a plain function of its arguments: no module-level state,
no caches.  Each build happens in a fresh temporary directory (or one the
caller passes) and data go in and out through binary files opened with
``access='stream', form='unformatted'``.  Stream files carry no record
markers, so the bytes NumPy writes are exactly the bytes Fortran reads, and
float64 results come back bit for bit (no decimal formatting on the way).

Main entry points
-----------------
``find_gfortran()``
    Locate the compiler (``None`` when it is missing).
``build_program(sources, flags)`` / ``run_program(exe)``
    Compile sources, each as its own compilation unit, link, run.
``evaluate_expressions(expressions, variables, inputs, flags)``
    Compile one program with one function per expression, feed it the rows
    of ``inputs`` read from a stream file at run time (so nothing can be
    constant-folded) and return the result bits as ``uint64``.
``check_syntax(files)``
    ``gfortran -fsyntax-only`` over a set of files in an order that satisfies
    ``use`` dependencies, returning the diagnostics per file.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Iterable, Sequence

if TYPE_CHECKING:  # NumPy is needed only by the data-exchange helpers
    import numpy as np

__all__ = [
    "CompileError",
    "Diagnostic",
    "GfortranMissing",
    "RunError",
    "SyntaxResult",
    "build_program",
    "check_syntax",
    "evaluate_expressions",
    "expression_program",
    "find_gfortran",
    "gfortran_version",
    "order_by_modules",
    "read_stream",
    "run_program",
    "write_stream",
]

#: Name of the environment variable that may point at a specific compiler.
COMPILER_ENV = "SAMEBITS_GFORTRAN"

#: Flags always given: no line-length limit (generated expressions can be
#: long) and one-line diagnostics that are easy to parse.
BASE_FLAGS = ("-ffree-line-length-none", "-fdiagnostics-plain-output")


class GfortranMissing(RuntimeError):
    """No gfortran executable could be found."""


class CompileError(RuntimeError):
    """A compile or link step failed; ``diagnostics`` holds the compiler's output."""

    def __init__(self, command: Sequence[str], returncode: int, diagnostics: str):
        self.command = list(command)
        self.returncode = returncode
        self.diagnostics = diagnostics
        super().__init__(
            f"{' '.join(self.command)} failed with status {returncode}:\n{diagnostics}"
        )


class RunError(RuntimeError):
    """A built program exited with a non-zero status."""

    def __init__(self, command: Sequence[str], returncode: int, output: str):
        self.command = list(command)
        self.returncode = returncode
        self.output = output
        super().__init__(f"{' '.join(self.command)} exited with {returncode}:\n{output}")


# --------------------------------------------------------------------------
# Finding the compiler
# --------------------------------------------------------------------------


def find_gfortran(explicit: str | None = None) -> str | None:
    """Return the path of a usable gfortran, or ``None``.

    Order: ``explicit``, then ``$SAMEBITS_GFORTRAN``, then ``gfortran`` on
    ``PATH``, then versioned names (``gfortran-14`` ... ``gfortran-9``).
    """
    candidates: list[str] = []
    if explicit:
        candidates.append(explicit)
    env = os.environ.get(COMPILER_ENV)
    if env:
        candidates.append(env)
    candidates.append("gfortran")
    candidates.extend(f"gfortran-{v}" for v in range(14, 8, -1))
    for name in candidates:
        found = shutil.which(name)
        if found:
            return found
    return None


def _require(compiler: str | None) -> str:
    found = find_gfortran(compiler)
    if found is None:
        raise GfortranMissing("gfortran not found (set $%s or put it on PATH)" % COMPILER_ENV)
    return found


def _env() -> dict[str, str]:
    """Environment for compiler runs: C locale so messages are plain ASCII."""
    env = dict(os.environ)
    env["LC_ALL"] = "C"
    env["LANG"] = "C"
    return env


def gfortran_version(compiler: str | None = None) -> str:
    """First line of ``gfortran --version``."""
    exe = _require(compiler)
    out = subprocess.run(
        [exe, "--version"], capture_output=True, text=True, env=_env(), check=True
    )
    return out.stdout.splitlines()[0].strip()


# --------------------------------------------------------------------------
# Stream files
# --------------------------------------------------------------------------


def write_stream(path: str | os.PathLike, *arrays: np.ndarray) -> None:
    """Write arrays back to back as raw native-endian bytes.

    A NumPy array in C order of shape ``(rows, cols)`` is read by Fortran as
    an array ``x(cols, rows)`` (column-major), i.e. ``x(:, i)`` is row ``i``.
    """
    import numpy as np

    with open(path, "wb") as fh:
        for arr in arrays:
            fh.write(np.ascontiguousarray(arr).tobytes(order="C"))


def read_stream(path: str | os.PathLike, dtype, shape: tuple[int, ...]) -> np.ndarray:
    """Read raw native-endian data written by Fortran stream I/O."""
    import numpy as np

    data = np.fromfile(path, dtype=dtype)
    expected = int(np.prod(shape))
    if data.size != expected:
        raise ValueError(f"{path}: expected {expected} items, found {data.size}")
    return data.reshape(shape)


# --------------------------------------------------------------------------
# Building and running
# --------------------------------------------------------------------------


def _run_compiler(cmd: Sequence[str], cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run(
        list(cmd), cwd=cwd, capture_output=True, text=True, env=_env()
    )


def build_program(
    sources: Sequence[tuple[str, str]],
    flags: Sequence[str] = (),
    workdir: str | os.PathLike | None = None,
    *,
    compiler: str | None = None,
    exe_name: str = "prog",
) -> Path:
    """Compile ``sources`` and link them into an executable; return its path.

    ``sources`` is a sequence of ``(file_name, text)`` written into
    ``workdir`` (a new temporary directory when ``None``; the caller then
    owns it, see :func:`evaluate_expressions` for a managed variant).  Each
    file is compiled with ``-c`` as its own compilation unit, in the order
    given (modules before their users), then all objects are linked with the
    same ``flags``.  Separate units matter: without link-time optimisation
    the compiler cannot inline or constant-propagate across them.

    Note that linking with ``-ffast-math`` also makes the program flush
    subnormal numbers to zero at start-up (GCC links ``crtfastmath.o``).
    """
    exe_c = _require(compiler)
    wd = Path(workdir).resolve() if workdir is not None else Path(tempfile.mkdtemp(prefix="samebits-"))
    wd.mkdir(parents=True, exist_ok=True)
    all_flags = [*BASE_FLAGS, *flags]
    objects = []
    for name, text in sources:
        src = wd / name
        src.write_text(text)
        obj = src.with_suffix(".o")
        cmd = [exe_c, *all_flags, "-J", str(wd), "-c", str(src), "-o", str(obj)]
        proc = _run_compiler(cmd, wd)
        if proc.returncode != 0:
            raise CompileError(cmd, proc.returncode, proc.stdout + proc.stderr)
        objects.append(str(obj))
    exe = wd / exe_name
    cmd = [exe_c, *all_flags, *objects, "-o", str(exe)]
    proc = _run_compiler(cmd, wd)
    if proc.returncode != 0:
        raise CompileError(cmd, proc.returncode, proc.stdout + proc.stderr)
    return exe


def run_program(
    exe: str | os.PathLike,
    args: Sequence[str] = (),
    *,
    cwd: str | os.PathLike | None = None,
    timeout: float = 120.0,
) -> subprocess.CompletedProcess:
    """Run a built program; raise :class:`RunError` on a non-zero exit."""
    exe = Path(exe)
    cmd = [str(exe), *args]
    proc = subprocess.run(
        cmd,
        cwd=cwd if cwd is not None else exe.parent,
        capture_output=True,
        text=True,
        timeout=timeout,
        env=_env(),
    )
    if proc.returncode != 0:
        raise RunError(cmd, proc.returncode, proc.stdout + proc.stderr)
    return proc


# --------------------------------------------------------------------------
# Expressions evaluated in one program
# --------------------------------------------------------------------------

_DECL = re.compile(r"^\s*([A-Za-z][A-Za-z0-9_]*)\s*(?:\(\s*([0-9]+)\s*\))?\s*$")


def _parse_variables(variables: Sequence[str]) -> list[tuple[str, int | None]]:
    """``["a", "v(4)"]`` -> ``[("a", None), ("v", 4)]`` (None = scalar)."""
    parsed = []
    seen = set()
    for var in variables:
        m = _DECL.match(var)
        if not m:
            raise ValueError(f"bad variable declaration {var!r}: use 'name' or 'name(n)'")
        name, size = m.group(1), m.group(2)
        if name.lower() in seen:
            raise ValueError(f"variable {name!r} given twice")
        seen.add(name.lower())
        parsed.append((name, int(size) if size is not None else None))
    return parsed


def _columns(parsed: Sequence[tuple[str, int | None]]) -> int:
    return sum(1 if size is None else size for _, size in parsed)


def expression_program(
    expressions: Sequence[str],
    variables: Sequence[str],
    *,
    kind: int = 8,
    module_name: str = "sb_exprs",
) -> tuple[str, str]:
    """Return ``(module_source, driver_source)`` evaluating ``expressions``.

    The module holds one function ``e00001``... per expression with every
    variable a dummy argument ``real(kind), intent(in)`` (``name(n)`` makes a
    rank-1 array of size ``n``).  The driver reads ``inputs.bin``::

        int64 nrows, int64 ncols, real(kind) x(ncols, nrows)

    calls every function on every row and writes ``outputs.bin``::

        real(kind) y(nexpr, nrows)
    """
    parsed = _parse_variables(variables)
    ncols = _columns(parsed)
    names = [name for name, _ in parsed]
    arglist = ", ".join(names)
    mod = [f"module {module_name}", "  implicit none", "contains"]
    for k, expr in enumerate(expressions, start=1):
        if "\n" in expr:
            raise ValueError("an expression must be one line")
        mod.append(f"  function e{k:05d}({arglist}) result(r)")
        scalars = [n for n, s in parsed if s is None]
        if scalars:
            mod.append(f"    real({kind}), intent(in) :: {', '.join(scalars)}")
        for n, s in parsed:
            if s is not None:
                mod.append(f"    real({kind}), intent(in) :: {n}({s})")
        mod.append(f"    real({kind}) :: r")
        mod.append(f"    r = {expr}")
        mod.append(f"  end function e{k:05d}")
    mod.append(f"end module {module_name}")

    # Actual arguments: column ranges of the current row.
    actuals = []
    col = 1
    for _, size in parsed:
        if size is None:
            actuals.append(f"x({col}, i)")
            col += 1
        else:
            actuals.append(f"x({col}:{col + size - 1}, i)")
            col += size
    call_args = ", ".join(actuals)
    nexpr = len(expressions)
    drv = [
        "program sb_driver",
        f"  use {module_name}",
        "  implicit none",
        "  integer(8) :: nrows, ncols, i",
        "  integer :: u",
        f"  real({kind}), allocatable :: x(:, :), y(:, :)",
        "  open(newunit=u, file='inputs.bin', access='stream', form='unformatted', &",
        "       status='old', action='read')",
        "  read(u) nrows, ncols",
        f"  if (ncols /= {ncols}_8) error stop 'column count does not match'",
        f"  allocate(x(ncols, nrows), y({max(nexpr, 1)}, nrows))",
        "  read(u) x",
        "  close(u)",
        "  do i = 1, nrows",
    ]
    for k in range(1, nexpr + 1):
        drv.append(f"    y({k}, i) = e{k:05d}({call_args})")
    drv += [
        "  end do",
        "  open(newunit=u, file='outputs.bin', access='stream', form='unformatted', &",
        "       status='replace', action='write')",
        f"  write(u) y(1:{nexpr}, :)",
        "  close(u)",
        "end program sb_driver",
    ]
    return "\n".join(mod) + "\n", "\n".join(drv) + "\n"


def evaluate_expressions(
    expressions: Sequence[str],
    variables: Sequence[str],
    inputs: np.ndarray,
    flags: Sequence[str] = ("-O0",),
    *,
    separate_unit: bool = True,
    compiler: str | None = None,
    workdir: str | os.PathLike | None = None,
    timeout: float = 120.0,
) -> np.ndarray:
    """Evaluate Fortran ``real(8)`` expressions on rows of inputs; return bits.

    ``variables`` names the dummy arguments (``"a"``, or ``"v(4)"`` for an
    array of four); ``inputs`` is a float64 array ``(rows, columns)`` whose
    columns are the variables in order, arrays taking one column per
    element.  The result is a ``uint64`` array ``(rows, len(expressions))``
    holding the raw bits of each result.

    The inputs reach the program only through a file read at run time, so
    the compiler cannot fold them.  With ``separate_unit=True`` (default)
    the functions and the driver loop are different compilation units: each
    expression is then compiled as scalar code, called once per row, and
    never inlined into (or vectorised with) the loop.  ``separate_unit=False``
    puts both in one file so that the optimiser may inline and vectorise.

    ``workdir``: build there (kept); default a temporary directory removed
    afterwards.
    """
    import numpy as np

    inputs = np.ascontiguousarray(inputs, dtype=np.float64)
    if inputs.ndim != 2:
        raise ValueError("inputs must be a 2-d array (rows x columns)")
    parsed = _parse_variables(variables)
    ncols = _columns(parsed)
    if inputs.shape[1] != ncols:
        raise ValueError(f"inputs have {inputs.shape[1]} columns, variables need {ncols}")
    nrows = inputs.shape[0]
    nexpr = len(expressions)
    if nexpr == 0:
        return np.zeros((nrows, 0), dtype=np.uint64)
    module_src, driver_src = expression_program(expressions, variables)
    if separate_unit:
        sources = [("sb_exprs.f90", module_src), ("sb_driver.f90", driver_src)]
    else:
        sources = [("sb_all.f90", module_src + driver_src)]

    def _in(wd: Path) -> np.ndarray:
        exe = build_program(sources, flags, wd, compiler=compiler)
        header = np.array([nrows, ncols], dtype=np.int64)
        write_stream(wd / "inputs.bin", header, inputs)
        run_program(exe, cwd=wd, timeout=timeout)
        out = read_stream(wd / "outputs.bin", np.float64, (nrows, nexpr))
        return out.view(np.uint64).copy()

    if workdir is not None:
        wd = Path(workdir)
        wd.mkdir(parents=True, exist_ok=True)
        return _in(wd)
    with tempfile.TemporaryDirectory(prefix="samebits-") as tmp:
        return _in(Path(tmp))


# --------------------------------------------------------------------------
# Syntax-only checks over a set of files
# --------------------------------------------------------------------------

_MODULE_DEF = re.compile(
    r"^\s*module\s+(?!procedure\b|function\b|subroutine\b)([a-z][a-z0-9_]*)\s*(?:!.*)?$",
    re.IGNORECASE | re.MULTILINE,
)
_SUBMODULE_DEF = re.compile(
    r"^\s*submodule\s*\(\s*([a-z][a-z0-9_]*)\s*(?::\s*([a-z][a-z0-9_]*))?\s*\)\s*([a-z][a-z0-9_]*)",
    re.IGNORECASE | re.MULTILINE,
)
_USE = re.compile(
    r"^\s*use\s*(?:,\s*(intrinsic|non_intrinsic)\s*)?(?:::)?\s*([a-z][a-z0-9_]*)",
    re.IGNORECASE | re.MULTILINE,
)
_MISSING_MOD = re.compile(r"Cannot open module file", re.IGNORECASE)
_DIAG = re.compile(
    r"^(?P<path>.+?):(?P<line>\d+):(?:(?P<col>\d+):)?\s*"
    r"(?P<sev>Fatal Error|Error|Warning|Note|Remark)\s*:\s*(?P<msg>.*)$"
)


@dataclass(frozen=True)
class Diagnostic:
    """One compiler message (from ``-fdiagnostics-plain-output``)."""

    path: str
    line: int
    column: int | None
    severity: str
    message: str


@dataclass
class SyntaxResult:
    """Outcome of ``gfortran -fsyntax-only`` on one file."""

    path: Path
    returncode: int
    output: str
    diagnostics: list[Diagnostic] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return self.returncode == 0

    @property
    def errors(self) -> list[Diagnostic]:
        return [d for d in self.diagnostics if "Error" in d.severity]


def _parse_diagnostics(output: str) -> list[Diagnostic]:
    diags = []
    for line in output.splitlines():
        m = _DIAG.match(line.strip())
        if m:
            diags.append(
                Diagnostic(
                    path=m.group("path"),
                    line=int(m.group("line")),
                    column=int(m.group("col")) if m.group("col") else None,
                    severity=m.group("sev"),
                    message=m.group("msg").strip(),
                )
            )
    return diags


def _strip_comments(text: str) -> str:
    """Drop ``!`` comments (roughly; quotes are respected on one line)."""
    out = []
    for line in text.splitlines():
        quote = None
        cut = len(line)
        for i, ch in enumerate(line):
            if quote:
                if ch == quote:
                    quote = None
            elif ch in "'\"":
                quote = ch
            elif ch == "!":
                cut = i
                break
        out.append(line[:cut])
    return "\n".join(out)


def _provides_and_needs(text: str) -> tuple[set[str], set[str]]:
    body = _strip_comments(text)
    provides = {m.group(1).lower() for m in _MODULE_DEF.finditer(body)}
    needs = set()
    for m in _SUBMODULE_DEF.finditer(body):
        needs.add(m.group(1).lower())
        if m.group(2):
            needs.add(f"{m.group(1).lower()}@{m.group(2).lower()}")
        provides.add(f"{m.group(1).lower()}@{m.group(3).lower()}")
    for m in _USE.finditer(body):
        if (m.group(1) or "").lower() == "intrinsic":
            continue
        needs.add(m.group(2).lower())
    return provides, needs - provides


def order_by_modules(files: Iterable[str | os.PathLike], texts: dict | None = None) -> list[Path]:
    """Order files so that a module's file precedes files that ``use`` it.

    Dependencies on modules no file provides (intrinsic or external ones)
    are ignored; cycles fall back to the input order.  ``texts`` may map a
    path to its text (read from disk otherwise).
    """
    paths = [Path(f) for f in files]
    info = {}
    for p in paths:
        text = texts[p] if texts and p in texts else p.read_text(errors="replace")
        info[p] = _provides_and_needs(text)
    provider = {}
    for p in paths:
        for mod in info[p][0]:
            provider.setdefault(mod, p)
    ordered: list[Path] = []
    state: dict[Path, int] = {}  # 1 = visiting, 2 = done

    def visit(p: Path) -> None:
        if state.get(p) == 2 or state.get(p) == 1:
            return
        state[p] = 1
        for mod in sorted(info[p][1]):
            dep = provider.get(mod)
            if dep is not None and dep != p:
                visit(dep)
        state[p] = 2
        ordered.append(p)

    for p in paths:
        visit(p)
    return ordered


def check_syntax(
    files: Sequence[str | os.PathLike],
    flags: Sequence[str] = (),
    *,
    compiler: str | None = None,
    module_dir: str | os.PathLike | None = None,
    order: bool = True,
) -> list[SyntaxResult]:
    """Run ``gfortran -fsyntax-only`` on each file; return one result per file.

    Files are taken in module-dependency order (``order=True``) and compiled
    one at a time with a shared module directory, so ``.mod`` files written
    by earlier files are found by later ones.  A file that fails only
    because a module file is missing is retried after the others, until a
    pass makes no progress; its last result is kept.  Results are returned
    in the order the files were finally compiled.
    """
    exe = _require(compiler)
    paths = order_by_modules(files) if order else [Path(f) for f in files]

    def run_all(mdir: Path) -> list[SyntaxResult]:
        done: list[SyntaxResult] = []
        pending = list(paths)
        while pending:
            retry: list[Path] = []
            last: dict[Path, SyntaxResult] = {}
            for p in pending:
                cmd = [exe, *BASE_FLAGS, *flags, "-fsyntax-only", "-J", str(mdir), str(p.resolve())]
                proc = _run_compiler(cmd, mdir)
                out = proc.stdout + proc.stderr
                res = SyntaxResult(p, proc.returncode, out, _parse_diagnostics(out))
                if proc.returncode != 0 and _MISSING_MOD.search(out):
                    retry.append(p)
                    last[p] = res
                else:
                    done.append(res)
            if len(retry) == len(pending):
                done.extend(last[p] for p in retry)
                break
            pending = retry
        return done

    if module_dir is not None:
        mdir = Path(module_dir)
        mdir.mkdir(parents=True, exist_ok=True)
        return run_all(mdir)
    with tempfile.TemporaryDirectory(prefix="samebits-mod-") as tmp:
        return run_all(Path(tmp))
