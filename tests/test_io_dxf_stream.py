"""Big drawings streamed entity by entity (ezdxf's iterdxf), and when they are read whole.

The streamed reader must give the model the whole-file reader gives; test_io_dxf.py runs
every reading test with both.  Here: which drawings are streamed, and the fall-backs.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pytest
from _frame_keys import member_keys

from spaceframe.io import _dxf_stream, read_report
from spaceframe.io import dxf as sfdxf

ezdxf = pytest.importorskip("ezdxf")

pytestmark = pytest.mark.filterwarnings("ignore::spaceframe.errors.SpaceframeWarning")


def _drawing(path: Path, *, insert: bool = False, units: int = 4) -> Path:
    """A 4 x 3 bay plane grid of 1000 mm squares with diagonals, on two layers."""
    doc = ezdxf.new("R2013")
    doc.header["$INSUNITS"] = units
    doc.layers.add("Chords")
    doc.layers.add("Diagonals")
    msp = doc.modelspace()
    for i in range(5):
        msp.add_line((1000.0 * i, 0, 0), (1000.0 * i, 3000.0, 0), dxfattribs={"layer": "CHORDS"})
    for j in range(4):
        msp.add_line((0, 1000.0 * j, 0), (4000.0, 1000.0 * j, 0), dxfattribs={"layer": "chords"})
    for i in range(4):
        for j in range(3):
            msp.add_line((1000.0 * i, 1000.0 * j, 0), (1000.0 * (i + 1), 1000.0 * (j + 1), 0),
                         dxfattribs={"layer": "Diagonals"})
    msp.add_lwpolyline([(0, 0), (0, -500), (4000, -500), (4000, 0)],
                       dxfattribs={"layer": "Chords"})
    msp.add_point((2000.0, 1500.0, 0.0), dxfattribs={"layer": "MARKS"})
    msp.add_3dface([(0, 0, 0), (1000, 0, 0), (1000, 1000, 0), (0, 1000, 0)],
                   dxfattribs={"layer": "ROOF"})
    msp.add_arc((0, 0), 300, 0, 90, dxfattribs={"layer": "NOTES"})
    if insert:
        block = doc.blocks.new("POST")
        block.add_line((0, 0, 0), (0, 0, 1000.0))
        msp.add_blockref("POST", (4000.0, 3000.0, 0.0), dxfattribs={"layer": "Posts"})
    doc.saveas(path)
    return path


def _read(path: Path) -> tuple[object, list[str]]:
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        model = sfdxf.read(path)
    return model, [str(w.message) for w in caught]


def test_streamed_model_is_the_whole_file_model(tmp_path: Path,
                                                monkeypatch: pytest.MonkeyPatch) -> None:
    path = _drawing(tmp_path / "grid.dxf")
    whole, whole_notes = _read(path)
    assert "dxf:streamed" not in whole.meta  # 9 kB: under the threshold, read whole
    monkeypatch.setattr(_dxf_stream, "STREAM_MIN_BYTES", 0)
    streamed, streamed_notes = _read(path)
    assert "iterdxf" in streamed.meta["dxf:streamed"]
    assert "ezdxf's audit was not run" in read_report(streamed)
    assert "iterdxf" not in read_report(whole)
    # Counted from the drawing (a line drawn through a joint is split there): 5 lines across
    # in 3 pieces and 4 along in 4, 12 diagonals, 3 polyline segments.
    assert whole.n_members == 31 + 12 + 3
    np.testing.assert_array_equal(streamed.nodes, whole.nodes)
    assert member_keys(streamed) == member_keys(whole)
    assert streamed.groups.keys() == whole.groups.keys() == {"Chords", "Diagonals"}
    for name in whole.groups:
        np.testing.assert_array_equal(streamed.groups[name], whole.groups[name])
    np.testing.assert_array_equal(streamed.markers, whole.markers)
    assert streamed.meta["io:ignored"] == whole.meta["io:ignored"]
    assert streamed.meta["units"] == whole.meta["units"]
    assert streamed_notes == whole_notes


def test_block_references_and_unreturned_kinds_are_read_whole(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(_dxf_stream, "STREAM_MIN_BYTES", 0)
    path = _drawing(tmp_path / "posts.dxf", insert=True)
    assert _dxf_stream.open_stream(path) is None
    model, _ = _read(path)
    assert "dxf:streamed" not in model.meta
    assert "Posts" in model.groups  # the block's line, on the insert's layer
    # A kind iterdxf passes over without a word (a 3D solid) must not be lost: read whole.
    text = _drawing(tmp_path / "solid.dxf").read_text()
    end = text.index("\nENDSEC\n", text.index("\nENTITIES\n"))
    solid = "  0\n3DSOLID\n  5\nFFF0\n330\n1F\n100\nAcDbEntity\n  8\nBODY\n"
    (tmp_path / "solid.dxf").write_text(text[:end - 3] + solid + text[end - 3:])
    assert _dxf_stream.open_stream(tmp_path / "solid.dxf") is None
    solid, _ = _read(tmp_path / "solid.dxf")
    assert solid.meta["io:ignored"]["3DSOLID"]["count"] == 1


def test_binary_and_damaged_drawings_are_read_whole(tmp_path: Path,
                                                    monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(_dxf_stream, "STREAM_MIN_BYTES", 0)
    path = _drawing(tmp_path / "grid.dxf")
    doc = ezdxf.readfile(path)
    doc.saveas(tmp_path / "binary.dxf", fmt="bin")
    assert _dxf_stream.open_stream(tmp_path / "binary.dxf") is None
    binary, _ = _read(tmp_path / "binary.dxf")
    assert binary.n_members == 46
    # A damaged coordinate inside the ENTITIES section: the stream cannot read it, and the
    # whole-file reader (with ezdxf's recover, which repairs the value) takes over.
    text = path.read_text()
    i = text.index("\nDiagonals\n", text.index("\nENTITIES\n"))
    j = text.index("\n 10\n", i) + len("\n 10\n")
    (tmp_path / "bad.dxf").write_text(text[:j] + "1.0.0\n" + text[j + text[j:].index("\n") + 1:])
    damaged, _ = _read(tmp_path / "bad.dxf")
    assert "dxf:streamed" not in damaged.meta
    assert "1.0.0" in str(damaged.meta["dxf:recover"]["errors"])
    assert damaged.n_members == 46


def test_small_drawings_are_not_streamed(tmp_path: Path) -> None:
    path = _drawing(tmp_path / "grid.dxf")
    assert path.stat().st_size < _dxf_stream.STREAM_MIN_BYTES
    assert _dxf_stream.open_stream(path) is None
    stream = _dxf_stream.open_stream(path, min_bytes=0)
    assert stream is not None
    try:
        assert stream.insunits == 4
        assert stream.layer_names["chords"] == "Chords"
        assert sum(1 for e in stream.entities if e.dxftype() == "LINE") == 21
    finally:
        stream.close()
