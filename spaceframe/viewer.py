"""A 3D view of the results with PyVista: coloured members, the deformed shape, supports, loads.

Members are drawn as tubes (plain lines beyond :data:`TUBE_LIMIT` members)
coloured by axial force on a diverging map centred on zero (``coolwarm``:
blue end compression, red end tension, the range symmetric), by
displacement magnitude, by stress, by group, or by design utilisation (a
sequential scale 0 to 1 in ten bands, everything above 1 in one distinct
colour, members not checked grey; ``utilisation=`` gives the values).  The deformed shape is drawn
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
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.results.summary import auto_scale, format_number, member_group_index

if TYPE_CHECKING:
    import pyvista

    from spaceframe.results import Envelope, Results

__all__ = [
    "COLOR_BY",
    "PICTURE_CHOICES",
    "TUBE_LIMIT",
    "VIEWS",
    "FrameScene",
    "auto_scale",
    "build_plotter",
    "build_scene",
    "screenshot",
    "screenshots",
    "select_cases",
    "show",
    "with_envelopes",
]

#: Above this many members the frame is drawn as plain lines: tube geometry
#: for more costs seconds per picture in software rendering (10k members as
#: tubes: about 1.5 s a render on this machine, as lines 0.2 s), and at that
#: density the lines read as well.
TUBE_LIMIT = 5_000

#: Most load arrows drawn; beyond it every k-th loaded node gets one.
MAX_ARROWS = 500

#: Most supports drawn as cones; beyond it they are drawn as points.
MAX_CONES = 500

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
    "utilisation": ("Utilisation [-] (demand / resistance)", "utilisation"),
}

#: Utilisation colours: a sequential scale from 0 (pale) to 1 (dark), in
#: :data:`UTILISATION_BANDS` bands of equal width, and one distinct colour for
#: everything above 1 (failing); members not checked are light grey.
UTILISATION_STOPS = ("#f4f1de", "#a8c5b5", "#4f8a8b", "#1f3c5a")
UTILISATION_OVER = "#e0218a"
UTILISATION_BANDS = 10
_NOT_CHECKED_COLOR = "lightgrey"

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


#: Horizontal colour bar: position x, y, width, height as window fractions.
_BAR = (0.25, 0.02, 0.5, 0.1)
#: Font size of the title line, points.
_TITLE_FONT = 12


def _lines_mesh(points: np.ndarray, cells: np.ndarray) -> Any:
    import pyvista as pv

    return pv.PolyData(points, lines=cells)


def _legend_size(labels: Sequence[str], window: Sequence[int]) -> tuple[float, float]:
    """Width and height (window fractions) of a legend box that holds every label whole.

    VTK fits the text into the box: a box sized for the longest label in
    characters (about 0.6 of the text height each, common practice for sans
    fonts) keeps long group names readable instead of cut.
    """
    w, h = (float(v) for v in window)
    row = 22.0  # pixels per entry
    longest = max((len(t) for t in labels), default=1)
    width = (longest + 5) * 0.62 * row
    height = row * len(labels) + 8.0
    return min(0.45, width / w), min(0.9, height / h)


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

    The scene is built once; :meth:`set_case` updates the member colours,
    the drawn positions, the colour range, the supports, the loads and the
    title in place, and nothing is rendered until a picture is taken or the
    window is drawn.  Each result gets its own colour range (symmetric about
    zero for forces and stresses), so a picture never depends on which
    results were drawn before it.  The views are orthographic (parallel
    projection), fitted between the title and the colour bar.

    Parameters
    ----------
    results : Results
    case : str, optional
        Result shown first (default the first of ``results``).
    color_by : {"axial_force", "stress", "displacement", "group", "utilisation"}
    scale : "auto" or float
        Multiplier of the drawn displacements; "auto" draws the largest at
        5 % of the model size (see :func:`spaceframe.results.summary.auto_scale`),
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
    clim : (float, float)
        Colour range of the result on show (kN, MPa or mm).

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
        utilisation: Mapping[str, Any] | None = None,
    ) -> None:
        import pyvista as pv

        _check_options(color_by, view)
        self.utilisation = dict(utilisation or {})
        if color_by == "utilisation" and not self.utilisation:
            raise ModelError("viewer: color_by='utilisation' needs the utilisation of the "
                             "results (run the design checks first)")
        self.results = results
        self.names = list(results)
        if not self.names:
            raise ModelError("viewer: there are no load cases or combinations to show")
        first = case if case is not None else self.names[0]
        results[first]  # KeyError naming the known results, before any window opens
        self._first = first
        model = results.model
        self.color_by = color_by
        self.scale_option = scale
        self.tube_limit = int(tube_limit)
        self.view = view
        self.window_size = (int(window_size[0]), int(window_size[1]))
        lengths = model.lengths
        self.median_length = float(np.median(lengths)) if lengths.size else 1.0
        # Thin enough that a dense grid stays readable, thick enough to see
        # its colour in a small picture.
        self.radius = min(0.006 * model.size, 0.06 * self.median_length)
        self.group_index, self.group_names = member_group_index(model)
        if off_screen:
            _quiet_vtk_warnings()
        # Typed Any: PyVista's decorated Plotter methods confuse mypy's signatures.
        plotter: Any = pv.Plotter(off_screen=off_screen, window_size=list(self.window_size))
        plotter.set_background("white")
        self.plotter = plotter
        self._slider: Any = None
        self._fit_each_case = True
        self.case = ""
        self.scale = 0.0
        self.clim = (0.0, 1.0)
        self.legend_size = (0.0, 0.0)
        cells = np.empty((model.n_members, 3), dtype=np.int64)
        cells[:, 0] = 2
        cells[:, 1:] = model.members
        self._cells = cells.ravel()
        self._lines: Any = None  # the member lines at the drawn positions
        self._sources: dict[str, Any] = {}  # actor name -> the mesh it draws
        self._build_members()
        self.set_case(first)
        self.set_view(view)
        if interactive if interactive is not None else not off_screen:
            self._enable_interaction()

    # ---------------------------------------------------------------- drawing
    @property
    def large(self) -> bool:
        """True when the members are drawn as plain lines (beyond ``tube_limit``)."""
        return self.results.model.n_members > self.tube_limit

    def deformed_nodes(self) -> np.ndarray:
        """(n, 3) float: node positions as drawn, m (undeformed + scale * u)."""
        res = self.results[self.case]
        return self.results.model.nodes + self.scale * res.displacements

    def _member_scalars(self, name: str) -> tuple[np.ndarray, tuple[float, float]]:
        res = self.results[name]
        if self.color_by in ("axial_force", "stress"):
            values = res.axial_forces / 1e3 if self.color_by == "axial_force" else res.stress / 1e6
            top = float(np.abs(values).max(initial=0.0)) or 1.0
            # Symmetric about zero: the neutral middle colour means no force in every case.
            return values, (-top, top)
        if self.color_by == "displacement":
            mag = np.linalg.norm(res.displacements, axis=1) * 1e3
            return mag, (0.0, float(mag.max(initial=0.0)) or 1.0)
        if self.color_by == "utilisation":
            if name not in self.utilisation:
                raise ModelError(f"viewer: no utilisation for result {name!r} (checked: "
                                 f"{', '.join(self.utilisation)})")
            util = np.asarray(self.utilisation[name], dtype=float)
            # Fixed 0..1: one colour means one utilisation in every picture.
            return util, (0.0, 1.0)
        n = max(len(self.group_names), 1)
        # One colour band centred on each integer group id.
        return self.group_index.astype(float), (-0.5, n - 0.5)

    def _shown_members(self) -> Any:
        """The dataset drawn for the members: tubes round the lines, or the lines."""
        if self.large:
            return self._lines
        return self._lines.tube(radius=self.radius, n_sides=10)

    def _build_members(self) -> None:
        """Add the member actor, its colour bar or group legend, once."""
        import pyvista as pv

        model = self.results.model
        lines = pv.PolyData(model.nodes.astype(float), lines=self._cells)
        values, clim = self._member_scalars(self._first)
        where = "point" if self.color_by == "displacement" else "cell"
        (lines.point_data if where == "point" else lines.cell_data)["value"] = values
        self._lines = lines
        title, cmap = COLOR_BY[self.color_by]
        mesh_kw: dict[str, Any] = {
            "scalars": "value",
            "preference": where,
            "cmap": cmap,
            "clim": clim,
            "scalar_bar_args": {
                "title": title,
                "color": "black",
                "vertical": False,
                "position_x": _BAR[0],
                "position_y": _BAR[1],
                "width": _BAR[2],
                "height": _BAR[3],
                "title_font_size": 14,
                "label_font_size": 12,
                "fmt": "%.3g",
                # Ends and middle only on a small picture: long labels run together.
                "n_labels": 5 if self.window_size[0] >= 900 else 3,
            },
            "name": "members",
            "render": False,
        }
        if self.color_by == "group":
            n = max(len(self.group_names), 1)
            colors = [_GROUP_COLORS[k % len(_GROUP_COLORS)] for k in range(n)]
            mesh_kw.update(cmap=colors, n_colors=n, below_color=_NO_GROUP_COLOR,
                           show_scalar_bar=False)
            # Names in a legend box: a scalar bar has no room for long group names.
            del mesh_kw["scalar_bar_args"]
            legend = [[g, colors[k]] for k, g in enumerate(self.group_names)]
            if np.any(self.group_index < 0):
                legend.append(["(no group)", _NO_GROUP_COLOR])
            if legend:
                self.legend_size = _legend_size([g for g, _ in legend], self.window_size)
                w, h = self.legend_size
                box = self.plotter.add_legend(legend, bcolor="white", face="rectangle",
                                              loc=None, size=self.legend_size)
                # Placed here: PyVista's "upper right" offsets the box by its
                # height, not its width, pushing a wide box past the window edge.
                box.SetPosition(1.0 - w - 0.01, 1.0 - h - 0.06)
                box.SetPosition2(w, h)
        if self.color_by == "utilisation":
            from matplotlib.colors import LinearSegmentedColormap

            mesh_kw.update(
                cmap=LinearSegmentedColormap.from_list("utilisation", UTILISATION_STOPS),
                n_colors=UTILISATION_BANDS, above_color=UTILISATION_OVER,
                nan_color=_NOT_CHECKED_COLOR)
            mesh_kw["scalar_bar_args"].update(above_label="> 1 fails", fmt="%.1f",
                                              n_labels=6 if self.window_size[0] >= 900 else 3)
        if self.large:
            # Plain lines: tube geometry or tube shading of 10^5 lines costs
            # seconds per picture in software rendering, for no gain at that density.
            mesh_kw["line_width"] = 2
        # The mesh given to add_mesh is the source of the actor's pipeline:
        # updates go into it (PyVista's mapper input is a filter's output).
        self._shown = self._shown_members()
        self._members_actor = self.plotter.add_mesh(self._shown, **mesh_kw)

    def _put(self, key: str, mesh: Any, **kw: Any) -> None:
        """Show ``mesh`` as actor ``key``: a new actor once, then its data replaced in place."""
        actor = self.plotter.actors.get(key)
        if actor is None or key not in self._sources:
            self._sources[key] = mesh
            self.plotter.add_mesh(mesh, name=key, pickable=False, render=False, **kw)
        else:
            self._sources[key].shallow_copy(mesh)
            self._sources[key].Modified()
            actor.SetVisibility(True)

    def _hide(self, key: str) -> None:
        actor = self.plotter.actors.get(key)
        if actor is not None:
            actor.SetVisibility(False)

    def set_case(self, name: str) -> None:
        """Show the result ``name``: colours, positions, colour range, supports, loads, title.

        Nothing is rendered here; the next picture or window redraw shows it.
        """
        res = self.results[name]
        model = self.results.model
        self.case = name
        self.scale = _resolve_scale(self.scale_option, model, res.displacements)
        if not np.any(res.displacements):
            self.scale = 0.0  # nothing moves (an envelope, a load-free case): no shape to scale
        values, clim = self._member_scalars(name)
        lines = self._lines
        lines.points = self.deformed_nodes()
        where = "point" if self.color_by == "displacement" else "cell"
        (lines.point_data if where == "point" else lines.cell_data)["value"] = values
        actor = self._members_actor
        if not self.large:
            self._shown.shallow_copy(self._shown_members())
        self._shown.Modified()
        # The range is set on the mapper and its lookup table directly: PyVista
        # widens a colour bar it already has to the union of every range added
        # under the same title, which carried one result's scale into the next.
        actor.mapper.scalar_range = clim
        actor.mapper.lookup_table.scalar_range = clim
        self.clim = clim

        if self.scale > 0 and np.any(res.displacements):
            # Translucency needs depth sorting; for large models an opaque pale
            # grey reads the same and renders far faster.
            if "undeformed" not in self.plotter.actors:
                undeformed = _lines_mesh(model.nodes.astype(float), self._cells)
                self._put("undeformed", undeformed,
                          color="gainsboro" if self.large else _UNDEFORMED_COLOR,
                          opacity=1.0 if self.large else 0.35, line_width=1)
            else:
                self.plotter.actors["undeformed"].SetVisibility(True)
        else:
            self._hide("undeformed")
        self._draw_supports()
        self._draw_loads()
        kind = {"combination": "combination", "envelope": "envelope"}.get(res.kind, "load case")
        shape = f"deformed x{format_number(self.scale, 3)}" if self.scale > 0 else "undeformed"
        if res.kind == "envelope":
            shape = "governing force of " + ", ".join(res.factors)
        if self.color_by == "utilisation":
            shape = "design utilisation, " + shape
        self.plotter.add_text(f"{name} ({kind}), {shape}", position="upper_left",
                              font_size=_TITLE_FONT, color="black", name="title", render=False)
        if self._slider is not None:
            self._slider.GetRepresentation().SetValue(self.names.index(name))
        if self.view and self._fit_each_case:
            # Off-screen, every picture is fitted to its own drawn shape.
            self.set_view(self.view)

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
            count = int(np.count_nonzero(mask))
            if count > MAX_CONES:
                # Thousands of cones cost seconds per picture in software
                # rendering and merge into a carpet: square points instead.
                self._put(key, pv.PolyData(pts[mask]), color=color, style="points",
                          point_size=6, render_points_as_spheres=False)
            elif count:
                glyphs = pv.PolyData(pts[mask]).glyph(geom=cone, orient=False, scale=False)
                self._put(key, glyphs, color=color)
            else:
                self._hide(key)
        self._support_height = h

    def arrow_length(self) -> float:
        """Drawn length of the largest load arrow, m.

        A tenth of the model size, but never more than twice the median
        member length, so that the arrows of a dense grid do not hide it.
        """
        size = self.results.model.size
        return min(0.1 * size, 2.0 * self.median_length) if size > 0 else 0.0

    def _draw_loads(self) -> None:
        import pyvista as pv

        forces = self.results[self.case].loads
        mag = np.linalg.norm(forces, axis=1)
        loaded = mag > 0
        self._arrow_starts = np.empty((0, 3))
        if not loaded.any():
            self._hide("loads")
            return
        factor = self.arrow_length() / float(mag.max())
        idx = np.flatnonzero(loaded)
        if idx.size > MAX_ARROWS:
            # Every k-th loaded node: thousands of arrows are unreadable and slow.
            idx = idx[:: -(-idx.size // MAX_ARROWS)]
        vec = forces[idx]
        # Arrows end at the node they load: start one arrow length before it.
        starts = self.deformed_nodes()[idx] - factor * vec
        self._arrow_starts = starts
        cloud = pv.PolyData(starts)
        cloud.point_data["force"] = vec
        arrows = cloud.glyph(orient="force", scale="force", factor=factor,
                             geom=pv.Arrow(tip_length=0.3, tip_radius=0.12, shaft_radius=0.04,
                                           tip_resolution=10, shaft_resolution=6))
        self._put("loads", arrows, color=_LOAD_COLOR)

    def _drawn_points(self) -> np.ndarray:
        """(k, 3) float: points the picture must hold (nodes, cone bases, arrow tails)."""
        model = self.results.model
        x = self.deformed_nodes()
        held = model.restraint.any(axis=1) | (model.springs > 0).any(axis=1)
        feet = x[held] - np.array([0.0, 0.0, getattr(self, "_support_height", 0.0)])
        return np.concatenate([x, feet, getattr(self, "_arrow_starts", np.empty((0, 3)))])

    def free_area(self) -> tuple[float, float, float, float]:
        """(x0, y0, x1, y1): the part of the window the frame is fitted into (0..1).

        Below the title and above the colour bar, and left of the group legend.
        """
        h = self.window_size[1]
        top = 1.0 - max(0.05, 2.6 * _TITLE_FONT / h)
        if self.color_by == "group":
            right = 1.0 - self.legend_size[0] - 0.03
            bottom = 0.03
        else:
            right = 0.97
            bottom = _BAR[1] + _BAR[3] + 0.03
        return 0.03, bottom, right, top

    def set_view(self, view: str) -> None:
        """Point the camera: "iso", "top", "front" or "side" (no render).

        Every view is a parallel projection (an elevation, plan or
        axonometric view, as drawn by hand), fitted to :meth:`free_area`.
        """
        _check_options(self.color_by, view)
        direction, up = VIEWS[view]
        d = np.asarray(direction, dtype=float)
        d /= np.linalg.norm(d)
        upv = np.asarray(up, dtype=float)
        upv = upv - (upv @ d) * d
        upv /= np.linalg.norm(upv)
        right = np.cross(-d, upv)  # screen x for a camera looking along -d
        pts = self._drawn_points()
        lo, hi = pts.min(axis=0), pts.max(axis=0)
        centre = (lo + hi) / 2
        u, v = (pts - centre) @ right, (pts - centre) @ upv
        x0, y0, x1, y1 = self.free_area()
        aspect = self.window_size[0] / self.window_size[1]
        span_u = max(float(np.ptp(u)), 1e-12)
        span_v = max(float(np.ptp(v)), 1e-12)
        # Parallel scale is half the visible height in model units; 4 % margin.
        ps = 1.04 * max(span_u / (2.0 * aspect * (x1 - x0)), span_v / (2.0 * (y1 - y0)))
        uc, vc = (u.max() + u.min()) / 2, (v.max() + v.min()) / 2
        gx, gy = (x0 + x1) / 2, (y0 + y1) / 2
        uf = uc - (gx - 0.5) * 2.0 * ps * aspect
        vf = vc - (gy - 0.5) * 2.0 * ps
        focal = centre + uf * right + vf * upv
        dist = 2.0 * max(float(np.linalg.norm(hi - lo)), 1e-9)
        cam = self.plotter.camera
        cam.SetParallelProjection(True)
        cam.SetFocalPoint(*focal)
        cam.SetPosition(*(focal + d * dist))
        cam.SetViewUp(*upv)
        cam.SetParallelScale(ps)
        self.plotter.renderer.ResetCameraClippingRange()
        self.plotter.renderer.camera_set = True
        self.view = view

    def to_display(self, points: np.ndarray) -> np.ndarray:
        """(k, 2) float: window fractions (0..1, origin lower left) of model points."""
        cam = self.plotter.camera
        m = cam.GetCompositeProjectionTransformMatrix(
            self.window_size[0] / self.window_size[1], -1.0, 1.0)
        mat = np.array([[m.GetElement(i, j) for j in range(4)] for i in range(4)])
        hom = np.c_[np.asarray(points, dtype=float), np.ones(len(points))] @ mat.T
        ndc = hom[:, :2] / hom[:, 3:4]
        return (ndc + 1.0) / 2.0

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
            *([f"utilisation = {format_number(float(self.utilisation[self.case][k]))}"]
              if self.case in self.utilisation else []),
        ])

    def _on_pick(self, point: Any, *args: Any) -> None:
        if point is None:
            return
        self.plotter.add_text(self.pick(point), position="lower_left", font_size=10,
                              color="black", name="pick")

    def _enable_interaction(self) -> None:
        p = self.plotter
        # In a window the user's camera stays put when stepping through results.
        self._fit_each_case = False
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
            # One render per picture: the scene's updates never render, and the
            # first screenshot of a plotter renders by itself.
            if getattr(self.plotter, "_rendered", False):
                self.plotter.render()
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
    utilisation: Mapping[str, Any] | None = None,
) -> FrameScene:
    """A :class:`FrameScene` (plotter plus case switching and picking); see there."""
    return FrameScene(results, case, color_by=color_by, scale=scale, off_screen=off_screen,
                      window_size=window_size, view=view, utilisation=utilisation)


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
    color_by : {"axial_force", "stress", "displacement", "group", "utilisation"}
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
    utilisation: Mapping[str, Any] | None = None,
) -> Path:
    """Render one result off-screen to a PNG file (no display needed).

    Returns
    -------
    Path
        The PNG written.
    """
    scene = build_scene(results, case, color_by=color_by, scale=scale, off_screen=True,
                        window_size=size, view=view, utilisation=utilisation)
    try:
        return scene.save(path)
    finally:
        scene.close()


def with_envelopes(results: Results, envelopes: Mapping[str, Envelope]) -> Results:
    """``results`` plus one drawable entry per envelope (kind "envelope").

    An envelope's entry carries, per member, the governing force of the
    results it spans (the larger in magnitude of its maximum and minimum),
    no displacements and no loads; ``factors`` lists the results spanned.
    """
    from spaceframe.results import CaseResult, Results

    model = results.model
    items = {name: results[name] for name in results}
    zeros = np.zeros((model.n_nodes, 3))
    for name, env in envelopes.items():
        if name in items:
            raise ModelError(f"envelope {name!r}: a load case or combination has that name")
        governing = np.where(np.abs(env.axial_max) >= np.abs(env.axial_min),
                             env.axial_max, env.axial_min)
        items[name] = CaseResult(
            name=name, kind="envelope", displacements=zeros, axial_forces=governing,
            reactions=zeros, loads=zeros, elongations=np.zeros(model.n_members),
            residual=0.0, area=model.area, factors={m: 1.0 for m in env.members},
        )
    return Results(model, items, results.solver, results.timings, results.info)


#: What :func:`select_cases` accepts besides a list of names.
PICTURE_CHOICES = ("combinations", "all", "none")


def select_cases(results: Results, which: str | Sequence[str] = "combinations") -> list[str]:
    """The results that get pictures.

    Parameters
    ----------
    results : Results
        Possibly with envelopes (:func:`with_envelopes`).
    which : str or sequence of str
        "combinations" (the default): combinations and envelopes, or every
        load case when there are neither; "all"; "none"; or result names
        (a sequence, or one string of names separated by commas).

    Raises
    ------
    ModelError
        Naming the first unknown result.
    """
    kinds = {name: results[name].kind for name in results}
    if isinstance(which, str) and which in PICTURE_CHOICES:
        if which == "none":
            return []
        if which == "all":
            return list(kinds)
        chosen = [n for n, k in kinds.items() if k in ("combination", "envelope")]
        return chosen or [n for n, k in kinds.items() if k == "case"]
    names = [t.strip() for t in which.split(",")] if isinstance(which, str) else list(which)
    names = [n for n in names if n]
    for n in names:
        if n not in kinds:
            raise ModelError(
                f"pictures: no result named {n!r} (have: {', '.join(kinds)}; or one of "
                f"{', '.join(PICTURE_CHOICES)})"
            )
    return names


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
    progress: Callable[[str], None] | None = None,
    utilisation: Mapping[str, Any] | None = None,
) -> list[Path]:
    """One PNG per result and view, ``<prefix><case>_<view>.png``, from one off-screen scene.

    The scene is built once; each result updates it in place and each
    picture is one render.  ``progress`` is called before each picture
    with "pictures k/n".

    Returns
    -------
    list of Path
        In the order of the results, then of ``views``.
    """
    import re

    out_dir = Path(folder)
    names = list(results) if cases is None else list(cases)
    for v in views:
        _check_options(color_by, v)
    unknown = [name for name in names if name not in results]
    if unknown:
        raise KeyError(f"no result named {unknown[0]!r} (have: {', '.join(results)})")
    if not names or not views:
        return []
    out_dir.mkdir(parents=True, exist_ok=True)
    scene = build_scene(results, names[0], color_by=color_by, scale=scale, off_screen=True,
                        window_size=size, view=views[0], utilisation=utilisation)
    paths: list[Path] = []
    used: set[str] = set()
    total = len(names) * len(views)
    try:
        for name in names:
            if name != scene.case:
                scene.set_case(name)
            safe = re.sub(r"[^A-Za-z0-9_.+-]+", "_", name).strip("._") or "result"
            stem, k = f"{prefix}{safe}", 2
            while stem.lower() in used:
                stem, k = f"{prefix}{safe}_{k}", k + 1
            used.add(stem.lower())
            for v in views:
                if progress is not None:
                    progress(f"pictures {len(paths) + 1}/{total}")
                scene.set_view(v)
                paths.append(scene.save(out_dir / f"{stem}_{v}.png"))
    finally:
        scene.close()
    return paths
