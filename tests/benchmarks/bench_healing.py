"""Benchmark of :func:`spaceframe.geometry.heal` on a large drawn line set.

Not collected by pytest (the file name does not start with ``test_``).  Run::

    python tests/benchmarks/bench_healing.py            # ~1M raw lines
    python tests/benchmarks/bench_healing.py --nx 200   # smaller
    python tests/benchmarks/bench_healing.py --crossings --nx 100

The model is a square-on-square double-layer grid as a drawing would give
it: every line has its own two end points (no shared node ids), each end
jittered by up to a fifth of the tolerance per axis, the top and bottom
chords are drawn as single lines right across the grid through the joints,
and a fraction of the diagonals is drawn twice (reversed).  The healed node
and member counts are checked against the closed forms of the grid.
"""

from __future__ import annotations

import argparse
import resource
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np

# Let the script run from a checkout without installing the package.
sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from spaceframe.geometry import HealResult, heal
from spaceframe.tolerances import GEOMETRY_TOLERANCE


def drawn_grid(
    nx: int,
    ny: int,
    *,
    pitch: float = 3.0,
    depth: float = 2.0,
    jitter: float = 0.2 * GEOMETRY_TOLERANCE,
    duplicate_fraction: float = 0.01,
    seed: int = 0,
) -> tuple[np.ndarray, np.ndarray, dict[str, int]]:
    """Line soup of a square-on-square grid with continuous chords.

    Returns
    -------
    nodes : (2 L, 3) float
        Two jittered end points per line.
    members : (L, 2) int64
        ``[2 i, 2 i + 1]`` for line ``i``.
    expected : dict
        Healed node and member counts and the number of duplicates drawn.
    """
    rng = np.random.default_rng(seed)
    i, j = np.meshgrid(np.arange(nx + 1), np.arange(ny + 1), indexing="ij")
    top = np.stack([i * pitch, j * pitch, np.full(i.shape, depth)], axis=-1).astype(float)
    ib, jb = np.meshgrid(np.arange(nx), np.arange(ny), indexing="ij")
    bottom = np.stack([(ib + 0.5) * pitch, (jb + 0.5) * pitch, np.zeros(ib.shape)], axis=-1)

    b = bottom.reshape(-1, 3)
    corners = [top[:-1, :-1], top[1:, :-1], top[:-1, 1:], top[1:, 1:]]
    diag = np.concatenate([np.stack([b, c.reshape(-1, 3)], axis=1) for c in corners])
    top_x = np.stack([top[0, :], top[-1, :]], axis=1)  # lines along x, one per j
    top_y = np.stack([top[:, 0], top[:, -1]], axis=1)  # lines along y, one per i
    chords = [top_x, top_y]
    if nx >= 2:
        chords.append(np.stack([bottom[0, :], bottom[-1, :]], axis=1))
    if ny >= 2:
        chords.append(np.stack([bottom[:, 0], bottom[:, -1]], axis=1))
    n_dup = round(duplicate_fraction * len(diag))
    dup = diag[rng.choice(len(diag), n_dup, replace=False)][:, ::-1]
    lines = np.concatenate([diag, *chords, dup])
    nodes = lines.reshape(-1, 3) + rng.uniform(-jitter, jitter, (2 * len(lines), 3))
    members = np.arange(2 * len(lines), dtype=np.int64).reshape(-1, 2)
    expected = {
        # Top (nx+1)(ny+1) joints plus one bottom joint per bay.
        "nodes": (nx + 1) * (ny + 1) + nx * ny,
        # Top chords nx(ny+1) + ny(nx+1), bottom (nx-1)ny + nx(ny-1),
        # diagonals 4 nx ny: together 8 nx ny.
        "members": 8 * nx * ny,
        "duplicates": n_dup,
    }
    return nodes, members, expected


def _table(result: HealResult, total: float) -> str:
    rows = [f"{'step':<20}{'count':>10}{'seconds':>10}"]
    rows += [f"{s.name:<20}{s.count:>10}{s.seconds:>10.3f}" for s in result.report.steps]
    rows.append(f"{'total heal()':<20}{'':>10}{total:>10.3f}")
    return "\n".join(rows)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nx", type=int, default=500, help="bays along x (default 500)")
    parser.add_argument("--ny", type=int, default=None, help="bays along y (default nx)")
    parser.add_argument("--crossings", action="store_true", help="also split at crossings")
    parser.add_argument(
        "--tracemalloc", action="store_true", help="also measure peak traced memory (slower)"
    )
    args = parser.parse_args()
    ny = args.nx if args.ny is None else args.ny

    nodes, members, expected = drawn_grid(args.nx, ny)
    print(f"raw: {len(members):,} lines, {len(nodes):,} end points ({args.nx} x {ny} bays)")
    rss_before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss

    start = time.perf_counter()
    result = heal(nodes, members, split_crossings=args.crossings)
    total = time.perf_counter() - start
    rss_after = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss

    print(_table(result, total))
    print(f"healed: {len(result.members):,} members, {len(result.nodes):,} nodes")
    # ru_maxrss is in KiB on Linux.
    print(f"peak RSS of the process: {rss_after / 1024:.0f} MiB")
    print(f"peak RSS before heal():  {rss_before / 1024:.0f} MiB (input generation)")
    ok = (
        len(result.nodes) == expected["nodes"]
        and len(result.members) == expected["members"]
        and result.report.step("remove_duplicates").count == expected["duplicates"]
    )
    print(f"expected {expected}: {'OK' if ok else 'MISMATCH'}")

    if args.tracemalloc:
        tracemalloc.start()
        heal(nodes, members, split_crossings=args.crossings)
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        print(f"peak memory traced inside heal(): {peak / 2**20:.0f} MiB")
    return 0 if ok else 1


if __name__ == "__main__":
    raise SystemExit(main())
