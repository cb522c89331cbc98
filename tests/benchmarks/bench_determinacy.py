"""Determinacy counts and mechanism naming at scale (a script, not a test).

```
python tests/benchmarks/bench_determinacy.py                 # 10k, 50k, 100k members; tower
python tests/benchmarks/bench_determinacy.py --sizes 10k --levels 500
```

Per grid size: the time of ``determinacy(m, modes=False)`` (the sparse
inertia count) beside one static solve of the same grid with the scipy
back-end, and the counts checked against the extended Maxwell rule
s - m = b - 3j + k (Calladine, Int. J. Solids Struct. 14, 1978) with m = 0
(the grid is stable).  Then a square lattice tower of ``4 (levels + 1)``
nodes, braced on every face except one storey: a sway mechanism; the time
for ``Model.solve`` to refuse it and name the storey's nodes.
Target (issue 12): determinacy of a 100k-member grid within 3x one static
solve; the tower's mechanism named in seconds.
"""

from __future__ import annotations

import argparse
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


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", nargs="*", default=["10k", "50k", "100k"])
    ap.add_argument("--levels", type=int, default=2000)
    args = ap.parse_args()
    warnings.simplefilter("ignore", sf.SpaceframeWarning)
    ok = True
    for text in args.sizes:
        m = grid_of(text)
        t0 = time.perf_counter()
        d = sf.determinacy(m, modes=False)
        t_det = time.perf_counter() - t0
        t0 = time.perf_counter()
        m.solve(solver="scipy")
        t_solve = time.perf_counter() - t0
        k = int(m.restraint.sum())
        good = d.mechanisms == 0 and d.self_stress == m.n_members - 3 * m.n_nodes + k
        ok &= good
        print(f"grid {m.n_members:>8} members: determinacy {t_det:6.2f} s ({d.method}), "
              f"static solve {t_solve:6.2f} s, ratio {t_det / t_solve:4.2f}; "
              f"m = {d.mechanisms}, s = {d.self_stress} {'ok' if good else 'WRONG'}")
    m = tower(args.levels, args.levels // 2)
    t0 = time.perf_counter()
    try:
        m.solve(solver="scipy")
        print("tower: not refused (WRONG)")
        ok = False
    except sf.MechanismError as exc:
        dt = time.perf_counter() - t0
        print(f"tower {m.n_nodes} nodes: mechanism named in {dt:.2f} s: {str(exc)[:160]}")
    t0 = time.perf_counter()
    d = sf.determinacy(m)
    shape = None if d.mechanism_modes is None else d.mechanism_modes.shape
    print(f"tower determinacy {time.perf_counter() - t0:.2f} s: m = {d.mechanisms}, "
          f"s = {d.self_stress}, modes {shape}")
    return 0 if ok else 1


if __name__ == "__main__":
    raise SystemExit(main())
