"""Pictures of a results folder: seconds per picture on generated double-layer grids.

Builds :func:`grids.double_layer_grid` for each size, solves it with a second
case and a combination, and renders off-screen through
:func:`spaceframe.viewer.screenshots` (one scene, updated in place, one
render per picture): 2 results x 3 views.  Prints the scene build, the
seconds per picture and the total.  Target: about one second per picture at
100k members (``--check`` exits 1 when the mean picture takes over 1.5 s).

    python tests/benchmarks/bench_pictures.py --sizes 10k
    python tests/benchmarks/bench_pictures.py --sizes 100k --check
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from collections.abc import Sequence
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from bench_static import parse_size
from grids import ROOF_CASE, double_layer_grid, grid_for_members

#: Mean seconds per picture above which ``--check`` fails.
TARGET = 1.5


def measure(members: int) -> dict[str, float]:
    import numpy as np
    import pyvista as pv

    from spaceframe import viewer

    pv.OFF_SCREEN = True
    nx, ny = grid_for_members(members)
    model = double_layer_grid(nx, ny)
    top = np.flatnonzero(model.nodes[:, 2] == 0.0)
    model.add_load("wind", top[::2], (3e3, 0.0, 0.0))
    model.add_combination("roof+wind", {ROOF_CASE: 1.35, "wind": 1.5})
    res = model.solve()
    stamps: list[float] = []
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory() as folder:
        paths = viewer.screenshots(folder, res, cases=[ROOF_CASE, "roof+wind"],
                                   progress=lambda _: stamps.append(time.perf_counter()))
    total = time.perf_counter() - t0
    stamps.append(t0 + total)
    per = np.diff(stamps)
    return {"members": float(model.n_members), "pictures": float(len(paths)),
            "build_and_first": float(stamps[1] - t0), "mean_after_first": float(per[1:].mean()),
            "total": total}


def main(argv: Sequence[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--sizes", nargs="+", type=parse_size, default=[10_000, 100_000])
    p.add_argument("--check", action="store_true", help="exit 1 when a target is missed")
    args = p.parse_args(argv)
    ok = True
    for size in args.sizes:
        row = measure(size)
        print(f"{int(row['members']):>9} members: {int(row['pictures'])} pictures in "
              f"{row['total']:.1f} s; scene + first picture {row['build_and_first']:.2f} s, "
              f"then {row['mean_after_first']:.2f} s per picture")
        ok &= row["mean_after_first"] <= TARGET
    return 0 if ok or not args.check else 1


if __name__ == "__main__":
    raise SystemExit(main())
