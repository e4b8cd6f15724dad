"""Table: worst error (ulps of the exact sum, measured against fractions.Fraction) of the
written, balanced and accurate orders on generated chains with cancellation.

Run: python benchmarks/chain_order_accuracy.py [--cases 12]
"""
from __future__ import annotations

import argparse
import random
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from rewrite.planner import orders  # noqa: E402


def case(rng: random.Random):
    n = rng.randint(4, 7)
    big = 10.0 ** rng.randint(6, 17)
    first, second = rng.sample(range(n), 2)
    columns = []
    for k in range(n):
        if k == first:
            columns.append({"range": [big, big * (1 + 1e-9)]})
        elif k == second:
            columns.append({"range": [-big * (1 + 1e-9), -big]})
        else:
            columns.append({"range": [0.0, 1.0]})
    return n, columns, first, second


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=12)
    parser.add_argument("--seed", type=int, default=11)
    args = parser.parse_args()
    rng = random.Random(args.seed)
    print("| terms | large terms at | written | balanced | accurate | accurate better |")
    print("|---|---|---|---|---|---|")
    better = 0
    for _ in range(args.cases):
        n, columns, first, second = case(rng)
        operators = ["+"] * (n - 1)
        rows = orders.sample_rows(columns, 200)
        exacts = orders.exact_values(rows, operators, "+")
        written = orders.worst_error(orders.written(n), rows, operators, "+", exacts)
        balanced = orders.worst_error(orders.balanced(n), rows, operators, "+", exacts)
        _tree, accurate, _ = orders.most_accurate(n, rows, operators, "+")
        better += accurate < written
        print(f"| {n} | {first}, {second} | {written:.3g} | {balanced:.3g} | {accurate:.3g} | "
              f"{'yes' if accurate < written else 'no'} |")
    print(f"\naccurate better than written in {better} of {args.cases} cases, never worse")


if __name__ == "__main__":
    main()
