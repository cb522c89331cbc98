"""Study throughput: variants per second on a local Dask cluster against one process.

    python tests/benchmarks/bench_study.py [--members 10k] [--variants 24]
    python tests/benchmarks/bench_study.py --scheduler tcp://127.0.0.1:8786

Goal (2 cores): 2 workers within 10 % of twice the one-process throughput.
With --scheduler the same study runs on a separately started scheduler
(``dask scheduler`` and ``dask worker tcp://...`` in other terminals).
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from grids import double_layer_grid, grid_for_members

from spaceframe.study import local_cluster, run_study


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--members", type=int, default=10_000)
    ap.add_argument("--variants", type=int, default=24)
    ap.add_argument("--scheduler", default=None)
    args = ap.parse_args()
    m = double_layer_grid(*grid_for_members(args.members))
    m.set_member_properties(np.arange(m.n_members), yield_strength=355e6,
                            second_moment=1.2e-6, buckling_curve="a")
    vary = {"case.roof": list(np.linspace(0.5, 1.5, args.variants))}
    t0 = time.perf_counter()
    run_study(m, vary, scheduler="serial", solver="scipy")
    t_serial = time.perf_counter() - t0
    from dask.distributed import Client

    t0 = time.perf_counter()
    if args.scheduler:
        client = Client(args.scheduler)
    else:
        client = Client(local_cluster(2))  # the cluster a study starts by itself
    t_start = time.perf_counter() - t0
    t0 = time.perf_counter()
    run_study(m, vary, client=client, solver="scipy")
    t_dask = time.perf_counter() - t0
    client.close()
    print(f"  starting the cluster / connecting: {t_start:.1f} s (not in the rate)")
    rate_s, rate_d = args.variants / t_serial, args.variants / t_dask
    print(f"{m.n_members} members, {args.variants} variants")
    print(f"  one process      {rate_s:6.2f} variants/s")
    print(f"  dask ({args.scheduler or '2 local workers'})  {rate_d:6.2f} variants/s   "
          f"speed-up {rate_d / rate_s:.2f} (goal >= 1.8)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
