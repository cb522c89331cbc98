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
from spaceframe.results.summary import format_number

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
    monkeypatch.setattr(viewer.scene, "MAX_ARROWS", 10)
    thinned = arrow_points()
    # Every k-th loaded node with k = ceil(loaded / 10): ceil(loaded / k) arrows.
    k = -(-loaded // 10)
    assert thinned * loaded == every * (-(-loaded // k))


def _mast() -> sf.Model:
    """The demo mast (2 m square, 30 m tall), base pinned, wind along +x at the top
    and its own weight; groups with long names."""
    from spaceframe.demos import mast_geometry

    g = mast_geometry()
    m = sf.Model()
    m.add_nodes(g["nodes"])
    for name in ("legs", "bracing", "horizontals"):
        ids = m.add_members(g[name], area=AREA, E=E)
        m.add_group(name.upper() + "_OF_THE_MAST", ids)
    m.add_support(np.arange(4))
    top = np.arange(g["nodes"].shape[0] - 4, g["nodes"].shape[0])
    m.add_load("wind", top, (2e3, 0.0, 0.0))
    m.add_load("light", top[:1], (0.0, 0.0, -10.0))
    m.add_combination("wind+light", {"wind": 1.5, "light": 1.0})
    return m


def test_each_result_gets_its_own_colour_range(tmp_path: Path) -> None:
    # A small load drawn after a large one: the colour range must follow the
    # result on show, symmetric about zero (no carry-over from the first).
    res = _mast().solve()
    scene = viewer.build_scene(res, "wind", off_screen=True, window_size=SIZE)
    try:
        top_wind = float(np.abs(res["wind"].axial_forces).max()) / 1e3
        assert scene.clim == pytest.approx((-top_wind, top_wind))
        scene.set_case("light")
        top_light = float(np.abs(res["light"].axial_forces).max()) / 1e3
        assert top_light < 0.05 * top_wind
        lut = scene.plotter.actors["members"].mapper.lookup_table
        assert tuple(lut.GetRange()) == pytest.approx((-top_light, top_light))
        assert tuple(scene.plotter.actors["members"].mapper.GetScalarRange()) == \
            pytest.approx((-top_light, top_light))
    finally:
        scene.close()
    # The folder's picture of "light" (drawn after "wind") is the one `view --case` draws.
    folder = viewer.screenshots(tmp_path / "f", res, cases=["wind", "light"], views=("iso",),
                                size=SIZE)
    single = viewer.screenshot(res, "light", tmp_path / "one.png", size=SIZE)
    a = mpimg.imread(folder[1])[..., :3]
    b = mpimg.imread(single)[..., :3]
    # The frame and title are drawn alike; the colour bar's labels are the same
    # numbers (checked on the lookup table above) but VTK may place their glyphs
    # a pixel apart, so the bar's band (bottom 14 %) is left out of the comparison.
    frame = slice(0, int(0.86 * SIZE[1]))
    assert np.abs(a[frame] - b[frame]).max() < 0.02


def test_mast_fits_between_title_and_colour_bar() -> None:
    res = _mast().solve()
    for view in ("iso", "front", "side"):
        scene = viewer.build_scene(res, "wind", off_screen=True, window_size=(1200, 800),
                                   view=view)
        try:
            x0, y0, x1, y1 = scene.free_area()
            # The title's band at the top and the colour bar's band at the bottom are outside.
            assert y1 <= 1.0 - 2.6 * 12 / 800 + 1e-12
            assert y0 >= 0.02 + 0.1
            xy = scene.to_display(scene._drawn_points())
            assert xy[:, 0].min() >= x0 - 1e-9 and xy[:, 0].max() <= x1 + 1e-9
            assert xy[:, 1].min() >= y0 - 1e-9 and xy[:, 1].max() <= y1 + 1e-9
            # Fitted, not lost in the middle: the tall tower spans most of the free height.
            assert np.ptp(xy[:, 1]) > 0.9 * (y1 - y0)
        finally:
            scene.close()


def test_front_is_an_orthographic_elevation(results: sf.Results) -> None:
    scene = viewer.build_scene(results, "wind", off_screen=True, window_size=SIZE,
                               view="front")
    try:
        cam = scene.plotter.camera
        assert cam.GetParallelProjection()
        # Looking along +y with z up: an elevation on the x-z plane.
        np.testing.assert_allclose(cam.GetDirectionOfProjection(), (0.0, 1.0, 0.0), atol=1e-12)
        np.testing.assert_allclose(cam.GetViewUp(), (0.0, 0.0, 1.0), atol=1e-12)
        # Parallel projection: two nodes at the same x and z but different y land
        # on the same screen point.
        pts = np.array([[0.3, -5.0, 0.7], [0.3, 5.0, 0.7]])
        a, b = scene.to_display(pts)
        np.testing.assert_allclose(a, b, atol=1e-12)
    finally:
        scene.close()


def test_group_legend_holds_long_names() -> None:
    res = _mast().solve()
    scene = viewer.build_scene(res, "wind", color_by="group", off_screen=True,
                               window_size=(1200, 800))
    try:
        w, h = scene.legend_size
        longest = max(len(g) for g in scene.group_names)
        # Room for the longest name at about 0.6 of a 22-pixel row per character.
        assert w * 1200 >= longest * 0.6 * 22
        box = scene.plotter.renderer._legend
        bx, by = box.GetPosition()
        bw, bh = box.GetPosition2()
        assert (bw, bh) == pytest.approx((w, h))
        # The whole box inside the window (not pushed past its right edge).
        assert 0.0 <= bx and bx + bw <= 1.0 and 0.0 <= by and by + bh <= 1.0
        x1 = scene.free_area()[2]
        assert x1 <= bx
        xy = scene.to_display(scene._drawn_points())
        assert xy[:, 0].max() <= x1 + 1e-9
    finally:
        scene.close()


def test_one_render_per_picture(tmp_path: Path, results: sf.Results,
                                monkeypatch: pytest.MonkeyPatch) -> None:
    renders: list[int] = []
    built: list[viewer.FrameScene] = []
    real = viewer.build_scene

    def counting(*args: object, **kwargs: object) -> viewer.FrameScene:
        scene = real(*args, **kwargs)  # type: ignore[arg-type]
        scene.plotter.ren_win.AddObserver("StartEvent", lambda *_: renders.append(1))
        built.append(scene)
        return scene

    monkeypatch.setattr(viewer.pictures, "build_scene", counting)
    seen: list[str] = []
    paths = viewer.screenshots(tmp_path, results, views=("iso", "top"), size=SIZE,
                               progress=seen.append)
    assert len(built) == 1  # one scene for all pictures
    assert len(paths) == 6
    assert len(renders) == 6
    assert seen == [f"pictures {k}/6" for k in range(1, 7)]


def test_envelopes_and_picture_selection() -> None:
    res = _mast().solve()
    env = res.envelope("all", ["wind", "wind+light"])
    both = viewer.with_envelopes(res, {"all": env})
    assert list(both) == ["wind", "light", "wind+light", "all"]
    # Governing force: the larger in magnitude of the two results, per member.
    forces = np.stack([res["wind"].axial_forces, res["wind+light"].axial_forces])
    pick = np.argmax(np.abs(forces), axis=0)
    np.testing.assert_array_equal(both["all"].axial_forces,
                                  forces[pick, np.arange(forces.shape[1])])
    assert viewer.select_cases(both) == ["wind+light", "all"]
    assert viewer.select_cases(res, "all") == ["wind", "light", "wind+light"]
    assert viewer.select_cases(res, "none") == []
    assert viewer.select_cases(res, "light, wind") == ["light", "wind"]
    only_cases = sf.Results(res.model, {"wind": res["wind"]})
    assert viewer.select_cases(only_cases) == ["wind"]
    with pytest.raises(sf.ModelError, match="no result named 'rain'"):
        viewer.select_cases(res, "wind,rain")
    scene = viewer.build_scene(both, "all", off_screen=True, window_size=SIZE)
    try:
        assert scene.scale == 0.0
        assert "loads" not in scene.plotter.actors
    finally:
        scene.close()


def test_load_arrows_short_on_dense_grids() -> None:
    # A fictional 30 x 30 grid of 1 m squares, every node held and loaded.
    k = 30
    xy = np.stack(np.meshgrid(np.arange(k + 1.0), np.arange(k + 1.0), indexing="ij"), -1)
    m = sf.Model()
    m.add_nodes(np.c_[xy.reshape(-1, 2), np.zeros((k + 1) ** 2)])
    ids = np.arange((k + 1) ** 2).reshape(k + 1, k + 1)
    m.add_members(np.r_[np.c_[ids[:-1].ravel(), ids[1:].ravel()],
                        np.c_[ids[:, :-1].ravel(), ids[:, 1:].ravel()]], area=AREA, E=E)
    m.add_support(ids.ravel())
    m.add_load("snow", ids.ravel(), (0.0, 0.0, -1e3))
    res = m.solve()
    scene = viewer.FrameScene(res, "snow", off_screen=True, window_size=SIZE)
    try:
        # Twice the median member (2 m), not a tenth of the 42 m diagonal.
        assert scene.arrow_length() == pytest.approx(2.0)
        arrows = scene.plotter.actors["loads"].mapper.dataset
        assert np.ptp(arrows.points[:, 2]) == pytest.approx(2.0, rel=1e-6)
    finally:
        scene.close()
