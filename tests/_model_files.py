"""Model files (invented data) shared by the tests and the benchmarks."""

from __future__ import annotations

from pathlib import Path

TRIPOD = """title = "tripod"
{output}
[geometry]
nodes = [[0,0,3],[2,0,0],[-1,1.732,0],[-1,-1.732,0]]
members = [[0,1],[0,2],[0,3]]
[sections]
s = {{ shape = "bar", diameter = 0.02 }}
[assign]
default = {{ section = "s", material = "steel" }}
[[supports]]
nodes = [1, 2, 3]
restrain = "pinned"
[loads.snow]
[[loads.snow.nodal]]
nodes = [0]
force = ["0 kN", "0 kN", "{load} kN"]
"""


def tripod_file(folder: Path, load: float = -30.0, output: str = "") -> Path:
    """``folder/tripod.toml``: the tripod with ``load`` kN down its apex, ``output`` if given."""
    folder.mkdir(parents=True, exist_ok=True)
    toml = folder / "tripod.toml"
    toml.write_text(TRIPOD.format(output=f'output = "{output}"' if output else "", load=load))
    return toml


def drawing_model(file: str, tolerance: str, diameter: float, thickness: float,
                  section: str = "tube") -> str:
    """Model-file text reading the drawing ``file``, one circular hollow section for all (S355).

    ``diameter`` and ``thickness`` are in the model file's section unit.
    """
    return (f'[geometry]\nfile = "{file}"\ntolerance = "{tolerance}"\n\n'
            f'[sections]\n{section} = {{ shape = "chs", diameter = {diameter}, '
            f'thickness = {thickness} }}\n\n'
            f'[assign]\ndefault = {{ section = "{section}", material = "S355" }}\n')
