"""Section, material and design properties of members: the table and the setter."""

from __future__ import annotations

from typing import Any

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.model.arrays import ModelArrays

__all__ = ["MEMBER_DESIGN_DEFAULTS", "MemberProperties"]

#: Design properties per member: name -> (default, dtype).  NaN means "not given".
MEMBER_DESIGN_DEFAULTS: dict[str, tuple[Any, Any]] = {
    "second_moment": (np.nan, float),
    "yield_strength": (np.nan, float),
    "ultimate_strength": (np.nan, float),
    "buckling_curve": ("", object),
    "buckling_length_factor": (1.0, float),
    "net_area_factor": (1.0, float),
    "slenderness_limit": (np.nan, float),
    "tension_only": (False, bool),
    "breaking_force": (np.nan, float),
    "pretension": (0.0, float),
}


class MemberProperties(ModelArrays):
    """:meth:`set_member_properties` of the Model, and self-weight that follows it."""

    def set_member_properties(
        self,
        member_ids: Any,
        *,
        area: Any = None,
        E: Any = None,
        density: Any = None,
        alpha: Any = None,
        second_moment: Any = None,
        yield_strength: Any = None,
        ultimate_strength: Any = None,
        buckling_curve: Any = None,
        buckling_length_factor: Any = None,
        net_area_factor: Any = None,
        slenderness_limit: Any = None,
        tension_only: Any = None,
        breaking_force: Any = None,
        pretension: Any = None,
    ) -> None:
        """Overwrite section, material and design properties of existing members (SI).

        Parameters
        ----------
        member_ids : int or (k,) int
        area, E, density, alpha : float or (k,) float
            m², Pa, kg/m³, 1/K.  Self-weight added with :meth:`add_self_weight`
            follows a change of area or density.
        second_moment : float or (k,) float
            Smallest second moment of area, m⁴ (flexural buckling).
        yield_strength, ultimate_strength : float or (k,) float
            f_y and f_u, Pa.
        buckling_curve : str or (k,) str
            "a0", "a", "b", "c" or "d" (EN 1993-1-1 Table 6.2).
        buckling_length_factor : float or (k,) float
            L_cr / L (1.0 for pin-ended members).
        net_area_factor : float or (k,) float
            A_net / A at holes, for EN 1993-1-1 (6.7); 1.0 for none.
        slenderness_limit : float or (k,) float
            Limit on L_cr / i in compression (NaN for the default).
        tension_only : bool or (k,) bool
            Cables and slender braces that carry no compression.
        breaking_force : float or (k,) float
            Minimum breaking force of a cable or rod, N.
        pretension : float or (k,) float
            Tension in the drawn (straight) geometry, N.

        Raises
        ------
        ModelError
            Naming the keyword and the first bad value; nothing changes then.
        """
        ids = self._member_ids(member_ids, "set_member_properties")
        k = ids.size
        new: dict[str, np.ndarray] = {}
        for name, value, positive in (
            ("area", area, True), ("E", E, True), ("density", density, False),
            ("alpha", alpha, False), ("second_moment", second_moment, False),
            ("yield_strength", yield_strength, True),
            ("ultimate_strength", ultimate_strength, True),
            ("buckling_length_factor", buckling_length_factor, True),
            ("net_area_factor", net_area_factor, True),
            ("slenderness_limit", slenderness_limit, True),
            ("breaking_force", breaking_force, True), ("pretension", pretension, False),
        ):
            if value is not None:
                new[name] = self._per_item(value, k, f"set_member_properties: {name}",
                                           positive=positive)
        for name in ("density", "second_moment"):
            if name in new and np.any(new[name] < 0):
                j = int(np.flatnonzero(new[name] < 0)[0])
                raise ModelError(
                    f"set_member_properties: {name}[{j}] = {float(new[name][j])}: "
                    "must not be negative"
                )
        if "net_area_factor" in new and np.any(new["net_area_factor"] > 1):
            j = int(np.flatnonzero(new["net_area_factor"] > 1)[0])
            raise ModelError(
                f"set_member_properties: net_area_factor[{j}] = "
                f"{float(new['net_area_factor'][j])}: must not exceed 1"
            )
        if buckling_curve is not None:
            curves = np.asarray(buckling_curve, dtype=object)
            curves = np.full(k, curves.item(), dtype=object) if curves.ndim == 0 else curves
            if curves.shape != (k,):
                raise ModelError(
                    f"set_member_properties: buckling_curve: expected one or {k} curves, "
                    f"got shape {curves.shape}"
                )
            bad = [c for c in curves.tolist() if c not in ("a0", "a", "b", "c", "d")]
            if bad:
                raise ModelError(
                    f"set_member_properties: buckling_curve {bad[0]!r} must be one of "
                    "a0, a, b, c, d"
                )
            new["buckling_curve"] = curves
        if tension_only is not None:
            flags = np.asarray(tension_only)
            if flags.dtype != bool:
                raise ModelError("set_member_properties: tension_only must be True or False")
            new["tension_only"] = np.broadcast_to(flags, (k,)).copy()
        old_mass = self.mass.copy() if ("area" in new or "density" in new) else None
        for name, arr in new.items():
            getattr(self, name)[ids] = arr
        if old_mass is not None:
            self._follow_self_weight(old_mass)
        self._invalidate()

    def _follow_self_weight(self, old_mass: np.ndarray) -> None:
        """Move recorded self-weight loads by the change of member mass."""
        delta = self.mass - old_mass
        for case, g, factor, ids in self.self_weight_records:
            w = 0.5 * factor * g * delta[ids]
            fz = np.bincount(self.members[ids, 0], w, self.n_nodes) + np.bincount(
                self.members[ids, 1], w, self.n_nodes
            )
            self.cases[case].forces[:, 2] -= fz
