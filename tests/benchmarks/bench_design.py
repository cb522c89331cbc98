"""Member checks and sizing at size: 100k members, 10 combinations.

    python tests/benchmarks/bench_design.py [--members 100k] [--check]

Targets (2 cores): the checks of every member under 10 combinations in under
1 s (arrays only); a sizing loop of 5 iterations within 10x one solve.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from _frames import grid_of

import spaceframe as sf


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--members", default="100k")
    ap.add_argument("--check", action="store_true", help="exit 1 when a target is missed")
    args = ap.parse_args()
    m = grid_of(args.members)
    b = m.n_members
    m.set_member_properties(np.arange(b), yield_strength=355e6, second_moment=1.2e-6,
                            buckling_curve="a")
    for i in range(10):
        m.add_combination(f"C{i}", {"roof": 1.0 + 0.05 * i})
    t0 = time.perf_counter()
    res = m.solve()
    t_solve = time.perf_counter() - t0
    t0 = time.perf_counter()
    g = sf.check_results(m, res)
    t_check = time.perf_counter() - t0
    groups = {"all": np.arange(b)}
    m.groups.update(groups)
    t0 = time.perf_counter()
    out = sf.size_groups(m, ["all"], max_iterations=5)
    t_size = time.perf_counter() - t0
    print(f"{b} members, 10 combinations")
    print(f"  solve (11 results)           {t_solve:8.2f} s")
    print(f"  check every member x 10      {t_check:8.2f} s   target < 1 s")
    print(f"  sizing, {len(out.iterations)} iterations         {t_size:8.2f} s   "
          f"target < {10 * t_solve:.1f} s (10 x solve)")
    print(f"  worst utilisation {g.utilisation.max():.3f}")
    ok = t_check < 1.0 and t_size < 10 * t_solve
    return 0 if ok or not args.check else 1


if __name__ == "__main__":
    raise SystemExit(main())
