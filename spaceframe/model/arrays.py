"""The arrays a Model is made of: state, read-only geometry, sizes and derived geometry.

:class:`ModelArrays` holds every array of a :class:`~spaceframe.model.Model` and the
checks of ids and values that its ``add_*`` methods share; the methods that build a
model live in the other modules of this package and are joined in ``core.py``.
:class:`LoadCase` holds the arrays of one load case.
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from spaceframe.errors import ModelError

__all__ = ["LoadCase", "ModelArrays", "checked_ids"]

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


def checked_ids(values: Any, what: str, noun: str, count: int) -> np.ndarray:
    """``values`` as int64 ids of existing ``noun``s (0..count-1), or ModelError naming ``what``."""
    try:
        ids = np.atleast_1d(np.asarray(values))
    except (ValueError, TypeError) as exc:
        raise ModelError(f"{what}: ids must be a 1-D list of integers ({exc})") from None
    if ids.ndim != 1:
        raise ModelError(f"{what}: {noun} ids must be a 1-D list, got shape {ids.shape}")
    if ids.size and not np.issubdtype(ids.dtype, np.integer):
        raise ModelError(
            f"{what}: {noun} ids must be integers, got {ids.dtype} ({ids[:3].tolist()})"
        )
    ids = ids.astype(np.int64)
    bad = np.flatnonzero((ids < 0) | (ids >= count))
    if bad.size:
        k = int(bad[0])
        raise ModelError(
            f"{what}: entry {k} refers to {noun} {int(ids[k])}, which does not exist "
            f"(the model has {noun}s 0..{count - 1})"
        )
    return ids


class ModelArrays:
    """The arrays of a Model, their derived geometry and the checks of ids and values."""

    def __init__(self) -> None:
        self._cache: dict[str, Any] = {}
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

    def __getstate__(self) -> dict[str, Any]:
        # The node tree is not copied or sent along (a study ships the model
        # to every worker): it is rebuilt from the nodes where needed.
        return {**self.__dict__,
                "_cache": {k: v for k, v in self._cache.items() if k != "node_tree"}}

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

    def node_tree(self) -> Any:
        """A k-d tree of the nodes (``scipy.spatial.cKDTree``), kept until the geometry changes.

        Built once for the many point selections of a model file (one per load
        case of a load moved over a roof) instead of once per selection.
        """
        tree = self._cache.get("node_tree")
        if tree is None:
            from scipy.spatial import cKDTree

            tree = self._cache["node_tree"] = cKDTree(self.nodes)
        return tree

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
        return checked_ids(node_ids, what, "node", self.n_nodes)

    def _member_ids(self, member_ids: Any, what: str) -> np.ndarray:
        return checked_ids(member_ids, what, "member", self.n_members)

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

    def groups_of(self, member: int) -> list[str]:
        """Names of the groups that contain ``member``."""
        return [g for g, ids in self.groups.items() if np.any(ids == member)]

    def _group_text(self, member: int) -> str:
        names = self.groups_of(member)
        return f" (group {', '.join(repr(g) for g in names)})" if names else ""
