"""Time linear buckling and natural frequencies of generated grids against one static solve.

    python tests/benchmarks/bench_eigen.py                 # 20k members, auto solver
    python tests/benchmarks/bench_eigen.py --sizes 5k 20k --solver scipy

Not collected by pytest; run on an otherwise idle machine.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from _frames import grid_of
from grids import ROOF_CASE

import spaceframe as sf


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", nargs="+", default=["20k"])
    ap.add_argument("--solver", default="auto")
    args = ap.parse_args()
    print(f"{'members':>9} {'static s':>9} {'buckling s':>11} {'ratio':>6} "
          f"{'frequencies s':>14} {'ratio':>6}  lowest factor, lowest frequency")
    for text in args.sizes:
        m = grid_of(text)
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
