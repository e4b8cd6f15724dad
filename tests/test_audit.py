"""The audit: source findings (libm, BLAS, FMA-prone shapes) and build-file findings, through
``samebits audit`` and ``samebits check``.

Outside facts the findings rest on (docs/audit.md has the measurements):
- GCC manual, Optimize Options: -ffp-contract=fast is the default outside ISO C modes, so
  a*b + c is fused wherever the target has FMA; -ftree-vectorize is on at -O3.
- glibc manual 19.7: libm results are not correctly rounded, except sqrt, fma and conversions.
- observed here with gfortran 12 (../shared/ORACLES.md): at -O3, loops over sin/exp/log call a
  vector math library with other bits.
"""
import json
import subprocess
import sys

from rewrite.api import rewrite_paths, rewrite_text
from rewrite.config import Options, from_table
from rewrite.fortran import frontend

from conftest import FIXTURES

LOOPS = """subroutine warm(t, n, x)
  integer, intent(in) :: n
  real(8), intent(inout) :: t(n)
  real(8), intent(out) :: x
  integer :: i, j
  x = exp(t(1))
  do i = 1, n
    t(i) = exp(t(i))
    do 10 j = 1, n
      x = sin(x)
10  continue
    x = cos(x)
  end do
  do while (x > 0.0d0)
    x = log(x)
  end do
  where (t > 0.0d0) t = log(t)
  forall (i = 1:n)
    t(i) = tan(t(i))
  end forall
  t = atan(t)
  x = x*t(1) + t(2)
end subroutine
"""


def _run(*args, cwd):
    return subprocess.run([sys.executable, "-m", "rewrite.cli", *args], cwd=cwd, capture_output=True, text=True)


def test_front_end_marks_statements_in_vectorisable_loops():
    in_loop = {site.line: site.in_loop for site in frontend.analyse(LOOPS).sites}
    # counted DO (also a labelled DO ending on CONTINUE), WHERE and FORALL statements: a compiler may
    # vectorise them (common practice, no source); DO WHILE and statements outside loops: no
    assert in_loop[8] and in_loop[10] and in_loop[12] and in_loop[17] and in_loop[19]
    assert not in_loop[6] and not in_loop[15] and not in_loop[22]


def test_libm_in_loops_and_on_arrays_is_a_warning_elsewhere_a_note():
    result = rewrite_text(LOOPS, options=Options(rules=("audit",)))
    libm = {f.line: (f.severity, f.kind) for f in result.findings if f.kind.startswith("libm")}
    assert libm[6] == ("note", "libm") and libm[15] == ("note", "libm")
    for line in (8, 10, 12, 17, 19, 21):  # line 21: atan of a whole array
        assert libm[line] == ("warning", "libm-loop"), line
    fma = [f for f in result.findings if f.kind == "fma"]
    assert [f.line for f in fma] == [22] and "-ffp-contract=off" in fma[0].message


def test_fma_notes_are_fortran_only_and_can_be_turned_off():
    python = rewrite_text("def f(a: float, b: float, c: float) -> float:\n    return a*b + c\n", language="python")
    assert not [f for f in python.findings if f.kind == "fma"]  # CPython rounds a*b, then adds
    quiet = rewrite_text(LOOPS, options=from_table({"rules": ["audit"], "audit": ["libm"]}))
    assert {f.kind for f in quiet.findings} == {"libm", "libm-loop"}


def test_audit_command_on_flagged_and_clean_build_files():
    flagged = _run("audit", str(FIXTURES / "build" / "flagged"), cwd=FIXTURES)
    assert flagged.returncode == 1, flagged.stderr
    lines = flagged.stdout.splitlines()
    assert lines and all(": build: " in line for line in lines)
    assert any("build: error: -Ofast" in line for line in lines)
    assert any("build: error: -ffast-math" in line for line in lines)
    clean = _run("audit", str(FIXTURES / "build" / "clean"), cwd=FIXTURES)
    assert clean.returncode == 0 and clean.stdout == "", clean.stdout


def test_audit_severity_filter_and_json(tmp_path):
    (tmp_path / "warm.f90").write_text(LOOPS)
    everything = _run("audit", "--format", "json", ".", cwd=tmp_path)
    assert everything.returncode == 1
    report = json.loads(everything.stdout)
    findings = report["files"][0]["findings"]
    assert {f["severity"] for f in findings} == {"note", "warning"}
    assert not report["files"][0]["edits"]  # the audit proposes nothing
    warnings = _run("audit", "--severity", "warning", ".", cwd=tmp_path)
    assert warnings.stdout and all(": warning: " in line for line in warnings.stdout.splitlines())
    assert _run("audit", "--severity", "error", ".", cwd=tmp_path).returncode == 0


def _tree(tmp_path, fortran: str | None):
    tmp_path.mkdir()
    (tmp_path / "Makefile").write_text("FC = gfortran\nFFLAGS = -O3\nmodel: model.f90\n\t$(FC) $(FFLAGS) -o $@ $<\n")
    if fortran is not None:
        (tmp_path / "model.f90").write_text(fortran)
    results = rewrite_paths([str(tmp_path)], Options())
    return [f for r in results if r.path.endswith("Makefile") for f in r.findings if "-O3" in f.message]


def test_vectorised_libm_flag_depends_on_the_code_of_the_run(tmp_path):
    assert [f.severity for f in _tree(tmp_path / "a", LOOPS)] == ["warning"]  # libm in loops
    scalar = "subroutine s(x)\n  real(8) :: x\n  x = exp(x)\nend subroutine\n"
    assert _tree(tmp_path / "b", scalar) == []  # Fortran without libm in loops: -O3 is harmless here
    assert [f.severity for f in _tree(tmp_path / "c", None)] == ["note"]  # no Fortran seen: unknown


def test_check_includes_build_findings_and_apply_never_writes_build_files(tmp_path):
    makefile = tmp_path / "Makefile"
    makefile.write_text("FFLAGS = -Ofast -march=native\n")
    check = _run("check", ".", cwd=tmp_path)
    assert "Makefile:1:10: build: error: -Ofast" in check.stdout
    before = makefile.read_bytes()
    _run("apply", ".", cwd=tmp_path)
    assert makefile.read_bytes() == before
    off = from_table({"audit": ["libm", "blas", "fma"]})
    assert not [r for r in rewrite_paths([str(tmp_path)], off) if r.path.endswith("Makefile")]
