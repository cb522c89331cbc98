"""Time linear buckling and natural frequencies of generated grids against one static solve.

    python tests/benchmarks/bench_eigen.py                          # 100k members, auto solver
    python tests/benchmarks/bench_eigen.py --sizes 20k 100k --solver scipy
    python tests/benchmarks/bench_eigen.py --sizes 100k --repeat 5 --check

Per size: one static solve (``Model.solve``), the 6 lowest linear buckling
factors of the roof case (``linear_buckling``) and the 10 lowest natural
frequencies (``natural_frequencies``), run in turn ``--repeat`` times so that
load from other processes falls on all three alike; each figure is the best
of its repeats, and the spread (slowest / best) is printed beside it.
Target (issue 12, 2 cores): buckling and frequencies each within 5x one
static solve; ``--check`` exits 1 when one is missed.  Peak memory is
``ru_maxrss`` of this process (cumulative over the sizes).

Not collected by pytest; run on an otherwise idle machine.
"""

from __future__ import annotations

import argparse
import resource
import sys
import time
import warnings
from collections.abc import Callable
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from _frames import grid_of
from grids import ROOF_CASE

import spaceframe as sf

#: Largest ratio to one static solve (issue 12).
TARGET = 5.0


def timed(fn: Callable[[], object]) -> tuple[float, object]:
    """Wall time of one call and its value."""
    t = time.perf_counter()
    out = fn()
    return time.perf_counter() - t, out


def measure(text: str, solver: str, repeat: int) -> dict[str, float]:
    """Best (and slowest) times of the three analyses of one grid, run in turn."""
    m = grid_of(text)
    r = m.solve(solver=solver)[ROOF_CASE]  # also loads MKL before any clock
    runs: dict[str, list[float]] = {"static": [], "buckling": [], "frequencies": []}
    out: dict[str, float] = {"members": m.n_members}
    for _ in range(repeat):
        dt, _res = timed(lambda: m.solve(solver=solver))
        runs["static"].append(dt)
        dt, b = timed(lambda: sf.linear_buckling(m, r, n_modes=6, solver=solver))
        runs["buckling"].append(dt)
        dt, f = timed(lambda: sf.natural_frequencies(m, n_modes=10, solver=solver))
        runs["frequencies"].append(dt)
    out["factor"] = float(b.factors[0])  # type: ignore[attr-defined]
    out["frequency"] = float(f.frequencies[0])  # type: ignore[attr-defined]
    for key, times in runs.items():
        out[key] = min(times)
        out[key + " spread"] = max(times) / min(times)
    out["peak MB"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return out


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", nargs="+", default=["100k"])
    ap.add_argument("--solver", default="auto")
    ap.add_argument("--repeat", type=int, default=3, help="best of N (default 3)")
    ap.add_argument("--check", action="store_true",
                    help=f"exit 1 when a ratio exceeds {TARGET:g}")
    args = ap.parse_args()
    warnings.simplefilter("ignore", sf.SpaceframeWarning)
    print(f"solver {sf.solvers.resolve_backend(args.solver)}, best of {args.repeat}")
    print(f"{'members':>9} {'static s':>9} {'buckling s':>11} {'ratio':>6} "
          f"{'frequencies s':>14} {'ratio':>6} {'peak MB':>8}  spread (slowest/best) "
          "static, buckling, frequencies; lowest factor, lowest frequency")
    ok = True
    for text in args.sizes:
        row = measure(text, args.solver, args.repeat)
        rb = row["buckling"] / row["static"]
        rf = row["frequencies"] / row["static"]
        ok &= rb <= TARGET and rf <= TARGET
        print(f"{int(row['members']):>9} {row['static']:>9.3f} {row['buckling']:>11.3f} "
              f"{rb:>6.2f} {row['frequencies']:>14.3f} {rf:>6.2f} {row['peak MB']:>8.0f}  "
              f"{row['static spread']:.2f}, {row['buckling spread']:.2f}, "
              f"{row['frequencies spread']:.2f}; {row['factor']:.6g}, "
              f"{row['frequency']:.6g} Hz")
    if args.check:
        print(f"target {TARGET:g}x one static solve: {'met' if ok else 'MISSED'}")
        return 0 if ok else 1
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
