"""Mode shapes in the viewer: buckling modes and vibration modes drawn as deformed shapes.

A mode shape has no size of its own (each is scaled to a largest nodal
movement of 1), so it is drawn at an amplitude: by default 5 % of the model
size, and in a window a slider sets it.  Members are coloured by their
stretch in the mode, ``c · (φ_j − φ_i)`` (dimensionless, per unit of the
largest movement; the sign shows which members lengthen and which shorten),
so the members that take part in the mode stand out.  Pictures of the first
modes come from :func:`mode_pictures`.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.viewer.scene import FrameScene, Writer, symmetric_range

if TYPE_CHECKING:
    from spaceframe.model import Model
    from spaceframe.results import Results

__all__ = ["DEFAULT_AMPLITUDE", "ModeScene", "mode_animation", "mode_pictures", "mode_results",
           "self_stress_results", "show_modes"]

#: Drawn amplitude of a mode, as a fraction of the model size, until the slider moves it.
DEFAULT_AMPLITUDE = 0.05


def mode_results(results: Results | Model, modes: Sequence[tuple[str, Any]]) -> Results:
    """Mode shapes as drawable results of kind "mode", one per ``(label, shape)``.

    ``results`` gives the model (a Model itself will do: a mechanism has no
    static results, and its modes from :func:`spaceframe.determinacy` are
    drawn the same way).

    ``shape`` is (n_nodes, 3), scaled to a largest movement of 1 (as
    :func:`spaceframe.linear_buckling` and :func:`spaceframe.natural_frequencies`
    give them).  Each entry's displacements are the shape; its "axial forces"
    are the members' stretch in the mode (module notes), with no loads and
    no reactions.
    """
    from spaceframe.results import CaseResult, Results

    model: Model = results.model if isinstance(results, Results) else results
    if not modes:
        raise ModelError("viewer: there are no mode shapes to show")
    zeros = np.zeros((model.n_nodes, 3))
    ends = model.members
    items = {}
    for label, shape in modes:
        phi = np.asarray(shape, dtype=float)
        if phi.shape != (model.n_nodes, 3) or not np.all(np.isfinite(phi)):
            raise ModelError(f"viewer: mode {label!r} has shape {phi.shape} or values that are "
                             f"not finite; expected ({model.n_nodes}, 3) numbers")
        if label in items:
            raise ModelError(f"viewer: two modes are labelled {label!r}")
        stretch = np.einsum("ij,ij->i", model.directions, phi[ends[:, 1]] - phi[ends[:, 0]])
        items[label] = CaseResult(
            name=label, kind="mode", displacements=phi, axial_forces=stretch,
            reactions=zeros, loads=zeros, elongations=stretch, residual=0.0,
            area=np.ones(model.n_members),
        )
    return Results(model, items, getattr(results, "solver", ""))


def self_stress_results(model: Model, states: Any) -> Results:
    """States of self-stress as drawable results of kind "self-stress": member colours only.

    ``states`` is (s, b), as :func:`spaceframe.determinacy` gives them (member
    forces in equilibrium with no load, each scaled to a largest of 1).
    Drawn by :class:`ModeScene`, the members are coloured by the state's force
    (tension +) on the undeformed frame.
    """
    from spaceframe.results import CaseResult, Results

    t = np.asarray(states, dtype=float)
    if t.ndim != 2 or t.shape[1] != model.n_members or not t.shape[0]:
        raise ModelError(f"viewer: states of self-stress of shape {t.shape}: expected "
                         f"(s, {model.n_members}) with s >= 1")
    zeros = np.zeros((model.n_nodes, 3))
    items = {f"self-stress state {k + 1}": CaseResult(
        name=f"self-stress state {k + 1}", kind="self-stress", displacements=zeros,
        axial_forces=t[k], reactions=zeros, loads=zeros, elongations=np.zeros(model.n_members),
        residual=0.0, area=np.ones(model.n_members)) for k in range(t.shape[0])}
    return Results(model, items)


def _amplitude(value: Any) -> float:
    amp = float(value)
    if not (np.isfinite(amp) and amp >= 0):
        raise ModelError(f"viewer: amplitude={value!r} must be a length >= 0, m")
    return amp


class ModeScene(FrameScene):
    """A :class:`FrameScene` of mode shapes, drawn at an amplitude (metres).

    ``amplitude`` is the drawn largest movement (default
    :data:`DEFAULT_AMPLITUDE` of the model size); :meth:`set_amplitude`
    changes it in place.  In a window a second slider sets it, from 0 to 4
    times the default.
    """

    def __init__(self, results: Results, case: str | None = None, *,
                 amplitude: float | None = None, **options: Any) -> None:
        size = results.model.size or 1.0
        self.default_amplitude = DEFAULT_AMPLITUDE * size
        amp = self.default_amplitude if amplitude is None else _amplitude(amplitude)
        self._amplitude_slider: Any = None
        options.setdefault("color_by", "axial_force")
        super().__init__(results, case, scale=amp, **options)

    def _bar_title(self) -> tuple[str, str]:
        if self.color_by == "axial_force":
            if self.results[self._first].kind == "self-stress":
                return "Self-stress state [-] (tension +)", "coolwarm"
            return "Stretch in the mode [-] (lengthens +)", "coolwarm"
        return super()._bar_title()

    def _member_scalars(self, name: str) -> tuple[np.ndarray, tuple[float, float]]:
        if self.color_by != "axial_force":
            return super()._member_scalars(name)
        values = self.results[name].axial_forces  # the stretch: no unit to convert
        return values, symmetric_range(values)

    @property
    def amplitude(self) -> float:
        """The drawn largest movement of the mode, m."""
        return float(self.scale)

    def set_amplitude(self, amplitude: float, case: str | None = None) -> None:
        """Draw the mode on show (or ``case``) with this largest movement (m), not rendered."""
        self.scale_option = _amplitude(amplitude)
        self.set_case(self.case if case is None else case)

    def _enable_interaction(self) -> None:
        super()._enable_interaction()
        self._amplitude_slider = self.plotter.add_slider_widget(
            lambda value: self.set_amplitude(value),
            rng=[0.0, 4.0 * self.default_amplitude],
            value=self.amplitude,
            title="amplitude [m]",
            fmt="%.3g",
            pointa=(0.05, 0.07),
            pointb=(0.45, 0.07),
            color="black",
        )


def show_modes(results: Results | Model, modes: Sequence[tuple[str, Any]], **options: Any) -> None:
    """Open a window on the mode shapes, with a slider for their amplitude.

    Keys and the result slider step through the modes as through results.
    """
    scene = ModeScene(mode_results(results, modes), **options)
    scene.plotter.show()


def mode_pictures(
    folder: str | os.PathLike[str],
    results: Results | Model,
    modes: Sequence[tuple[str, Any]],
    *,
    views: Sequence[str] = ("iso",),
    size: Sequence[int] = (1200, 800),
    amplitude: float | None = None,
    prefix: str = "",
    progress: Callable[[str], None] | None = None,
    write: Writer | None = None,
) -> list[Path]:
    """One PNG per mode and view, ``<prefix><label>_<view>.png``, from one off-screen scene."""
    from spaceframe.viewer.pictures import render_all

    shown = mode_results(results, modes)
    names = list(shown)
    out = Path(folder)
    out.mkdir(parents=True, exist_ok=True)
    scene = ModeScene(shown, names[0], amplitude=amplitude, off_screen=True,
                      window_size=size, view=views[0])
    return render_all(scene, names, views, out, prefix=prefix, progress=progress, write=write,
                      counted="mode pictures")


def mode_animation(
    path: str | os.PathLike[str],
    results: Results | Model,
    mode: tuple[str, Any],
    *,
    frames: int = 24,
    size: Sequence[int] = (800, 600),
    amplitude: float | None = None,
    view: str = "iso",
    seconds: float = 2.0,
    write: Writer | None = None,
) -> Path:
    """An animated GIF of one mode (or mechanism) swinging through a full cycle.

    ``frames`` pictures at amplitude ``a sin(2πk/frames)`` (``a`` as in
    :class:`ModeScene`), one cycle in ``seconds``, repeated; written through
    ``write`` (default :func:`spaceframe.files.atomic_write`).  The camera
    is fitted to the largest swing so the frame does not jump.
    """
    import io

    from PIL import Image

    from spaceframe.files import atomic_write

    if int(frames) < 2:
        raise ModelError(f"viewer: frames={frames!r}: an animation needs at least 2")
    label, shape = mode
    back = f"{label}, swinging back"
    # The swing back is the reversed shape at a positive amplitude.
    both = mode_results(results, [(label, shape), (back, -np.asarray(shape, dtype=float))])
    scene = ModeScene(both, label, amplitude=amplitude, off_screen=True, window_size=size,
                      view=view)
    try:
        peak = scene.amplitude
        scene.set_view(view)  # fitted at the largest swing, then kept for every frame
        scene._fit_each_case = False
        images = []
        for k in range(int(frames)):
            a = peak * float(np.sin(2.0 * np.pi * k / int(frames)))
            scene.set_amplitude(abs(a), label if a >= 0 else back)  # one update per frame
            frame = Image.open(io.BytesIO(scene.png()))
            images.append(frame.convert("P", palette=Image.Palette.ADAPTIVE))
    finally:
        scene.close()

    def save(tmp: Path) -> None:
        images[0].save(tmp, format="GIF", save_all=True, append_images=images[1:], loop=0,
                       duration=max(int(1000 * seconds / len(images)), 20))

    return (write or atomic_write)(Path(path), save)

