"""Time rewrite.runtime.exact_sum against math.fsum and numpy.sum on the same array.

Data: N float64 values (default 10**7), seeded: standard normal times 10**uniform(-8, 8).
Targets: math.fsum at least 20 times slower than exact_sum, and exact_sum at most 10
times slower than numpy.sum.  exact_sum: median of --repeat runs (default 5);
math.fsum (which iterates the numpy array element by element): median of 3; numpy.sum:
median of --repeat.  Peak extra memory of one exact_sum call is measured with
tracemalloc (numpy reports its buffers to it) and compared with the input size.

Run: python benchmarks/bench_exact_sum.py [--n 10000000] [--seed 1] [--repeat 5] [--extra]
"""
from __future__ import annotations

import argparse
import math
import statistics
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from rewrite.runtime import exact_sum  # noqa: E402


def median_time(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def peak_bytes(fn) -> int:
    tracemalloc.start()
    try:
        fn()
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=10**7)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--extra", action="store_true", help="also time other layouts and float32")
    args = parser.parse_args()

    rng = np.random.default_rng(args.seed)
    x = rng.standard_normal(args.n) * 10.0 ** rng.uniform(-8, 8, args.n)

    exact_sum(x)  # warm up
    t_exact = median_time(lambda: exact_sum(x), args.repeat)
    t_fsum = median_time(lambda: math.fsum(x), 3)
    t_np = median_time(lambda: np.sum(x), args.repeat)
    same = exact_sum(x).tobytes() == np.float64(math.fsum(x)).tobytes()
    peak = peak_bytes(lambda: exact_sum(x))

    print(f"n = {args.n}, float64, normal * 10**uniform(-8, 8), seed {args.seed}")
    print(f"exact_sum: {t_exact:.3f} s")
    print(f"math.fsum: {t_fsum:.3f} s")
    print(f"np.sum: {t_np:.4f} s")
    ratio_fsum = t_fsum / t_exact
    ratio_np = t_exact / t_np
    print(f"fsum/exact_sum: {ratio_fsum:.1f}x (target >= 20){'' if ratio_fsum >= 20 else '  MISSED'}")
    print(f"exact_sum/np.sum: {ratio_np:.1f}x (target <= 10){'' if ratio_np <= 10 else '  MISSED'}")
    print(f"bit-equal to math.fsum: {same}")
    print(
        f"peak extra memory of exact_sum: {peak / 2**20:.2f} MiB "
        f"({100 * peak / x.nbytes:.2f}% of the {x.nbytes / 2**20:.0f} MiB input)"
    )

    if args.extra:
        cases = {
            "strided x[::2]": (lambda: exact_sum(x[::2]), lambda: np.sum(x[::2])),
            "reversed x[::-1]": (lambda: exact_sum(x[::-1]), lambda: np.sum(x[::-1])),
            "float32": ((lambda y: lambda: exact_sum(y))(x.astype(np.float32)), None),
            "axis=0 of (n/1000, 1000)": (
                lambda: exact_sum(x.reshape(-1, 1000), axis=0),
                lambda: np.sum(x.reshape(-1, 1000), axis=0),
            ),
            "axis=1 of (n/1000, 1000)": (
                lambda: exact_sum(x.reshape(-1, 1000), axis=1),
                lambda: np.sum(x.reshape(-1, 1000), axis=1),
            ),
            "axis=1 of (n/4, 4)": (
                lambda: exact_sum(x.reshape(-1, 4), axis=1),
                lambda: np.sum(x.reshape(-1, 4), axis=1),
            ),
        }
        for name, (ours, theirs) in cases.items():
            line = f"{name}: exact_sum {median_time(ours, 3):.3f} s"
            if theirs is not None:
                line += f", np.sum {median_time(theirs, 3):.4f} s"
            print(line)


if __name__ == "__main__":
    main()
