"""The results folder: only what the tool wrote is ever replaced or removed.

Each test builds a small project (a loaded tripod, invented data) and runs the
command line in-process; none of them needs pictures.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
from _model_files import tripod_file

from spaceframe.cli import main
from spaceframe.run.job import MARKER

pytest.importorskip("ezdxf")

def project(folder: Path, output: str = "", load: float = -30.0) -> Path:
    """The tripod model file in ``folder`` with the user's other files beside it."""
    toml = tripod_file(folder, load, output)
    (folder / "budget.xlsx").write_bytes(b"the user's spreadsheet")
    return toml


def snapshot(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def run(*args: str) -> int:
    return main(["run", *args, "--no-pictures", "-q"])


def test_output_dot_in_model_file_is_refused(tmp_path: Path,
                                             capsys: pytest.CaptureFixture[str]) -> None:
    toml = project(tmp_path / "proj", output=".")
    before = snapshot(tmp_path / "proj")
    assert run(str(toml)) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "model file's folder" in err[0]
    assert snapshot(tmp_path / "proj") == before
    # --force never makes the model file's folder (or one above it) writable.
    assert run(str(toml), "--force") == 2
    assert run(str(toml), "-o", str(tmp_path)) == 2
    assert snapshot(tmp_path / "proj") == before


def test_dash_o_dot_is_refused_without_traceback(tmp_path: Path) -> None:
    toml = project(tmp_path / "proj")
    proc = subprocess.run([sys.executable, "-m", "spaceframe", "run", "tripod.toml", "-o", ".",
                           "--no-pictures"], cwd=tmp_path / "proj", capture_output=True,
                          text=True, env={**os.environ, "PYTHONPATH": str(Path.cwd())})
    assert proc.returncode == 2, proc.stderr
    assert "Traceback" not in proc.stderr and len(proc.stderr.strip().splitlines()) == 1
    assert "model file's folder" in proc.stderr
    assert sorted(p.name for p in (tmp_path / "proj").iterdir()) == ["budget.xlsx",
                                                                     toml.name]


def test_dash_o_dot_elsewhere_is_an_ordinary_folder(tmp_path: Path,
                                                    monkeypatch: pytest.MonkeyPatch) -> None:
    toml = project(tmp_path / "proj")
    out = tmp_path / "empty"
    out.mkdir()
    monkeypatch.chdir(out)
    assert run(str(toml), "-o", ".") == 0  # an empty folder of its own: fine
    assert (out / "summary.json").exists() and (out / MARKER).exists()


def test_folder_of_foreign_files_is_refused(tmp_path: Path,
                                            capsys: pytest.CaptureFixture[str]) -> None:
    toml = project(tmp_path / "proj")
    other = tmp_path / "someone-else"
    other.mkdir()
    (other / "thesis.tex").write_text("years of work")
    (other / "summary.json").write_text("{}")  # even a name the tool also writes
    before = snapshot(other)
    assert run(str(toml), "-o", str(other)) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "did not write" in err[0] and "--force" in err[0]
    assert snapshot(other) == before
    # With --force a clash with a file of the tool's own name is still refused.
    assert run(str(toml), "-o", str(other), "--force") == 2
    assert "summary.json" in capsys.readouterr().err
    assert snapshot(other) == before
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".someone")]


def test_force_adds_results_and_keeps_foreign_files(tmp_path: Path) -> None:
    toml = project(tmp_path / "proj")
    other = tmp_path / "shared"
    other.mkdir()
    (other / "notes.txt").write_text("keep me")
    assert run(str(toml), "-o", str(other), "--force") == 0
    assert (other / "notes.txt").read_text() == "keep me"
    first = json.loads((other / "summary.json").read_text())
    # A second run needs no --force: the tool replaces only what its marker lists.
    project(tmp_path / "proj", load=-60.0)
    assert run(str(toml), "-o", str(other)) == 0
    assert (other / "notes.txt").read_text() == "keep me"
    second = json.loads((other / "summary.json").read_text())
    # Applied load total along z: -30 kN, then -60 kN (the input, read back).
    assert first["results"]["snow"]["applied_total"][2] == pytest.approx(-30e3)
    assert second["results"]["snow"]["applied_total"][2] == pytest.approx(-60e3)
    assert "notes.txt" not in json.loads((other / MARKER).read_text())["paths"]


def test_foreign_file_inside_a_results_subfolder_is_refused(tmp_path: Path) -> None:
    toml = project(tmp_path / "proj")
    out = tmp_path / "res"
    assert run(str(toml), "-o", str(out)) == 0
    (out / "vtk" / "my-view.pvsm").write_text("a saved ParaView state")
    assert run(str(toml), "-o", str(out)) == 2
    assert (out / "vtk" / "my-view.pvsm").read_text() == "a saved ParaView state"


def test_results_folder_replaced_twice_in_a_row(tmp_path: Path) -> None:
    toml = project(tmp_path / "proj")
    out = tmp_path / "proj" / "res"
    for load in (-10.0, -20.0, -40.0):
        project(tmp_path / "proj", load=load)
        assert run(str(toml), "-o", str(out)) == 0
        summ = json.loads((out / "summary.json").read_text())
        assert summ["results"]["snow"]["applied_total"][2] == pytest.approx(load * 1e3)
    assert sorted(p.name for p in (tmp_path / "proj").iterdir()) == [
        "budget.xlsx", "res", "tripod.toml"]  # no hidden copies left
    listed = json.loads((out / MARKER).read_text())["paths"]
    assert "summary.json" in listed and "nodes.csv" in listed


def test_symlinked_output_folder_is_followed(tmp_path: Path) -> None:
    toml = project(tmp_path / "proj")
    real = tmp_path / "disk" / "res"
    assert run(str(toml), "-o", str(real)) == 0
    link = tmp_path / "proj" / "res-link"
    link.symlink_to(real, target_is_directory=True)
    project(tmp_path / "proj", load=-50.0)
    assert run(str(toml), "-o", str(link)) == 0
    assert link.is_symlink() and link.resolve() == real.resolve()
    summ = json.loads((real / "summary.json").read_text())
    assert summ["results"]["snow"]["applied_total"][2] == pytest.approx(-50e3)
    assert not [p for p in real.parent.iterdir() if p.name.startswith(".")]


def test_symlink_to_the_model_folder_is_refused(tmp_path: Path) -> None:
    toml = project(tmp_path / "proj")
    link = tmp_path / "sneaky"
    link.symlink_to(tmp_path / "proj", target_is_directory=True)
    before = snapshot(tmp_path / "proj")
    assert run(str(toml), "-o", str(link), "--force") == 2
    assert snapshot(tmp_path / "proj") == before


def test_output_holding_an_input_is_refused(tmp_path: Path) -> None:
    toml = project(tmp_path / "proj" / "model")
    assert run(str(toml), "-o", str(tmp_path / "proj"), "--force") == 2
    assert toml.exists()


def test_output_that_is_a_file_is_refused(tmp_path: Path,
                                          capsys: pytest.CaptureFixture[str]) -> None:
    toml = project(tmp_path / "proj")
    f = tmp_path / "res"
    f.write_text("a file")
    assert run(str(toml), "-o", str(f), "--force") == 2
    assert "not a folder" in capsys.readouterr().err
    assert f.read_text() == "a file"
