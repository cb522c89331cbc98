"""Mode shapes in the viewer: drawn at an amplitude set by a slider, and pictured off-screen."""

from __future__ import annotations

from pathlib import Path

import matplotlib.image as mpimg
import numpy as np
import pytest
import pyvista as pv
from conftest import loaded_tripod

import spaceframe as sf
from spaceframe import viewer

pv.OFF_SCREEN = True
SIZE = (400, 300)


@pytest.fixture
def modes() -> tuple[sf.Results, list[tuple[str, np.ndarray]]]:
    m = loaded_tripod(density=7850.0)
    res = m.solve()
    f = sf.natural_frequencies(m, n_modes=3)
    return res, [(f"frequency mode {k + 1} ({hz:.3g} Hz)", f.modes[k])
                 for k, hz in enumerate(f.frequencies)]


def test_mode_results_carry_the_shape_and_the_members_stretch(modes) -> None:
    res, shapes = modes
    shown = viewer.mode_results(res, shapes)
    m = res.model
    for label, phi in shapes:
        r = shown[label]
        assert r.kind == "mode"
        np.testing.assert_array_equal(r.displacements, phi)
        # Stretch of member k in the mode: c_k · (φ_j − φ_i), written out member by member.
        for k, (i, j) in enumerate(m.members):
            assert r.axial_forces[k] == pytest.approx(float(m.directions[k] @ (phi[j] - phi[i])))
        # Scaled by the analysis to a largest nodal movement of 1.
        assert np.linalg.norm(phi, axis=1).max() == pytest.approx(1.0)


def test_amplitude_sets_the_drawn_movement_and_the_slider_moves_it(modes) -> None:
    res, shapes = modes
    scene = viewer.ModeScene(viewer.mode_results(res, shapes), off_screen=True,
                             window_size=SIZE, interactive=True)
    try:
        m = res.model
        phi = shapes[0][1]
        # Default: 5 % of the model size (viewer.modes.DEFAULT_AMPLITUDE) as the largest move.
        assert scene.amplitude == pytest.approx(0.05 * m.size)
        np.testing.assert_allclose(scene.deformed_nodes(), m.nodes + 0.05 * m.size * phi)
        scene.set_amplitude(0.2)
        np.testing.assert_allclose(scene.deformed_nodes(), m.nodes + 0.2 * phi)
        slider = scene._amplitude_slider
        slider.GetRepresentation().SetValue(0.1)
        slider.InvokeEvent("EndInteractionEvent")  # PyVista acts when the drag ends
        assert scene.amplitude == pytest.approx(0.1)
        scene.next_case(1)  # the modes step like results, at the amplitude set
        assert scene.case == shapes[1][0] and scene.amplitude == pytest.approx(0.1)
        with pytest.raises(sf.ModelError, match="amplitude"):
            scene.set_amplitude(-1.0)
    finally:
        scene.close()


def test_mode_pictures_show_the_mode(tmp_path: Path, modes) -> None:
    res, shapes = modes
    moved = viewer.mode_pictures(tmp_path / "a", res, shapes[:2], size=SIZE)
    flat = viewer.mode_pictures(tmp_path / "b", res, shapes[:1], size=SIZE, amplitude=0.0)
    assert len(moved) == 2 and moved[0].name.startswith("frequency_mode_1_")
    assert all(p.exists() and p.suffix == ".png" for p in moved)
    a, b = mpimg.imread(moved[0]), mpimg.imread(flat[0])
    assert a.shape == b.shape and not np.array_equal(a, b)  # the shape is drawn moved


def test_bad_modes_are_refused(modes) -> None:
    res, _ = modes
    with pytest.raises(sf.ModelError, match="no mode shapes"):
        viewer.mode_results(res, [])
    with pytest.raises(sf.ModelError, match=r"expected \(4, 3\)"):
        viewer.mode_results(res, [("bad", np.zeros((3, 3)))])


def test_a_mechanism_is_drawn_from_the_model_alone() -> None:
    # A tripod without its apex load is fine; with two feet free it is a mechanism whose
    # modes come from determinacy, with no static result to draw on.
    m = loaded_tripod()
    m.restraint[1:3] = False
    d = sf.determinacy(m)
    assert d.mechanisms > 0 and d.mechanism_modes is not None
    shown = viewer.mode_results(m, [(f"mechanism {k + 1}", s)
                                    for k, s in enumerate(d.mechanism_modes)])
    assert len(shown) == d.mechanisms
    for r in shown.values():  # a mechanism stretches no member (to round-off)
        assert np.abs(r.axial_forces).max() < 1e-9


def test_a_state_of_self_stress_is_drawn_as_member_colours(tmp_path: Path) -> None:
    # A doubly braced square (test_check_modes.py derives its state: sides ∓1/√2, diagonals
    # ±1), held in its plane: one state of self-stress.
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [3, 0, 0], [3, 3, 0], [0, 3, 0]])
    m.add_members([[0, 1], [1, 2], [2, 3], [3, 0], [0, 2], [1, 3]], area=1e-3, E=210e9)
    m.add_support([0])
    m.add_support([1], x=False)
    m.add_support([2, 3], x=False, y=False)
    d = sf.determinacy(m)
    shown = viewer.self_stress_results(m, d.self_stress_states)
    assert list(shown) == ["self-stress state 1"]
    scene = viewer.ModeScene(shown, off_screen=True, window_size=SIZE)
    try:
        assert scene.amplitude == 0.0  # nothing moves: the frame is drawn as it stands
        assert scene._bar_title()[0].startswith("Self-stress state")
        t = shown["self-stress state 1"].axial_forces
        assert scene.clim == pytest.approx((-np.abs(t).max(), np.abs(t).max()))
        scene.save(tmp_path / "s.png")
    finally:
        scene.close()
    with pytest.raises(sf.ModelError, match="expected"):
        viewer.self_stress_results(m, np.zeros((1, 3)))


def test_the_viewer_steps_through_a_load_path() -> None:
    m = loaded_tripod()
    p = sf.solve_nonlinear(m, "snow", max_load_factor=1.0)
    shown = viewer.path_results(m, p)
    assert len(shown) == p.n_steps
    names = list(shown)
    assert names[0] == "step 0: load factor 0" and names[-1].endswith("load factor 1")
    scene = viewer.FrameScene(shown, off_screen=True, window_size=SIZE, scale=1.0,
                              interactive=True)
    try:
        scene.next_case(len(names) - 1)
        # True scale: drawn where the path put the nodes at its last step.
        np.testing.assert_allclose(scene.deformed_nodes(), m.nodes + p.displacements[-1])
        np.testing.assert_array_equal(shown[scene.case].axial_forces, p.axial_forces[-1])
    finally:
        scene.close()
    with pytest.raises(sf.ModelError, match="not of this model"):
        viewer.path_results(sf.Model(), p)


def test_a_mode_animates_as_a_gif_through_a_full_cycle(tmp_path: Path, modes) -> None:
    from PIL import Image

    res, shapes = modes
    gif = viewer.mode_animation(tmp_path / "mode1.gif", res, shapes[0], frames=8, size=SIZE)
    with Image.open(gif) as im:
        assert im.format == "GIF" and im.n_frames == 8
        first = np.asarray(im.convert("RGB"))
        im.seek(2)  # a quarter cycle: the largest swing
        quarter = np.asarray(im.convert("RGB"))
        im.seek(6)  # three quarters: swung the other way
        back = np.asarray(im.convert("RGB"))
    assert not np.array_equal(first, quarter) and not np.array_equal(quarter, back)
    with pytest.raises(sf.ModelError, match="at least 2"):
        viewer.mode_animation(tmp_path / "x.gif", res, shapes[0], frames=1)
