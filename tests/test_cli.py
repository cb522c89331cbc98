"""The command line, run as a user would (subprocess), and in-process for speed."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from spaceframe import __version__
from spaceframe.cli import main
from spaceframe.demos import write_demo
from spaceframe.project import load_project

pytest.importorskip("ezdxf")


@pytest.fixture
def canopy(tmp_path: Path) -> Path:
    return write_demo(tmp_path / "proj", "canopy")[1]


def test_version_and_help() -> None:
    out = subprocess.run([sys.executable, "-m", "spaceframe", "--version"],
                         capture_output=True, text=True, check=True).stdout
    assert out.strip() == f"spaceframe {__version__}"
    out = subprocess.run([sys.executable, "-m", "spaceframe", "--help"],
                         capture_output=True, text=True, check=True).stdout
    for word in ("check", "run", "new", "view", "qualified engineer"):
        assert word in out


def test_check_reports_geometry_and_stability(canopy: Path,
                                               capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", str(canopy), "--json"]) == 0
    rep = json.loads(capsys.readouterr().out)
    assert rep["stable"] is True
    assert rep["counts"]["nodes"] == 94 and rep["components"] == 1
    assert rep["supports"]["supported nodes"] == 6
    assert any("split" in h for h in rep["healing"])
    # Extents in metres from a drawing in millimetres: 24 m x 15 m, z 6..8 m.
    assert rep["extents"] == [[0.0, 0.0, 6.0], [24.0, 15.0, 8.0]]


#: A flat frame on two pinned supports: its middle nodes can move out of plane.
FLAT = (
    "[geometry]\nnodes = [[0,0,0],[1,0,0],[2,0,0],[0.5,1,0],[1.5,1,0]]\n"
    "members = [[0,1],[1,2],[0,3],[1,3],[1,4],[2,4],[3,4]]\n"
    "[sections]\ns = { shape = \"bar\", diameter = 0.02 }\n"
    "[assign]\ndefault = { section = \"s\", material = \"steel\" }\n"
    "[[supports]]\nnodes = [0, 2]\nrestrain = \"pinned\"\n"
)


def test_check_names_a_mechanism(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    toml = tmp_path / "flat.toml"
    toml.write_text(FLAT)
    assert main(["check", str(toml)]) == 1
    err = capsys.readouterr().err
    assert "node 1 has no stiffness along z" in err


def test_run_json_matches_library(canopy: Path, tmp_path: Path,
                                  capsys: pytest.CaptureFixture[str]) -> None:
    out = tmp_path / "res"
    assert main(["run", str(canopy), "-o", str(out), "--json", "--no-pictures"]) == 0
    summ = json.loads(capsys.readouterr().out)
    res = load_project(canopy).solve()
    for name in ("snow", "ULS_snow"):
        s = summ["results"][name]
        node, umax = res[name].max_displacement()
        assert s["max_displacement"]["node"] == node
        assert s["max_displacement"]["value"] == pytest.approx(umax, rel=1e-12)
        np.testing.assert_allclose(s["reaction_total"], res[name].reaction_total, atol=1e-6)
    assert (out / "summary.json").exists()
    # The envelope takes the max and min over its combinations, member by member.
    env = summ["envelopes"]["ULS"]
    both = np.stack([res["ULS_snow"].axial_forces, res["ULS_uplift"].axial_forces])
    assert env["max_tension"]["force"] == pytest.approx(both.max(), rel=1e-12)
    assert env["max_compression"]["force"] == pytest.approx(both.min(), rel=1e-12)
    table = np.genfromtxt(out / "envelopes.csv", delimiter=",", names=True)
    # Results in the tables carry 7 significant digits (spaceframe.io.tables.RESULT_DIGITS).
    np.testing.assert_allclose(table["ULS_N_max_N"], both.max(axis=0), rtol=5e-7, atol=1e-9)
    np.testing.assert_allclose(table["ULS_N_min_N"], both.min(axis=0), rtol=5e-7, atol=1e-9)
    assert not [p for p in tmp_path.iterdir() if ".tmp-" in p.name]


def test_run_table_output(canopy: Path, tmp_path: Path,
                          capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["run", str(canopy), "-o", str(tmp_path / "r"), "--no-pictures"]) == 0
    text = capsys.readouterr().out
    assert "max |u| [mm]" in text and "ULS_snow" in text and "qualified engineer" in text
    # Hand calculation: 0.8 kN/m² of snow on 24 m x 15 m = 288 kN up at the columns.
    assert "0.0 / 0.0 / 288.0" in text


@pytest.mark.parametrize(
    ("text", "needle"),
    [
        ("[geometry]\nnodez = []\n", "nodez"),
        ("[geometry]\nnodes = [[0,0,0],[1,0,0],[0,1,0]]\nmembers = [[0,1],[1,2],[2,0]]\n"
         "[geometry.panels]\nroof = [[0,1,2]]\n"
         "[sections]\ns = { shape = 'bar', diameter = 0.02 }\n"
         "[assign]\ndefault = { section = 's', material = 'steel' }\n"
         "[loads.snow]\n[[loads.snow.area]]\nkind = 'plan'\npanels = 'all'\n"
         "value = '0.8 kN'\n", "loads.snow.area[0].value"),
    ],
)
def test_bad_model_file_one_line_exit_2(tmp_path: Path, text: str, needle: str) -> None:
    toml = tmp_path / "bad.toml"
    toml.write_text(text)
    out = tmp_path / "res"
    proc = subprocess.run([sys.executable, "-m", "spaceframe", "run", str(toml), "-o", str(out)],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and "bad.toml" in lines[0] and needle in lines[0]
    assert "Traceback" not in proc.stderr
    assert not out.exists()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".res")]


def test_failed_run_keeps_old_results(canopy: Path, tmp_path: Path) -> None:
    out = tmp_path / "res"
    assert main(["run", str(canopy), "-o", str(out), "--no-pictures", "-q"]) == 0
    before = sorted(p.name for p in out.iterdir())
    canopy.write_text(canopy.read_text().replace('restrain = "pinned"', 'restrain = "z"'))
    # Supported along z only, the canopy is a mechanism: exit 1, as check gives.
    assert main(["run", str(canopy), "-o", str(out), "--no-pictures", "-q"]) == 1
    assert sorted(p.name for p in out.iterdir()) == before


@pytest.mark.parametrize("broken", ["write_arrays", "write_envelopes", "summary"])
def test_a_step_that_fails_leaves_the_old_results(canopy: Path, tmp_path: Path,
                                                    monkeypatch: pytest.MonkeyPatch,
                                                    broken: str) -> None:
    # results.npz is written on a thread of its own while the summary, the
    # checks and the other files are made: its failure, or another step's,
    # fails the run, the old results stay, and no thread is left writing.
    import threading

    from spaceframe.errors import WriteError
    from spaceframe.io import tables
    from spaceframe.results import summary

    out = tmp_path / "res"
    assert main(["run", str(canopy), "-o", str(out), "--no-pictures", "-q"]) == 0
    before = {str(p.relative_to(out)): p.stat().st_mtime_ns for p in out.rglob("*")}

    def fail(*args: object, **kwargs: object) -> None:
        raise WriteError(f"{broken}: disk full (test)")

    monkeypatch.setattr(summary if broken == "summary" else tables, broken, fail)
    assert main(["run", str(canopy), "-o", str(out), "--no-pictures", "-q"]) != 0
    assert {str(p.relative_to(out)): p.stat().st_mtime_ns for p in out.rglob("*")} == before
    assert not [t for t in threading.enumerate() if t.name == "write results.npz"]
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".res")]


def test_new_writes_a_starter_project(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["new", str(tmp_path / "p"), "--demo", "dome"]) == 0
    assert (tmp_path / "p" / "dome.toml").exists() and (tmp_path / "p" / "dome.vtu").exists()
    assert main(["new", str(tmp_path / "p"), "--demo", "dome"]) == 2  # no silent overwrite
    assert main(["new", str(tmp_path / "q"), "--demo", "opera-house"]) == 2
    assert "unknown demo 'opera-house'" in capsys.readouterr().err


def test_view_screenshot_off_screen(canopy: Path, tmp_path: Path) -> None:
    pytest.importorskip("pyvista")
    png = tmp_path / "shot.png"
    assert main(["view", str(canopy), "--case", "snow", "--screenshot", str(png),
                 "--size", "400x300", "-q"]) == 0
    from PIL import Image

    img = np.asarray(Image.open(png))
    assert img.shape[:2] == (300, 400) and img.std() > 0


def test_check_a_bare_drawing(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    import ezdxf

    doc = ezdxf.new()
    doc.header["$INSUNITS"] = 0  # unitless: the user must say
    msp = doc.modelspace()
    msp.add_line((0, 0, 0), (1000, 0, 0))
    msp.add_line((0, 0, 0), (0, 1000, 500))
    path = tmp_path / "sketch.dxf"
    doc.saveas(path)
    assert main(["check", str(path)]) == 2
    assert "units=" in capsys.readouterr().err
    assert main(["check", str(path), "--units", "mm", "--json"]) == 0
    rep = json.loads(capsys.readouterr().out)
    assert rep["stable"] is None and "no supports" in rep["mechanism"]
    assert rep["counts"]["members without a section"] == 2
    # 1000 drawing units of mm are 1 m.
    assert rep["extents"] == [[0.0, 0.0, 0.0], [1.0, 1.0, 0.5]]
    assert rep["units"].startswith("mm")


def test_results_folder_gets_ordinary_permissions(canopy: Path, tmp_path: Path) -> None:
    import os

    mask = os.umask(0o022)
    try:
        out = tmp_path / "res"
        assert main(["run", str(canopy), "-o", str(out), "--no-pictures", "-q"]) == 0
        # As a plain mkdir and open() make them under umask 022 (common practice).
        assert out.stat().st_mode & 0o777 == 0o755
        assert (out / "results.dxf").stat().st_mode & 0o777 == 0o644
    finally:
        os.umask(mask)


def test_no_command_prints_help_and_exits_2(capsys: pytest.CaptureFixture[str]) -> None:
    assert main([]) == 2
    assert "COMMAND" in capsys.readouterr().out


def test_help_lists_demos_and_solver(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit):
        main(["new", "--help"])
    assert "canopy, mast, dome" in capsys.readouterr().out
    with pytest.raises(SystemExit):
        main(["run", "--help"])
    assert "sparse solver" in capsys.readouterr().out


def test_view_without_display_and_screenshot_into_missing_folder(
        canopy: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
        capsys: pytest.CaptureFixture[str]) -> None:
    monkeypatch.delenv("DISPLAY", raising=False)
    monkeypatch.delenv("WAYLAND_DISPLAY", raising=False)
    assert main(["view", str(canopy)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "no display" in err[0] and "--screenshot" in err[0]
    assert main(["view", str(canopy), "--screenshot", str(tmp_path / "no" / "x.png")]) == 2
    err = capsys.readouterr().err
    assert "does not exist" in err and ".tmp" not in err and not (tmp_path / "no").exists()


def test_units_differing_from_the_drawing_are_refused(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    import ezdxf

    doc = ezdxf.new()
    doc.header["$INSUNITS"] = 4  # millimetres
    doc.modelspace().add_line((0, 0, 0), (1000, 0, 0))
    path = tmp_path / "mm.dxf"
    doc.saveas(path)
    assert main(["check", str(path), "--units", "m"]) == 2
    assert "--override-units" in capsys.readouterr().err
    assert main(["check", str(path), "--units", "m", "--override-units", "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["extents"][1][0] == 1000.0
    doc = ezdxf.new()
    doc.header["$INSUNITS"] = 6
    doc.modelspace().add_3dface([(0, 0, 0), (1, 0, 0), (0, 1, 0)])
    face = tmp_path / "face.dxf"
    doc.saveas(face)
    assert main(["check", str(face)]) == 2
    assert "--edges-as-members" in capsys.readouterr().err
    assert main(["check", str(face), "--edges-as-members", "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["counts"]["members"] == 3


def test_view_results_folder_reads_the_run_and_does_not_solve(
    canopy: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    pytest.importorskip("pyvista")
    out = tmp_path / "res"
    assert main(["run", str(canopy), "-o", str(out), "--no-pictures", "-q"]) == 0
    assert (out / "results.npz").exists()

    def no_solve(*args: object, **kwargs: object) -> None:
        raise AssertionError("view of a results folder solved the model again")

    monkeypatch.setattr("spaceframe.model.core.Model.solve", no_solve)
    monkeypatch.setattr("spaceframe.project.core.Project.solve", no_solve)
    png = tmp_path / "shot.png"
    assert main(["view", str(out), "--case", "snow", "--screenshot", str(png),
                 "--size", "400x300", "-q"]) == 0
    assert png.stat().st_size > 0
    # The model file changed since the run (one more bar drawn inline): the folder's results
    # are of another model and are refused, not drawn on it.
    text = canopy.read_text()
    canopy.write_text(text.replace('tolerance = "2 mm"', 'tolerance = "2 mm"\n'
                                   'nodes = [[0, 0, -5], [0, 0, -6]]\nmembers = [[0, 1]]', 1))
    capsys.readouterr()
    assert main(["view", str(out), "--screenshot", str(png), "--size", "400x300"]) == 2
    err = capsys.readouterr().err
    assert "results.npz: the results are of another model" in err
    assert "run it again" in err


def test_run_of_a_mechanism_exits_1_as_check_does(tmp_path: Path,
                                                 capsys: pytest.CaptureFixture[str]) -> None:
    # The same flat frame as above, loaded: check and run agree that it is unstable.
    toml = tmp_path / "flat.toml"
    toml.write_text(FLAT + "[loads.down]\n[[loads.down.nodal]]\nnodes = [1]\n"
                    "force = [0, 0, -1000]\n")
    assert main(["check", str(toml)]) == 1
    capsys.readouterr()
    assert main(["run", str(toml), "-o", str(tmp_path / "out"), "--no-pictures"]) == 1
    err = capsys.readouterr().err
    assert err.startswith("spaceframe run: error:") and "node 1" in err
    assert not (tmp_path / "out").exists()
