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
"""

from __future__ import annotations

import numbers
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import ModelError

if TYPE_CHECKING:
    from spaceframe.results import Results

__all__ = ["STANDARD_GRAVITY", "LoadCase", "Model"]

#: Standard acceleration of gravity, m/s² (CGPM 1901, the conventional value).
STANDARD_GRAVITY = 9.80665

_AXES = "xyz"


@dataclass
class LoadCase:
    """Loads of one case, as arrays sized to the model when the case is solved.

    Attributes
    ----------
    forces : (n, 3) float
        Applied nodal forces, N.
    temperature : (b,) float
        Member temperature change, K.
    initial_strain : (b,) float
        Imposed free strain (lack of fit; positive = member too long), -.
    settlement : (n, 3) float
        Prescribed displacement of restrained directions, m.
    settlement_mask : (n, 3) bool
        Where a settlement was given.
    """

    name: str
    forces: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))
    temperature: np.ndarray = field(default_factory=lambda: np.zeros(0))
    initial_strain: np.ndarray = field(default_factory=lambda: np.zeros(0))
    settlement: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))
    settlement_mask: np.ndarray = field(default_factory=lambda: np.zeros((0, 3), dtype=bool))

    def resize(self, n_nodes: int, n_members: int) -> None:
        """Grow the arrays (with zeros) to a model of ``n_nodes`` and ``n_members``."""
        self.forces = _grow(self.forces, n_nodes)
        self.settlement = _grow(self.settlement, n_nodes)
        self.settlement_mask = _grow(self.settlement_mask, n_nodes)
        self.temperature = _grow(self.temperature, n_members)
        self.initial_strain = _grow(self.initial_strain, n_members)

    @property
    def is_empty(self) -> bool:
        """True when the case applies nothing at all."""
        return not (
            np.any(self.forces)
            or np.any(self.temperature)
            or np.any(self.initial_strain)
            or np.any(self.settlement_mask)
        )


def _real_array(value: Any, name: str) -> np.ndarray:
    """``value`` as a float64 array, or ModelError naming ``name``.

    Refuses what numpy would turn into numbers silently or with a warning:
    strings (even "1.5"), complex numbers, booleans, None; and ragged nested
    lists, which numpy refuses with a message that names no argument.
    """
    try:
        arr = np.asarray(value)
    except (ValueError, TypeError) as exc:
        raise ModelError(f"{name}: not a rectangular array of numbers ({exc})") from None
    kind = arr.dtype.kind
    if kind == "O":
        flat = arr.ravel()
        # Object arrays only come from mixed Python lists (rare, small): look
        # at each entry to name the first that is not a real number.
        for i, v in enumerate(flat):
            if isinstance(v, bool | np.bool_) or not isinstance(v, numbers.Real):
                where = np.unravel_index(i, arr.shape) if arr.ndim else ()
                raise ModelError(
                    f"{name}: entry {tuple(int(j) for j in where)} is {v!r}, not a real number"
                )
        try:
            return arr.astype(float)
        except (ValueError, TypeError, OverflowError) as exc:
            raise ModelError(f"{name}: not an array of real numbers ({exc})") from None
    if kind not in "iuf":
        what = {"c": "complex", "U": "text", "S": "text", "b": "boolean"}.get(kind, arr.dtype.name)
        raise ModelError(f"{name}: expected real numbers, got {what} values ({arr.dtype})")
    return arr.astype(float)


def _frozen(a: np.ndarray) -> np.ndarray:
    """``a``, marked read-only (the model owns it)."""
    a.flags.writeable = False
    return a


def _grow(a: np.ndarray, n: int) -> np.ndarray:
    if a.shape[0] >= n:
        return a
    out = np.zeros((n, *a.shape[1:]), dtype=a.dtype)
    out[: a.shape[0]] = a
    return out


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


#: Analyses that :meth:`Model.solve` dispatches to, by name: "default" is
#: filled by the package root (``spaceframe/__init__.py``) with
#: :func:`spaceframe.solve`.  The Model imports no analysis itself.
ANALYSES: dict[str, Callable[..., Results]] = {}


class Model:
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

    def __init__(self) -> None:
        self._cache: dict[str, np.ndarray] = {}
        self._nodes = _frozen(np.zeros((0, 3)))
        self._members = _frozen(np.zeros((0, 2), dtype=np.int64))
        self.area = np.zeros(0)
        self.E = np.zeros(0)
        self.density = np.zeros(0)
        self.alpha = np.zeros(0)
        # Design properties per member (defaults in MEMBER_DESIGN_DEFAULTS; NaN: not given).
        self.second_moment = np.zeros(0)
        self.yield_strength = np.zeros(0)
        self.ultimate_strength = np.zeros(0)
        self.buckling_curve = np.zeros(0, dtype=object)
        self.buckling_length_factor = np.zeros(0)
        self.net_area_factor = np.zeros(0)
        self.slenderness_limit = np.zeros(0)
        self.tension_only = np.zeros(0, dtype=bool)
        self.breaking_force = np.zeros(0)
        self.pretension = np.zeros(0)
        #: Self-weight applied with add_self_weight: (case, g, factor, member ids),
        #: so that the loads follow later changes of area or density.
        self.self_weight_records: list[tuple[str, float, float, np.ndarray]] = []
        self.restraint = np.zeros((0, 3), dtype=bool)
        self.springs = np.zeros((0, 3))
        self.groups: dict[str, np.ndarray] = {}
        self.node_sets: dict[str, np.ndarray] = {}
        self.cases: dict[str, LoadCase] = {}
        self.combinations: dict[str, dict[str, float]] = {}
        #: Load panels: polygon k has node ids ``panel_nodes[panel_offsets[k]:panel_offsets[k+1]]``.
        self.panel_nodes = np.zeros(0, dtype=np.int64)
        self.panel_offsets = np.zeros(1, dtype=np.int64)
        self.panel_groups: dict[str, np.ndarray] = {}
        #: Marker points (e.g. DXF POINT entities): positions in metres and layer names.
        self.markers = np.zeros((0, 3))
        self.marker_layers = np.zeros(0, dtype=object)
        #: Free-form, namespaced extras ("dxf:layer", "heal:report", "source", ...).
        self.meta: dict[str, Any] = {}

    # ---------------------------------------------- geometry (cannot go stale)
    # Lengths and directions are cached from nodes and members.  Both arrays
    # are read-only, so ``m.nodes[0] += ...`` raises instead of leaving the
    # cache stale; assigning a new array goes through the setter, which
    # checks it and drops the cache.  (A fingerprint of the arrays, checked on
    # every access, was the alternative: hashing 1M nodes and members costs
    # tens of milliseconds per access, and lengths are read many times a solve.)
    @property
    def nodes(self) -> np.ndarray:
        """(n, 3) float, m (read-only: assign a new array to change it)."""
        return self._nodes

    @nodes.setter
    def nodes(self, value: Any) -> None:
        pts = _real_array(value, "nodes")
        if pts.ndim != 2 or pts.shape[1] != 3:
            raise ModelError(f"nodes must be an (n, 3) float array, got shape {pts.shape}")
        bad = np.argwhere(~np.isfinite(pts))
        if bad.size:
            i, j = (int(v) for v in bad[0])
            raise ModelError(f"node {i}: coordinate {_AXES[j]} is {float(pts[i, j])}")
        # _real_array always returns a new array (astype copies): the caller
        # keeps no handle on the model's geometry.
        self._nodes = _frozen(pts)
        self._invalidate()

    @property
    def members(self) -> np.ndarray:
        """(b, 2) int64 node ids (read-only: assign a new array to change it)."""
        return self._members

    @members.setter
    def members(self, value: Any) -> None:
        mem = np.asarray(value)
        if mem.ndim != 2 or mem.shape[1] != 2 or (mem.size and mem.dtype.kind not in "iu"):
            raise ModelError(
                f"members must be a (b, 2) integer array, got shape {mem.shape} of {mem.dtype}"
            )
        out = mem.astype(np.int64, copy=True)
        self._members = _frozen(out)
        self._invalidate()

    def __setstate__(self, state: dict[str, Any]) -> None:
        # copy.deepcopy and pickle (parameter studies) make writeable copies.
        self.__dict__.update(state)
        for name in ("_nodes", "_members"):
            arr = self.__dict__[name]
            if arr.flags.writeable:
                self.__dict__[name] = _frozen(arr)

    # ------------------------------------------------------------------ sizes
    @property
    def n_nodes(self) -> int:
        """Number of nodes."""
        return int(self.nodes.shape[0])

    @property
    def n_members(self) -> int:
        """Number of members."""
        return int(self.members.shape[0])

    @property
    def n_panels(self) -> int:
        """Number of load panels."""
        return int(self.panel_offsets.shape[0] - 1)

    def __repr__(self) -> str:
        return (
            f"Model({self.n_nodes} nodes, {self.n_members} members, "
            f"{int((self.restraint | (self.springs > 0)).any(axis=1).sum())} supported nodes, "
            f"{len(self.cases)} cases, {len(self.combinations)} combinations)"
        )

    # ------------------------------------------------------- derived geometry
    def _derived(self, key: str) -> np.ndarray:
        # Lengths and direction cosines are derived from nodes and members and
        # cached until either changes (every mutation goes through add_*).
        if key not in self._cache:
            d = self.nodes[self.members[:, 1]] - self.nodes[self.members[:, 0]]
            length = np.sqrt(np.einsum("ij,ij->i", d, d))
            with np.errstate(invalid="ignore", divide="ignore"):
                self._cache["directions"] = d / length[:, None]
            self._cache["lengths"] = length
        return self._cache[key]

    @property
    def lengths(self) -> np.ndarray:
        """(b,) float: member lengths, m."""
        return self._derived("lengths")

    @property
    def directions(self) -> np.ndarray:
        """(b, 3) float: unit vectors from each member's first node to its second."""
        return self._derived("directions")

    @property
    def axial_stiffness(self) -> np.ndarray:
        """(b,) float: EA/L, N/m."""
        return self.E * self.area / self.lengths

    @property
    def mass(self) -> np.ndarray:
        """(b,) float: member masses density*A*L, kg."""
        return self.density * self.area * self.lengths

    def extents(self) -> tuple[np.ndarray, np.ndarray]:
        """Lower and upper corners of the bounding box of the nodes, m."""
        if self.n_nodes == 0:
            return np.zeros(3), np.zeros(3)
        return self.nodes.min(axis=0), self.nodes.max(axis=0)

    @property
    def size(self) -> float:
        """Diagonal of the bounding box, m (1.0 for an empty or single-point model)."""
        lo, hi = self.extents()
        d = float(np.linalg.norm(hi - lo))
        return d if d > 0 else 1.0

    # ------------------------------------------------------------ validation
    def _node_ids(self, node_ids: Any, what: str) -> np.ndarray:
        try:
            ids = np.atleast_1d(np.asarray(node_ids))
        except (ValueError, TypeError) as exc:
            raise ModelError(f"{what}: ids must be a 1-D list of integers ({exc})") from None
        if ids.ndim != 1:
            raise ModelError(f"{what}: node ids must be a 1-D list, got shape {ids.shape}")
        if ids.size and not np.issubdtype(ids.dtype, np.integer):
            raise ModelError(
                f"{what}: node ids must be integers, got {ids.dtype} ({ids[:3].tolist()})"
            )
        ids = ids.astype(np.int64)
        bad = np.flatnonzero((ids < 0) | (ids >= self.n_nodes))
        if bad.size:
            k = int(bad[0])
            raise ModelError(
                f"{what}: entry {k} refers to node {int(ids[k])}, which does not exist "
                f"(the model has nodes 0..{self.n_nodes - 1})"
            )
        return ids

    def _member_ids(self, member_ids: Any, what: str) -> np.ndarray:
        try:
            ids = np.atleast_1d(np.asarray(member_ids))
        except (ValueError, TypeError) as exc:
            raise ModelError(f"{what}: ids must be a 1-D list of integers ({exc})") from None
        if ids.ndim != 1:
            raise ModelError(f"{what}: member ids must be a 1-D list, got shape {ids.shape}")
        if ids.size and not np.issubdtype(ids.dtype, np.integer):
            raise ModelError(f"{what}: member ids must be integers, got {ids.dtype}")
        ids = ids.astype(np.int64)
        bad = np.flatnonzero((ids < 0) | (ids >= self.n_members))
        if bad.size:
            k = int(bad[0])
            raise ModelError(
                f"{what}: entry {k} refers to member {int(ids[k])}, which does not exist "
                f"(the model has members 0..{self.n_members - 1})"
            )
        return ids

    @staticmethod
    def _per_item(value: Any, k: int, name: str, *, positive: bool = False) -> np.ndarray:
        arr = _real_array(value, name)
        if arr.ndim == 0:
            arr = np.full(k, float(arr))
        if arr.shape != (k,):
            raise ModelError(f"{name}: expected a scalar or {k} values, got shape {arr.shape}")
        bad = np.flatnonzero(~np.isfinite(arr) | ((arr <= 0) if positive else False))
        if bad.size:
            j = int(bad[0])
            need = "a positive finite number" if positive else "a finite number"
            raise ModelError(f"{name}[{j}] = {float(arr[j])}: must be {need}")
        return arr

    @staticmethod
    def _vector(value: Any, name: str) -> np.ndarray:
        vec = _real_array(value, name)
        if vec.ndim == 1:
            if vec.shape != (3,):
                raise ModelError(f"{name}: expected 3 components, got {vec.shape[0]}")
        elif vec.ndim != 2 or vec.shape[1] != 3:
            raise ModelError(f"{name}: expected (3,) or (k, 3) values, got shape {vec.shape}")
        bad = np.argwhere(~np.isfinite(vec))
        if bad.size:
            where = tuple(int(i) for i in bad[0])
            raise ModelError(f"{name}: component {where} = {float(vec[where])} is not finite")
        return vec

    def _invalidate(self) -> None:
        # A new dict, not clear(): shallow copies (tension_only's submodels)
        # share the old one.
        self._cache = {}

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

    def groups_of(self, member: int) -> list[str]:
        """Names of the groups that contain ``member``."""
        return [g for g, ids in self.groups.items() if np.any(ids == member)]

    def _group_text(self, member: int) -> str:
        names = self.groups_of(member)
        return f" (group {', '.join(repr(g) for g in names)})" if names else ""

    def add_node_set(self, name: str, node_ids: Any) -> np.ndarray:
        """Add nodes to the named node set (created if new); returns the set's ids."""
        ids = self._node_ids(node_ids, f"node set {name!r}")
        merged = np.union1d(self.node_sets.get(name, np.zeros(0, dtype=np.int64)), ids)
        self.node_sets[name] = merged.astype(np.int64)
        return self.node_sets[name]

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

    # --------------------------------------------------------------- panels
    def add_panels(self, polygons: Iterable[Any], group: str | None = None) -> np.ndarray:
        """Add load panels (polygons of at least three node ids).

        Returns
        -------
        ids : (k,) int
            The new panel ids.
        """
        polys = []
        for k, p in enumerate(polygons):
            try:
                arr = np.asarray(p)
            except (ValueError, TypeError) as exc:
                raise ModelError(
                    f"add_panels: polygon {k} is not a list of node ids ({exc})"
                ) from None
            if arr.size and arr.dtype.kind not in "iu":
                raise ModelError(
                    f"add_panels: polygon {k}: node ids must be integers, got {arr.dtype} values"
                )
            polys.append(arr.astype(np.int64).ravel())
        sizes = np.array([p.size for p in polys], dtype=np.int64)
        flat = np.concatenate(polys) if polys else np.zeros(0, dtype=np.int64)
        return self.add_panels_flat(flat, np.concatenate([[0], np.cumsum(sizes)]), group=group)

    def add_panels_flat(
        self, panel_nodes: Any, offsets: Any, group: str | None = None
    ) -> np.ndarray:
        """Add load panels given flat: panel k has ``panel_nodes[offsets[k]:offsets[k+1]]``.

        The vectorised form of :meth:`add_panels`, for meshes of many faces.

        Parameters
        ----------
        panel_nodes : (m,) int
            Node ids of all panels, one after another.
        offsets : (k + 1,) int
            Start of each panel in ``panel_nodes``, then the total length.
        group : str, optional
            Panel group to add the new panels to.

        Returns
        -------
        ids : (k,) int
            The new panel ids.

        Raises
        ------
        ModelError
            On a panel of fewer than three nodes, a missing node, or offsets that
            do not describe ``panel_nodes``.
        """
        try:
            flat = np.asarray(panel_nodes).ravel()
            offs_raw = np.asarray(offsets).ravel()
        except (ValueError, TypeError) as exc:
            raise ModelError(
                f"add_panels: node ids and offsets must be 1-D integer lists ({exc})"
            ) from None
        if offs_raw.size and offs_raw.dtype.kind not in "iu":
            raise ModelError(f"add_panels: offsets must be integers, got {offs_raw.dtype} values")
        offs = offs_raw.astype(np.int64)
        if flat.size and not np.issubdtype(flat.dtype, np.integer):
            raise ModelError(f"add_panels: node ids must be integers, got {flat.dtype}")
        flat = flat.astype(np.int64)
        if offs.size == 0 or offs[0] != 0 or offs[-1] != flat.size or np.any(np.diff(offs) < 0):
            raise ModelError(
                f"add_panels: offsets must rise from 0 to {flat.size} (the number of node ids)"
            )
        start = self.n_panels
        small = np.flatnonzero(np.diff(offs) < 3)
        if small.size:
            k = int(small[0])
            raise ModelError(
                f"add_panels: panel {start + k} has {int(offs[k + 1] - offs[k])} nodes (needs 3)"
            )
        bad = np.flatnonzero((flat < 0) | (flat >= self.n_nodes))
        if bad.size:
            k = int(np.searchsorted(offs, bad[0], side="right") - 1)
            raise ModelError(
                f"add_panels: panel {start + k} refers to node {int(flat[bad[0]])}, which does "
                f"not exist (the model has nodes 0..{self.n_nodes - 1})"
            )
        zero = _zero_area_panels(self.nodes, flat, offs)
        if zero.size:
            k = int(zero[0])
            raise ModelError(
                f"add_panels: panel {start + k} (nodes {flat[offs[k]:offs[k + 1]].tolist()}) "
                f"has zero area ({zero.size} such panels): a load panel needs three nodes "
                "not on one line"
            )
        self.panel_nodes = np.concatenate([self.panel_nodes, flat])
        self.panel_offsets = np.concatenate([self.panel_offsets, self.panel_offsets[-1] + offs[1:]])
        ids = np.arange(start, self.n_panels, dtype=np.int64)
        if group is not None:
            self.panel_groups[group] = np.union1d(
                self.panel_groups.get(group, np.zeros(0, dtype=np.int64)), ids
            ).astype(np.int64)
        return ids

    def panel(self, k: int) -> np.ndarray:
        """Node ids of panel ``k``."""
        return self.panel_nodes[self.panel_offsets[k] : self.panel_offsets[k + 1]]

    def add_markers(self, xyz: Any, layers: Any) -> None:
        """Add marker points (metres) with a layer name each."""
        pts = _real_array(xyz, "add_markers: xyz")
        if pts.size % 3 or not np.all(np.isfinite(pts)):
            raise ModelError(
                f"add_markers: expected finite (k, 3) positions, got shape {pts.shape}"
            )
        pts = pts.reshape(-1, 3)
        names = np.asarray(layers, dtype=object).ravel()
        if names.size == 1 and pts.shape[0] != 1:
            names = np.full(pts.shape[0], names[0], dtype=object)
        if names.shape[0] != pts.shape[0]:
            raise ModelError(
                f"add_markers: {pts.shape[0]} positions but {names.shape[0]} layer names"
            )
        self.markers = np.concatenate([self.markers, pts])
        self.marker_layers = np.concatenate([self.marker_layers, names])

    # -------------------------------------------------------------- supports
    def add_support(self, node_ids: Any, x: Any = True, y: bool = True, z: bool = True) -> None:
        """Restrain translations of nodes (a roller restrains fewer directions).

        ``x``, ``y``, ``z`` say which directions are held; ``x`` may instead be
        the three flags at once, ``add_support(ids, (False, True, True))``.
        """
        ids = self._node_ids(node_ids, "add_support")
        flags = np.asarray(x, dtype=object)
        if flags.ndim == 0:
            flags = np.array([x, y, z], dtype=object)
        elif flags.shape != (3,):
            raise ModelError(f"add_support: expected three flags (x, y, z), got {x!r}")
        for axis, f in zip(_AXES, flags, strict=True):
            if not isinstance(f, bool | np.bool_ | int | np.integer) or f not in (0, 1):
                raise ModelError(f"add_support: flag {axis} is {f!r}; use True or False")
        self.restraint[ids] |= flags.astype(bool)

    def add_spring(self, node_ids: Any, kx: Any = 0.0, ky: Any = 0.0, kz: Any = 0.0) -> None:
        """Add elastic supports, N/m, to nodes (adds to any spring already there).

        Either ``kx``, ``ky``, ``kz`` (each a number or one per node), or the
        stiffnesses as one array-like in ``kx``: ``(kx, ky, kz)`` for every
        node or ``(k, 3)``, one row per node, as :meth:`add_load` takes forces.
        """
        ids = self._node_ids(node_ids, "add_spring")
        kx_a = _real_array(kx, "add_spring: kx")
        if kx_a.ndim >= 1 and kx_a.shape[-1] == 3 and kx_a.ndim <= 2 and kx_a.size != 1:
            if np.any(_real_array(ky, "add_spring: ky")) or np.any(
                _real_array(kz, "add_spring: kz")
            ):
                raise ModelError(
                    "add_spring: give the stiffness either as (kx, ky, kz) in one argument or "
                    "as kx=, ky=, kz=, not both"
                )
            k = self._vector(kx_a, "add_spring: stiffness")
        else:
            k = np.stack(
                [self._per_item(v, ids.size, f"add_spring: {a}") for a, v in
                 zip(("kx", "ky", "kz"), (kx, ky, kz), strict=True)],
                axis=1,
            )
        if k.ndim == 2 and k.shape[0] != ids.size:
            raise ModelError(f"add_spring: {ids.size} nodes but {k.shape[0]} stiffness rows")
        if np.any(k < 0):
            i = tuple(int(v) for v in np.argwhere(k < 0)[0])
            raise ModelError(f"add_spring: stiffness component {i} = {float(k[i])} must not "
                             "be negative")
        np.add.at(self.springs, ids, np.broadcast_to(k, (ids.size, 3)))

    # ----------------------------------------------------------------- loads
    def case(self, name: str) -> LoadCase:
        """The load case ``name``, created empty if new."""
        if not isinstance(name, str) or not name:
            raise ModelError(f"load case name must be a non-empty string, got {name!r}")
        if name in self.combinations:
            raise ModelError(f"load case {name!r}: a combination already has that name")
        if name not in self.cases:
            self.cases[name] = LoadCase(name)
        lc = self.cases[name]
        lc.resize(self.n_nodes, self.n_members)
        return lc

    def add_load(self, case: str, node_ids: Any, force: Any) -> None:
        """Add nodal forces, N, to a load case (adds to what is there).

        ``force`` is one (fx, fy, fz) for all nodes or (k, 3), one per node.
        """
        ids = self._node_ids(node_ids, f"add_load({case!r})")
        f = self._vector(force, f"add_load({case!r}): force")
        if f.ndim == 2 and f.shape[0] != ids.size:
            raise ModelError(
                f"add_load({case!r}): {ids.size} nodes but {f.shape[0]} force vectors"
            )
        lc = self.case(case)
        np.add.at(lc.forces, ids, np.broadcast_to(f, (ids.size, 3)))

    def add_self_weight(
        self, case: str, g: float = STANDARD_GRAVITY, factor: float = 1.0, members: Any = None
    ) -> None:
        """Add member self-weight along -z, half of each member's weight to each end.

        Parameters
        ----------
        case : str
            Load case.
        g : float
            Acceleration of gravity, m/s².
        factor : float
            Multiplier, e.g. 1.1 for joints and connections.
        members : (k,) int, optional
            Only these members (default all).
        """
        ids = (
            np.arange(self.n_members)
            if members is None
            else self._member_ids(members, f"add_self_weight({case!r})")
        )
        g_val = float(self._per_item(g, 1, f"add_self_weight({case!r}): g")[0])
        if not g_val > 0:
            raise ModelError(
                f"add_self_weight({case!r}): g = {g_val} m/s² must be positive (self-weight "
                "acts along -z by definition; use nodal loads for another direction)"
            )
        f_val = float(self._per_item(factor, 1, f"add_self_weight({case!r}): factor")[0])
        lc = self.case(case)
        w = 0.5 * f_val * g_val * self.mass[ids]
        fz = np.bincount(self.members[ids, 0], w, self.n_nodes) + np.bincount(
            self.members[ids, 1], w, self.n_nodes
        )
        lc.forces[:, 2] -= fz
        self.self_weight_records.append((case, float(g), float(factor), ids.copy()))

    def add_temperature(self, case: str, member_ids: Any, dT: Any) -> None:
        """Add a uniform temperature change, K, to members (free strain alpha*dT)."""
        ids = self._member_ids(member_ids, f"add_temperature({case!r})")
        t = self._per_item(dT, ids.size, f"add_temperature({case!r}): dT")
        lc = self.case(case)
        np.add.at(lc.temperature, ids, t)

    def add_initial_strain(self, case: str, member_ids: Any, strain: Any) -> None:
        """Add an imposed free strain (lack of fit; positive = member too long)."""
        ids = self._member_ids(member_ids, f"add_initial_strain({case!r})")
        s = self._per_item(strain, ids.size, f"add_initial_strain({case!r}): strain")
        lc = self.case(case)
        np.add.at(lc.initial_strain, ids, s)

    def add_settlement(self, case: str, node_ids: Any, displacement: Any) -> None:
        """Prescribe displacements, m, of restrained directions of support nodes.

        Only directions that are restrained may be given a non-zero value; a
        non-zero component in a free direction raises ModelError.
        """
        ids = self._node_ids(node_ids, f"add_settlement({case!r})")
        u = np.broadcast_to(self._vector(displacement, f"add_settlement({case!r})"), (ids.size, 3))
        given = u != 0.0
        free = given & ~self.restraint[ids]
        if np.any(free):
            i, j = (int(v) for v in np.argwhere(free)[0])
            raise ModelError(
                f"add_settlement({case!r}): node {int(ids[i])} is not restrained along "
                f"{_AXES[j]}, so it cannot be given a settlement of {float(u[i, j])} m there"
            )
        lc = self.case(case)
        np.add.at(lc.settlement, ids, u)
        lc.settlement_mask[ids] |= given

    def add_combination(self, name: str, factors: Mapping[str, float]) -> None:
        """Define a combination: name -> {case: factor}, results by superposition."""
        if not isinstance(name, str) or not name:
            raise ModelError(f"combination name must be a non-empty string, got {name!r}")
        if name in self.cases:
            raise ModelError(f"combination {name!r}: a load case already has that name")
        if not factors:
            raise ModelError(f"combination {name!r} has no cases")
        clean: dict[str, float] = {}
        for case, factor in factors.items():
            if case not in self.cases:
                known = ", ".join(sorted(self.cases)) or "none defined"
                raise ModelError(
                    f"combination {name!r} refers to unknown load case {case!r} (cases: {known})"
                )
            if isinstance(factor, bool) or not isinstance(factor, numbers.Real):
                raise ModelError(
                    f"combination {name!r}: factor for {case!r} is {factor!r}, not a number"
                )
            f = float(factor)
            if not np.isfinite(f):
                raise ModelError(f"combination {name!r}: factor for {case!r} is {factor!r}")
            clean[case] = f
        self.combinations[name] = clean

    # ----------------------------------------------------------------- solve
    def validate(self) -> None:  # noqa: C901 (one independent check after another)
        """Check the whole model once more before analysis (cheap, vectorised).

        Raises
        ------
        ModelError
            On any inconsistency of shapes, ids or values.
        """
        # Arrays are public and may have been changed in place after add_*:
        # check them all again (vectorised) and drop cached lengths.
        self._invalidate()
        nodes = self.nodes
        if not (isinstance(nodes, np.ndarray) and nodes.ndim == 2 and nodes.shape[1] == 3
                and nodes.dtype.kind == "f"):
            raise ModelError(
                f"nodes must be an (n, 3) float array, got {getattr(nodes, 'shape', nodes)!r}"
            )
        bad = np.argwhere(~np.isfinite(nodes))
        if bad.size:
            i, j = (int(v) for v in bad[0])
            raise ModelError(f"node {i}: coordinate {_AXES[j]} is {float(nodes[i, j])}")
        n = self.n_nodes
        mem = self.members
        if not (isinstance(mem, np.ndarray) and mem.ndim == 2 and mem.shape[1] == 2
                and mem.dtype.kind in "iu"):
            raise ModelError(
                f"members must be a (b, 2) integer array, got {getattr(mem, 'shape', mem)!r}"
            )
        b = self.n_members
        out = np.argwhere((mem < 0) | (mem >= n))
        if out.size:
            i, j = (int(v) for v in out[0])
            raise ModelError(
                f"member {i} refers to node {int(mem[i, j])}, which does not exist "
                f"(the model has nodes 0..{n - 1})"
            )
        for name in ("area", "E", "density", "alpha"):
            arr = getattr(self, name)
            if not isinstance(arr, np.ndarray) or arr.shape != (b,):
                raise ModelError(
                    f"{name} has shape {getattr(arr, 'shape', None)}, expected ({b},)"
                )
        if self.restraint.shape != (n, 3) or self.springs.shape != (n, 3):
            raise ModelError("restraint and springs must be (n, 3) arrays")
        if b == 0:
            raise ModelError("the model has no members")
        same = np.flatnonzero(mem[:, 0] == mem[:, 1])
        if same.size:
            i = int(same[0])
            raise ModelError(f"member {i} runs from node {int(mem[i, 0])} to itself")
        zero = np.flatnonzero(~(self.lengths > 0))
        if zero.size:
            i = int(zero[0])
            raise ModelError(
                f"member {i} between nodes {int(mem[i, 0])} and {int(mem[i, 1])} has zero length"
            )
        for name in ("area", "E"):
            arr = getattr(self, name)
            missing = np.flatnonzero(np.isnan(arr))
            if missing.size:
                i = int(missing[0])
                raise ModelError(
                    f"member {i}{self._group_text(i)} has no {name} assigned "
                    f"({missing.size} members without one)"
                )
            wrong = np.flatnonzero(~(np.isfinite(arr) & (arr > 0)))
            if wrong.size:
                i = int(wrong[0])
                raise ModelError(f"member {i}: {name} = {float(arr[i])} must be a positive "
                                 "finite number")
        for name, lowest in (("density", 0.0), ("alpha", -np.inf)):
            arr = getattr(self, name)
            wrong = np.flatnonzero(~(np.isfinite(arr) & (arr >= lowest)))
            if wrong.size:
                i = int(wrong[0])
                raise ModelError(f"member {i}: {name} = {float(arr[i])} is not allowed")
        bad_k = np.argwhere(~(np.isfinite(self.springs) & (self.springs >= 0)))
        if bad_k.size:
            i, j = (int(v) for v in bad_k[0])
            raise ModelError(
                f"node {i}: spring along {_AXES[j]} is {float(self.springs[i, j])} N/m "
                "(must be finite and not negative)"
            )
        for name, ids in self.groups.items():
            self._member_ids(ids, f"group {name!r}")
        for name, ids in self.node_sets.items():
            self._node_ids(ids, f"node set {name!r}")
        if self.panel_nodes.size:
            self._node_ids(self.panel_nodes, "panels")
        for cname, lc in self.cases.items():
            lc.resize(n, b)
            for what, arr, rows in (
                ("forces", lc.forces, n), ("settlement", lc.settlement, n),
                ("temperature", lc.temperature, b), ("initial_strain", lc.initial_strain, b),
            ):
                if arr.shape[0] != rows:
                    raise ModelError(
                        f"load case {cname!r}: {what} has {arr.shape[0]} rows for {rows} "
                        f"{'nodes' if rows == n else 'members'}"
                    )
                where = np.argwhere(~np.isfinite(arr))
                if where.size:
                    i = int(where[0][0])
                    raise ModelError(
                        f"load case {cname!r}: {what} of {'node' if rows == n else 'member'} "
                        f"{i} is not finite"
                    )
        for cname, factors in self.combinations.items():
            for case, f in factors.items():
                if case not in self.cases:
                    raise ModelError(f"combination {cname!r} refers to unknown load case {case!r}")
                if not np.isfinite(f):
                    raise ModelError(f"combination {cname!r}: factor for {case!r} is {f!r}")

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


def _zero_area_panels(nodes: np.ndarray, flat: np.ndarray, offs: np.ndarray) -> np.ndarray:
    """Indices of polygons whose vector (Newell) area is zero against their own size.

    Coordinates are taken relative to each polygon's centroid, so a panel at
    site coordinates is judged as one at the origin.
    """
    k = offs.size - 1
    if k == 0:
        return np.zeros(0, dtype=np.int64)
    counts = np.diff(offs)
    pid = np.repeat(np.arange(k), counts)
    pts = nodes[flat]
    centre = np.stack([np.bincount(pid, pts[:, j], k) for j in range(3)], axis=1) / counts[:, None]
    rel = pts - centre[pid]
    nxt = np.arange(1, flat.size + 1)
    nxt[offs[1:] - 1] = offs[:-1]
    cr = np.cross(rel, rel[nxt])
    vec = np.stack([np.bincount(pid, cr[:, j], k) for j in range(3)], axis=1)
    area = 0.5 * np.linalg.norm(vec, axis=1)
    size2 = np.stack([np.bincount(pid, rel[:, j] ** 2, k) for j in range(3)], axis=1).sum(axis=1)
    # Non-finite coordinates are left to the coordinate checks, which name them.
    return np.flatnonzero(np.isfinite(area) & np.isfinite(size2) & (area <= 1e-12 * size2))


def _pair_keys(pairs: np.ndarray) -> np.ndarray:
    """Order-free int64 keys of node pairs (node ids below 2**31)."""
    lo = np.minimum(pairs[:, 0], pairs[:, 1]).astype(np.int64)
    hi = np.maximum(pairs[:, 0], pairs[:, 1]).astype(np.int64)
    return (lo << 31) | hi
