"""Time the large-displacement path and the tension-only analysis against one linear solve.

    python tests/benchmarks/bench_nonlinear.py                       # both, best of 3
    python tests/benchmarks/bench_nonlinear.py --path-size 10k --tension-size 100k --check
    python tests/benchmarks/bench_nonlinear.py --only path --repeat 5 --solver scipy

Not collected by pytest; run on an otherwise idle machine.  The timed runs
alternate with their reference (one linear static solve of the same grid), and
each figure is the best of the repeats, so that load from other processes
falls on both alike.
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from collections.abc import Callable
from pathlib import Path
from typing import Any

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

import numpy as np
from _frames import member_count
from grids import ROOF_CASE, double_layer_grid, grid_for_members

import spaceframe as sf

#: Targets (2 cores): 50 path increments within this many linear solves ...
PATH_TARGET = 100.0
#: ... and the tension-only analysis within this many.
TENSION_TARGET = 10.0
INCREMENTS = 50


def best_of(repeat: int, *runs: Callable[[], Any]) -> list[float]:
    """Best wall time of each run over ``repeat`` rounds, the runs alternating."""
    best = [np.inf] * len(runs)
    for _ in range(repeat):
        for k, run in enumerate(runs):
            t = time.perf_counter()
            run()
            best[k] = min(best[k], time.perf_counter() - t)
    return best


def braced_grid(members: int) -> tuple[sf.Model, np.ndarray]:
    """A double-layer grid with X-bracing in every top bay (the bracing about 1/5 of it).

    Returns the model and the bracing members' ids.
    """
    nx, ny = grid_for_members(members * 8 // 10)
    m = double_layer_grid(nx, ny)
    j, i = np.divmod(np.arange(nx * ny), nx)
    a = j * (nx + 1) + i  # top node (i, j); (i + 1, j + 1) is a + nx + 2
    ids = m.add_members(np.r_[np.c_[a, a + nx + 2], np.c_[a + 1, a + nx + 1]],
                        area=1.1e-3, E=210e9)
    return m, ids


def bench_path(size: str, repeat: int, solver: str = "auto") -> dict[str, float]:
    """The roof load to load factor 1 from a first increment of 0.02.

    The arc length grows on an easy path, so the run takes fewer than 50
    increments; each converged increment is time-stamped (``progress``), and
    50 increments are estimated as the set-up (everything before the first
    increment) plus 50 times the mean increment after the first.
    """
    m = double_layer_grid(*grid_for_members(member_count(size)))
    out: dict[str, Any] = {}

    def path() -> None:
        stamps = [time.perf_counter()]
        out["path"] = sf.solve_nonlinear(
            m, ROOF_CASE, max_load_factor=1.0, initial_increment=1.0 / INCREMENTS,
            progress=lambda step, lam: stamps.append(time.perf_counter()), solver=solver,
        )
        t = np.diff(stamps)
        mean = float(np.mean(t[1:]))
        est = float(t[0] - mean) + INCREMENTS * mean
        out["est"] = min(out.get("est", np.inf), est)
        out["mean"] = min(out.get("mean", np.inf), mean)

    t_static, t_path = best_of(repeat, lambda: m.solve(), path)
    p = out["path"]
    steps = p.n_steps - 1
    est = out["est"]
    print(f"path: {m.n_members} members, {steps} increments ({int(p.iterations.sum())} "
          f"Newton iterations, {p.cutbacks} cutbacks) to load factor 1 in {t_path:.3f} s "
          f"({out['mean'] * 1e3:.0f} ms per increment after the first); linear solve "
          f"{t_static:.3f} s; {INCREMENTS} increments (estimated) {est:.2f} s = "
          f"{est / t_static:.1f} x linear (target {PATH_TARGET:g} x)")
    return {"ratio": est / t_static, "target": PATH_TARGET}


def bench_tension(size: str, repeat: int) -> dict[str, float]:
    """Model.solve with the bracing tension-only against the same grid all linear."""
    plain, ids = braced_grid(member_count(size))
    braced, _ = braced_grid(member_count(size))
    braced.set_member_properties(ids, tension_only=True)
    out: dict[str, Any] = {}

    def tension() -> None:
        out["res"] = braced.solve()

    t_plain, t_tension = best_of(repeat, lambda: plain.solve(), tension)
    slack = int(out["res"][ROOF_CASE].slack.sum())
    print(f"tension-only: {braced.n_members} members, {ids.size} bracing, {slack} slack; "
          f"{t_tension:.3f} s against the plain linear solve {t_plain:.3f} s = "
          f"{t_tension / t_plain:.1f} x (target {TENSION_TARGET:g} x)")
    return {"ratio": t_tension / t_plain, "target": TENSION_TARGET}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--path-size", default="10k")
    ap.add_argument("--tension-size", default="100k")
    ap.add_argument("--only", choices=["path", "tension"])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--solver", default="auto", help="the path's tangent solver (auto, scipy, "
                    "pardiso); the linear solves use auto")
    ap.add_argument("--check", action="store_true", help="exit 1 when a target is missed")
    args = ap.parse_args()
    warnings.simplefilter("ignore", sf.SpaceframeWarning)  # the roof's large linear deflection
    # One tiny solve first: one-off library loading is not counted.
    double_layer_grid(2, 2).solve()
    rows = []
    if args.only in (None, "path"):
        rows.append(bench_path(args.path_size, args.repeat, args.solver))
    if args.only in (None, "tension"):
        rows.append(bench_tension(args.tension_size, args.repeat))
    if args.check and any(r["ratio"] > r["target"] for r in rows):
        sys.exit(1)


if __name__ == "__main__":
    main()
