"""Time linear buckling and natural frequencies of generated grids against one static solve.

    python tests/benchmarks/bench_eigen.py                 # 20k members, auto solver
    python tests/benchmarks/bench_eigen.py --sizes 5k 20k --solver scipy

Not collected by pytest; run on an otherwise idle machine.
"""

from __future__ import annotations

import argparse
import time

import spaceframe as sf
from tests.benchmarks.grids import ROOF_CASE, double_layer_grid, grid_for_members


def _size(text: str) -> int:
    text = text.lower()
    scale = 1_000_000 if text.endswith("m") else 1_000 if text.endswith("k") else 1
    return int(float(text.rstrip("km")) * scale)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", nargs="+", default=["20k"])
    ap.add_argument("--solver", default="auto")
    args = ap.parse_args()
    print(f"{'members':>9} {'static s':>9} {'buckling s':>11} {'ratio':>6} "
          f"{'frequencies s':>14} {'ratio':>6}  lowest factor, lowest frequency")
    for text in args.sizes:
        m = double_layer_grid(*grid_for_members(_size(text)))
        t = time.perf_counter()
        r = m.solve(solver=args.solver)[ROOF_CASE]
        ts = time.perf_counter() - t
        t = time.perf_counter()
        b = sf.linear_buckling(m, r, n_modes=6, solver=args.solver)
        tb = time.perf_counter() - t
        t = time.perf_counter()
        f = sf.natural_frequencies(m, n_modes=10, solver=args.solver)
        tf = time.perf_counter() - t
        print(f"{m.n_members:>9} {ts:>9.3f} {tb:>11.3f} {tb / ts:>6.1f} {tf:>14.3f} "
              f"{tf / ts:>6.1f}  {b.factors[0]:.4g}, {f.frequencies[0]:.4g} Hz")


if __name__ == "__main__":
    main()
