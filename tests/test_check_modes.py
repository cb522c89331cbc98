"""``spaceframe check --write-modes``: the mechanisms and states of self-stress as VTK series.

Check values are derived in the tests from joint equilibrium and from the
condition that a mechanism stretches no member (c · (d_j − d_i) = 0 for every
bar); the counts follow Maxwell's rule as extended by Pellegrino and
Calladine (Int. J. Solids Structures 22(4), 1986): s − m = b − (3j − k).
"""

from __future__ import annotations

from pathlib import Path

import meshio
import numpy as np
import pytest

from spaceframe.cli import main
from spaceframe.io.vtk import decode_text

pytest.importorskip("pyvista")

#: A 3 m square in the xy plane, held out of plane at every node, pinned at
#: node 0 and on a roller along x at node 1 (invented demo data).
SQUARE = """\
[geometry]
nodes = [[0, 0, 0], [3, 0, 0], [3, 3, 0], [0, 3, 0]]
members = [[0, 1], [1, 2], [2, 3], [3, 0]{extra}]
[sections]
s = {{ shape = "chs", diameter = 60.3, thickness = 3.2 }}
[units]
section = "mm"
[assign]
default = {{ section = "s", material = "S355" }}
[[supports]]
nodes = [0]
restrain = "xyz"
[[supports]]
nodes = [1]
restrain = "yz"
[[supports]]
nodes = [2, 3]
restrain = "z"
"""


def _check(tmp_path: Path, extra: str, capsys: pytest.CaptureFixture[str]) -> tuple[int, str]:
    (tmp_path / "sq.toml").write_text(SQUARE.format(extra=extra), encoding="utf-8")
    code = main(["check", str(tmp_path / "sq.toml"), "--write-modes", str(tmp_path / "modes")])
    return code, capsys.readouterr().out


def test_the_sway_of_an_unbraced_square_is_written_as_a_mechanism(tmp_path, capsys) -> None:
    code, out = _check(tmp_path, "", capsys)
    assert code == 1  # a mechanism: check says unstable
    # j = 4, k = 3 + 2 + 1 + 1 = 7 restrained directions, b = 4: s − m = 4 − (12 − 7) = −1.
    assert "determinacy: 1 mechanism, 0 states of self-stress" in out
    assert "determinacy: wrote 3 files" in out  # the series, its one file, and the animation
    from PIL import Image

    with Image.open(tmp_path / "modes" / "mechanism_mode1.gif") as gif:
        assert gif.n_frames == 24  # one cycle of the sway
    mesh = meshio.read(tmp_path / "modes" / "mechanism_mode1.vtu")
    d = mesh.point_data["mode_shape"]
    # No bar may stretch: 0-1 fixes node 1 (x), the posts 1-2 and 3-0 keep nodes 2 and 3
    # at their height, and 2-3 moves them together: nodes 2 and 3 sway along x.
    sign = np.sign(d[2, 0])
    np.testing.assert_allclose(d * sign, [[0, 0, 0], [0, 0, 0], [1, 0, 0], [1, 0, 0]],
                               atol=1e-9)
    assert decode_text(mesh.field_data["mode_kind"]) == ["mechanism"]
    assert (tmp_path / "modes" / "mechanisms.pvd").exists()
    assert not (tmp_path / "modes" / "self_stress.pvd").exists()


def test_the_doubly_braced_square_has_one_state_of_self_stress(tmp_path, capsys) -> None:
    code, out = _check(tmp_path, ", [0, 2], [1, 3]", capsys)
    assert code == 0
    # b = 6: s − m = 6 − 5 = 1, and the braced square is rigid (m = 0), so s = 1.
    assert "determinacy: 0 mechanisms, 1 state of self-stress" in out
    mesh = meshio.read(tmp_path / "modes" / "self_stress_state1.vtu")
    t = mesh.cell_data["self_stress"][0]
    # Joint equilibrium at a corner: the two sides carry t each and the diagonal at 45°
    # d with t + d cos 45° = 0, so d = −√2 t; scaled to a largest force of 1.
    t = t * np.sign(t[4])
    np.testing.assert_allclose(t, [-1 / np.sqrt(2)] * 4 + [1.0, 1.0], atol=1e-9)


def test_nothing_to_write_is_said(tmp_path, capsys) -> None:
    code, out = _check(tmp_path, ", [0, 2]", capsys)
    assert code == 0
    assert "determinacy: 0 mechanisms, 0 states of self-stress" in out
    assert "no mechanism and no state of self-stress to write" in out


def test_a_folder_with_other_files_is_refused_and_left_alone(tmp_path, capsys) -> None:
    # Rerunning into the folder it wrote replaces its own files.
    assert _check(tmp_path, "", capsys)[0] == 1
    assert _check(tmp_path, "", capsys)[0] == 1
    # A file the tool did not write, even one named like its own series, is never touched.
    mine = tmp_path / "modes" / "notes.txt"
    mine.write_text("site survey, do not lose", encoding="utf-8")
    before = sorted(p.name for p in (tmp_path / "modes").iterdir())
    (tmp_path / "sq.toml").write_text(SQUARE.format(extra=""), encoding="utf-8")
    code = main(["check", str(tmp_path / "sq.toml"), "--write-modes", str(tmp_path / "modes")])
    err = capsys.readouterr().err
    assert code == 2
    assert "--write-modes" in err and "'notes.txt'" in err and "\n" not in err.strip()
    assert mine.read_text(encoding="utf-8") == "site survey, do not lose"
    assert sorted(p.name for p in (tmp_path / "modes").iterdir()) == before
