"""Determinacy counts and mechanism naming at scale (a script, not a test).

```
python tests/benchmarks/bench_determinacy.py                 # 10k, 50k, 100k members; tower
python tests/benchmarks/bench_determinacy.py --sizes 10k --levels 500
python tests/benchmarks/bench_determinacy.py --sizes 100k --levels 0 --repeat 5 --check
```

Per grid size: the time of ``determinacy(m, modes=False)`` (the sparse
inertia count) beside one static solve of the same grid (``Model.solve``
with ``--solver``, default auto), the two run in turn ``--repeat`` times
and each the best of its repeats (the spread, slowest / best, is printed),
and the counts checked against the extended Maxwell rule
s - m = b - 3j + k (Calladine, Int. J. Solids Struct. 14, 1978) with m = 0
(the grid is stable).  Then (unless ``--levels 0``) a square lattice tower
of ``4 (levels + 1)`` nodes, braced on every face except one storey: a sway
mechanism; the time for ``Model.solve`` to refuse it and name the storey's
nodes.  Target (issue 12): determinacy of a 100k-member grid within 3x one
static solve (``--check`` exits 1 when missed, or when a count is wrong);
the tower's mechanism named in seconds.
"""

from __future__ import annotations

import argparse
import resource
import sys
import time
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from _frames import grid_of

import spaceframe as sf


def tower(levels: int, open_storey: int, h: float = 3.0, w: float = 2.0) -> sf.Model:
    """Square tower, four legs, one diagonal per face per storey except ``open_storey``.

    Plan bracing (a diagonal) at every level keeps each level's square
    rigid, so removing one storey's face diagonals leaves that storey free
    to sway (and twist): inextensional mechanisms.  Base pinned.
    """
    corners = np.array([[0, 0], [w, 0], [w, w], [0, w]], dtype=float)
    lev = np.arange(levels + 1)
    xyz = np.c_[np.tile(corners, (levels + 1, 1)), np.repeat(lev * h, 4)]
    ids = np.arange(4 * (levels + 1)).reshape(levels + 1, 4)
    nxt = np.roll(ids, -1, axis=1)
    legs = np.c_[ids[:-1].ravel(), ids[1:].ravel()]
    rings = np.c_[ids[1:].ravel(), nxt[1:].ravel()]
    plan = np.c_[ids[1:, 0], ids[1:, 2]]
    keep = np.ones(levels, dtype=bool)
    keep[open_storey] = False
    faces = np.c_[ids[:-1][keep].ravel(), nxt[1:][keep].ravel()]
    m = sf.Model()
    m.add_nodes(xyz)
    m.add_members(np.concatenate([legs, rings, plan, faces]), area=1e-3, E=2.1e11)
    m.add_support(ids[0])
    return m


#: Largest ratio of determinacy to one static solve (issue 12).
TARGET = 3.0


def grid_row(text: str, solver: str, repeat: int) -> tuple[bool, bool]:
    """Time determinacy against a static solve on one grid; print the row.

    Returns whether the counts are right and whether the ratio is within the
    target (always true below 50k members, where the target does not apply).
    """
    m = grid_of(text)
    m.solve(solver=solver)  # loads MKL and the like before any clock
    t_det, t_solve = [], []
    for _ in range(repeat):
        t0 = time.perf_counter()
        d = sf.determinacy(m, modes=False)
        t_det.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        m.solve(solver=solver)
        t_solve.append(time.perf_counter() - t0)
    k = int(m.restraint.sum())
    good = d.mechanisms == 0 and d.self_stress == m.n_members - 3 * m.n_nodes + k
    ratio = min(t_det) / min(t_solve)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"grid {m.n_members:>8} members: determinacy {min(t_det):6.3f} s ({d.method}), "
          f"static solve {min(t_solve):6.3f} s, ratio {ratio:4.2f} (target {TARGET:g}); "
          f"spread {max(t_det) / min(t_det):.2f}, {max(t_solve) / min(t_solve):.2f}; "
          f"peak {peak:.0f} MB; m = {d.mechanisms}, s = {d.self_stress} "
          f"{'ok' if good else 'WRONG'}")
    return good, ratio <= TARGET or m.n_members < 50_000


def tower_rows(levels: int) -> bool:
    """The tower with one open storey: refused and named; its determinacy."""
    m = tower(levels, levels // 2)
    t0 = time.perf_counter()
    try:
        m.solve(solver="scipy")
        print("tower: not refused (WRONG)")
        return False
    except sf.MechanismError as exc:
        dt = time.perf_counter() - t0
        print(f"tower {m.n_nodes} nodes: mechanism named in {dt:.2f} s: {str(exc)[:160]}")
    t0 = time.perf_counter()
    d = sf.determinacy(m)
    shape = None if d.mechanism_modes is None else d.mechanism_modes.shape
    print(f"tower determinacy {time.perf_counter() - t0:.2f} s: m = {d.mechanisms}, "
          f"s = {d.self_stress}, modes {shape}")
    return True


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", nargs="*", default=["10k", "50k", "100k"])
    ap.add_argument("--levels", type=int, default=2000, help="tower storeys (0: no tower)")
    ap.add_argument("--solver", default="auto", help="back-end of the static solve")
    ap.add_argument("--repeat", type=int, default=3, help="best of N (default 3)")
    ap.add_argument("--check", action="store_true",
                    help=f"exit 1 when a count is wrong or a ratio (from 50k members) "
                         f"exceeds {TARGET:g}")
    args = ap.parse_args()
    warnings.simplefilter("ignore", sf.SpaceframeWarning)
    ok = fast = True
    for text in args.sizes:
        good, within = grid_row(text, args.solver, args.repeat)
        ok &= good
        fast &= within
    if args.levels > 0:
        ok &= tower_rows(args.levels)
    if args.check:
        print(f"target {TARGET:g}x one static solve: {'met' if fast else 'MISSED'}")
    return 0 if ok and (fast or not args.check) else 1


if __name__ == "__main__":
    raise SystemExit(main())
