"""Import speed of a large DXF: ezdxf parsing against our conversion and healing.

Writes a double-layer roof grid of about 100 000 LINE entities (each member
one line, as CAD exports draw them), then times ``spaceframe.io.read`` stage
by stage:

- parse: ``ezdxf.readfile``;
- collect: walking the model space into flat coordinate lists, one array;
- model: exact node join, groups and Model building, without healing;
- heal: :func:`spaceframe.geometry.heal` on the same raw arrays;
- read(): the whole public call, for reference.

Run: ``python tests/benchmarks/bench_import.py [--lines 100000]``.  The goal
is that parsing dominates (our part well under ezdxf's).
"""

from __future__ import annotations

import argparse
import math
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np


def write_grid(path: Path, target_lines: int) -> tuple[int, int]:
    """Square-on-square grid with 8 lines per bay; returns (bays in x, bays in y)."""
    import ezdxf

    n = max(2, int(math.sqrt(target_lines / 8)))
    a, h = 3.0, 2.0
    doc = ezdxf.new("R2013")
    doc.header["$INSUNITS"] = 6
    msp = doc.modelspace()
    for i in range(n):
        for j in range(n):
            x0, y0 = i * a, j * a
            c = (x0 + a / 2, y0 + a / 2, 0.0)
            msp.add_line((x0, y0, h), (x0 + a, y0, h), dxfattribs={"layer": "TOP"})
            msp.add_line((x0, y0, h), (x0, y0 + a, h), dxfattribs={"layer": "TOP"})
            if i + 1 < n:
                msp.add_line(c, (c[0] + a, c[1], 0.0), dxfattribs={"layer": "BOTTOM"})
            if j + 1 < n:
                msp.add_line(c, (c[0], c[1] + a, 0.0), dxfattribs={"layer": "BOTTOM"})
            for dx in (0.0, a):
                for dy in (0.0, a):
                    msp.add_line(c, (x0 + dx, y0 + dy, h), dxfattribs={"layer": "DIAG"})
    for k in range(n):  # the far edges of the top grid
        msp.add_line((k * a, n * a, h), ((k + 1) * a, n * a, h), dxfattribs={"layer": "TOP"})
        msp.add_line((n * a, k * a, h), (n * a, (k + 1) * a, h), dxfattribs={"layer": "TOP"})
    doc.saveas(path)
    return n, n


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--lines", type=int, default=100_000, help="about this many LINEs")
    args = parser.parse_args()

    import ezdxf

    from spaceframe.geometry import heal
    from spaceframe.io import dxf as sfdxf
    from spaceframe.io import read, read_report
    from spaceframe.io._common import build_model, units_from_insunits
    from spaceframe.io._options import read_settings

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "grid.dxf"
        t0 = time.perf_counter()
        nx, ny = write_grid(path, args.lines)
        t_write = time.perf_counter() - t0

        t0 = time.perf_counter()
        doc = ezdxf.readfile(path)
        t_parse = time.perf_counter() - t0
        n_lines = len(doc.modelspace())

        t0 = time.perf_counter()
        names = {e.dxf.name.lower(): e.dxf.name for e in doc.layers}
        collector = sfdxf._Collector(str(path), lambda _name: True, names)
        collector.visit(doc.modelspace(), None, 0)
        raw = collector.raw()
        t_collect = time.perf_counter() - t0

        units = units_from_insunits(doc.header["$INSUNITS"], where=str(path))
        assert units is not None
        t0 = time.perf_counter()
        settings = read_settings(
            path, tolerance=None, heal=False, edges_as_members=False, heal_options={}
        )
        unhealed = build_model(raw, settings, units=units, meta={})
        t_model = time.perf_counter() - t0

        t0 = time.perf_counter()
        healed = heal(unhealed.nodes, unhealed.members)
        t_heal = time.perf_counter() - t0

        t0 = time.perf_counter()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            model = read(path)
        t_read = time.perf_counter() - t0

    # every line is one distinct member; top (n+1)^2 and bottom n^2 nodes
    assert model.n_members == healed.members.shape[0] == n_lines
    assert model.n_nodes == (nx + 1) * (ny + 1) + nx * ny
    rows = [
        ("ezdxf parse", t_parse),
        ("collect entities", t_collect),
        ("build Model (no heal)", t_model),
        ("heal", t_heal),
        ("read() total", t_read),
    ]
    ours = t_collect + t_model + t_heal
    try:
        from rich.console import Console
        from rich.table import Table

        table = Table(title=f"DXF import: {n_lines} LINEs, grid {nx} x {ny} bays")
        table.add_column("stage")
        table.add_column("seconds", justify="right")
        table.add_column("entities/s", justify="right")
        for name, sec in rows:
            table.add_row(name, f"{sec:.3f}", f"{n_lines / sec:,.0f}")
        Console().print(table)
        Console().print(
            f"our share (collect + model + heal) / parse = {ours / t_parse:.2f}; "
            f"model: {model.n_nodes} nodes, {model.n_members} members; "
            f"writing the file took {t_write:.1f} s"
        )
    except ImportError:
        for name, sec in rows:
            print(f"{name:24s} {sec:8.3f} s  {n_lines / sec:12,.0f} entities/s")
        print(f"our share / parse = {ours / t_parse:.2f}")
    np.testing.assert_equal(model.n_nodes, unhealed.n_nodes)
    print(read_report(model))


if __name__ == "__main__":
    main()
