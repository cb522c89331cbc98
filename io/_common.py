"""What every reader shares: units, option checks, and one road from raw geometry to a Model.

A format module turns its file into a :class:`RawGeometry` (points in file
units, straight segments, faces, markers, sets keyed by "owner" = the source
entity or cell) and hands it to :func:`build_model`, which converts units,
heals, carries groups, node sets and panels through healing, and fills the
Model and its ``meta``.  Nothing here imports a file-format library.
"""

from __future__ import annotations

import functools
import math
import os
import tempfile
import threading
import warnings
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import scipy.sparse as sp

from spaceframe.errors import (
    ModelError,
    ReadError,
    SpaceframeWarning,
    WriteError,
)
from spaceframe.model import Model
from spaceframe.tolerances import GEOMETRY_TOLERANCE

__all__ = [
    "HEAL_OPTIONS",
    "INSUNITS",
    "UNIT_CODES",
    "RawGeometry",
    "Units",
    "WriteError",
    "atomic_write",
    "build_model",
    "check_options",
    "check_path",
    "insunits_code",
    "parse_units",
    "read_report",
    "units_from_insunits",
]


# ---------------------------------------------------------------------------
# Units
# ---------------------------------------------------------------------------

#: The DXF ``$INSUNITS`` codes (drawing units of the model space, as listed
#: for that header variable in the DXF reference) with a short name and the
#: length of one unit in metres.  Inch-based values are exact by the 1959
#: international yard and pound agreement (1 in = 25.4 mm); US survey units
#: by their definition 1 ft = 1200/3937 m; the astronomical unit by IAU 2012
#: resolution B2, the light year as 365.25 days of light travel (IAU), the
#: parsec as 648000/pi au (IAU 2015 B2).  Code 0 (unitless) is deliberately
#: absent: it has no length.  This is the only unit table; every other map
#: (name -> code, name -> metres) is derived from it below.
INSUNITS: dict[int, tuple[str, float]] = {
    1: ("inch", 0.0254),
    2: ("ft", 0.3048),
    3: ("mi", 1609.344),
    4: ("mm", 1.0e-3),
    5: ("cm", 1.0e-2),
    6: ("m", 1.0),
    7: ("km", 1.0e3),
    8: ("microinch", 2.54e-8),
    9: ("mil", 2.54e-5),
    10: ("yd", 0.9144),
    11: ("angstrom", 1.0e-10),
    12: ("nm", 1.0e-9),
    13: ("um", 1.0e-6),
    14: ("dm", 0.1),
    15: ("dam", 10.0),
    16: ("hm", 100.0),
    17: ("Gm", 1.0e9),
    18: ("au", 149_597_870_700.0),
    19: ("ly", 9_460_730_472_580_800.0),
    20: ("pc", 648_000.0 / math.pi * 149_597_870_700.0),
    21: ("us_ft", 1200.0 / 3937.0),
    22: ("us_inch", 100.0 / 3937.0),
    23: ("us_yd", 3600.0 / 3937.0),
    24: ("us_mi", 6_336_000.0 / 3937.0),
}

#: Unit name -> $INSUNITS code, derived from :data:`INSUNITS`.
UNIT_CODES: dict[str, int] = {name: code for code, (name, _) in INSUNITS.items()}

# Spellings people type for the common units, mapped to table names; anything
# else goes to pint.  Lower-case keys: unit names compare case-insensitively
# except "Gm", which is reached through pint ("gigameter").
_ALIASES: dict[str, str] = {
    "in": "inch",
    "inches": "inch",
    "foot": "ft",
    "feet": "ft",
    "millimetre": "mm",
    "millimeter": "mm",
    "centimetre": "cm",
    "centimeter": "cm",
    "metre": "m",
    "meter": "m",
    "kilometre": "km",
    "kilometer": "km",
    "yard": "yd",
}


@dataclass(frozen=True)
class Units:
    """Length unit of a file.

    Attributes
    ----------
    name : str
        Unit name as shown to the user ("mm", "inch", ...).
    scale : float
        Metres per file unit.
    source : str
        Where it came from: "$INSUNITS = 4", "units= option", "assumed".
    """

    name: str
    scale: float
    source: str

    def as_dict(self) -> dict[str, Any]:
        """The form stored in ``model.meta["units"]``."""
        return {"name": self.name, "scale": self.scale, "source": self.source}


def parse_units(units: str, *, where: str) -> tuple[str, float]:
    """Name and metres per unit of a length unit given by name.

    Parameters
    ----------
    units : str
        "mm", "m", "inch", "ft", any name of :data:`INSUNITS`, a common
        spelling ("millimetre", "feet"), or any length unit pint knows.
    where : str
        Prefix for error messages (the file being read or written).

    Returns
    -------
    name : str
    scale : float
        Metres per unit.

    Raises
    ------
    ReadError
        If the name is not a known length unit.
    """
    if not isinstance(units, str) or not units.strip():
        raise ReadError(f"{where}: units must be a unit name such as 'mm' or 'm', got {units!r}")
    text = units.strip()
    key = _ALIASES.get(text.lower(), text.lower())
    for name, scale in ((n, s) for n, s in INSUNITS.values()):
        if name.lower() == key and name != "Gm":
            return name, scale
    found = _pint_scale(text)
    if found is None:
        known = ", ".join(n for n, _ in INSUNITS.values())
        raise ReadError(
            f"{where}: units={units!r} is not a known length unit (use one of {known}, "
            "or any length unit name pint understands)"
        )
    return text, found


@functools.lru_cache(maxsize=1)
def _pint_registry() -> Any:
    import pint

    return pint.UnitRegistry()


def _pint_scale(text: str) -> float | None:
    try:
        import pint
    except ImportError:
        return None
    registry = _pint_registry()
    try:
        quantity = registry.Quantity(1.0, text)
        if not quantity.check("[length]"):
            return None
        value = float(quantity.to("m").magnitude)
    except (pint.errors.PintError, ValueError, TypeError, AttributeError, SyntaxError):
        return None
    return value if math.isfinite(value) and value > 0 else None


def units_from_insunits(code: Any, *, where: str) -> Units | None:
    """Units for a ``$INSUNITS`` value; None for 0 (unitless).

    Raises
    ------
    ReadError
        If the value is not one of the codes of :data:`INSUNITS`.
    """
    try:
        icode = int(code)
    except (TypeError, ValueError):
        raise ReadError(f"{where}: header $INSUNITS = {code!r} is not an integer") from None
    if icode == 0:
        return None
    if icode not in INSUNITS:
        raise ReadError(
            f"{where}: header $INSUNITS = {icode} is not a known unit code (0..{max(INSUNITS)})"
        )
    name, scale = INSUNITS[icode]
    return Units(name, scale, f"$INSUNITS = {icode}")


def insunits_code(units: str, *, where: str) -> tuple[int, float]:
    """``$INSUNITS`` code and metres per unit for a unit name (for writers).

    Raises
    ------
    WriteError
        If the unit has no ``$INSUNITS`` code.
    """
    try:
        name, scale = parse_units(units, where=where)
    except ReadError as exc:
        raise WriteError(str(exc)) from None
    if name in UNIT_CODES:
        return UNIT_CODES[name], scale
    for code, (_, s) in INSUNITS.items():
        if math.isclose(s, scale, rel_tol=1e-12):
            return code, s
    raise WriteError(f"{where}: units={units!r} has no DXF $INSUNITS code")


# ---------------------------------------------------------------------------
# Paths and options
# ---------------------------------------------------------------------------

#: Healing switches a reader passes through to :func:`spaceframe.geometry.heal`.
HEAL_OPTIONS = frozenset(
    {
        "merge_nodes",
        "split_at_nodes",
        "split_crossings",
        "remove_zero_length",
        "remove_duplicates",
        "drop_unused_nodes",
    }
)


def check_path(path: str | os.PathLike[str]) -> Path:
    """The path as a Path, or ReadError if there is no readable file there."""
    p = Path(path)
    if not p.exists():
        raise ReadError(f"{p}: no such file")
    if not p.is_file():
        raise ReadError(f"{p}: is not a file")
    if not os.access(p, os.R_OK):
        raise ReadError(f"{p}: permission denied")
    return p


def check_options(where: str, options: Mapping[str, Any], allowed: Iterable[str]) -> None:
    """ReadError naming the first option not in ``allowed`` (or not a bool heal switch)."""
    allowed_set = set(allowed)
    for key, value in options.items():
        if key not in allowed_set:
            names = ", ".join(sorted(allowed_set))
            raise ReadError(f"{where}: unknown option {key!r} (options here: {names})")
        if key in HEAL_OPTIONS and not isinstance(value, bool | np.bool_):
            raise ReadError(f"{where}: option {key}={value!r} must be True or False")


def layer_filter(
    where: str, include: Iterable[str] | str | None, exclude: Iterable[str] | str | None
) -> Callable[[str], bool]:
    """Case-insensitive test of a layer (or set) name against include/exclude lists."""

    def names(value: Iterable[str] | str | None, what: str) -> set[str] | None:
        if value is None:
            return None
        items = [value] if isinstance(value, str) else list(value)
        for item in items:
            if not isinstance(item, str):
                raise ReadError(f"{where}: {what} must hold names, got {item!r}")
        return {item.lower() for item in items}

    inc = names(include, "layers")
    exc = names(exclude, "exclude_layers")

    def keep(name: str) -> bool:
        low = name.lower()
        return (inc is None or low in inc) and (exc is None or low not in exc)

    return keep


def atomic_write(path: str | os.PathLike[str], save: Callable[[Path], None]) -> Path:
    """Call ``save(temp_path)`` on a temporary file next to ``path``, then rename.

    A failure leaves neither a partial file at ``path`` nor the temporary file.

    Raises
    ------
    WriteError
        If the folder does not exist or the file cannot be written.
    """
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise WriteError(f"{target}: folder {folder} does not exist")
    try:
        fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=folder)
    except OSError as exc:
        raise WriteError(
            f"{target}: cannot create a file in {folder}: {exc.strerror or exc}") from exc
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        save(tmp)
        # mkstemp makes the file private (0600); give it the mode any new file
        # gets under the user's umask, as a plain open() would.
        os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, target)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        # strerror, not str(exc): the latter names the hidden temporary file.
        raise WriteError(f"{target}: could not be written: {exc.strerror or exc}") from exc
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return target


_UMASK_LOCK = threading.Lock()


def _umask() -> int:
    """The process's umask.

    Read from /proc/self/status where the kernel reports it (Linux 4.7 on):
    ``os.umask`` can only read it by setting it, and a file that another
    thread creates in that moment would be created under umask 0.  Elsewhere
    ``os.umask`` under a lock (which guards against this module's own threads).
    """
    try:
        with open("/proc/self/status", encoding="ascii", errors="replace") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError, IndexError):
        pass
    with _UMASK_LOCK:
        mask = os.umask(0)
        os.umask(mask)
    return mask


# ---------------------------------------------------------------------------
# Raw geometry
# ---------------------------------------------------------------------------


def _empty_int(*shape: int) -> np.ndarray:
    return np.zeros(shape if shape else (0,), dtype=np.int64)


@dataclass
class RawGeometry:
    """Geometry straight from a file, before units, healing or ids are settled.

    Every segment and face belongs to an *owner*: the drawing entity or mesh
    cell it came from.  Sets (layers, physical groups) are lists of owners,
    so one set can hold members and panels alike.

    Attributes
    ----------
    points : (n, 3) float
        Coordinates in file units.
    segments : (s, 2) int
        Straight pieces as point ids.
    segment_owner : (s,) int
        Owner of each segment.
    face_nodes : (p,) int
        Corner point ids of all faces, one after the other.
    face_offsets : (f + 1,) int
        Face k has corners ``face_nodes[face_offsets[k]:face_offsets[k + 1]]``.
    face_owner : (f,) int
        Owner of each face.
    edges : (e, 2) int
        Candidate members along face edges (only those meant to be seen).
    edge_face : (e,) int
        Face of each edge.
    sets : dict of str to (k,) int
        Owner ids per set name; these become member and panel groups.
    node_sets : dict of str to (k,) int
        Point ids per set name.
    marker_points : (m, 3) float
        Marker positions in file units.
    marker_layers : (m,) object
        Layer (or set) name of each marker.
    ignored : dict
        What was not used: kind -> {"count": int, "layers": {name: count}}.
    """

    points: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))
    segments: np.ndarray = field(default_factory=lambda: _empty_int(0, 2))
    segment_owner: np.ndarray = field(default_factory=_empty_int)
    face_nodes: np.ndarray = field(default_factory=_empty_int)
    face_offsets: np.ndarray = field(default_factory=lambda: np.zeros(1, dtype=np.int64))
    face_owner: np.ndarray = field(default_factory=_empty_int)
    edges: np.ndarray = field(default_factory=lambda: _empty_int(0, 2))
    edge_face: np.ndarray = field(default_factory=_empty_int)
    sets: dict[str, np.ndarray] = field(default_factory=dict)
    node_sets: dict[str, np.ndarray] = field(default_factory=dict)
    marker_points: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))
    marker_layers: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=object))
    ignored: dict[str, dict[str, Any]] = field(default_factory=dict)

    @property
    def n_faces(self) -> int:
        """Number of faces."""
        return int(self.face_offsets.shape[0] - 1)


def count_ignored(ignored: dict[str, dict[str, Any]], kind: str, layer: str, n: int = 1) -> None:
    """Add ``n`` ignored things of ``kind`` on ``layer`` to an ignored-table."""
    entry = ignored.setdefault(kind, {"count": 0, "layers": {}})
    entry["count"] += n
    entry["layers"][layer] = entry["layers"].get(layer, 0) + n


def describe_ignored(ignored: Mapping[str, Mapping[str, Any]], kinds: Iterable[str]) -> str:
    """Short text "ARC x2 on 'A', 'B'; ..." for the given kinds present in ``ignored``."""
    parts = []
    for kind in kinds:
        if kind in ignored:
            entry = ignored[kind]
            layers = ", ".join(repr(name) for name in entry["layers"])
            parts.append(f"{kind} x{entry['count']} on {layers}")
    return "; ".join(parts)


# ---------------------------------------------------------------------------
# Raw geometry -> Model
# ---------------------------------------------------------------------------

# A space frame spans from a few metres (one canopy bay) to a few hundred
# metres (the largest roof grids).  A model far outside that range almost
# always means a units slip (a millimetre drawing read as metres comes out
# 1000 times too big), so it is worth a warning.  Common practice.
_PLAUSIBLE_SIZE_M = (0.05, 5000.0)


def _max_id(ids: np.ndarray) -> int:
    return int(np.max(ids)) if len(ids) else -1


def _pair_keys(pairs: np.ndarray) -> np.ndarray:
    lo = np.minimum(pairs[:, 0], pairs[:, 1]).astype(np.int64)
    hi = np.maximum(pairs[:, 0], pairs[:, 1]).astype(np.int64)
    return (lo << 31) | hi


def _incidence(rows: np.ndarray, cols: np.ndarray, shape: tuple[int, int]) -> sp.csr_matrix:
    data = np.ones(rows.shape[0], dtype=np.int32)
    return sp.csr_matrix((data, (rows, cols)), shape=shape)


def _columns_to_lists(mat: sp.spmatrix, names: list[str]) -> dict[str, np.ndarray]:
    """Row ids of the non-zeros in each column, keyed by that column's name."""
    csc = sp.csc_matrix(mat)
    csc.sum_duplicates()
    out: dict[str, np.ndarray] = {}
    for j, name in enumerate(names):  # one pass per set, not per member
        rows = csc.indices[csc.indptr[j] : csc.indptr[j + 1]]
        out[name] = np.unique(rows).astype(np.int64)
    return out


def _dedupe_ring(flat: np.ndarray, offsets: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Drop repeated consecutive corners of each polygon (cyclically)."""
    n_poly = offsets.shape[0] - 1
    if flat.size == 0:
        return flat, offsets
    sizes = np.diff(offsets)
    nxt = np.arange(1, flat.size + 1, dtype=np.int64)
    ends = offsets[1:][sizes > 0] - 1
    nxt[ends] = offsets[:-1][sizes > 0]
    keep = flat != flat[nxt]
    # A polygon whose corners are all one node keeps nothing.
    poly_of = np.repeat(np.arange(n_poly), sizes)
    new_sizes = np.bincount(poly_of[keep], minlength=n_poly)
    new_offsets = np.concatenate([[0], np.cumsum(new_sizes)]).astype(np.int64)
    return flat[keep], new_offsets


def _member_signature(n_members: int, groups: Mapping[str, np.ndarray]) -> np.ndarray:
    """(b,) uint64 fingerprint of each member's group membership.

    Two members with the same groups have the same value; different groups
    give equal values only by a 2**-64 accident (sum of random 64-bit words).
    """
    rng = np.random.default_rng(20240601)
    sig = np.zeros(n_members, dtype=np.uint64)
    for ids in groups.values():
        word = rng.integers(1, np.iinfo(np.int64).max, dtype=np.int64).astype(np.uint64)
        sig[ids] += word  # uint64 wraps, which is what a fingerprint wants
    return sig


def _mid_member_step(
    nodes: np.ndarray,
    members: np.ndarray,
    groups: dict[str, np.ndarray],
    protected: np.ndarray,
    merge: bool,
) -> tuple[np.ndarray, np.ndarray, dict[str, np.ndarray], np.ndarray, dict[str, Any]]:
    """Find nodes that only subdivide a straight member; optionally merge them away.

    Returns members, node renumbering (old -> new, -1 dropped), groups, kept
    node mask and the meta entry.
    """
    from spaceframe.geometry import find_mid_member_nodes, merge_collinear_chains

    n = nodes.shape[0]
    mids = find_mid_member_nodes(nodes, members)
    info: dict[str, Any] = {"count": int(mids.size), "merged": False}
    identity = np.arange(n, dtype=np.int64)
    if not merge or mids.size == 0:
        info["nodes"] = mids
        return members, identity, groups, np.ones(n, dtype=bool), info
    # Never merge through a node that carries something (a node set, a panel
    # corner) or where the group changes: the merged member would lose it.
    sig = _member_signature(members.shape[0], groups)
    ends = np.concatenate([members[:, 0], members[:, 1]])
    member_of_end = np.concatenate([np.arange(members.shape[0])] * 2)
    order = np.argsort(ends, kind="stable")
    ends_sorted, mem_sorted = ends[order], member_of_end[order]
    first = np.searchsorted(ends_sorted, mids)
    differ = sig[mem_sorted[first]] != sig[mem_sorted[first + 1]]
    keep = np.union1d(protected, mids[differ]).astype(np.int64)
    new_members, origin = merge_collinear_chains(nodes, members, mids, keep_nodes=keep)
    new_groups = {}
    for name, ids in groups.items():  # one pass per group
        in_group = np.zeros(members.shape[0], dtype=bool)
        in_group[ids] = True
        new_groups[name] = np.flatnonzero(in_group[origin]).astype(np.int64)
    used = np.zeros(n, dtype=bool)
    used[new_members.reshape(-1)] = True
    used[protected] = True
    renumber = np.cumsum(used) - 1
    renumber[~used] = -1
    merged_away = np.flatnonzero(~used)
    info.update(
        {
            "merged": True,
            "removed_nodes": int(merged_away.size),
            "removed_members": int(members.shape[0] - new_members.shape[0]),
            "locations": nodes[merged_away[:10]],
            "nodes": np.zeros(0, dtype=np.int64),
        }
    )
    return renumber[new_members], renumber, new_groups, used, info


def build_model(
    raw: RawGeometry,
    *,
    where: str,
    units: Units,
    tolerance: float | None,
    heal: bool,
    heal_options: Mapping[str, bool],
    edges_as_members: bool,
    meta: dict[str, Any],
    mid_member_key: str | None = None,
    merge_mid_nodes: bool = False,
    no_members_hint: str = "",
) -> Model:
    """Turn raw geometry into a Model: units, healing, groups, node sets, panels.

    Parameters
    ----------
    raw : RawGeometry
        Geometry in file units.
    where : str
        File name for messages.
    units : Units
        File units.
    tolerance : float, optional
        Healing tolerance in metres (default GEOMETRY_TOLERANCE).
    heal : bool
        Run :func:`spaceframe.geometry.heal`; without it only exactly
        coincident points become one node.
    heal_options : dict of str to bool
        Step switches passed to heal.
    edges_as_members : bool
        Also make members of the face edges.
    meta : dict
        Extra ``model.meta`` entries from the reader.
    mid_member_key : str, optional
        ``meta`` key under which to report mid-member nodes (not looked for
        when None).
    merge_mid_nodes : bool
        Merge chains through mid-member nodes into single members.
    no_members_hint : str
        Added to the error raised when nothing became a member.

    Returns
    -------
    Model

    Raises
    ------
    ReadError
        No usable entities, non-finite coordinates, or (without healing) a
        drawing the Model refuses (duplicate or zero-length members).
    """
    scale = units.scale
    pts = np.asarray(raw.points, dtype=np.float64).reshape(-1, 3)
    bad = np.flatnonzero(~np.isfinite(pts).all(axis=1))
    if bad.size:
        i = int(bad[0])
        raise ReadError(f"{where}: point {i} has non-finite coordinates {pts[i].tolist()}")
    # +0.0 turns -0.0 into 0.0 so that both sort as one point.
    pts = pts * scale + 0.0

    require_members(raw, where, edges_as_members, no_members_hint)
    segments = np.asarray(raw.segments, dtype=np.int64).reshape(-1, 2)
    edges = np.asarray(raw.edges, dtype=np.int64).reshape(-1, 2) if edges_as_members else None

    # Exactly coincident points are one node whatever the options: joining
    # them changes no coordinate.  Ids follow the first appearance in the file.
    _, first, inverse = np.unique(pts, axis=0, return_index=True, return_inverse=True)
    inverse = inverse.reshape(-1)
    rank = np.empty(first.size, dtype=np.int64)
    rank[np.argsort(first, kind="stable")] = np.arange(first.size)
    point_node = rank[inverse]
    nodes0 = pts[np.sort(first)]

    seg_n = point_node[segments]
    n_seg = seg_n.shape[0]
    n_sets = len(raw.sets)
    set_names = list(raw.sets)
    n_owner = 1 + max(
        [_max_id(raw.segment_owner), _max_id(raw.face_owner)]
        + [_max_id(v) for v in raw.sets.values()]
    )
    owner_set = sp.csr_matrix((n_owner, n_sets), dtype=np.int32)
    if n_sets:
        rows = np.concatenate([np.asarray(v, dtype=np.int64) for v in raw.sets.values()])
        cols = np.repeat(np.arange(n_sets), [len(v) for v in raw.sets.values()])
        owner_set = _incidence(rows, cols, (n_owner, n_sets))
    n_faces = raw.n_faces
    face_owner = _incidence(np.arange(n_faces), raw.face_owner, (n_faces, n_owner))

    member_owner_rows = [np.arange(n_seg)]
    member_owner_cols = [np.asarray(raw.segment_owner, dtype=np.int64)]
    member_face_rows: list[np.ndarray] = []
    member_face_cols: list[np.ndarray] = []
    members0 = seg_n
    if edges is not None and edges.shape[0]:
        edge_n = point_node[edges]
        real = edge_n[:, 0] != edge_n[:, 1]
        edge_n, edge_face = edge_n[real], np.asarray(raw.edge_face, dtype=np.int64)[real]
        keys = _pair_keys(edge_n)
        ukeys, ufirst, uinv = np.unique(keys, return_index=True, return_inverse=True)
        uinv = uinv.reshape(-1)
        # A face edge that is also a drawn segment is that segment, not a second member.
        seg_keys = _pair_keys(seg_n) if n_seg else np.zeros(0, dtype=np.int64)
        seg_order = np.argsort(seg_keys, kind="stable")
        pos = np.searchsorted(seg_keys[seg_order], ukeys)
        pos_c = np.minimum(pos, max(n_seg - 1, 0))
        on_seg = (
            (pos < n_seg) & (seg_keys[seg_order][pos_c] == ukeys)
            if n_seg
            else np.zeros(ukeys.size, dtype=bool)
        )
        member_of_unique = np.empty(ukeys.size, dtype=np.int64)
        member_of_unique[on_seg] = seg_order[pos_c[on_seg]]
        new = np.flatnonzero(~on_seg)
        member_of_unique[new] = n_seg + np.arange(new.size)
        members0 = np.concatenate([seg_n, edge_n[ufirst[new]]])
        member_face_rows.append(member_of_unique[uinv])
        member_face_cols.append(edge_face)
    n_mem0 = members0.shape[0]

    # Sets of owners -> groups of raw members and panels, by sparse products
    # (member -> owner -> set), not by looping over members.
    m_owner = _incidence(
        np.concatenate(member_owner_rows), np.concatenate(member_owner_cols), (n_mem0, n_owner)
    )
    member_set = m_owner @ owner_set
    if member_face_rows:
        m_face = _incidence(
            np.concatenate(member_face_rows), np.concatenate(member_face_cols), (n_mem0, n_faces)
        )
        member_set = member_set + m_face @ (face_owner @ owner_set)
    raw_groups = _columns_to_lists(member_set, set_names) if n_sets else {}
    panel_sets = _columns_to_lists(face_owner @ owner_set, set_names) if n_sets else {}
    raw_node_sets = {
        name: np.unique(point_node[np.asarray(ids, dtype=np.int64)])
        for name, ids in raw.node_sets.items()
    }

    tol = GEOMETRY_TOLERANCE if tolerance is None else tolerance
    report = None
    if heal:
        from spaceframe.geometry import heal as heal_frame
        from spaceframe.geometry import remap_groups

        try:
            switches: dict[str, Any] = dict(heal_options)
            result = heal_frame(nodes0, members0, tolerance=tol, **switches)
        except ModelError as exc:
            raise ReadError(f"{where}: healing failed: {exc}") from exc
        nodes, members, node_map = result.nodes, result.members, result.node_map
        if members.shape[0] == 0 and members0.shape[0]:
            _no_members_left(nodes0, members0, tol, units, where)
        groups = remap_groups(raw_groups, result)
        # remap_node_sets' advice (keep_nodes) is for heal() callers; a
        # reader's user gets what happened, and where, in file units.
        node_sets = {}
        for name, ids in raw_node_sets.items():  # one pass per set
            new = result.node_map[ids]
            if np.any(new < 0):
                at = (nodes0[ids[new < 0][0]] / scale).round(6).tolist()
                warnings.warn(
                    f"{where}: node set {name!r}: {int(np.sum(new < 0))} node(s) are on no "
                    f"member after healing and were left out (first at {at} {units.name})",
                    SpaceframeWarning,
                    stacklevel=3,
                )
            node_sets[name] = np.unique(new[new >= 0]).astype(np.int64)
        report = result.report
    else:
        used = np.zeros(nodes0.shape[0], dtype=bool)
        used[members0.reshape(-1)] = True
        node_map = np.cumsum(used) - 1
        node_map[~used] = -1
        nodes, members = nodes0[used], node_map[members0]
        groups = raw_groups
        node_sets = {}
        for name, ids in raw_node_sets.items():
            mapped = node_map[ids]
            if np.any(mapped < 0):
                warnings.warn(
                    f"{where}: node set {name!r}: {int(np.sum(mapped < 0))} node(s) are on "
                    "no member and were left out",
                    SpaceframeWarning,
                    stacklevel=3,
                )
            node_sets[name] = mapped[mapped >= 0]

    # Panels: corners through the node map; a panel that lost a corner (on
    # no member) or collapsed below three corners is dropped and reported.
    flat = node_map[point_node[np.asarray(raw.face_nodes, dtype=np.int64)]]
    sizes = np.diff(raw.face_offsets)
    poly_of = np.repeat(np.arange(n_faces), sizes)
    lost = np.zeros(n_faces, dtype=bool)
    lost[poly_of[flat < 0]] = True
    flat, offsets = _dedupe_ring(flat, raw.face_offsets)
    small = np.diff(offsets) < 3
    dropped_faces = np.flatnonzero(lost | small)
    keep_face = ~(lost | small)

    if mid_member_key is not None:
        protected = np.unique(
            np.concatenate(
                [flat[np.repeat(keep_face, np.diff(offsets))]]
                + [np.asarray(v, dtype=np.int64) for v in node_sets.values()]
            )
        ).astype(np.int64)
        members, renumber, groups, kept_nodes, mid_info = _mid_member_step(
            nodes, members, groups, protected, merge_mid_nodes
        )
        nodes = nodes[kept_nodes]
        node_sets = {k: renumber[v] for k, v in node_sets.items()}
        flat = renumber[flat]
        meta[mid_member_key] = mid_info

    model = Model()
    model.add_nodes(nodes)
    try:
        model.add_members(members)
    except ModelError as exc:
        hint = (
            "read with heal=True to remove such members"
            if not heal
            else "switch the healing steps back on"
        )
        raise ReadError(f"{where}: the members do not form a valid frame ({exc}); {hint}") from exc
    for name, ids in groups.items():
        if ids.size:
            model.add_group(name, ids)
    for name, ids in node_sets.items():
        if ids.size:
            model.add_node_set(name, ids)

    face_ids = np.flatnonzero(keep_face)
    kept_sizes = np.diff(offsets)[keep_face]
    model.add_panels_flat(
        flat[np.repeat(keep_face, np.diff(offsets))],
        np.concatenate([[0], np.cumsum(kept_sizes)]),
    )
    new_face_id = np.full(n_faces, -1, dtype=np.int64)
    new_face_id[face_ids] = np.arange(face_ids.size)
    for name, ids in panel_sets.items():
        mapped = new_face_id[ids]
        mapped = mapped[mapped >= 0]
        if mapped.size:
            model.panel_groups[name] = np.unique(mapped)

    if raw.marker_points.shape[0]:
        model.add_markers(np.asarray(raw.marker_points, dtype=float) * scale, raw.marker_layers)

    if dropped_faces.size:
        corner_pts = pts[
            np.asarray(raw.face_nodes, dtype=np.int64)[raw.face_offsets[dropped_faces]]
        ]
        meta["io:dropped_panels"] = {
            "count": int(dropped_faces.size),
            "locations": corner_pts[:10],
        }
        warnings.warn(
            f"{where}: {dropped_faces.size} panel(s) dropped: a corner is on no member or the "
            f"panel has fewer than three distinct corners (first near "
            f"{(corner_pts[0] / scale).round(6).tolist()} {units.name})",
            SpaceframeWarning,
            stacklevel=3,
        )

    model.meta.update(meta)
    model.meta["source"] = where
    model.meta["units"] = units.as_dict()
    model.meta["io:ignored"] = raw.ignored
    if report is not None:
        model.meta["heal:report"] = report
    lo, hi = model.extents()
    model.meta["io:extents"] = {"min": lo.tolist(), "max": hi.tolist()}
    size = float(np.linalg.norm(hi - lo))
    if not (_PLAUSIBLE_SIZE_M[0] <= size <= _PLAUSIBLE_SIZE_M[1]):
        warnings.warn(
            f"{where}: the model is {size:.6g} m across (units {units.name!r}, "
            f"{units.source}); check the units",
            SpaceframeWarning,
            stacklevel=3,
        )
    return model


def _no_members_left(
    nodes: np.ndarray, members: np.ndarray, tol: float, units: Units, where: str
) -> None:
    """ReadError for a heal that left no member: say why, in the file's unit."""
    length = np.linalg.norm(nodes[members[:, 1]] - nodes[members[:, 0]], axis=1)
    n = int(members.shape[0])
    tol_text = f"{tol / units.scale:.4g} {units.name}"
    longest = f"{float(length.max()) / units.scale:.4g} {units.name}"
    if bool(np.all(length < tol)):
        why = f"all {n} members are shorter than the tolerance {tol_text}"
    else:
        why = (f"all {n} members collapsed when nodes closer than the tolerance {tol_text} "
               f"were merged (longest member {longest})")
    raise ReadError(f"{where}: healing left no member: {why}: are the units right "
                    f"(read as {units.name}, {units.source})?")


def require_members(raw: RawGeometry, where: str, edges_as_members: bool, hint: str) -> None:
    """ReadError when nothing in ``raw`` can become a member.

    Raises
    ------
    ReadError
        Naming the file, what was found instead, and ``hint``.
    """
    if raw.segments.shape[0] or (edges_as_members and raw.edges.shape[0]):
        return
    raise ReadError(
        f"{where}: no usable entities: nothing to make members of ({_found_text(raw)})"
        + (f"; {hint}" if hint else "")
    )


def _found_text(raw: RawGeometry) -> str:
    parts = []
    if raw.n_faces:
        parts.append(f"{raw.n_faces} faces")
    if raw.marker_points.shape[0]:
        parts.append(f"{raw.marker_points.shape[0]} points")
    for kind, entry in raw.ignored.items():
        parts.append(f"{entry['count']} ignored {kind}")
    return "found " + ", ".join(parts) if parts else "the file holds no geometry"


# ---------------------------------------------------------------------------
# Report
# ---------------------------------------------------------------------------


def read_report(model: Model) -> str:
    """Plain-text account of how a model was read: units, extents, counts, ignored, healing.

    Parameters
    ----------
    model : Model
        A model returned by :func:`spaceframe.io.read`.

    Returns
    -------
    str
        Several lines; extents are given in metres and in file units so that
        a millimetre/metre slip shows at a glance.
    """
    meta = model.meta
    units = meta.get("units", {"name": "m", "scale": 1.0, "source": "assumed"})
    scale, uname = float(units["scale"]), str(units["name"])
    lines = [f"Read {meta.get('source', '(not from a file)')}"]
    lines.append(f"  units: {uname} ({units.get('source', '')}), 1 {uname} = {scale:.6g} m")
    lo, hi = model.extents()
    span = hi - lo
    axes = ", ".join(
        f"{a} {lo[i]:.6g}..{hi[i]:.6g} m ({lo[i] / scale:.6g}..{hi[i] / scale:.6g} {uname})"
        for i, a in enumerate("xyz")
    )
    lines.append(f"  extents: {axes}")
    lines.append(f"  size: {span[0]:.6g} x {span[1]:.6g} x {span[2]:.6g} m")
    lines.append(
        f"  {model.n_nodes} nodes, {model.n_members} members, {len(model.groups)} groups, "
        f"{len(model.node_sets)} node sets, {model.n_panels} panels, "
        f"{model.markers.shape[0]} markers"
    )
    if model.groups:
        shown = ", ".join(f"{k!r} ({v.size})" for k, v in list(model.groups.items())[:20])
        more = ", ..." if len(model.groups) > 20 else ""
        lines.append(f"  groups: {shown}{more}")
    ignored = meta.get("io:ignored") or {}
    if ignored:
        lines.append("  ignored: " + describe_ignored(ignored, ignored))
    recover = meta.get("dxf:recover")
    if recover:
        lines.append(
            f"  damaged file, read by ezdxf.recover ({recover['reason']}); "
            f"{len(recover['fixes'])} fixes, {len(recover['errors'])} unfixed errors"
        )
        lines += [f"    fixed: {text}" for text in recover["fixes"][:10]]
        lines += [f"    error: {text}" for text in recover["errors"][:10]]
    mid = meta.get("mesh:mid_member_nodes")
    if mid:
        verb = "merged away" if mid.get("merged") else "found (merge_mid_nodes=True merges them)"
        lines.append(f"  mid-member nodes: {mid['count']} {verb}")
    dropped = meta.get("io:dropped_panels")
    if dropped:
        lines.append(f"  panels dropped: {dropped['count']}")
    report = meta.get("heal:report")
    if report is not None:
        lines += ["  " + line for line in report.format(scale, uname).splitlines()]
    return "\n".join(lines)
