#!/usr/bin/env python3
"""Time the runtime's ``exact_sum`` against gfortran's intrinsic ``sum`` on the same array.

Usage::

    python benchmarks/bench_fortran_sum.py [--n 10000000] [--repeat 11] [--flags=-O2]
        [--data wide|uniform|positive] [--seed N] [--keep DIR] [--check]

Builds one program at ``--flags`` (default ``-O2``; write ``--flags=-O0`` when the value starts
with a dash), with ``samebits_runtime.f90`` and the program as two compilation units.  NumPy
makes ``--n`` real64 values from a seeded generator (the same data for any flags) and writes them
to a stream file; the program reads them, then ``--repeat`` times, taking turns, times
``s = sum(x)`` and ``s = exact_sum(x)`` with ``system_clock`` (int64 counts).  Both results are
printed (as bit patterns), so neither call can be optimised away; the script checks that
``exact_sum`` equals ``math.fsum`` of the same data.  It prints the median time of each (and the
best) and their ratio; the target is a ratio of 2 or less.

``--data``:

* ``wide`` (default): mixed signs, magnitudes spread evenly over 1e-300 .. 1e300;
* ``uniform``: uniform in [-1, 1);
* ``positive``: uniform in [0, 1).

Exit status: 0 when the benchmark ran; 1 when building or running failed, when ``exact_sum``
differs from ``math.fsum``, or with ``--check`` when the ratio is above the target; 2 when
gfortran is missing.
"""
from __future__ import annotations

import argparse
import math
import shutil
import struct
import sys
import tempfile
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from rewrite.runtime.powers import fortran_source  # noqa: E402
from rewrite.verify.gfortran import (  # noqa: E402
    CompileError,
    RunError,
    build_program,
    find_gfortran,
    gfortran_version,
    run_program,
    write_stream,
)

TARGET_RATIO = 2.0


def make_data(kind: str, n: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    if kind == "wide":
        return rng.choice([-1.0, 1.0], n) * (1.0 + rng.random(n)) * 10.0 ** rng.uniform(-300, 300, n)
    if kind == "uniform":
        return rng.uniform(-1.0, 1.0, n)
    return rng.random(n)


DATA = ("wide", "uniform", "positive")

PROGRAM = """\
program bench_fortran_sum
  use, intrinsic :: iso_fortran_env, only: real64, int64
  use samebits_runtime, only: exact_sum
  implicit none
  integer, parameter :: reps = {repeat}
  real(real64), allocatable :: x(:)
  integer(int64) :: n, t0, t1, rate
  integer(int64) :: t_sum(reps), t_exact(reps)
  integer :: i, u
  real(real64) :: s_sum, s_exact
  open(newunit=u, file='data.bin', access='stream', form='unformatted', status='old', action='read')
  read(u) n
  allocate(x(n))
  read(u) x
  close(u)
  s_sum = 0
  s_exact = 0
  do i = 1, reps
    call system_clock(t0, rate)
    s_sum = sum(x)
    call system_clock(t1)
    t_sum(i) = t1 - t0
    call system_clock(t0, rate)
    s_exact = exact_sum(x)
    call system_clock(t1)
    t_exact(i) = t1 - t0
  end do
  print '(a, i0)', 'rate ', rate
  print '(a, *(1x, i0))', 'sum', t_sum
  print '(a, *(1x, i0))', 'exact', t_exact
  print '(a, i0)', 'bits_sum ', transfer(s_sum, 0_int64)
  print '(a, i0)', 'bits_exact ', transfer(s_exact, 0_int64)
end program bench_fortran_sum
"""


def _median(values: list[float]) -> float:
    s = sorted(values)
    mid = len(s) // 2
    return s[mid] if len(s) % 2 else (s[mid - 1] + s[mid]) / 2


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--n", type=int, default=10_000_000, help="number of real64 values (default 1e7)")
    ap.add_argument("--repeat", type=int, default=11, help="timed runs of each (default 11)")
    ap.add_argument("--flags", default="-O2", help='compiler flags for both units (default "-O2")')
    ap.add_argument("--data", choices=DATA, default="wide")
    ap.add_argument("--seed", type=int, default=2024, help="seed of the data (default 2024)")
    ap.add_argument("--keep", metavar="DIR", help="build in DIR and keep it")
    ap.add_argument("--check", action="store_true", help=f"exit 1 when the ratio is above {TARGET_RATIO}")
    args = ap.parse_args(argv)

    compiler = find_gfortran()
    if compiler is None:
        print("gfortran not found (set $SAMEBITS_GFORTRAN or put it on PATH)", file=sys.stderr)
        return 2
    workdir = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="samebits-bench-sum-"))
    program = PROGRAM.format(repeat=args.repeat)
    x = make_data(args.data, args.n, args.seed)
    try:
        workdir.mkdir(parents=True, exist_ok=True)
        write_stream(workdir / "data.bin", np.array([x.size], np.int64), x)
        exe = build_program(
            [("samebits_runtime.f90", fortran_source().read_text()), ("bench.f90", program)],
            args.flags.split(), workdir, compiler=compiler,
        )
        out = run_program(exe, cwd=workdir, timeout=600).stdout
    except (CompileError, RunError) as exc:
        print(exc, file=sys.stderr)
        return 1
    finally:
        if not args.keep:
            shutil.rmtree(workdir, ignore_errors=True)

    fields = {line.split()[0]: line.split()[1:] for line in out.splitlines() if line.strip()}
    rate = int(fields["rate"][0])
    t_sum = [int(t) / rate for t in fields["sum"]]
    t_exact = [int(t) / rate for t in fields["exact"]]
    med_sum, med_exact = _median(t_sum), _median(t_exact)
    ratio = med_exact / med_sum

    def value(key: str) -> float:  # the result's bit pattern, printed by the program as an int64
        return struct.unpack("<d", struct.pack("<q", int(fields[key][0])))[0]

    reference = math.fsum(x.tolist())
    exact_ok = struct.pack("<d", value("bits_exact")) == struct.pack("<d", reference)
    print(f"{gfortran_version(compiler)}; flags {args.flags}; n = {args.n} real64 ({args.data}, seed "
          f"{args.seed}); {args.repeat} runs each: median (best)")
    print(f"intrinsic sum: {med_sum:.4g} s ({min(t_sum):.4g} s)")
    print(f"exact_sum: {med_exact:.4g} s ({min(t_exact):.4g} s)")
    print(f"values: sum {value('bits_sum')!r}, exact_sum {value('bits_exact')!r}, "
          f"math.fsum {reference!r} ({'equal' if exact_ok else 'DIFFERENT'})")
    print(f"ratio exact_sum/sum: {ratio:.2f} (target <= {TARGET_RATIO:g})")
    if not exact_ok:
        return 1
    if args.check and ratio > TARGET_RATIO:
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
