"""The main job end to end: ``spaceframe run --no-pictures`` on a grid drawn in mm.

Builds a square-on-square double-layer grid (``grids.double_layer_grid``),
writes it as a DXF drawing in millimetres with the project's DXF writer
(supports on ``SUPPORT_XYZ`` layers), and a model file beside it with three
load cases (self-weight, snow on the top nodes, wind along x on the top
nodes), three combinations and an envelope (invented demo data).  Then it
times, best of ``--repeat``:

- run: ``spaceframe run --no-pictures`` in-process (``job.run`` with
  ``pictures=False``, what the command calls), with its own phase timings
  read (drawing, healing, model file), solve (every case and combination)
  and write (tables, results DXF, VTK), and the total;
- parse: ezdxf's bare ``ezdxf.readfile`` of the same drawing;
- bare solve: factorise the reduced stiffness matrix once and solve the
  three load cases' right-hand sides (``spaceframe.solvers``).

Target: run total within 2x (parse + bare solve).  Run:
``python tests/benchmarks/bench_run.py [--members 10000] [--repeat 3] [--check]``.
Do not run it at 100k members or more on a shared machine.
"""

from __future__ import annotations

import argparse
import gc
import sys
import tempfile
import time
import warnings
from pathlib import Path
from typing import Any

#: Allowed ratio run / (bare parse + bare solve).
RATIO_TARGET = 2.0

MODEL_FILE = """\
# Benchmark model (invented demo data). Results must be checked by a qualified engineer.
title = "Benchmark grid roof (demo)"
output = "results"

[units]
length = "m"
section = "mm"
force = "kN"

"""

#: The loads, combinations and envelope (formatted with the snow and wind totals, kN).
LOADS = """
[selections]
top = {{ plane = "z", at = "max" }}

[loads.dead]
self_weight = {{ factor = 1.1 }}

[loads.snow]
[[loads.snow.nodal]]
nodes = "top"
total = [0, 0, {snow:.6g}]

[loads.wind]
[[loads.wind.nodal]]
nodes = "top"
total = [{wind:.6g}, 0, 0]

[combinations]
ULS_snow = {{ dead = 1.35, snow = 1.5 }}
ULS_wind = {{ dead = 1.0, wind = 1.5 }}
SLS = {{ dead = 1.0, snow = 1.0 }}

[envelopes]
ULS = ["ULS_snow", "ULS_wind"]
"""


def build(folder: Path, target_members: int) -> tuple[Path, int]:
    """Write grid.dxf (mm) and model.toml into ``folder``; returns (model file, members)."""
    sys.path.insert(0, str(Path(__file__).resolve().parent))
    from grids import double_layer_grid, grid_for_members

    import spaceframe as sf

    nx, ny = grid_for_members(target_members)
    model = double_layer_grid(nx, ny)
    sf.io.write(folder / "grid.dxf", model, units="mm")
    plan = (3.0 * nx) * (3.0 * ny)
    # 0.8 kN/m² of snow and 0.1 kN/m² of wind drag over the plan (invented).
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from _model_files import drawing_model

    text = (MODEL_FILE + drawing_model("grid.dxf", "2 mm", 114.3, 3.2)
            + LOADS.format(snow=-0.8 * plan, wind=0.1 * plan))
    path = folder / "model.toml"
    path.write_text(text, encoding="utf-8")
    return path, int(model.n_members)


def measure(target_members: int, repeat: int) -> dict[str, Any]:
    """Time the run and its bare parts; returns plain numbers (seconds)."""
    import ezdxf
    import numpy as np

    from spaceframe.analysis.static import reduced_system
    from spaceframe.memory import keep_freed_memory
    from spaceframe.run import job
    from spaceframe.solvers import factorize, resolve_backend

    keep_freed_memory()  # as the command line's process does (spaceframe.cli.main)
    best: dict[str, float] = {}

    def keep(name: str, value: float) -> None:
        best[name] = min(best.get(name, float("inf")), value)

    with tempfile.TemporaryDirectory(prefix="bench-run-") as tmp:
        folder = Path(tmp)
        path, members = build(folder, target_members)
        size = (folder / "grid.dxf").stat().st_size
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            # One-off library loading (ezdxf, VTK, the solver) is paid once per
            # process, not per model: a first run before any clock.
            job.run(path, folder / "warm", pictures=False, force=True)
            info: dict[str, Any] = {}
            for k in range(repeat):
                t = time.perf_counter()
                out = job.run(path, folder / f"out{k}", pictures=False, force=True)
                keep("run", time.perf_counter() - t)
                for phase in ("read", "solve", "write"):
                    keep(phase, out.timings[phase])
                info = {"results": len(out.results),
                        "files": len(out.files),
                        "dxf_bytes": (out.output / "results.dxf").stat().st_size
                        if (out.output / "results.dxf").exists() else 0}
                model = out.results.model
                del out
                gc.collect()

                t = time.perf_counter()
                doc = ezdxf.readfile(folder / "grid.dxf")
                keep("parse", time.perf_counter() - t)
                del doc
                gc.collect()

                backend = resolve_backend("auto")
                K, free = reduced_system(model, backend)
                rhs = np.stack([c.forces.ravel()[free] for c in model.cases.values()], axis=1)
                t = time.perf_counter()
                factor = factorize(K, backend)
                u = factor.solve(rhs)
                keep("bare_solve", time.perf_counter() - t)
                if not np.all(np.isfinite(u)):
                    raise RuntimeError("bare solve gave non-finite values")
                del factor, u, K, rhs, model
                gc.collect()
    bare = best["parse"] + best["bare_solve"]
    return {"members": members, "drawing_bytes": size, "repeat": repeat, **best,
            "bare": bare, "ratio": best["run"] / bare, "backend": backend, **info}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--members", type=int, default=10_000, help="about this many members")
    parser.add_argument("--repeat", type=int, default=3, help="best of N runs")
    parser.add_argument("--check", action="store_true",
                        help=f"exit 1 if the run takes more than {RATIO_TARGET} x bare")
    args = parser.parse_args(argv)
    row = measure(args.members, max(1, args.repeat))
    print(f"{row['members']} members, drawing {row['drawing_bytes'] / 1e6:.1f} MB, "
          f"{row['results']} results, solver {row['backend']}, best of {row['repeat']}")
    for name, key in (("run --no-pictures", "run"), ("  read", "read"), ("  solve", "solve"),
                      ("  write", "write"), ("ezdxf bare parse", "parse"),
                      ("bare factorise + solve (3 cases)", "bare_solve"),
                      ("parse + bare solve", "bare")):
        print(f"{name:36s} {row[key]:8.3f} s")
    print(f"{'results DXF':36s} {row['dxf_bytes'] / 1e6:8.1f} MB")
    ok = row["ratio"] <= RATIO_TARGET
    print(f"ratio run / (parse + bare solve)     {row['ratio']:8.2f}  "
          f"(target <= {RATIO_TARGET}: {'met' if ok else 'MISSED'})")
    return 0 if ok or not args.check else 1


if __name__ == "__main__":
    raise SystemExit(main())
