"""Example scripts and README commands run as tests."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path
from typing import Any

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[1]


def test_roof_grid_example_runs_and_balances() -> None:
    proc = subprocess.run(
        [sys.executable, str(ROOT / "examples" / "roof_grid.py")],
        capture_output=True, text=True, check=True, cwd=ROOT,
    )
    lines = {ln.split(":")[0].strip(): ln for ln in proc.stdout.splitlines() if "residual" in ln}
    assert set(lines) == {"dead", "snow", "ULS", "SLS"}
    snow = lines["snow"]
    rz, fz = (float(v) for v in re.findall(r"reactions z\s+(-?[\d.]+) kN vs loads\s+(-?[\d.]+)",
                                           snow)[0])
    # Hand calculation: snow 0.8 kN/m² on a 12 m x 8 m plan gives 76.8 kN.
    assert rz == 76.8 and fz == -76.8
    assert "qualified engineer" in proc.stdout
    sys.path.insert(0, str(ROOT / "examples"))
    import roof_grid

    model = roof_grid.build()
    # Counts of a 6 x 4 square-on-square grid, derived: top nodes 7*5, bottom
    # 6*4; top chords 6*5 + 7*4, bottom chords 5*4 + 6*3, diagonals 4*6*4.
    assert model.n_nodes == 35 + 24
    assert model.n_members == (30 + 28) + (20 + 18) + 96


def test_readme_commands_are_what_ci_runs() -> None:
    readme = (ROOT / "README.md").read_text()
    ci = (ROOT / ".ci" / "run").read_text()
    commands = re.findall(r"^\s*(python (?:-P )?-m pytest.*|spaceframe run \S+.*)$", readme, re.M)
    assert commands, "README shows no run/test command"
    test_cmd = next(c for c in commands if "pytest" in c)
    assert test_cmd.strip() in ci


def test_readme_main_command_word_for_word(tmp_path: Path) -> None:
    import shutil

    readme = (ROOT / "README.md").read_text()
    cmd = re.findall(r"^(spaceframe run \S+)$", readme, re.M)[0]
    model = Path(cmd.split()[-1])
    shutil.copytree(ROOT / model.parent, tmp_path / model.parent)
    exe = Path(sys.executable).with_name("spaceframe")
    proc = subprocess.run([str(exe), *cmd.split()[1:]], cwd=tmp_path,
                          capture_output=True, text=True, check=False)
    assert proc.returncode == 0, proc.stderr
    assert "qualified engineer" in proc.stdout
    out = tmp_path / model.parent / "canopy-results"
    assert (out / "report.html").exists() or (out / "summary.json").exists()


def test_readme_python_example_runs(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    readme = (ROOT / "README.md").read_text()
    block = re.findall(r"```python\n(.*?)```", readme, re.S)[0]
    monkeypatch.chdir(tmp_path)
    scope: dict[str, Any] = {}
    exec(compile(block, "README.md", "exec"), scope)
    r = scope["r"]
    # Ferreira (2010) §5.3 published u1 = (-0.3024, -1.5177, 0.2688) mm under
    # 10 kN; the README's combination factors it by 1.5 (linear).
    assert np.allclose(r.displacements[0] * 1e3 / 1.5, [-0.3024, -1.5177, 0.2688], atol=6e-5)
    assert scope["model"].n_members == 4
