"""Faults while writing results: killed runs, read-only folders, a full disk.

A run is a subprocess (``python -m spaceframe run``) killed with SIGKILL,
either by the writer's fault hook (``SPACEFRAME_FAULT``, at a named moment) or
from outside after a delay.  After every kill the results folder must hold
either the complete old results or the complete new ones, and the next run
must clean up what the killed one left (only the tool's own marked leftovers).
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import pytest
from _model_files import tripod_file

from spaceframe.cli import main
from spaceframe.run.job import FAULT_ENV, MARKER

pytest.importorskip("ezdxf")
pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="POSIX signals and ulimit")

ROOT = Path(__file__).resolve().parents[1]

def model(folder: Path, load: float) -> Path:
    return tripod_file(folder, load)


def env(**extra: str) -> dict[str, str]:
    e = {k: v for k, v in os.environ.items() if k != FAULT_ENV}
    e["PYTHONPATH"] = str(ROOT)
    e.update(extra)
    return e


def cli(toml: Path, out: Path, fault: str = "", *more: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, "-m", "spaceframe", "run", str(toml), "-o", str(out), "--no-pictures",
         *more],
        capture_output=True, text=True, env=env(**({FAULT_ENV: fault} if fault else {})),
        timeout=300,
    )


def applied_z(out: Path) -> float:
    """The applied load along z recorded in a complete results folder (kN)."""
    listed = json.loads((out / MARKER).read_text())["paths"]
    missing = [p for p in listed if not (out / p).exists()]
    assert not missing, f"incomplete results folder: {missing}"
    assert {"summary.json", "nodes.csv", "members.csv", "results.dxf"} <= set(listed)
    summ = json.loads((out / "summary.json").read_text())
    return float(summ["results"]["snow"]["applied_total"][2]) / 1e3


def leftovers(out: Path) -> list[str]:
    return sorted(p.name for p in out.parent.iterdir() if p.name.startswith(f".{out.name}."))


@pytest.mark.parametrize(
    ("fault", "shows"),
    [
        ("after-mkdtemp", -10.0),  # nothing written yet: the old results
        ("after-write", -10.0),  # new results complete but hidden: the old
        ("before-swap", -10.0),
        ("after-swap", -20.0),  # swapped, old copy not yet removed: the new
    ],
)
def test_kill_at_a_moment_leaves_old_or_new(tmp_path: Path, fault: str, shows: float) -> None:
    out = tmp_path / "res"
    assert cli(model(tmp_path, -10.0), out).returncode == 0
    proc = cli(model(tmp_path, -20.0), out, fault)
    assert proc.returncode == -signal.SIGKILL
    assert applied_z(out) == pytest.approx(shows)
    assert leftovers(out)  # the killed run left its hidden folder ...
    proc = cli(model(tmp_path, -30.0), out)
    assert proc.returncode == 0, proc.stderr
    assert applied_z(out) == pytest.approx(-30.0)
    assert leftovers(out) == []  # ... and the next run removed it


def test_kill_inside_the_two_rename_swap_is_repaired(tmp_path: Path) -> None:
    # Where the system cannot swap two folders in one step, a kill between the two
    # renames leaves the old results under a hidden name: the next run puts them back
    # before anything else, and a failing next run leaves them visible.
    out = tmp_path / "res"
    assert cli(model(tmp_path, -10.0), out).returncode == 0
    proc = cli(model(tmp_path, -20.0), out, "no-exchange,mid-swap")
    assert proc.returncode == -signal.SIGKILL
    assert not out.exists() and len(leftovers(out)) == 2  # .res.old-PID and .res.tmp-PID-*
    assert cli(model(tmp_path, -30.0), out, "no-exchange,disk-full").returncode == 2
    assert applied_z(out) == pytest.approx(-10.0)
    assert cli(model(tmp_path, -30.0), out, "no-exchange").returncode == 0
    assert applied_z(out) == pytest.approx(-30.0)
    assert leftovers(out) == []


def test_kill_from_outside_at_several_moments(tmp_path: Path) -> None:
    out = tmp_path / "res"
    assert cli(model(tmp_path, -10.0), out).returncode == 0
    seen: set[float] = set()
    for k, delay in enumerate((0.4, 1.2, 2.0, 2.8)):
        model(tmp_path, -20.0 - k)
        before = applied_z(out)
        proc = subprocess.Popen(
            [sys.executable, "-m", "spaceframe", "run", str(tmp_path / "tripod.toml"), "-o",
             str(out), "--no-pictures", "-q"], env=env())
        time.sleep(delay)
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=300)
        now = applied_z(out)  # complete, old or new
        assert now in (before, pytest.approx(-20.0 - k))
        seen.add(now)
    assert cli(model(tmp_path, -99.0), out).returncode == 0
    assert applied_z(out) == pytest.approx(-99.0)
    assert leftovers(out) == []


def dead_pid() -> int:
    p = subprocess.Popen([sys.executable, "-c", "pass"])
    p.wait()
    return p.pid


def test_cleanup_removes_only_marked_leftovers_of_dead_runs(tmp_path: Path) -> None:
    out = tmp_path / "res"
    toml = model(tmp_path / "m", -10.0)
    assert main(["run", str(toml), "-o", str(out), "--no-pictures", "-q"]) == 0
    dead = dead_pid()
    marked = [tmp_path / f".res.tmp-{dead}-abc123", tmp_path / f".res.old-{dead}"]
    for d in marked:
        shutil.copytree(out, d)
    empty = tmp_path / f".res.tmp-{dead}-empty"
    empty.mkdir()
    kept = {
        tmp_path / f".res.tmp-{dead}-user": "no marker: not the tool's",
        tmp_path / f".res.tmp-{os.getpid()}-live": "a run still going",
        tmp_path / f".other.tmp-{dead}-x": "another folder's leftover",
    }
    for d, why in kept.items():
        d.mkdir()
        (d / "file.txt").write_text(why)
    (tmp_path / f".res.tmp-{os.getpid()}-live" / MARKER).write_text(
        (out / MARKER).read_text())
    assert main(["run", str(toml), "-o", str(out), "--no-pictures", "-q"]) == 0
    assert not any(d.exists() for d in [*marked, empty])
    for d, why in kept.items():
        assert (d / "file.txt").read_text() == why


@contextmanager
def read_only(path: Path) -> Iterator[None]:
    """``path`` read-only inside the block, writable again after it."""
    if os.geteuid() == 0:  # permissions do not stop root; the immutable flag does
        if subprocess.run(["chattr", "+i", str(path)], capture_output=True).returncode:
            pytest.skip("chattr +i not available to make a folder read-only for root")
    else:
        path.chmod(0o555)
    try:
        yield
    finally:
        if os.geteuid() == 0:
            subprocess.run(["chattr", "-i", str(path)], capture_output=True)
        else:
            path.chmod(0o755)


def refusal(proc: subprocess.CompletedProcess[str]) -> str:
    """The one line of a run that failed on bad input or a write (exit code 2)."""
    assert proc.returncode == 2, proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1, proc.stderr
    return lines[0]


def test_read_only_old_results_are_refused(tmp_path: Path) -> None:
    # A read-only old folder could be renamed away but never removed: each run would
    # leave one more hidden copy.  Refused before anything changes, naming it.
    out = tmp_path / "res"
    toml = model(tmp_path / "m", -10.0)
    assert cli(toml, out).returncode == 0
    vtk = out / "vtk"
    with read_only(vtk):
        line = refusal(cli(model(tmp_path / "m", -20.0), out))
    assert str(vtk) in line and "read-only" in line
    assert applied_z(out) == pytest.approx(-10.0) and leftovers(out) == []


def test_leftover_that_cannot_be_removed_is_reported(tmp_path: Path) -> None:
    out = tmp_path / "res"
    toml = model(tmp_path / "m", -10.0)
    assert cli(toml, out).returncode == 0
    stale = tmp_path / f".res.tmp-{dead_pid()}-killed"
    shutil.copytree(out, stale)
    with read_only(stale / "vtk"):
        proc = cli(toml, out)
        assert proc.returncode == 0, proc.stderr
        assert "could not remove" in proc.stdout and stale.name in proc.stdout
        assert leftovers(out) == [stale.name]  # said, and no new copy per run
        proc = cli(toml, out, "", "--json")
        assert any(stale.name in w for w in json.loads(proc.stdout)["warnings"])
    assert cli(toml, out).returncode == 0
    assert leftovers(out) == []


def test_read_only_parent_names_the_users_folder(tmp_path: Path) -> None:
    parent = tmp_path / "locked"
    parent.mkdir()
    out = parent / "res"
    with read_only(parent):
        proc = cli(model(tmp_path / "m", -10.0), out)
    line = refusal(proc)
    assert str(out) in line and ".tmp" not in line
    assert "Traceback" not in proc.stderr
    assert list(parent.iterdir()) == []


def test_file_size_limit_names_the_users_folder(tmp_path: Path) -> None:
    out = tmp_path / "res"
    toml = model(tmp_path / "m", -10.0)
    assert cli(toml, out).returncode == 0
    model(tmp_path / "m", -20.0)
    # ulimit -f 8: no file over 8 KiB (the results DXF is larger); Python ignores
    # SIGXFSZ, so the write fails with EFBIG ("File too large").
    proc = subprocess.run(
        ["bash", "-c", f'ulimit -f 8; exec "{sys.executable}" -m spaceframe run '
                       f'"{toml}" -o "{out}" --no-pictures'],
        capture_output=True, text=True, env=env(), timeout=300)
    line = refusal(proc)
    assert str(out) in line and "File too large" in line
    assert ".tmp" not in line and ".res." not in line
    assert applied_z(out) == pytest.approx(-10.0)
    assert leftovers(out) == []


def test_full_disk_names_the_users_folder(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                          capsys: pytest.CaptureFixture[str]) -> None:
    out = tmp_path / "res"
    toml = model(tmp_path / "m", -10.0)
    assert main(["run", str(toml), "-o", str(out), "--no-pictures", "-q"]) == 0
    monkeypatch.setenv(FAULT_ENV, "disk-full")
    assert main(["run", str(toml), "-o", str(out), "--no-pictures", "-q"]) == 2
    err = capsys.readouterr().err.strip()
    assert err == (f"spaceframe run: error: {out}: could not write the results (writing vtk): "
                   "No space left on device; the old results are kept")
    assert applied_z(out) == pytest.approx(-10.0)
    assert leftovers(out) == []
