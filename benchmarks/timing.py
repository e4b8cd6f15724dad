"""What the benchmark scripts share: timing one command as a subprocess."""
from __future__ import annotations

import shlex
import subprocess
import time


def time_once(cmd: list[str], ok_codes: tuple[int, ...], keep_stdout: bool = False,
              tail_lines: int = 40) -> tuple[float, subprocess.CompletedProcess]:
    """Wall time of one run of ``cmd``; RuntimeError with the end of its stderr when its exit
    status is not in ``ok_codes``."""
    t0 = time.perf_counter()
    proc = subprocess.run(cmd, stdin=subprocess.DEVNULL, stdout=subprocess.PIPE if keep_stdout else subprocess.DEVNULL,
                          stderr=subprocess.PIPE, text=True, errors="replace")
    elapsed = time.perf_counter() - t0
    if proc.returncode not in ok_codes:
        tail = "\n".join(proc.stderr.strip().splitlines()[-tail_lines:])
        raise RuntimeError(f"{shlex.join(cmd)} exited {proc.returncode}\nstderr:\n{tail}")
    return elapsed, proc
