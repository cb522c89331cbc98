"""Writing a model to DXF and reading it back keeps its supports."""

from __future__ import annotations

from pathlib import Path

import ezdxf
import numpy as np
import pytest
from conftest import AREA, E, H, W, loaded_tripod, tripod_wind_forces

import spaceframe as sf
from spaceframe.io import dxf


def _tripod_with_kinds() -> sf.Model:
    """The shared loaded tripod, one foot pinned, one on a roller (z only) plus a
    horizontal spring, one held in x and z."""
    m = sf.Model()
    src = loaded_tripod()
    m.add_nodes(src.nodes)
    m.add_members(src.members, area=AREA, E=E)
    m.add_group("legs", [0, 1, 2])
    m.add_support([0])
    m.add_support([1], x=False, y=False, z=True)
    m.add_spring([1], 2e6, 3.5e6, 0.0)
    m.add_support([2], x=True, y=False, z=True)
    return m


def test_supports_written_on_layers_of_their_own(tmp_path: Path) -> None:
    m = _tripod_with_kinds()
    doc = ezdxf.readfile(dxf.write(tmp_path / "t.dxf", m, units="mm"))
    points = {(p.dxf.layer, tuple(np.round(np.asarray(p.dxf.location) / 1e3, 9)))
              for p in doc.modelspace().query("POINT")}
    want = {
        ("SUPPORT_XYZ", tuple(np.round(m.nodes[0], 9))),
        ("SUPPORT_Z", tuple(np.round(m.nodes[1], 9))),
        ("SPRING_2000000.0_3500000.0_0.0", tuple(np.round(m.nodes[1], 9))),
        ("SUPPORT_XZ", tuple(np.round(m.nodes[2], 9))),
    }
    assert points == want


def test_round_trip_keeps_supports_and_solves_alike(tmp_path: Path) -> None:
    m = _tripod_with_kinds()
    path = dxf.write(tmp_path / "t.dxf", m, units="mm")
    back = dxf.read(path)
    # Node ids may be renumbered by the reader: compare by position.
    order = [int(np.argmin(np.linalg.norm(back.nodes - x, axis=1))) for x in m.nodes]
    np.testing.assert_allclose(back.nodes[order], m.nodes, atol=1e-9)
    np.testing.assert_array_equal(back.restraint[order], m.restraint)
    np.testing.assert_allclose(back.springs[order], m.springs, rtol=1e-15)
    # Written again, the supports are not doubled by the markers they came back as.
    again = ezdxf.readfile(dxf.write(tmp_path / "again.dxf", back, units="mm"))
    assert len(again.modelspace().query("POINT")) == 4


def test_round_trip_of_the_loaded_tripod_gives_the_closed_form(tmp_path: Path) -> None:
    src = loaded_tripod()
    back = dxf.read(dxf.write(tmp_path / "tripod.dxf", src, units="m"))
    assert back.restraint.sum() == 9
    back.set_member_properties(np.arange(back.n_members), area=AREA, E=E)
    apex = int(np.argmax(back.nodes[:, 2]))
    back.add_load("wind", [apex], (H, 0.0, 0.0))
    back.add_load("snow", [apex], (0.0, 0.0, -W))
    res = back.solve()
    # Closed form (joint equilibrium at the apex), matched by leg direction.
    feet = back.members[:, 0] + back.members[:, 1] - apex
    src_feet = src.members[:, 0] + src.members[:, 1] - 3
    expected = {tuple(np.round(src.nodes[f], 9)): n
                for f, n in zip(src_feet, tripod_wind_forces(), strict=True)}
    got = {tuple(np.round(back.nodes[f], 9)): n
           for f, n in zip(feet, res["wind"].axial_forces, strict=True)}
    assert got.keys() == expected.keys()
    for key, n in expected.items():
        assert got[key] == pytest.approx(n, abs=1e-9 * H)


def test_support_point_off_every_node_is_refused(tmp_path: Path) -> None:
    m = _tripod_with_kinds()
    path = dxf.write(tmp_path / "t.dxf", m, units="m")
    doc = ezdxf.readfile(path)
    doc.modelspace().add_point((10.0, 10.0, 0.0), dxfattribs={"layer": "SUPPORT_Z"})
    doc.saveas(path)
    with pytest.raises(sf.ReadError, match=r"support point on layer 'SUPPORT_Z' at \(10, 10, 0\)"):
        dxf.read(path)
