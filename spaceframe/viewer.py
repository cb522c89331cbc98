"""A 3D view of the results with PyVista: coloured members, the deformed shape, supports, loads.

Members are drawn as tubes (plain lines beyond :data:`TUBE_LIMIT` members)
coloured by axial force on a diverging map centred on zero (``coolwarm``:
blue end compression, red end tension, the range symmetric), by
displacement magnitude, by stress or by group.  The deformed shape is drawn
with a scale factor, the undeformed shape faint beside it; supports are cones
under the nodes and loads arrows pointing at them.

In an interactive window, ``n`` / Right and ``b`` / Left step through the load
cases and combinations (a slider does the same), and ``p`` over a member or
node shows its figures.  Everything renders off-screen as well, for
:func:`screenshot` and for tests; PyVista is imported inside the functions.
"""

from __future__ import annotations

import os
import uuid
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.summary import auto_scale, format_number, member_group_index

if TYPE_CHECKING:
    import pyvista

    from spaceframe.results import Results

__all__ = [
    "COLOR_BY",
    "TUBE_LIMIT",
    "VIEWS",
    "FrameScene",
    "auto_scale",
    "build_plotter",
    "build_scene",
    "screenshot",
    "screenshots",
    "show",
]

#: Above this many members the frame is drawn as plain lines: building real
#: tube geometry for more costs seconds and gigabytes.
TUBE_LIMIT = 50_000

#: Most load arrows drawn; beyond it every k-th loaded node gets one.
MAX_ARROWS = 2000

#: Camera presets: name -> (camera direction from the model, view-up vector).
VIEWS: dict[str, tuple[tuple[float, float, float], tuple[float, float, float]]] = {
    "iso": ((1.0, -1.0, 1.0), (0.0, 0.0, 1.0)),
    "top": ((0.0, 0.0, 1.0), (0.0, 1.0, 0.0)),
    "front": ((0.0, -1.0, 0.0), (0.0, 0.0, 1.0)),
    "side": ((1.0, 0.0, 0.0), (0.0, 0.0, 1.0)),
}

#: What the members can be coloured by: name -> (scalar bar title, colour map).
COLOR_BY: dict[str, tuple[str, str]] = {
    "axial_force": ("Axial force [kN] (tension +)", "coolwarm"),
    "stress": ("Stress [MPa] (tension +)", "coolwarm"),
    "displacement": ("Displacement [mm]", "viridis"),
    "group": ("Group", "tab10"),
}

_SUPPORT_COLOR = "seagreen"
_SPRING_COLOR = "darkgoldenrod"
_LOAD_COLOR = "black"
_UNDEFORMED_COLOR = "grey"
_NO_GROUP_COLOR = "lightgrey"
#: Distinct colours for groups, cycled when there are more groups.
_GROUP_COLORS = (
    "#1f77b4", "#ff7f0e", "#2ca02c", "#d62728", "#9467bd",
    "#8c564b", "#e377c2", "#7f7f7f", "#bcbd22", "#17becf",
)


def _check_options(color_by: str, view: str) -> None:
    if color_by not in COLOR_BY:
        raise ModelError(f"color_by={color_by!r}: expected one of {', '.join(COLOR_BY)}")
    if view not in VIEWS:
        raise ModelError(f"view={view!r}: expected one of {', '.join(VIEWS)}")


def _resolve_scale(scale: float | str, model: Any, displacements: np.ndarray) -> float:
    if isinstance(scale, str):
        if scale != "auto":
            raise ModelError(f"scale={scale!r}: expected 'auto' or a number >= 0")
        return auto_scale(model, displacements)
    value = float(scale)
    if not np.isfinite(value) or value < 0:
        raise ModelError(f"scale={scale!r}: expected 'auto' or a finite number >= 0")
    return value


def _segment_distances(points_a: np.ndarray, points_b: np.ndarray, p: np.ndarray) -> np.ndarray:
    """(b,) float: distance from ``p`` to each segment a-b."""
    d = points_b - points_a
    w = p - points_a
    dd = np.einsum("ij,ij->i", d, d)
    with np.errstate(invalid="ignore", divide="ignore"):
        s = np.clip(np.einsum("ij,ij->i", w, d) / dd, 0.0, 1.0)
    s = np.where(dd > 0, s, 0.0)
    closest = points_a + s[:, None] * d
    return np.linalg.norm(p - closest, axis=1)


def _quiet_vtk_warnings() -> None:
    """Keep VTK's "bad X server connection" warning off stderr when rendering off-screen.

    Without a display VTK warns that it cannot reach an X server and then
    renders off-screen anyway; the warning would read as a failure to a user
    of the command line.  Errors are still shown.
    """
    from vtkmodules.vtkCommonCore import vtkLogger

    vtkLogger.SetStderrVerbosity(vtkLogger.VERBOSITY_ERROR)


class FrameScene:
    """A PyVista plotter showing one result at a time, with switching and picking.

    Parameters
    ----------
    results : Results
    case : str, optional
        Result shown first (default the first of ``results``).
    color_by : {"axial_force", "stress", "displacement", "group"}
    scale : "auto" or float
        Multiplier of the drawn displacements; "auto" draws the largest at
        5 % of the model size (see :func:`spaceframe.summary.auto_scale`),
        recomputed for each result; 0 draws the undeformed shape only.
    off_screen : bool
        Render without a window (no display needed).
    window_size : (2,) int
        Width and height in pixels.
    view : {"iso", "top", "front", "side"}
    tube_limit : int
        Largest number of members drawn as tube geometry.
    interactive : bool, optional
        Wire keys, slider and picking (default: when on-screen).

    Attributes
    ----------
    plotter : pyvista.Plotter
    case : str
        Name of the result on show.
    scale : float
        Displacement scale factor in use.

    Raises
    ------
    ModelError
        On an unknown ``color_by`` or ``view``, a bad ``scale`` or empty results.
    KeyError
        If ``case`` is not a result name.
    """

    def __init__(
        self,
        results: Results,
        case: str | None = None,
        *,
        color_by: str = "axial_force",
        scale: float | str = "auto",
        off_screen: bool = False,
        window_size: Sequence[int] = (1600, 1000),
        view: str = "iso",
        tube_limit: int = TUBE_LIMIT,
        interactive: bool | None = None,
    ) -> None:
        import pyvista as pv

        _check_options(color_by, view)
        self.results = results
        self.names = list(results)
        if not self.names:
            raise ModelError("viewer: there are no load cases or combinations to show")
        model = results.model
        self.color_by = color_by
        self.scale_option = scale
        self.tube_limit = int(tube_limit)
        self.view = view
        lengths = model.lengths
        median = float(np.median(lengths)) if lengths.size else 1.0
        # Thin enough that a dense grid stays readable, thick enough to see
        # its colour in a small picture.
        self.radius = min(0.006 * model.size, 0.06 * median)
        self.group_index, self.group_names = member_group_index(model)
        if off_screen:
            _quiet_vtk_warnings()
        # Typed Any: PyVista's decorated Plotter methods confuse mypy's signatures.
        plotter: Any = pv.Plotter(off_screen=off_screen, window_size=list(window_size))
        plotter.set_background("white")
        self.plotter = plotter
        self._slider: Any = None
        self.case = ""
        self.scale = 0.0
        self.set_case(case if case is not None else self.names[0])
        self.set_view(view)
        if interactive if interactive is not None else not off_screen:
            self._enable_interaction()

    # ---------------------------------------------------------------- drawing
    def deformed_nodes(self) -> np.ndarray:
        """(n, 3) float: node positions as drawn, m (undeformed + scale * u)."""
        res = self.results[self.case]
        return self.results.model.nodes + self.scale * res.displacements

    def _member_scalars(self) -> tuple[np.ndarray, str, tuple[float, float]]:
        res = self.results[self.case]
        if self.color_by in ("axial_force", "stress"):
            values = res.axial_forces / 1e3 if self.color_by == "axial_force" else res.stress / 1e6
            top = float(np.abs(values).max(initial=0.0)) or 1.0
            # Symmetric about zero: the neutral middle colour means no force in every case.
            return values, "cell", (-top, top)
        if self.color_by == "displacement":
            mag = np.linalg.norm(res.displacements, axis=1) * 1e3
            return mag, "point", (0.0, float(mag.max(initial=0.0)) or 1.0)
        n = max(len(self.group_names), 1)
        # One colour band centred on each integer group id.
        return self.group_index.astype(float), "cell", (-0.5, n - 0.5)

    def set_case(self, name: str) -> None:
        """Show the result ``name`` (redraws members, supports, loads and the title)."""
        import pyvista as pv

        res = self.results[name]
        model = self.results.model
        self.case = name
        self.scale = _resolve_scale(self.scale_option, model, res.displacements)
        p = self.plotter
        lines = np.empty((model.n_members, 3), dtype=np.int64)
        lines[:, 0] = 2
        lines[:, 1:] = model.members
        deformed = pv.PolyData(self.deformed_nodes(), lines=lines.ravel())
        values, where, clim = self._member_scalars()
        if where == "cell":
            deformed.cell_data["value"] = values
        else:
            deformed.point_data["value"] = values
        title, cmap = COLOR_BY[self.color_by]
        mesh_kw: dict[str, Any] = {
            "scalars": "value",
            "cmap": cmap,
            "clim": clim,
            "scalar_bar_args": {
                "title": title,
                "color": "black",
                "vertical": False,
                "position_x": 0.25,
                "position_y": 0.03,
                "width": 0.5,
                "height": 0.1,
                "title_font_size": 14,
                "label_font_size": 12,
                "fmt": "%.3g",
            },
            "name": "members",
        }
        legend: list[list[str]] = []
        if self.color_by == "group":
            n = max(len(self.group_names), 1)
            colors = [_GROUP_COLORS[k % len(_GROUP_COLORS)] for k in range(n)]
            mesh_kw["cmap"] = colors
            mesh_kw["n_colors"] = n
            mesh_kw["below_color"] = _NO_GROUP_COLOR
            # Names in a legend box: a scalar bar has no room for long group names.
            mesh_kw["show_scalar_bar"] = False
            del mesh_kw["scalar_bar_args"]
            legend = [[g, colors[k]] for k, g in enumerate(self.group_names)]
            if np.any(self.group_index < 0):
                legend.append(["(no group)", _NO_GROUP_COLOR])
        large = model.n_members > self.tube_limit
        if not large:
            p.add_mesh(deformed.tube(radius=self.radius, n_sides=10), **mesh_kw)
        else:
            # Plain lines: tube geometry or tube shading of 10^5 lines costs
            # seconds per picture in software rendering, for no gain at that density.
            p.add_mesh(deformed, line_width=2, **mesh_kw)
        if legend:
            p.add_legend(legend, bcolor="white", face="rectangle", loc="lower right",
                         size=(0.3, 0.06 * len(legend)))

        if self.scale > 0 and np.any(res.displacements):
            undeformed = pv.PolyData(model.nodes.astype(float), lines=lines.ravel())
            # Translucency needs depth sorting; for large models an opaque pale
            # grey reads the same and renders far faster.
            p.add_mesh(undeformed, color="gainsboro" if large else _UNDEFORMED_COLOR,
                       opacity=1.0 if large else 0.35,
                       line_width=1, name="undeformed", pickable=False)
        else:
            p.remove_actor("undeformed")
        self._draw_supports()
        self._draw_loads()
        kind = "combination" if res.kind == "combination" else "load case"
        shape = f"deformed x{format_number(self.scale, 3)}" if self.scale > 0 else "undeformed"
        p.add_text(f"{name} ({kind}), {shape}", position="upper_left", font_size=12,
                   color="black", name="title")
        if self._slider is not None:
            self._slider.GetRepresentation().SetValue(self.names.index(name))

    def _draw_supports(self) -> None:
        import pyvista as pv

        model = self.results.model
        pts = self.deformed_nodes()
        h = 0.035 * model.size
        # Tip at the glyph origin, so each cone sits just under its node.
        cone = pv.Cone(center=(0.0, 0.0, -h / 2), direction=(0.0, 0.0, 1.0), height=h,
                       radius=0.4 * h, resolution=12)
        held = model.restraint.any(axis=1)
        sprung = (model.springs > 0).any(axis=1) & ~held
        for key, mask, color in (("supports", held, _SUPPORT_COLOR),
                                 ("springs", sprung, _SPRING_COLOR)):
            if mask.any():
                glyphs = pv.PolyData(pts[mask]).glyph(geom=cone, orient=False, scale=False)
                self.plotter.add_mesh(glyphs, color=color, name=key, pickable=False)
            else:
                self.plotter.remove_actor(key)

    def _draw_loads(self) -> None:
        import pyvista as pv

        model = self.results.model
        forces = self.results[self.case].loads
        mag = np.linalg.norm(forces, axis=1)
        loaded = mag > 0
        if not loaded.any():
            self.plotter.remove_actor("loads")
            return
        factor = 0.1 * model.size / float(mag.max())
        idx = np.flatnonzero(loaded)
        if idx.size > MAX_ARROWS:
            # Every k-th loaded node: thousands of arrows are unreadable and slow.
            idx = idx[:: -(-idx.size // MAX_ARROWS)]
        vec = forces[idx]
        # Arrows end at the node they load: start one arrow length before it.
        starts = self.deformed_nodes()[idx] - factor * vec
        cloud = pv.PolyData(starts)
        cloud.point_data["force"] = vec
        arrows = cloud.glyph(orient="force", scale="force", factor=factor,
                             geom=pv.Arrow(tip_length=0.3, tip_radius=0.12, shaft_radius=0.04))
        self.plotter.add_mesh(arrows, color=_LOAD_COLOR, name="loads", pickable=False)

    def set_view(self, view: str) -> None:
        """Point the camera: "iso", "top", "front" or "side"."""
        _check_options(self.color_by, view)
        direction, up = VIEWS[view]
        lo, hi = self.results.model.extents()
        centre = (lo + hi) / 2
        pos = centre + np.asarray(direction) * self.results.model.size * 2.0
        self.plotter.camera_position = [tuple(pos), tuple(centre), up]
        self.plotter.reset_camera()
        self.view = view

    @property
    def slider(self) -> Any:
        """The VTK slider widget that picks the result (None unless interactive)."""
        return self._slider

    def next_case(self, step: int = 1) -> str:
        """Show the next (or, with ``step=-1``, previous) result, wrapping round."""
        k = (self.names.index(self.case) + step) % len(self.names)
        self.set_case(self.names[k])
        self.plotter.render()
        return self.case

    # ---------------------------------------------------------------- picking
    def pick(self, point: Sequence[float]) -> str:
        """Describe the node or member drawn nearest to ``point`` (drawn coordinates).

        A point within a few tube radii of a node describes the node
        (position, displacement, reaction); otherwise the nearest member
        (id, end nodes, groups, length, force, stress).
        """
        model = self.results.model
        res = self.results[self.case]
        p = np.asarray(point, dtype=float).reshape(3)
        x = self.deformed_nodes()
        dn = np.linalg.norm(x - p, axis=1)
        i = int(np.argmin(dn))
        dm = _segment_distances(x[model.members[:, 0]], x[model.members[:, 1]], p)
        k = int(np.argmin(dm))
        if dn[i] <= max(3.0 * self.radius, dm[k]):
            u = res.displacements[i] * 1e3
            r = res.reactions[i] / 1e3
            lines = [
                f"node {i} at ({', '.join(format_number(v) for v in model.nodes[i])}) m",
                f"u = ({', '.join(format_number(v) for v in u)}) mm, "
                f"|u| = {format_number(float(np.linalg.norm(u)))} mm",
            ]
            if model.restraint[i].any() or (model.springs[i] > 0).any():
                lines.append(f"R = ({', '.join(format_number(v) for v in r)}) kN")
            else:
                lines.append("no support")
            return "\n".join(lines)
        n = float(res.axial_forces[k])
        sense = "tension" if n > 0 else "compression" if n < 0 else "no force"
        groups = ", ".join(model.groups_of(k)) or "none"
        a, b = (int(v) for v in model.members[k])
        return "\n".join([
            f"member {k} (nodes {a}-{b}), group {groups}",
            f"L = {format_number(float(model.lengths[k]))} m",
            f"N = {format_number(n / 1e3)} kN ({sense})",
            f"stress = {format_number(float(res.stress[k]) / 1e6)} MPa",
        ])

    def _on_pick(self, point: Any, *args: Any) -> None:
        if point is None:
            return
        self.plotter.add_text(self.pick(point), position="lower_left", font_size=10,
                              color="black", name="pick")

    def _enable_interaction(self) -> None:
        p = self.plotter
        for key, step in (("n", 1), ("Right", 1), ("b", -1), ("Left", -1)):
            p.add_key_event(key, lambda step=step: self.next_case(step))
        if len(self.names) > 1:
            self._slider = p.add_slider_widget(
                lambda value: self._on_slider(value),
                rng=[0, len(self.names) - 1],
                value=self.names.index(self.case),
                title="result (n / b)",
                fmt="%.0f",
                pointa=(0.55, 0.07),
                pointb=(0.95, 0.07),
                color="black",
            )
        p.enable_point_picking(callback=self._on_pick, show_message="p: pick member or node",
                               picker="cell", font_size=10, color="black", show_point=False)

    def _on_slider(self, value: float) -> None:
        name = self.names[round(value)]
        if name != self.case:
            self.set_case(name)

    # -------------------------------------------------------------- pictures
    def save(self, path: str | os.PathLike[str]) -> Path:
        """Render to a PNG file, written under a temporary name and then renamed."""
        final = Path(path)
        tmp = final.with_name(f".{final.stem}.{os.getpid()}-{uuid.uuid4().hex[:12]}.png")
        try:
            self.plotter.screenshot(str(tmp))
            os.replace(tmp, final)
        finally:
            tmp.unlink(missing_ok=True)
        return final

    def close(self) -> None:
        """Release the render window."""
        self.plotter.close()


def build_scene(
    results: Results,
    case: str | None = None,
    *,
    color_by: str = "axial_force",
    scale: float | str = "auto",
    off_screen: bool = False,
    window_size: Sequence[int] = (1600, 1000),
    view: str = "iso",
) -> FrameScene:
    """A :class:`FrameScene` (plotter plus case switching and picking); see there."""
    return FrameScene(results, case, color_by=color_by, scale=scale, off_screen=off_screen,
                      window_size=window_size, view=view)


def build_plotter(
    results: Results,
    case: str | None = None,
    *,
    color_by: str = "axial_force",
    scale: float | str = "auto",
    off_screen: bool = False,
    window_size: Sequence[int] = (1600, 1000),
    view: str = "iso",
) -> pyvista.Plotter:
    """A PyVista plotter showing ``case`` of ``results``.

    Parameters
    ----------
    results : Results
    case : str, optional
        Load case or combination shown first (default the first).
    color_by : {"axial_force", "stress", "displacement", "group"}
    scale : "auto" or float
        Displacement scale; "auto" draws the largest at 5 % of the model size.
    off_screen : bool
    window_size : (2,) int
    view : {"iso", "top", "front", "side"}

    Returns
    -------
    pyvista.Plotter
        Ready to ``show()`` or ``screenshot()``; when on-screen, with keys,
        slider and picking wired to the scene.
    """
    return build_scene(results, case, color_by=color_by, scale=scale, off_screen=off_screen,
                       window_size=window_size, view=view).plotter


def show(results: Results, case: str | None = None, **options: Any) -> None:
    """Open an interactive window on the results (options as :func:`build_plotter`)."""
    scene = build_scene(results, case, **options)
    scene.plotter.show(title=f"spaceframe: {scene.case}")


def screenshot(
    results: Results,
    case: str,
    path: str | os.PathLike[str],
    *,
    view: str = "iso",
    size: Sequence[int] = (1200, 800),
    color_by: str = "axial_force",
    scale: float | str = "auto",
) -> Path:
    """Render one result off-screen to a PNG file (no display needed).

    Returns
    -------
    Path
        The PNG written.
    """
    scene = build_scene(results, case, color_by=color_by, scale=scale, off_screen=True,
                        window_size=size, view=view)
    try:
        return scene.save(path)
    finally:
        scene.close()


def screenshots(
    folder: str | os.PathLike[str],
    results: Results,
    *,
    cases: Sequence[str] | None = None,
    views: Sequence[str] = ("iso", "top", "front"),
    size: Sequence[int] = (1200, 800),
    color_by: str = "axial_force",
    scale: float | str = "auto",
    prefix: str = "",
) -> list[Path]:
    """One PNG per result and view, ``<prefix><case>_<view>.png``, from one off-screen scene.

    Returns
    -------
    list of Path
        In the order of the results, then of ``views``.
    """
    import re

    out_dir = Path(folder)
    out_dir.mkdir(parents=True, exist_ok=True)
    names = list(results) if cases is None else list(cases)
    for v in views:
        _check_options(color_by, v)
    unknown = [name for name in names if name not in results]
    if unknown:
        raise KeyError(f"no result named {unknown[0]!r} (have: {', '.join(results)})")
    if not names:
        return []
    scene = build_scene(results, names[0], color_by=color_by, scale=scale, off_screen=True,
                        window_size=size, view=views[0] if views else "iso")
    paths: list[Path] = []
    used: set[str] = set()
    try:
        for name in names:
            scene.set_case(name)
            safe = re.sub(r"[^A-Za-z0-9_.+-]+", "_", name).strip("._") or "result"
            stem, k = f"{prefix}{safe}", 2
            while stem.lower() in used:
                stem, k = f"{prefix}{safe}_{k}", k + 1
            used.add(stem.lower())
            for v in views:
                scene.set_view(v)
                paths.append(scene.save(out_dir / f"{stem}_{v}.png"))
    finally:
        scene.close()
    return paths
