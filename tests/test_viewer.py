"""The 3D viewer, rendered off-screen: pictures are checked for content, never pixel by pixel."""

from __future__ import annotations

from pathlib import Path

import matplotlib.image as mpimg
import numpy as np
import pytest
import pyvista as pv
from conftest import A_FOOT, AREA, H_APEX, L_LEG, E, H, W, loaded_tripod

import spaceframe as sf
from spaceframe import viewer
from spaceframe.summary import format_number

pv.OFF_SCREEN = True

SIZE = (400, 300)


def _tripod() -> sf.Model:
    """A fictional lighting-mast tripod (the shared loaded tripod) with two groups."""
    m = loaded_tripod()
    m.add_group("rear", [0])
    m.add_group("front", [1, 2])
    return m


@pytest.fixture
def results() -> sf.Results:
    return _tripod().solve()


def _reddish(img: np.ndarray) -> int:
    r, g, b = (img[..., k].astype(int) for k in range(3))
    return int(np.count_nonzero((r - g > 60) & (r - b > 60)))


def _bluish(img: np.ndarray) -> int:
    r, g, b = (img[..., k].astype(int) for k in range(3))
    return int(np.count_nonzero((b - r > 60) & (b - g > 40)))


def test_screenshot_shows_tension_red_and_compression_blue(tmp_path: Path,
                                                           results: sf.Results) -> None:
    path = viewer.screenshot(results, "wind", tmp_path / "wind.png", size=SIZE)
    assert path == tmp_path / "wind.png"
    assert [p.name for p in tmp_path.iterdir()] == ["wind.png"]  # no temporary left
    img = (mpimg.imread(path)[..., :3] * 255).astype(np.uint8)  # read back with matplotlib
    assert img.shape == (SIZE[1], SIZE[0], 3)
    assert img.std() > 0
    assert len(np.unique(img.reshape(-1, 3), axis=0)) > 10
    # Under the horizontal load one leg is in tension and one in compression
    # (closed form, joint equilibrium); on the coolwarm map tension is the
    # red end (180, 4, 38) and compression the blue end (59, 76, 192).
    assert _reddish(img) > 30
    assert _bluish(img) > 30


def test_all_compression_has_no_red_members(results: sf.Results) -> None:
    scene = viewer.build_scene(results, "snow", off_screen=True, window_size=SIZE,
                               view="front")
    try:
        img = scene.plotter.screenshot(return_img=True)
        # The colour bar shows both ends; count only above it (top 70 % of the picture).
        top = img[: int(0.7 * SIZE[1])]
        assert _bluish(top) > 30
        assert _reddish(top) == 0
    finally:
        scene.close()


@pytest.mark.parametrize("color_by", ["displacement", "stress", "group"])
def test_other_colourings_render(results: sf.Results, color_by: str) -> None:
    plotter = viewer.build_plotter(results, "snow+wind", color_by=color_by, off_screen=True,
                                   window_size=SIZE, view="top")
    try:
        img = plotter.screenshot(return_img=True)
        assert img.std() > 0
        assert "members" in plotter.actors and "supports" in plotter.actors
        assert "loads" in plotter.actors and "undeformed" in plotter.actors
    finally:
        plotter.close()


def test_scale_and_case_switching(results: sf.Results) -> None:
    scene = viewer.build_scene(results, off_screen=True, window_size=SIZE)
    try:
        assert scene.case == "snow"
        # Closed form (compatibility): the apex drops W L³ / (3 h² E A); the
        # automatic scale draws it at 5 % of the bounding-box diagonal.
        drop = W * L_LEG**3 / (3 * H_APEX**2 * E * AREA)
        size = np.linalg.norm(np.ptp(results.model.nodes, axis=0))
        assert scene.scale * drop == pytest.approx(0.05 * size, rel=1e-9)
        np.testing.assert_allclose(scene.deformed_nodes()[3],
                                   [0.0, 0.0, H_APEX - 0.05 * size], atol=1e-9)
        assert scene.next_case() == "wind"
        assert scene.next_case() == "snow+wind"
        assert scene.next_case() == "snow"
        assert scene.next_case(-1) == "snow+wind"
        assert viewer.auto_scale(results.model, results["snow+wind"].displacements) == \
            pytest.approx(scene.scale, rel=1e-12)
    finally:
        scene.close()


def test_fixed_scale_zero_draws_undeformed(results: sf.Results) -> None:
    scene = viewer.build_scene(results, "snow", scale=0.0, off_screen=True, window_size=SIZE)
    try:
        np.testing.assert_array_equal(scene.deformed_nodes(), results.model.nodes)
        assert "undeformed" not in scene.plotter.actors
    finally:
        scene.close()


def test_picking_describes_members_and_nodes(results: sf.Results) -> None:
    scene = viewer.build_scene(results, "wind", scale=0.0, off_screen=True, window_size=SIZE)
    try:
        x = results.model.nodes
        text = scene.pick((x[3] + x[1]) / 2)
        # Closed form: leg 1 carries +H L / (sqrt(3) a) under the horizontal load.
        n_kn = H * L_LEG / (np.sqrt(3.0) * A_FOOT) / 1e3
        assert "member 1 (nodes 3-1), group front" in text
        assert f"L = {format_number(L_LEG)} m" in text
        assert f"N = {format_number(n_kn)} kN (tension)" in text
        assert f"stress = {format_number(n_kn * 1e3 / AREA / 1e6)} MPa" in text
        foot = scene.pick(x[2] + 1e-3)
        assert foot.startswith("node 2 at")
        assert "R = (" in foot and "kN" in foot
        apex = scene.pick(x[3])
        assert apex.startswith("node 3") and "no support" in apex
    finally:
        scene.close()


def test_large_models_use_lines(results: sf.Results) -> None:
    scene = viewer.FrameScene(results, "wind", off_screen=True, window_size=SIZE, tube_limit=2)
    try:
        members = scene.plotter.actors["members"]
        # Plain line cells (no tube polygons) beyond the tube limit: 3 lines here.
        mesh = members.mapper.dataset
        assert mesh.GetNumberOfLines() == 3 and mesh.GetNumberOfPolys() == 0
        assert scene.plotter.screenshot(return_img=True).std() > 0
    finally:
        scene.close()


def test_screenshots_per_case_and_view(tmp_path: Path, results: sf.Results) -> None:
    paths = viewer.screenshots(tmp_path, results, cases=["wind", "snow+wind"],
                               views=("top", "side"), size=SIZE)
    assert [p.name for p in paths] == ["wind_top.png", "wind_side.png",
                                       "snow+wind_top.png", "snow+wind_side.png"]
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(p.name for p in paths)
    assert mpimg.imread(paths[1]).std() > 0


def test_bad_options_raise(results: sf.Results, tmp_path: Path) -> None:
    with pytest.raises(sf.ModelError, match="color_by='force'"):
        viewer.build_plotter(results, "snow", color_by="force", off_screen=True)
    with pytest.raises(sf.ModelError, match="view='bottom'"):
        viewer.screenshot(results, "snow", tmp_path / "x.png", view="bottom")
    with pytest.raises(sf.ModelError, match="scale=-2"):
        viewer.build_plotter(results, "snow", scale=-2.0, off_screen=True)
    with pytest.raises(KeyError, match="'rain'"):
        viewer.screenshots(tmp_path, results, cases=["rain"])
    assert list(tmp_path.iterdir()) == []


def test_keys_and_slider_switch_cases(results: sf.Results) -> None:
    # Off-screen, but with the interaction wired as in a window.
    scene = viewer.FrameScene(results, off_screen=True, window_size=SIZE, interactive=True)
    try:
        vtk_iren = scene.plotter.iren.interactor
        vtk_iren.SetKeySym("n")
        vtk_iren.InvokeEvent("KeyPressEvent")
        assert scene.case == "wind"
        vtk_iren.SetKeySym("Left")
        vtk_iren.InvokeEvent("KeyPressEvent")
        assert scene.case == "snow"
        slider = scene.slider.GetRepresentation()
        scene.next_case(2)
        assert slider.GetValue() == pytest.approx(2.0)
        assert scene.case == "snow+wind"
    finally:
        scene.close()


def test_load_arrows_thinned_on_large_models(monkeypatch: pytest.MonkeyPatch) -> None:
    import sys

    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "examples"))
    import roof_grid

    res = roof_grid.build().solve()
    loaded = int(np.count_nonzero(np.linalg.norm(res["snow"].loads, axis=1)))

    def arrow_points() -> int:
        scene = viewer.FrameScene(res, "snow", off_screen=True, window_size=SIZE)
        try:
            return int(scene.plotter.actors["loads"].mapper.dataset.n_points)
        finally:
            scene.close()

    every = arrow_points()
    monkeypatch.setattr(viewer, "MAX_ARROWS", 10)
    thinned = arrow_points()
    # Every k-th loaded node with k = ceil(loaded / 10): ceil(loaded / k) arrows.
    k = -(-loaded // 10)
    assert thinned * loaded == every * (-(-loaded // k))
