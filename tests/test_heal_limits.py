"""Healing limits seen through the readers: an import that heals away every
member is refused with the reason, in the drawing's unit.

Check values are closed forms from the geometry each test builds.
"""

from __future__ import annotations

from pathlib import Path

import ezdxf
import pytest

import spaceframe.io as sfio
from spaceframe.errors import ReadError, SpaceframeWarning

Line = tuple[tuple[float, ...], tuple[float, ...]]


def _dxf(path: Path, lines: list[Line], insunits: int) -> Path:
    doc = ezdxf.new()
    doc.header["$INSUNITS"] = insunits
    msp = doc.modelspace()
    for a, b in lines:
        msp.add_line(a, b, dxfattribs={"layer": "FRAME"})
    doc.saveas(path)
    return path


def test_drawing_whose_members_all_heal_away_is_refused(tmp_path: Path) -> None:
    # A 0.5-unit tripod declared in metres ($INSUNITS 6): every line is
    # 0.5 mm long at the default 1 mm tolerance (a millimetre drawing read
    # as metres).
    top = (0.0, 0.0, 0.5e-3)
    feet = [(0.0, 0.0, 0.0), (0.3e-3, 0.0, 0.0), (0.0, 0.3e-3, 0.0)]
    path = _dxf(tmp_path / "tiny.dxf", [(f, top) for f in feet], insunits=6)
    with pytest.raises(ReadError, match=r"all 3 members are shorter than the tolerance "
                                        r"0\.001 m: are the units right") as info, \
            pytest.warns(SpaceframeWarning, match="removed 3 drawn member"):
        sfio.read(path)
    assert "\n" not in str(info.value)


def test_the_same_drawing_in_millimetres_reads(tmp_path: Path) -> None:
    top = (0.0, 0.0, 500.0)
    feet = [(0.0, 0.0, 0.0), (300.0, 0.0, 0.0), (0.0, 300.0, 0.0)]
    model = sfio.read(_dxf(tmp_path / "mm.dxf", [(f, top) for f in feet], insunits=4))
    assert (model.n_nodes, model.n_members) == (4, 3)


def test_drawing_too_wide_to_resolve_the_tolerance_is_refused(tmp_path: Path) -> None:
    # 4e307 m wide: squared distances overflow float64 (max ~1.8e308) and
    # round-off (eps * 4e307 ~ 1e292 m) dwarfs the 1 mm tolerance.
    lines = [((0.0, 0.0, 0.0), (4e307, 0.0, 0.0)), ((0.0, 0.0, 0.0), (0.0, 1.0, 0.0))]
    path = _dxf(tmp_path / "wide.dxf", lines, insunits=6)
    with pytest.raises(ReadError, match=r"coordinates reach 4e\+307 m .* cannot be resolved"):
        sfio.read(path)
