"""The suffix tables of spaceframe.io, dispatch, and a round trip through every writer."""

from __future__ import annotations

import importlib
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import spaceframe as sf
import spaceframe.io as sfio


@pytest.fixture
def grouped_frame() -> sf.Model:
    """A two-bay plane truss lifted into 3D, every member in one group."""
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [3, 0, 0], [6, 0, 0], [1.5, 1, 1.2], [4.5, 1, 1.2]])
    m.add_members([[0, 1], [1, 2]], group="BOTTOM")
    m.add_members([[3, 4]], group="TOP")
    m.add_members([[0, 3], [3, 1], [1, 4], [4, 2]], group="WEB")
    m.add_panels([[0, 1, 3]], group="SKIN")
    return m


def test_tables_point_at_modules_with_the_right_function() -> None:
    assert {".dxf", ".msh", ".vtu", ".vtk", ".vtp", ".obj", ".inp", ".stl"} <= set(sfio.READERS)
    assert ".dxf" in sfio.WRITERS
    for table, func in ((sfio.READERS, "read"), (sfio.WRITERS, "write")):
        for suffix, module in table.items():
            assert suffix == suffix.lower() and suffix.startswith(".")
            mod = importlib.import_module(f"spaceframe.io.{module}")
            assert callable(getattr(mod, func)), (suffix, module)


def test_duplicate_registration_is_refused() -> None:
    before = dict(sfio.READERS)
    with pytest.raises(sf.SpaceframeError, match=r"'\.dxf' is already registered \(module 'dxf'\)"):
        sfio.register_reader(".DXF", "mesh")
    with pytest.raises(sf.SpaceframeError, match=r"already registered"):
        sfio.register_writer(".dxf", "dxf")
    with pytest.raises(sf.SpaceframeError, match=r"must look like '\.dxf'"):
        sfio.register_reader("dxf", "dxf")
    assert sfio.READERS == before


def test_unknown_suffix_lists_the_supported_ones(tmp_path: Path, grouped_frame: sf.Model) -> None:
    path = tmp_path / "frame.step"
    path.write_text("ISO-10303-21;")
    with pytest.raises(
        sf.ReadError, match=r"frame\.step: no reader for suffix '\.step'; supported: .*\.dxf.*\.msh"
    ):
        sfio.read(path)
    with pytest.raises(sfio.WriteError, match=r"no writer for suffix '\.step'; supported: \.dxf"):
        sfio.write(path, grouped_frame)
    assert path.read_text() == "ISO-10303-21;"


@pytest.mark.parametrize("suffix", sorted(sfio.WRITERS))
def test_round_trip_through_every_writer(
    tmp_path: Path, grouped_frame: sf.Model, suffix: str
) -> None:
    path = tmp_path / f"frame{suffix}"
    assert sfio.write(path, grouped_frame) == path
    back = sfio.read(path)

    def keyed(m: sf.Model, ids: np.ndarray) -> set[frozenset[tuple[float, ...]]]:
        xyz = np.round(m.nodes, 9)
        return {frozenset((tuple(xyz[i]), tuple(xyz[j]))) for i, j in m.members[ids].tolist()}

    assert back.n_nodes == grouped_frame.n_nodes and back.n_members == grouped_frame.n_members
    assert sorted(np.round(back.nodes, 9).tolist()) == sorted(grouped_frame.nodes.tolist())
    assert set(back.groups) == set(grouped_frame.groups)
    for name, ids in grouped_frame.groups.items():
        assert keyed(back, back.groups[name]) == keyed(grouped_frame, ids), name
    assert back.n_panels == 1 and set(back.panel_groups) == {"SKIN"}


def test_format_overrides_the_suffix(tmp_path: Path, grouped_frame: sf.Model) -> None:
    path = tmp_path / "frame.txt"
    sfio.write(path, grouped_frame, format="dxf")
    model = sfio.read(path, format=".DXF")
    assert model.n_members == grouped_frame.n_members
    with pytest.raises(sf.ReadError, match=r"no reader for format 'step'"):
        sfio.read(path, format="step")


def test_read_passes_options_through(tmp_path: Path, grouped_frame: sf.Model) -> None:
    path = tmp_path / "frame.dxf"
    sfio.write(path, grouped_frame, units="mm")
    with pytest.warns(sf.SpaceframeWarning, match="overrides the header"):
        model = sfio.read(path, units="m", layers=["TOP"])
    assert model.n_members == 1
    # read as metres, the millimetre drawing is 1000 times too long
    assert model.lengths[0] == pytest.approx(3000.0, rel=1e-12)


def test_importing_io_loads_no_file_format_library() -> None:
    heavy = "('ezdxf', 'meshio', 'pyvista', 'vtk', 'pint')"
    code = f"import sys, spaceframe.io; print(sorted(m for m in {heavy} if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"
