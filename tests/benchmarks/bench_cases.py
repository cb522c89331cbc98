"""Many load cases in one solve (a script, not a test).

```
python tests/benchmarks/bench_cases.py                     # 100k members, 1000 cases
python tests/benchmarks/bench_cases.py --size 10k --cases 200 --check
```

Builds a double-layer grid (``grids.double_layer_grid``, its roof case) and
adds ``cases - 1`` more load cases, each 20 top nodes picked at random under
1 kN down (invented demo data).  Each count runs in its own subprocess, so
that the peak memory (``ru_maxrss``) is that run's.  It times ``Model.solve``
with the roof case alone and with every case (best of ``--repeat``, the
phases from ``Results.timings``), and the bulk write of every result as
binary arrays (``spaceframe.io.tables.write_arrays``).  Target (issue 14):
``cases`` cases within 2x the time of one; the peak memory is reported.
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from _frames import grid_of

#: Allowed ratio of the many-case solve to the one-case solve.
RATIO_TARGET = 2.0


def measure(size: str, cases: int, repeat: int) -> dict[str, float]:
    """Time one solve with ``cases`` load cases (in this process)."""
    from spaceframe.io import tables

    warnings.simplefilter("ignore")
    m = grid_of(size)
    rng = np.random.default_rng(1)
    top = np.flatnonzero(m.nodes[:, 2] == m.nodes[:, 2].max())
    for k in range(cases - 1):
        m.add_load(f"c{k}", rng.choice(top, 20, replace=False), (0.0, 0.0, -1.0e3))
    m.solve()  # warm: the back-end's one-off loading is not counted
    best, timings = float("inf"), {}
    for _ in range(repeat):
        t = time.perf_counter()
        res = m.solve()
        took = time.perf_counter() - t
        if took < best:
            best, timings = took, dict(res.timings)
    with tempfile.TemporaryDirectory() as tmp:
        t = time.perf_counter()
        tables.write_arrays(tmp, res)
        write = time.perf_counter() - t
    return {"members": m.n_members, "cases": cases, "solve": best, "write_arrays": write,
            **{f"phase_{k}": v for k, v in timings.items()},
            "peak_gb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1e6}


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", default="100k", help="members, e.g. 10k, 100k")
    ap.add_argument("--cases", type=int, default=1000)
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--check", action="store_true", help=f"exit 1 above {RATIO_TARGET} x")
    ap.add_argument("--one", nargs=2, metavar=("SIZE", "CASES"), help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.one:
        print(json.dumps(measure(args.one[0], int(args.one[1]), args.repeat)))
        return 0
    rows = []
    for n in (1, args.cases):
        out = subprocess.run([sys.executable, __file__, "--one", args.size, str(n),
                              "--repeat", str(args.repeat)],
                             capture_output=True, text=True, check=True).stdout
        rows.append(json.loads(out.strip().splitlines()[-1]))
    one, many = rows
    ratio = many["solve"] / one["solve"]
    print(f"{one['members']} members")
    for r in rows:
        phases = ", ".join(f"{k[6:]} {v:.2f} s" for k, v in r.items()
                           if k.startswith("phase_") and k != "phase_total")
        print(f"  {r['cases']:>5} cases: solve {r['solve']:.2f} s ({phases}); "
              f"write_arrays {r['write_arrays']:.2f} s; peak {r['peak_gb']:.2f} GB")
    verdict = "met" if ratio <= RATIO_TARGET else "MISSED"
    print(f"  ratio {args.cases} cases / 1 case: {ratio:.1f} (target <= {RATIO_TARGET}: "
          f"{verdict})")
    return 1 if args.check and ratio > RATIO_TARGET else 0


if __name__ == "__main__":
    raise SystemExit(main())
