"""The interactive window: keys and a slider step through the results, ``p`` picks.

A mixin of :class:`spaceframe.viewer.scene.FrameScene`: ``n`` / Right and
``b`` / Left step through the load cases and combinations, the slider does
the same, and ``p`` over a member or node shows its figures.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.results.summary import format_number

if TYPE_CHECKING:
    from spaceframe.results import Results


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


class Interaction:
    """Result stepping and picking of a :class:`~spaceframe.viewer.scene.FrameScene`."""

    results: Results
    plotter: Any
    names: list[str]
    case: str
    radius: float
    utilisation: Mapping[str, Any]
    _slider: Any
    _fit_each_case: bool

    if TYPE_CHECKING:
        def set_case(self, name: str) -> None:
            """Show the result ``name`` (the scene's)."""

        def deformed_nodes(self) -> np.ndarray:
            """(n, 3) float: node positions as drawn (the scene's)."""

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
