#!/usr/bin/env python3
"""Time ``samebits check FILE`` against a bare fparser2 parse of the same file.

Usage::

    python benchmarks/bench_check_vs_parse.py [--lines 20000] [--repeat 3]
        [--samebits CMD] [--only-parse] [--keep PATH] [--seed N] [--no-gfortran]

The script writes a deterministic free-form Fortran file of about ``--lines`` lines into
a temporary folder (modules with declarations, a derived type, many subroutines and
functions, assignments with arithmetic chains, if/do/where/select constructs, comments,
continuation lines and calls). If gfortran is on PATH it first checks that the file
compiles (``-fsyntax-only``, not timed). Then it runs, each ``--repeat`` times as a
subprocess and alternating between the two:

1. ``CMD check FILE`` (default CMD: ``samebits``), output discarded; exit status 0 and 1
   both count as success (1 means "there are proposals");
2. ``python -c`` that creates ``ParserFactory().create(std="f2008")`` and parses
   ``FortranFileReader(FILE)``; it must exit 0, otherwise the benchmark stops.

and prints the median wall time of each and their ratio. Exit status: 0 when everything
asked for ran, 1 when a run failed, 2 when the samebits command was not found.
"""
from __future__ import annotations

import argparse
import random
import shlex
import shutil
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

from timing import time_once

TARGET_RATIO = 1.0  # issue 2: checking must not cost more than a bare parse

PARSE_SNIPPET = """\
import sys
from fparser.common.readfortran import FortranFileReader
from fparser.two.parser import ParserFactory
parser = ParserFactory().create(std="f2008")
tree = parser(FortranFileReader(sys.argv[1]))
if tree is None:
    sys.exit("fparser2 returned no tree")
"""


# --------------------------------------------------------------------------- generator
class _Writer:
    def __init__(self) -> None:
        self.lines: list[str] = []

    def add(self, text: str) -> None:
        self.lines.extend(_wrap(text.split("\n")))

    def __len__(self) -> int:
        return len(self.lines)


SCALARS = ["a", "b", "c", "d"]
LOCALS = ["t1", "t2", "t3", "t4", "t5", "t6"]
COMPONENTS = ["st%h", "st%temp", "st%rho", "st%area"]
LITERALS = ["0.5_dp", "1.5_dp", "2.0_dp", "0.25_dp", "1.0d-3", "3.0_dp", "0.125_dp", "9.81_dp", "1.0e-6_dp"]
ADD_OPS = [" + ", " - "]
MUL_OPS = ["*", "*", "/"]


class FortranGenerator:
    """Deterministic source of Fortran text; the same seed gives the same file."""

    def __init__(self, seed: int) -> None:
        self.rng = random.Random(seed)

    # ---- expressions
    def operand(self, depth: int = 0, array_index: str | None = None) -> str:
        r = self.rng.random()
        if r < 0.30:
            return self.rng.choice(SCALARS + LOCALS)
        if r < 0.42:
            return self.rng.choice(COMPONENTS)
        if r < 0.55:
            return self.rng.choice(LITERALS)
        if r < 0.67 and array_index:
            off = self.rng.choice(["", " - 1", " + 1"])
            return f"{self.rng.choice(['v', 'w'])}({array_index}{off})"
        if r < 0.78 and depth < 1:
            fn = self.rng.choice(["sqrt(abs({}))", "exp(-abs({}))", "abs({})", "max({}, 0.0_dp)",
                                  "min({}, 1.0e3_dp)", "log(1.0_dp + abs({}))"])
            return fn.format(self.chain(2, depth + 1, array_index))
        if r < 0.86 and depth < 1:
            return "(" + self.chain(self.rng.randint(2, 3), depth + 1, array_index) + ")"
        if r < 0.94:
            base = self.rng.choice(SCALARS + LOCALS)
            return f"{base}**{self.rng.choice(['2', '3', '0.5_dp'])}" if "0.5" not in base else base
        return f"real(k, dp)" if self.rng.random() < 0.5 else "real(n, dp)"

    def term(self, depth: int, array_index: str | None) -> str:
        n = self.rng.choice([1, 1, 1, 2, 2, 3])
        out = self.operand(depth, array_index)
        for _ in range(n - 1):
            out += self.rng.choice(MUL_OPS) + self.operand(depth, array_index)
        return out

    def chain(self, n_terms: int, depth: int = 0, array_index: str | None = None,
              negate: bool = False) -> str:
        out = ("-" if negate and self.rng.random() < 0.15 else "") + self.term(depth, array_index)
        for _ in range(n_terms - 1):
            out += self.rng.choice(ADD_OPS) + self.term(depth, array_index)
        return out

    def long_chain(self, array_index: str | None = None) -> str:
        return self.chain(self.rng.randint(3, 5), 0, array_index, negate=True)

    def int_chain(self) -> str:
        return self.rng.choice(["i + n - 1", "k + 1 + n", "n - k + 1", "2*k + i - 1", "k + i + 1"])

    # ---- statements
    def statement(self, w: _Writer, ind: str, callee: str | None) -> None:
        r = self.rng.random()
        lhs = self.rng.choice(LOCALS)
        if r < 0.30:
            w.add(f"{ind}{lhs} = {self.long_chain()}")
        elif r < 0.38:
            parts = [self.term(0, None) for _ in range(self.rng.randint(3, 5))]
            text = f"{ind}{lhs} = {parts[0]} &"
            for j, p in enumerate(parts[1:], 1):
                end = " &" if j < len(parts) - 1 else ""
                if self.rng.random() < 0.4:
                    text += f"\n{ind}   ! contribution {j}"
                text += f"\n{ind}     {self.rng.choice(ADD_OPS).strip()} {p}{end}"
            w.add(text)
        elif r < 0.44:
            w.add(f"{ind}if ({self.chain(2)} > {self.rng.choice(LITERALS)}) {lhs} = {self.long_chain()}")
        elif r < 0.54:
            w.add(f"{ind}if ({self.rng.choice(LOCALS)} > {self.chain(3)}) then\n"
                  f"{ind}   {lhs} = {self.long_chain()}\n"
                  f"{ind}   st%temp = st%temp + {self.term(0, None)} - {self.rng.choice(LITERALS)}\n"
                  f"{ind}else if ({self.rng.choice(SCALARS)} < 0.0_dp) then\n"
                  f"{ind}   {lhs} = {self.long_chain()}\n"
                  f"{ind}else\n"
                  f"{ind}   {lhs} = -{lhs} + {self.term(0, None)} + {self.rng.choice(LITERALS)}\n"
                  f"{ind}end if")
        elif r < 0.66:
            w.add(f"{ind}do i = 2, n - 1\n"
                  f"{ind}   k = {self.int_chain()}\n"
                  f"{ind}   w(i) = {self.long_chain('i')}\n"
                  f"{ind}   v(i) = v(i) + {self.term(0, 'i')} - {self.term(0, 'i')}\n"
                  f"{ind}end do")
        elif r < 0.72:
            w.add(f"{ind}where (v + w > {self.rng.choice(LITERALS)})\n"
                  f"{ind}   v = v + w*{self.rng.choice(SCALARS)} + {self.rng.choice(LITERALS)}\n"
                  f"{ind}elsewhere\n"
                  f"{ind}   v = v*{self.rng.choice(SCALARS)}*{self.rng.choice(LITERALS)} - w\n"
                  f"{ind}end where")
        elif r < 0.77:
            w.add(f"{ind}! update {lhs}: {lhs} = a + b + c (comment only)\n"
                  f"{ind}{lhs} = {self.chain(3)}; {self.rng.choice(LOCALS)} = {self.chain(3)}")
        elif r < 0.82 and callee:
            w.add(f"{ind}call {callee}(n, {self.chain(3)}, {self.chain(2)}, &\n"
                  f"{ind}     {self.chain(3)}, {self.rng.choice(SCALARS)}, v, w, st, {lhs})")
        elif r < 0.86:
            w.add(f"{ind}select case (mod(k + n + 1, 3))\n"
                  f"{ind}case (0)\n"
                  f"{ind}   {lhs} = {self.long_chain()}\n"
                  f"{ind}case default\n"
                  f"{ind}   {lhs} = {self.chain(2)}\n"
                  f"{ind}end select")
        elif r < 0.90:
            w.add(f"{ind}res = res + sum(v(1:n)*w(1:n)) + dot_product(v, w)*{self.rng.choice(SCALARS)} "
                  f"- maxval(w) + minval(v)")
        elif r < 0.94:
            w.add(f"{ind}k = {self.int_chain()}\n"
                  f"{ind}{lhs} = v(max(1, min(n, {self.int_chain()}))) + {self.chain(2)}")
        else:
            w.add(f"{ind}! {self.rng.choice(['diagnostic', 'energy', 'mass', 'flux'])} "
                  f"bookkeeping for step k\n"
                  f"{ind}st%h = st%h*{self.rng.choice(LITERALS)} + {self.term(0, None)} + {self.term(0, None)}")

    def subroutine(self, w: _Writer, name: str, callee: str | None, n_statements: int) -> None:
        w.add(f"   !> Generated routine {name}: arithmetic chains for the benchmark.\n"
              f"   subroutine {name}(n, a, b, c, d, v, w, st, res)\n"
              f"      integer, intent(in) :: n\n"
              f"      real(dp), intent(in) :: a, b, c, d\n"
              f"      real(dp), intent(inout) :: v(n), w(n)\n"
              f"      type(cell_t), intent(inout) :: st\n"
              f"      real(dp), intent(out) :: res\n"
              f"      real(dp) :: t1, t2, t3, t4, t5, t6\n"
              f"      integer :: i, k\n"
              f"\n"
              f"      t1 = a + b*0.5_dp; t2 = b - c; t3 = c*d + 1.0_dp\n"
              f"      t4 = a*b*c; t5 = d + a + 1.0_dp; t6 = 0.0_dp\n"
              f"      k = 1\n"
              f"      res = 0.0_dp")
        for _ in range(n_statements):
            self.statement(w, "      ", callee)
        w.add(f"      res = res + t1 + t2 + t3 + t4 + t5 + t6\n"
              f"   end subroutine {name}\n")

    def function(self, w: _Writer, name: str) -> None:
        w.add(f"   pure real(dp) function {name}(x, y, z)\n"
              f"      real(dp), intent(in) :: x, y, z\n"
              f"      {name} = x*y*z + x + y - z*{self.rng.choice(LITERALS)} &\n"
              f"         + {self.rng.choice(LITERALS)}*x**2 + y**3\n"
              f"   end function {name}\n")

    def generate(self, target_lines: int) -> str:
        w = _Writer()
        w.add("! Generated by benchmarks/bench_check_vs_parse.py: synthetic source, no real model.\n"
              "module bench_kinds\n"
              "   implicit none\n"
              "   integer, parameter :: dp = kind(1.0d0)\n"
              "   type :: cell_t\n"
              "      real(dp) :: h = 1.0_dp, temp = 10.0_dp, rho = 1000.0_dp, area = 1.0_dp\n"
              "   end type cell_t\n"
              "end module bench_kinds\n")
        module_budget = 2500
        mi = 0
        while len(w) < target_lines - 40:
            mi += 1
            start = len(w)
            w.add(f"module bench_mod_{mi:03d}\n"
                  f"   use bench_kinds, only: dp, cell_t\n"
                  f"   implicit none\n"
                  f"   private\n"
                  f"   real(dp), parameter :: c_gain_{mi} = 1.25_dp, c_loss_{mi} = 0.75_dp\n"
                  f"   real(dp), save :: acc_{mi}(16) = 0.0_dp\n"
                  f"   integer, parameter :: n_max_{mi} = 64\n"
                  f"   public :: acc_{mi}\n"
                  f"contains\n")
            si = 0
            prev = None
            while len(w) - start < module_budget and len(w) < target_lines - 25:
                si += 1
                name = f"step_{mi:03d}_{si:03d}"
                remaining = target_lines - len(w) - 20
                n_stmt = max(1, min(self.rng.randint(12, 30), remaining // 4))
                w.lines.insert(start + 8, f"   public :: {name}")
                self.subroutine(w, name, prev, n_stmt)
                prev = name
                if si % 5 == 0:
                    fname = f"blend_{mi:03d}_{si:03d}"
                    w.lines.insert(start + 8, f"   public :: {fname}")
                    self.function(w, fname)
            w.add(f"end module bench_mod_{mi:03d}\n")
        return "\n".join(w.lines).rstrip("\n") + "\n"


def _wrap(lines: list[str], width: int = 100) -> list[str]:
    """Continue statement lines longer than ``width`` with '&', breaking between tokens."""
    out: list[str] = []
    for line in lines:
        indent = len(line) - len(line.lstrip())
        if len(line) <= width or line.lstrip().startswith("!"):
            out.append(line)
            continue
        pad = " " * (indent + 6)
        rest = line
        while len(rest) > width:
            # break before a ' + ' or ' - ' if there is one, else after a ', '
            lo = indent + 12
            cut = max(rest.rfind(" + ", lo, width - 2), rest.rfind(" - ", lo, width - 2))
            if cut < 0:
                cut = rest.rfind(", ", lo, width - 2) + 1
            if cut <= 0:
                break
            out.append(rest[:cut].rstrip() + " &")
            rest = pad + rest[cut:].lstrip()
        out.append(rest)
    return out


# --------------------------------------------------------------------------- timing
def _time_once(cmd: list[str], ok_codes: tuple[int, ...]) -> tuple[float, subprocess.CompletedProcess]:
    return time_once(cmd, ok_codes, keep_stdout=False)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--lines", type=int, default=20000, help="size of the generated file (default 20000)")
    ap.add_argument("--repeat", type=int, default=3, help="runs of each command; the median is shown (default 3)")
    ap.add_argument("--samebits", default="samebits", metavar="CMD",
                    help="command that runs the tool, split like a shell would (default: samebits)")
    ap.add_argument("--only-parse", action="store_true", help="time the fparser2 parse only")
    ap.add_argument("--keep", metavar="PATH", help="also copy the generated file to PATH")
    ap.add_argument("--seed", type=int, default=1729, help="seed of the generator (default 1729)")
    ap.add_argument("--no-gfortran", action="store_true", help="skip the untimed gfortran -fsyntax-only check")
    args = ap.parse_args(argv)

    source = FortranGenerator(args.seed).generate(args.lines)
    n_lines = source.count("\n")
    with tempfile.TemporaryDirectory(prefix="samebits-bench-") as tmp:
        path = Path(tmp) / "bench_chains.f90"
        path.write_text(source)
        if args.keep:
            shutil.copyfile(path, args.keep)
        print(f"lines: {n_lines}", flush=True)

        gfortran = shutil.which("gfortran")
        if gfortran and not args.no_gfortran:
            proc = subprocess.run([gfortran, "-std=f2008", "-fsyntax-only", path.name], cwd=tmp,
                                  capture_output=True, text=True)
            if proc.returncode != 0:
                print("generated file does not compile:\n" + proc.stderr[-3000:], file=sys.stderr)
                return 1
            print("gfortran -fsyntax-only: ok (not timed)", flush=True)

        parse_cmd = [sys.executable, "-c", PARSE_SNIPPET, str(path)]
        check_cmd = None if args.only_parse else shlex.split(args.samebits) + ["check", str(path)]
        status = 0
        if check_cmd is not None and shutil.which(check_cmd[0]) is None:
            print(f"samebits check: skipped (command not found: {check_cmd[0]})", flush=True)
            check_cmd, status = None, 2

        check_times: list[float] = []
        parse_times: list[float] = []
        try:
            for _ in range(args.repeat):
                if check_cmd is not None:
                    check_times.append(_time_once(check_cmd, (0, 1))[0])
                parse_times.append(_time_once(parse_cmd, (0,))[0])
        except RuntimeError as err:
            print(f"run failed: {err}", file=sys.stderr)
            return 1

        check = statistics.median(check_times) if check_times else None
        parse = statistics.median(parse_times)
        if check is not None:
            print(f"samebits check: {check:.2f} s (median of {args.repeat})")
        print(f"fparser2 parse: {parse:.2f} s (median of {args.repeat})")
        if check is not None:
            print(f"ratio check/parse: {check / parse:.2f} (target for issue 2: <= {TARGET_RATIO})")
    return status


if __name__ == "__main__":
    sys.exit(main())
