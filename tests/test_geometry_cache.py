"""The geometry cache: a re-run reuses the imported, healed drawing until it changes."""

from __future__ import annotations

import json
import shutil
import warnings
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from _model_files import drawing_model

import spaceframe.io as sio
from spaceframe.cli import main
from spaceframe.project import Project, load_project
from spaceframe.project import cache as geometry_cache

ezdxf = pytest.importorskip("ezdxf")

EXAMPLES = Path(__file__).resolve().parent.parent / "examples"

# A drawing in metres with one member shorter than the tolerance, a circle the
# reader skips and two separate parts: three reader warnings to replay.
def model_text(tol: str) -> str:
    """The model file of the drawing, joints merged within ``tol``."""
    return ('title = "cache test (invented data)"\noutput = "out"\n'
            + drawing_model("frame.dxf", tol, 0.05, 0.004, section="s"))


def _drawing(path: Path, x_end: float = 1.0) -> None:
    doc = ezdxf.new()
    doc.header["$INSUNITS"] = 6
    msp = doc.modelspace()
    msp.add_line((0, 0, 0), (x_end, 0, 0), dxfattribs={"layer": "A"})
    msp.add_line((x_end, 0, 0), (x_end, 1, 0), dxfattribs={"layer": "A"})
    msp.add_line((5, 0, 0), (6, 0, 0), dxfattribs={"layer": "B"})
    msp.add_line((5, 0, 0), (5.0000001, 0, 0), dxfattribs={"layer": "B"})
    msp.add_circle((0, 0), 1)
    doc.saveas(path)


@pytest.fixture
def model_file(tmp_path: Path) -> Path:
    _drawing(tmp_path / "frame.dxf")
    path = tmp_path / "frame.toml"
    path.write_text(model_text("1 mm"), encoding="utf-8")
    return path


class _Spy:
    def __init__(self, monkeypatch: pytest.MonkeyPatch) -> None:
        self.calls = 0
        real = sio.read

        def read(*args: Any, **kwargs: Any) -> Any:
            self.calls += 1
            return real(*args, **kwargs)

        monkeypatch.setattr(sio, "read", read)


def _load(path: Path, cache: bool = True) -> tuple[Project, list[str]]:
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        proj = load_project(path, cache=cache)
    return proj, [str(w.message) for w in caught]


def _same_geometry(a: Project, b: Project, exact: bool = True) -> None:
    ma, mb = a.model, b.model
    np.testing.assert_array_equal(ma.nodes, mb.nodes)
    np.testing.assert_array_equal(ma.members, mb.members)
    for name in ("groups", "node_sets", "panel_groups"):
        da, db = getattr(ma, name), getattr(mb, name)
        assert list(da) == list(db)
        for key in da:
            np.testing.assert_array_equal(da[key], db[key])
    for name, value in vars(ma).items():
        if isinstance(value, np.ndarray):
            other = vars(mb)[name]
            assert other.dtype == value.dtype, name
            np.testing.assert_array_equal(other, value, err_msg=name)
    assert list(ma.meta) == list(mb.meta)
    assert a.warnings == b.warnings
    assert str(a.heal_report) == str(b.heal_report)
    assert a.heal_report is not None and b.heal_report is not None
    da, db = a.heal_report.as_dict(), b.heal_report.as_dict()
    if not exact:  # two fresh reads differ in the steps' timings only
        for d in (da, db):
            for step in d["steps"]:
                step.pop("seconds")
    assert da == db


def test_second_load_reads_the_cache_with_the_same_geometry_and_warnings(
        model_file: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    spy = _Spy(monkeypatch)
    first, warned1 = _load(model_file)
    assert spy.calls == 1
    second, warned2 = _load(model_file)
    assert spy.calls == 1  # not read again
    _same_geometry(first, second)
    assert len(first.warnings) == 3 and any("2 separate parts" in w for w in first.warnings)
    assert warned1 == warned2  # replayed as warnings too, not only listed


def test_canopy_results_from_the_cache_equal_a_fresh_read(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    folder = tmp_path / "canopy"
    shutil.copytree(EXAMPLES / "canopy", folder)
    spy = _Spy(monkeypatch)
    fresh, _ = _load(folder / "canopy.toml")
    cached, _ = _load(folder / "canopy.toml")
    assert spy.calls == 1
    _same_geometry(fresh, cached)
    ra, rb = fresh.solve(), cached.solve()
    assert list(ra) == list(rb) and len(ra) >= 2
    for name in ra:
        np.testing.assert_array_equal(ra[name].axial_forces, rb[name].axial_forces)
        np.testing.assert_array_equal(ra[name].displacements, rb[name].displacements)


def test_a_changed_coordinate_is_read_again(model_file: Path,
                                            monkeypatch: pytest.MonkeyPatch) -> None:
    spy = _Spy(monkeypatch)
    first, _ = _load(model_file)
    _drawing(model_file.with_name("frame.dxf"), x_end=1.5)
    second, _ = _load(model_file)
    assert spy.calls == 2
    assert first.model.nodes[:, 0].max() == 6.0
    assert sorted(second.model.nodes[:, 0]) != sorted(first.model.nodes[:, 0])
    assert 1.5 in second.model.nodes[:, 0]


def test_a_changed_tolerance_is_read_again(model_file: Path,
                                           monkeypatch: pytest.MonkeyPatch) -> None:
    spy = _Spy(monkeypatch)
    _load(model_file)
    model_file.write_text(model_text("0.5 mm"), encoding="utf-8")
    _load(model_file)
    assert spy.calls == 2
    model_file.write_text(model_text("1 mm"), encoding="utf-8")
    _load(model_file)  # the first entry is still there
    assert spy.calls == 2


def test_no_cache_bypasses_and_library_default_writes_nothing(
        model_file: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    spy = _Spy(monkeypatch)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        load_project(model_file)  # the library's default
    assert not (model_file.parent / geometry_cache.FOLDER).exists()
    _load(model_file)  # writes the entry
    _load(model_file, cache=False)  # ignores it
    assert spy.calls == 3
    _load(model_file)
    assert spy.calls == 3


def test_cli_check_uses_the_cache_and_no_cache_bypasses_it(
        model_file: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    spy = _Spy(monkeypatch)
    assert main(["-q", "check", "--quick", str(model_file)]) == 1  # unstable, read fine
    assert main(["-q", "check", "--quick", str(model_file)]) == 1  # unstable, read fine
    assert spy.calls == 1
    assert main(["-q", "check", "--quick", "--no-cache", str(model_file)]) == 1
    assert spy.calls == 2


@pytest.mark.parametrize("damage", ["npz", "json", "truncate"])
def test_a_damaged_entry_is_ignored_and_rewritten(model_file: Path, damage: str,
                                                  monkeypatch: pytest.MonkeyPatch) -> None:
    first, _ = _load(model_file)
    folder = model_file.parent / geometry_cache.FOLDER
    (npz,) = folder.glob("*.npz")
    side = npz.with_suffix(".json")
    if damage == "npz":
        npz.write_bytes(b"not a zip file")
    elif damage == "json":
        side.write_text("{", encoding="utf-8")
    else:
        npz.write_bytes(npz.read_bytes()[: npz.stat().st_size // 2])
    spy = _Spy(monkeypatch)
    second, _ = _load(model_file)
    assert spy.calls == 1  # read afresh, no error
    _same_geometry(first, second, exact=False)
    json.loads(side.read_text(encoding="utf-8"))
    third, _ = _load(model_file)
    assert spy.calls == 1  # the rewritten entry is good
    _same_geometry(second, third)


def test_the_cache_folder_holds_only_the_tools_files(model_file: Path) -> None:
    _load(model_file)
    model_file.write_text(model_text("0.5 mm"), encoding="utf-8")
    _load(model_file)
    folder = model_file.parent / geometry_cache.FOLDER
    names = sorted(p.name for p in folder.iterdir())
    assert geometry_cache.MARKER in names
    entries = [n for n in names if n != geometry_cache.MARKER]
    assert len(entries) == 4
    assert all(len(n.split(".")[0]) == 64 and n.endswith((".npz", ".json")) for n in entries)


def test_a_foreign_folder_of_that_name_is_left_alone(model_file: Path,
                                                     monkeypatch: pytest.MonkeyPatch) -> None:
    folder = model_file.parent / geometry_cache.FOLDER
    folder.mkdir()
    (folder / "mine.txt").write_text("keep", encoding="utf-8")
    spy = _Spy(monkeypatch)
    _load(model_file)
    _load(model_file)
    assert spy.calls == 2
    assert [p.name for p in folder.iterdir()] == ["mine.txt"]


def test_old_entries_beyond_the_limit_are_pruned_but_not_other_files(
        model_file: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(geometry_cache, "MAX_ENTRIES", 2)
    _load(model_file)
    folder = model_file.parent / geometry_cache.FOLDER
    (folder / "notes.txt").write_text("user file", encoding="utf-8")
    for tol in ("0.5 mm", "0.25 mm"):
        model_file.write_text(model_text(tol), encoding="utf-8")
        _load(model_file)
    assert len(list(folder.glob("*.npz"))) == 2
    assert (folder / "notes.txt").read_text(encoding="utf-8") == "user file"
