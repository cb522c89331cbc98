"""The scene: PyVista meshes, colours, camera and one picture of a set of results.

:class:`FrameScene` builds the plotter once and updates it in place for each
result; the keys, slider and picking of a window are in
:mod:`spaceframe.viewer.interactive`, the picture files in
:mod:`spaceframe.viewer.pictures`.
"""

from __future__ import annotations

import io
import os
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.files import atomic_write
from spaceframe.results.summary import auto_scale, format_number, member_group_index
from spaceframe.viewer.interactive import Interaction

if TYPE_CHECKING:
    import pyvista

    from spaceframe.results import Results

#: Writes a file safely: ``write(path, save)`` calls ``save(temporary_path)`` and puts
#: the result at ``path`` (the signature of ``spaceframe.files.atomic_write``).
Writer = Callable[[Path, Callable[[Path], None]], Path]

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


def symmetric_range(values: np.ndarray) -> tuple[float, float]:
    """A colour range symmetric about zero: the neutral middle colour means no force."""
    top = float(np.abs(values).max(initial=0.0)) or 1.0
    return -top, top


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


def _quiet_vtk_warnings() -> None:
    """Keep VTK's "bad X server connection" warning off stderr when rendering off-screen.

    Without a display VTK warns that it cannot reach an X server and then
    renders off-screen anyway; the warning would read as a failure to a user
    of the command line.  Errors are still shown.
    """
    from vtkmodules.vtkCommonCore import vtkLogger

    vtkLogger.SetStderrVerbosity(vtkLogger.VERBOSITY_ERROR)


class FrameScene(Interaction):
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
        self.utilisation = utilisation if utilisation is not None else {}  # read when shown
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

    def _bar_title(self) -> tuple[str, str]:
        """Colour-bar title and colour map of ``color_by``."""
        return COLOR_BY[self.color_by]

    def _member_scalars(self, name: str) -> tuple[np.ndarray, tuple[float, float]]:
        res = self.results[name]
        if self.color_by in ("axial_force", "stress"):
            values = res.axial_forces / 1e3 if self.color_by == "axial_force" else res.stress / 1e6
            return values, symmetric_range(values)
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
        title, cmap = self._bar_title()
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
        kind = {"combination": "combination", "envelope": "envelope", "mode": "mode shape",
                "self-stress": "no load", "step": "load path"}.get(res.kind, "load case")
        shape = f"deformed x{format_number(self.scale, 3)}" if self.scale > 0 else "undeformed"
        if res.kind == "mode":
            shape = f"amplitude {format_number(self.scale, 3)} m"
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

    # -------------------------------------------------------------- pictures
    def png(self) -> bytes:
        """The picture on show, rendered once, as PNG bytes."""
        buffer = io.BytesIO()
        # One render per picture: the scene's updates never render, and the
        # first screenshot of a plotter renders by itself.
        if getattr(self.plotter, "_rendered", False):
            self.plotter.render()
        self.plotter.screenshot(buffer)
        return buffer.getvalue()

    def save(self, path: str | os.PathLike[str], write: Writer | None = None) -> Path:
        """Render to a PNG file.

        ``write`` puts the file in place; by default
        :func:`spaceframe.files.atomic_write` (a temporary file, then a rename:
        the picture appears whole or not at all).
        """
        data = self.png()

        def save(tmp: Path) -> None:
            tmp.write_bytes(data)

        return (write or atomic_write)(Path(path), save)

    def close(self) -> None:
        """Release the render window."""
        self.plotter.close()


def build_scene(results: Results, case: str | None = None, **options: Any) -> FrameScene:
    """A :class:`FrameScene` (plotter plus case switching and picking); options as there."""
    return FrameScene(results, case, **options)


def build_plotter(results: Results, case: str | None = None, **options: Any) -> pyvista.Plotter:
    """A PyVista plotter showing ``case`` of ``results``.

    Parameters
    ----------
    results : Results
    case : str, optional
        Load case or combination shown first (default the first).
    **options
        As :class:`FrameScene`: ``color_by``, ``scale`` ("auto" draws the
        largest displacement at 5 % of the model size), ``off_screen``,
        ``window_size``, ``view``, ...

    Returns
    -------
    pyvista.Plotter
        Ready to ``show()`` or ``screenshot()``; when on-screen, with keys,
        slider and picking wired to the scene.
    """
    return build_scene(results, case, **options).plotter


def show(results: Results, case: str | None = None, **options: Any) -> None:
    """Open an interactive window on the results (options as :func:`build_plotter`)."""
    scene = build_scene(results, case, **options)
    scene.plotter.show(title=f"spaceframe: {scene.case}")


