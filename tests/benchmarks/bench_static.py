"""Time the linear static pipeline on double-layer grid roofs of growing size.

Run from the repository root::

    python tests/benchmarks/bench_static.py                      # 10k, 100k, 1M members
    python tests/benchmarks/bench_static.py --sizes 10k 100k --solver scipy
    python tests/benchmarks/bench_static.py --sizes 1M --solver pardiso --check

Each size runs in a subprocess of its own, so the peak resident memory it
reports (``ru_maxrss``) belongs to that size alone.  Per size it prints the
time to build the model, the stability check, assembly, factorise and solve,
recovery of forces and reactions, the whole ``Model.solve`` end to end, and
the bare solver on the same reduced matrix (``spaceframe.solvers.factorize``
and ``solve`` on ``reduced_system``), with the ratio of the two.  Times are
the best of ``--repeat`` runs, end-to-end and bare runs interleaved so that
load from other processes hits both alike.

Targets (2-core machine): a grid of about 100k members end to end within
1.3 x the bare factorise-and-solve time; a grid of about 1M members completes
with PARDISO under 8 GB peak memory.  ``--check`` makes the exit code 1 when
a target is missed.
"""

from __future__ import annotations

import argparse
import gc
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from collections.abc import Sequence
from pathlib import Path
from typing import Any

#: Ratio end-to-end / bare factorise-and-solve allowed near 100k members.
RATIO_TARGET = 1.3
#: Member counts between which a run counts as "about 100k" for the ratio target.
RATIO_RANGE = (50_000, 200_000)
#: Peak resident memory allowed near 1M members with PARDISO, bytes.
MEMORY_TARGET = 8 * 1024**3
#: Member count from which the memory target applies.
MEMORY_FROM = 500_000
#: Above this many members one run per size is the default (minutes each).
_SINGLE_RUN_ABOVE = 300_000

_SUFFIX = {"k": 1_000, "m": 1_000_000}


def parse_size(text: str) -> int:
    """'100k' -> 100000, '1M' -> 1000000, '2500' -> 2500."""
    t = text.strip().lower().replace("_", "")
    factor = _SUFFIX.get(t[-1:], 1)
    digits = t[:-1] if t[-1:] in _SUFFIX else t
    try:
        value = float(digits) * factor
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"size {text!r}: expected e.g. 10000, 100k or 1M"
        ) from None
    if value < 8:
        raise argparse.ArgumentTypeError(f"size {text!r}: a grid has at least 8 members")
    return int(value)


def _positive(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        value = 0
    if value < 1:
        raise argparse.ArgumentTypeError(f"{text!r}: expected a whole number of runs, 1 or more")
    return value


def _peak_rss_bytes() -> int:
    # Linux reports ru_maxrss in kilobytes (macOS in bytes; not a target here).
    scale = 1 if sys.platform == "darwin" else 1024
    return int(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss) * scale


def measure(target_members: int, solver: str, repeat: int) -> dict[str, Any]:
    """Build one grid and time every phase; returns plain numbers (seconds, bytes)."""
    import numpy as np

    from spaceframe.analysis.stability import check_stability
    from spaceframe.analysis.static import reduced_system, solve_static
    from spaceframe.solvers import factorize, resolve_backend

    sys.path.insert(0, str(Path(__file__).resolve().parent))
    from grids import ROOF_CASE, double_layer_grid, grid_for_members

    backend = resolve_backend(solver)
    # Imports of the solver libraries (MKL alone is ~1 s) are paid once per
    # process, not per model: pay them on a tiny grid before any clock runs.
    solve_static(double_layer_grid(2, 2), solver=backend)

    nx, ny = grid_for_members(target_members)
    t = time.perf_counter()
    model = double_layer_grid(nx, ny)
    build = time.perf_counter() - t
    rss_model = _peak_rss_bytes()

    best: dict[str, float] = {}

    def keep(name: str, value: float) -> None:
        best[name] = min(best.get(name, float("inf")), value)

    info: dict[str, Any] = {}
    for _ in range(repeat):
        t = time.perf_counter()
        check_stability(model)
        keep("stability", time.perf_counter() - t)

        t = time.perf_counter()
        results = solve_static(model, solver=backend)
        keep("end_to_end", time.perf_counter() - t)
        for phase in ("assemble", "factorise", "solve", "recover"):
            keep(phase, results.timings[phase])
        keep("factorise_and_solve", results.timings["factorise"] + results.timings["solve"])
        r = results[ROOF_CASE]
        info = {
            "dofs": int(results.info["dofs"]),
            "nnz": int(results.info["nnz"]),
            "solver": results.solver,
            "residual": float(r.residual),
            "balance_z": float(abs(r.reaction_total[2] + r.applied_total[2])
                               / abs(r.applied_total[2])),
        }
        del results, r
        gc.collect()

        K, free = reduced_system(model, backend)
        rhs = model.cases[ROOF_CASE].forces.ravel()[free][:, None]
        t = time.perf_counter()
        factor = factorize(K, backend)
        t_f = time.perf_counter() - t
        t = time.perf_counter()
        u = factor.solve(rhs)
        t_s = time.perf_counter() - t
        if not np.all(np.isfinite(u)):
            raise RuntimeError(f"bare solve of {model.n_members} members gave non-finite values")
        keep("bare_factorise", t_f)
        keep("bare_solve", t_s)
        keep("bare", t_f + t_s)
        del factor, u, K, rhs
        gc.collect()

    return {
        "target": target_members,
        "nx": nx,
        "ny": ny,
        "members": model.n_members,
        "nodes": model.n_nodes,
        "backend": backend,
        "repeat": repeat,
        "build": build,
        **best,
        "ratio": best["end_to_end"] / best["bare"],
        "rss_model": rss_model,
        "peak_rss": _peak_rss_bytes(),
        **info,
    }


def _run_child(size: int, solver: str, repeat: int) -> dict[str, Any]:
    cmd = [sys.executable, str(Path(__file__).resolve()), "--child", str(size),
           "--solver", solver, "--repeat", str(repeat)]
    proc = subprocess.run(cmd, capture_output=True, text=True, check=False)
    if proc.returncode != 0:
        return {"target": size, "backend": solver, "error": proc.stderr.strip()[-2000:]}
    return dict(json.loads(proc.stdout.strip().splitlines()[-1]))


def _seconds(x: float) -> str:
    return f"{x * 1e3:.0f} ms" if x < 1 else f"{x:.2f} s"


def _table(row: dict[str, Any]) -> Any:
    from rich.table import Table

    title = f"{row['members']:,} members ({row['nx']} x {row['ny']} bays), {row['backend']}"
    table = Table(title=title, show_header=True, title_justify="left")
    table.add_column("quantity")
    table.add_column("value", justify="right")
    lines = [
        ("members", f"{row['members']:,}"),
        ("nodes", f"{row['nodes']:,}"),
        ("degrees of freedom (free)", f"{row['dofs']:,}"),
        ("non-zeros in K as factorised", f"{row['nnz']:,}"),
        ("build the model", _seconds(row["build"])),
        ("stability check", _seconds(row["stability"])),
        ("assemble", _seconds(row["assemble"])),
        ("factorise + solve", _seconds(row["factorise_and_solve"])),
        ("  of which factorise", _seconds(row["factorise"])),
        ("recover forces and reactions", _seconds(row["recover"])),
        ("end to end (Model.solve)", _seconds(row["end_to_end"])),
        ("bare factorise + solve", _seconds(row["bare"])),
        ("  of which factorise", _seconds(row["bare_factorise"])),
        ("ratio end to end / bare", f"{row['ratio']:.2f}"),
        ("peak memory (ru_maxrss)", f"{row['peak_rss'] / 1024**3:.2f} GB"),
        ("  after building the model", f"{row['rss_model'] / 1024**3:.2f} GB"),
        ("residual / z balance", f"{row['residual']:.1e} / {row['balance_z']:.1e}"),
        ("best of", f"{row['repeat']} run(s)"),
    ]
    for name, value in lines:
        table.add_row(name, value)
    return table


def _targets(row: dict[str, Any]) -> list[tuple[str, bool]]:
    out = []
    if RATIO_RANGE[0] <= row["members"] <= RATIO_RANGE[1]:
        out.append((f"end to end <= {RATIO_TARGET} x bare ({row['ratio']:.2f})",
                    row["ratio"] <= RATIO_TARGET))
    if row["members"] >= MEMORY_FROM and row["backend"] == "pardiso":
        gb = row["peak_rss"] / 1024**3
        out.append((f"peak memory < {MEMORY_TARGET / 1024**3:.0f} GB ({gb:.2f} GB)",
                    row["peak_rss"] < MEMORY_TARGET))
    return out


def _write_json(path: Path, rows: list[dict[str, Any]]) -> None:
    # Written beside the target and renamed, so a failed run leaves no half file.
    fd, tmp = tempfile.mkstemp(prefix=path.name + ".", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "w") as fh:
            json.dump(rows, fh, indent=2)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def build_parser() -> argparse.ArgumentParser:
    """Arguments of the benchmark script."""
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--sizes", nargs="+", type=parse_size,
                   default=[10_000, 100_000, 1_000_000],
                   help="target member counts, e.g. 10k 100k 1M (default: %(default)s)")
    p.add_argument("--solver", choices=["scipy", "pardiso", "auto"], default="auto",
                   help="sparse direct solver back-end (default: %(default)s)")
    p.add_argument("--repeat", type=_positive, default=None,
                   help=f"runs per size, best kept (default 5, 1 above {_SINGLE_RUN_ABOVE:,})")
    p.add_argument("--in-process", action="store_true",
                   help="run all sizes in this process (peak memory is then cumulative)")
    p.add_argument("--json", type=Path, default=None, help="also write the rows to this file")
    p.add_argument("--check", action="store_true",
                   help="exit with status 1 when a target is missed")
    p.add_argument("--child", type=int, default=None, help=argparse.SUPPRESS)
    return p


def main(argv: Sequence[str] | None = None) -> int:
    """Run the benchmark; returns the exit status."""
    args = build_parser().parse_args(argv)
    if args.child is not None:
        print(json.dumps(measure(args.child, args.solver, args.repeat or 1)))
        return 0

    from rich.console import Console

    console = Console()
    rows = []
    missed = False
    for size in args.sizes:
        repeat = args.repeat or (1 if size > _SINGLE_RUN_ABOVE else 5)
        if args.in_process:
            row = measure(size, args.solver, repeat)
        else:
            row = _run_child(size, args.solver, repeat)
        rows.append(row)
        if "error" in row:
            console.print(f"[red]{size:,} members ({args.solver}) failed:[/red]\n{row['error']}")
            missed = True
            continue
        console.print(_table(row))
        for text, ok in _targets(row):
            missed |= not ok
            verdict = "[green]met[/green]" if ok else "[red]MISSED[/red]"
            console.print(f"  target: {text}: {verdict}")
        console.print()
    if args.json is not None:
        _write_json(args.json, rows)
    return 1 if (missed and args.check) else 0


if __name__ == "__main__":
    sys.exit(main())
