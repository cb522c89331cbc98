"""The Model: a pin-jointed space frame held as plain numpy arrays.

Nothing here knows about files or solvers.  Readers, the model file and
Python scripts all end in the same arrays:

- ``nodes`` : (n, 3) float64, metres
- ``members`` : (b, 2) int64 node ids
- per-member ``area`` (m²), ``E`` (Pa), ``density`` (kg/m³), ``alpha`` (1/K)
- ``restraint`` : (n, 3) bool, ``springs`` : (n, 3) float (N/m)
- ``groups`` : name -> member ids, ``node_sets`` : name -> node ids
- ``cases`` : name -> :class:`LoadCase`, ``combinations`` : name -> {case: factor}
- ``panels`` (load surfaces, polygons of node ids) and ``markers`` (positions
  with a layer name, e.g. from DXF POINT entities).

The arrays and derived geometry are in ``arrays.py``; member properties,
panels, supports, load cases and the whole-model check each in their own
module, joined here in :class:`Model`.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.model.arrays import _AXES, LoadCase, _frozen, _real_array
from spaceframe.model.cases import STANDARD_GRAVITY, LoadCases
from spaceframe.model.panels import Panels
from spaceframe.model.properties import MEMBER_DESIGN_DEFAULTS, MemberProperties
from spaceframe.model.supports import Supports
from spaceframe.model.validate import Validation

if TYPE_CHECKING:
    from spaceframe.results import Results

__all__ = ["STANDARD_GRAVITY", "LoadCase", "Model"]

#: Analyses that :meth:`Model.solve` dispatches to, by name: "default" is
#: filled by the package root (``spaceframe/__init__.py``) with
#: :func:`spaceframe.solve`.  The Model imports no analysis itself.
ANALYSES: dict[str, Callable[..., Results]] = {}


class Model(MemberProperties, Panels, Supports, LoadCases, Validation):
    """A three-dimensional pin-jointed frame.

    Build it with :meth:`add_nodes`, :meth:`add_members`, supports and loads,
    then call :meth:`solve`.  Every ``add_*`` method validates its input and
    raises :class:`~spaceframe.errors.ModelError` naming the offending index
    and value; nothing is changed when it raises.

    Examples
    --------
    >>> import spaceframe as sf
    >>> m = sf.Model()
    >>> ids = m.add_nodes([[0, 0, 0], [1, 0, 1], [2, 0, 0]])
    >>> m.add_members([[0, 1], [1, 2]], area=1e-4, E=210e9)
    array([0, 1])
    """

    # ------------------------------------------------------------------ nodes
    def add_nodes(self, xyz: Any) -> np.ndarray:
        """Add nodes.

        Parameters
        ----------
        xyz : (k, 3) float
            Coordinates in metres.

        Returns
        -------
        ids : (k,) int
            The new node ids (0-based, consecutive).

        Raises
        ------
        ModelError
            If the array is not (k, 3) or holds NaN or infinity.
        """
        pts = _real_array(xyz, "add_nodes: xyz")
        if pts.ndim == 1 and pts.shape == (3,):
            pts = pts[None, :]
        if pts.ndim != 2 or pts.shape[1] != 3:
            raise ModelError(f"add_nodes: expected (k, 3) coordinates, got shape {pts.shape}")
        bad = np.argwhere(~np.isfinite(pts))
        if bad.size:
            i, j = (int(v) for v in bad[0])
            raise ModelError(
                f"add_nodes: coordinate {_AXES[j]} of new node {i} (node id {self.n_nodes + i}) "
                f"is {float(pts[i, j])}"
            )
        start = self.n_nodes
        self._nodes = _frozen(np.concatenate([self.nodes, pts]))
        k = pts.shape[0]
        self.restraint = np.concatenate([self.restraint, np.zeros((k, 3), dtype=bool)])
        self.springs = np.concatenate([self.springs, np.zeros((k, 3))])
        self._invalidate()
        return np.arange(start, start + k, dtype=np.int64)

    # ---------------------------------------------------------------- members
    def add_members(
        self,
        pairs: Any,
        area: Any = None,
        E: Any = None,
        density: Any = 0.0,
        alpha: Any = 0.0,
        group: str | None = None,
    ) -> np.ndarray:
        """Add members between existing nodes.

        Parameters
        ----------
        pairs : (k, 2) int
            End node ids.  The member's direction runs from the first to the second.
        area : float or (k,) float, optional
            Cross-section area, m².  ``None`` leaves it unassigned (NaN), to be
            set later with :meth:`set_member_properties`; solving a model with
            unassigned members raises ModelError.
        E : float or (k,) float, optional
            Young's modulus, Pa; ``None`` as for ``area``.
        density : float or (k,) float
            Mass density, kg/m³ (for self-weight).
        alpha : float or (k,) float
            Coefficient of thermal expansion, 1/K.
        group : str, optional
            Name of a member group to add the new members to.

        Returns
        -------
        ids : (k,) int
            The new member ids.

        Raises
        ------
        ModelError
            On a missing node, a member from a node to itself, a zero-length
            member, a duplicate (same node pair, either way round, also against
            existing members), non-positive area or E, or a shape mismatch.
        """
        try:
            p = np.asarray(pairs)
        except (ValueError, TypeError) as exc:
            raise ModelError(f"add_members: pairs must be (k, 2) node ids ({exc})") from None
        if p.dtype.kind not in "iuf" and p.size:
            raise ModelError(f"add_members: node ids must be integers, got {p.dtype} values")
        if p.ndim == 1 and p.shape == (2,):
            p = p[None, :]
        if p.ndim != 2 or p.shape[1] != 2:
            raise ModelError(f"add_members: expected (k, 2) node ids, got shape {p.shape}")
        if p.size and not np.issubdtype(p.dtype, np.integer):
            if not np.all(np.isfinite(p)) or np.any(p != np.round(p)):
                raise ModelError("add_members: node ids must be integers")
        p = p.astype(np.int64)
        k = p.shape[0]
        start = self.n_members
        bad = np.argwhere((p < 0) | (p >= self.n_nodes))
        if bad.size:
            i, j = (int(v) for v in bad[0])
            raise ModelError(
                f"add_members: member {start + i} refers to node {int(p[i, j])}, which does not "
                f"exist (the model has nodes 0..{self.n_nodes - 1})"
            )
        same = np.flatnonzero(p[:, 0] == p[:, 1])
        if same.size:
            i = int(same[0])
            raise ModelError(
                f"add_members: member {start + i} runs from node {int(p[i, 0])} to itself"
            )
        d = self.nodes[p[:, 1]] - self.nodes[p[:, 0]]
        length = np.sqrt(np.einsum("ij,ij->i", d, d))
        zero = np.flatnonzero(length <= 0.0)
        if zero.size:
            i = int(zero[0])
            raise ModelError(
                f"add_members: member {start + i} between nodes {int(p[i, 0])} and "
                f"{int(p[i, 1])} has zero length (both at {self.nodes[p[i, 0]].tolist()})"
            )
        key_all = np.concatenate([_pair_keys(self.members), _pair_keys(p)])
        order = np.argsort(key_all, kind="stable")
        dup = np.flatnonzero(key_all[order][1:] == key_all[order][:-1])
        if dup.size:
            a, b = int(order[dup[0]]), int(order[dup[0] + 1])
            pair = p[b - start] if b >= start else self.members[b]
            raise ModelError(
                f"add_members: member {b} duplicates member {a} (both join nodes "
                f"{int(min(pair))} and {int(max(pair))})"
            )
        area_a = (
            np.full(k, np.nan)
            if area is None
            else self._per_item(area, k, "add_members: area", positive=True)
        )
        e_a = (
            np.full(k, np.nan)
            if E is None
            else self._per_item(E, k, "add_members: E", positive=True)
        )
        rho_a = self._per_item(density, k, "add_members: density")
        alpha_a = self._per_item(alpha, k, "add_members: alpha")
        if np.any(rho_a < 0):
            j = int(np.flatnonzero(rho_a < 0)[0])
            raise ModelError(f"add_members: density[{j}] = {float(rho_a[j])}: must not be negative")
        self._members = _frozen(np.concatenate([self.members, p]))
        self.area = np.concatenate([self.area, area_a])
        self.E = np.concatenate([self.E, e_a])
        self.density = np.concatenate([self.density, rho_a])
        self.alpha = np.concatenate([self.alpha, alpha_a])
        for name, (default, dtype) in MEMBER_DESIGN_DEFAULTS.items():
            setattr(self, name, np.concatenate([getattr(self, name), np.full(k, default, dtype)]))
        ids = np.arange(start, start + k, dtype=np.int64)
        if group is not None:
            self.add_group(group, ids)
        self._invalidate()
        return ids

    def add_group(self, name: str, member_ids: Any) -> np.ndarray:
        """Add members to the named group (created if new); returns the group's ids."""
        ids = self._member_ids(member_ids, f"group {name!r}")
        merged = np.union1d(self.groups.get(name, np.zeros(0, dtype=np.int64)), ids)
        self.groups[name] = merged.astype(np.int64)
        return self.groups[name]

    def add_node_set(self, name: str, node_ids: Any) -> np.ndarray:
        """Add nodes to the named node set (created if new); returns the set's ids."""
        ids = self._node_ids(node_ids, f"node set {name!r}")
        merged = np.union1d(self.node_sets.get(name, np.zeros(0, dtype=np.int64)), ids)
        self.node_sets[name] = merged.astype(np.int64)
        return self.node_sets[name]


    def solve(self, solver: str = "auto") -> Results:
        """Linear static analysis of every load case and combination.

        Parameters
        ----------
        solver : {"auto", "scipy", "pardiso"}
            Sparse direct solver back-end; "auto" prefers PARDISO when installed.

        Returns
        -------
        Results
            Mapping from case or combination name to its result.

        Raises
        ------
        MechanismError
            If the frame cannot carry load (named nodes and directions).
        ModelError
            On inconsistent input.
        """
        # Late-bound: the Model imports no analysis (the package root registers
        # the default one, see ANALYSES), so the import graph has no circle.
        try:
            analysis = ANALYSES["default"]
        except KeyError:
            raise ModelError(
                "no analysis registered: import spaceframe (the package root registers the "
                "static analysis) before calling Model.solve"
            ) from None
        return analysis(self, solver=solver)


def _pair_keys(pairs: np.ndarray) -> np.ndarray:
    """Order-free int64 keys of node pairs (node ids below 2**31)."""
    lo = np.minimum(pairs[:, 0], pairs[:, 1]).astype(np.int64)
    hi = np.maximum(pairs[:, 0], pairs[:, 1]).astype(np.int64)
    return (lo << 31) | hi
