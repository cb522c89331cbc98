"""Area loads turned into nodal forces: pure array functions.

Load panels
-----------
A panel is a polygon of node ids; panel ``k`` has the nodes
``panel_nodes[panel_offsets[k]:panel_offsets[k + 1]]``.

*Normal.*  The panel's normal follows the right-hand rule of its node order:
seen from the side the normal points to, the nodes run counter-clockwise.
The vector area of a polygon p_0 .. p_(m-1) is ``a = 1/2 sum p_i x p_(i+1)``
(independent of the origin, so defined for warped panels too); the unit
normal is ``a / |a|``.

*Pressure sign.*  A pressure acts on the face the normal points out of:
positive pressure pushes on that face, i.e. the force is ``-p a`` (against
the normal); negative pressure (suction) pulls, along the normal.  With
normals pointing out of a building, this is the usual sign of external wind
pressure.

*Distribution rule (centroid fan).*  The panel is split into triangles from
its vertex centroid ``c`` (mean of its corner positions) to each edge.  Each
triangle's load goes a third to each of its three points, and the share at
``c`` is then shared equally by all corners of the panel.  For a uniform load
on a flat panel this is statically exact - the nodal forces have the
resultant and the moment of the distributed load - because a third to each
vertex is exact for a triangle and ``c`` is the mean of the corners.  A
triangle gets a third at each corner, a rectangle a quarter.

Plan tributary areas
--------------------
Roofs drawn as lines only (no panels) are loaded by the plan tributary area
of selected nodes: the Voronoi cell of each node's plan position, clipped to
an outline polygon (by default the convex hull of the nodes).  Voronoi
neighbours come from :class:`scipy.spatial.Voronoi`; each cell is the
intersection of the half-planes of its neighbours' bisectors, and the outline
is clipped by those half-planes (Sutherland-Hodgman), vectorised over all
nodes at once.  The clip is written here because neither numpy nor scipy
clips polygons; a geometry library (shapely) would add a dependency for these
few lines.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any

import numpy as np

from spaceframe.errors import ModelError

__all__ = [
    "panel_normal_loads",
    "panel_plan_loads",
    "panel_surface_loads",
    "panel_vector_areas",
    "tributary_plan_areas",
    "tributary_plan_loads",
]


def _fan(
    nodes: np.ndarray, panel_nodes: np.ndarray, panel_offsets: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Triangles of the centroid fan of every panel, one per panel edge.

    Returns
    -------
    owner : (t,) int
        Panel of each triangle (t = len(panel_nodes)).
    a, b : (t,) int
        The two corner node ids of each triangle's panel edge.
    vec : (t, 3) float
        Vector area of each triangle (c, p_a, p_b), m².
    sizes : (k,) int
        Corners per panel.
    """
    offsets = np.asarray(panel_offsets, dtype=np.int64)
    corners = np.asarray(panel_nodes, dtype=np.int64)
    sizes = np.diff(offsets)
    k = sizes.size
    owner = np.repeat(np.arange(k), sizes)
    nxt = np.arange(corners.size) + 1
    nxt[offsets[1:] - 1] = offsets[:-1]
    pts = nodes[corners]
    centre = np.stack(
        [np.bincount(owner, pts[:, j], minlength=k) for j in range(3)], axis=1
    ) / np.maximum(sizes, np.ones_like(sizes))[:, None]
    rel = pts - centre[owner]
    vec = 0.5 * np.cross(rel, rel[nxt])
    return owner, corners, corners[nxt], vec, sizes


def _spread(
    n_nodes: int,
    owner: np.ndarray,
    a: np.ndarray,
    b: np.ndarray,
    sizes: np.ndarray,
    force: np.ndarray,
    corners: np.ndarray,
) -> np.ndarray:
    """Nodal forces from triangle forces by the centroid-fan rule."""
    third = force / 3.0
    k = sizes.size
    centre_share = np.stack(
        [np.bincount(owner, third[:, j], minlength=k) for j in range(3)], axis=1
    ) / np.maximum(sizes, np.ones_like(sizes))[:, None]
    out = np.zeros((n_nodes, 3))
    for j in range(3):  # three components, not a loop over nodes
        out[:, j] = (
            np.bincount(a, third[:, j], minlength=n_nodes)
            + np.bincount(b, third[:, j], minlength=n_nodes)
            + np.bincount(corners, centre_share[owner, j], minlength=n_nodes)
        )
    return out


def _per_panel(value: Any, k: int, name: str) -> np.ndarray:
    arr = np.asarray(value, dtype=float)
    if arr.ndim == 0:
        arr = np.full(k, float(arr))
    if arr.shape != (k,):
        raise ModelError(
            f"{name}: expected a scalar or {k} values (one per panel), got shape {arr.shape}"
        )
    bad = np.flatnonzero(~np.isfinite(arr))
    if bad.size:
        raise ModelError(f"{name}: value for panel {int(bad[0])} is {float(arr[bad[0]])!r}")
    return arr


def _check_panels(nodes: np.ndarray, panel_nodes: np.ndarray, panel_offsets: np.ndarray) -> None:
    offsets = np.asarray(panel_offsets)
    if offsets.ndim != 1 or offsets.size < 1 or offsets[0] != 0 or offsets[-1] != len(panel_nodes):
        raise ModelError(
            f"panel_offsets must start at 0 and end at len(panel_nodes) = {len(panel_nodes)}"
        )
    small = np.flatnonzero(np.diff(offsets) < 3)
    if small.size:
        k = int(small[0])
        raise ModelError(f"panel {k} has {int(offsets[k + 1] - offsets[k])} corners, needs 3")
    ids = np.asarray(panel_nodes)
    bad = np.flatnonzero((ids < 0) | (ids >= len(nodes)))
    if bad.size:
        raise ModelError(f"panel corner entry {int(bad[0])} is node {int(ids[bad[0]])}, "
                         f"which does not exist (nodes 0..{len(nodes) - 1})")


#: A panel whose true area is below this fraction of the square of its size
#: (largest corner distance from its centroid) has zero area: its corners
#: coincide or lie on one line.  1e-8 is a sliver with an aspect ratio of
#: about 1e8, far thinner than any panel drawn on purpose, and well above
#: the round-off of corner coordinates at site coordinates (~1e-9 relative
#: for a 1 m panel 6000 km from the origin).
_ZERO_AREA = 1e-8


def _refuse_zero_area(nodes: np.ndarray, panel_nodes: np.ndarray, owner: np.ndarray,
                      vec: np.ndarray, sizes: np.ndarray, loaded: np.ndarray) -> None:
    """ModelError naming the first loaded panel of zero area."""
    k = sizes.size
    area = np.linalg.norm(
        np.stack([np.bincount(owner, vec[:, j], minlength=k) for j in range(3)], 1), axis=1
    )
    pts = nodes[np.asarray(panel_nodes, dtype=np.int64)]
    centre = np.stack(
        [np.bincount(owner, pts[:, j], minlength=k) for j in range(3)], axis=1
    ) / np.maximum(sizes, np.ones_like(sizes))[:, None]
    r2 = np.zeros(k)
    np.maximum.at(r2, owner, np.einsum("ij,ij->i", pts - centre[owner], pts - centre[owner]))
    flat = loaded & (area <= _ZERO_AREA * r2)
    bad = np.flatnonzero(flat)
    if bad.size:
        i = int(bad[0])
        raise ModelError(
            f"load panel {i} has zero area (its corners coincide or lie on one line) and "
            f"cannot carry an area load ({bad.size} such panel(s); first corners "
            f"{pts[owner == i][:4].round(6).tolist()} m)"
        )


def panel_vector_areas(
    nodes: np.ndarray, panel_nodes: np.ndarray, panel_offsets: np.ndarray
) -> np.ndarray:
    """Vector area of every panel (area times unit normal, right-hand rule), m².

    Parameters
    ----------
    nodes, panel_nodes, panel_offsets : (n, 3) float, (s,) int, (k + 1,) int
        Node coordinates (m) and the panels, as in the module notes.

    Returns
    -------
    a : (k, 3) float
    """
    _check_panels(nodes, panel_nodes, panel_offsets)
    owner, _, _, vec, sizes = _fan(nodes, panel_nodes, panel_offsets)
    return np.stack([np.bincount(owner, vec[:, j], minlength=sizes.size) for j in range(3)], 1)


def _panel_load(
    nodes: Any,
    panel_nodes: Any,
    panel_offsets: Any,
    value: Any,
    name: str,
    force: Callable[[np.ndarray, np.ndarray], np.ndarray],
) -> np.ndarray:
    """Nodal forces of a per-panel ``value`` (a scalar or one per panel).

    ``force(vec, v)`` gives the (t, 3) force of each fan triangle from its
    vector area and its panel's value; panels of zero area may not be loaded.
    """
    nodes = np.asarray(nodes, dtype=float)
    _check_panels(nodes, panel_nodes, panel_offsets)
    owner, a, b, vec, sizes = _fan(nodes, panel_nodes, panel_offsets)
    v = _per_panel(value, sizes.size, name)
    _refuse_zero_area(nodes, panel_nodes, owner, vec, sizes, v != 0)
    return _spread(nodes.shape[0], owner, a, b, sizes, force(vec, v[owner]),
                   np.asarray(panel_nodes, dtype=np.int64))


def panel_normal_loads(
    nodes: np.ndarray, panel_nodes: np.ndarray, panel_offsets: np.ndarray, pressure: Any
) -> np.ndarray:
    """Nodal forces of a pressure acting normal to each panel.

    Parameters
    ----------
    nodes, panel_nodes, panel_offsets : (n, 3) float, (s,) int, (k + 1,) int
        Node coordinates (m) and the panels, as in the module notes.
    pressure : float or (k,) float
        Pa; positive pushes on the face the normal points out of (force
        against the normal), negative is suction.  See the module notes.

    Returns
    -------
    forces : (n, 3) float
        N.  They sum to ``-sum_k p_k a_k``.
    """
    return _panel_load(nodes, panel_nodes, panel_offsets, pressure, "pressure",
                       lambda vec, p: -p[:, None] * vec)


def _vertical_load(
    nodes: Any, panel_nodes: Any, panel_offsets: Any, load: Any, *, plan: bool
) -> np.ndarray:
    """Load along -z per plan area (``plan``) or per true surface area, to the corners."""

    def force(vec: np.ndarray, q: np.ndarray) -> np.ndarray:
        # Each fan triangle's vector area: its z component is its plan area,
        # its length its true area.
        area = np.abs(vec[:, 2]) if plan else np.linalg.norm(vec, axis=1)
        out = np.zeros_like(vec)
        out[:, 2] = -q * area
        return out

    return _panel_load(nodes, panel_nodes, panel_offsets, load, "load", force)


def panel_plan_loads(
    nodes: np.ndarray, panel_nodes: np.ndarray, panel_offsets: np.ndarray, load: Any
) -> np.ndarray:
    """Nodal forces of a load per unit plan area acting along -z (e.g. snow).

    Each fan triangle carries ``load`` times its area projected on the xy
    plane; a vertical panel carries nothing.

    Parameters
    ----------
    nodes, panel_nodes, panel_offsets : (n, 3) float, (s,) int, (k + 1,) int
        Node coordinates (m) and the panels, as in the module notes.
    load : float or (k,) float
        Pa of plan area; positive acts downwards.

    Returns
    -------
    forces : (n, 3) float
        N; only the z components are non-zero.
    """
    return _vertical_load(nodes, panel_nodes, panel_offsets, load, plan=True)


def panel_surface_loads(
    nodes: np.ndarray, panel_nodes: np.ndarray, panel_offsets: np.ndarray, load: Any
) -> np.ndarray:
    """Nodal forces of a load per unit surface area acting along -z (e.g. cladding weight).

    As :func:`panel_plan_loads`, but ``load`` is in Pa of true (sloping)
    surface area (positive acts downwards), so a vertical panel carries its
    share too.
    """
    return _vertical_load(nodes, panel_nodes, panel_offsets, load, plan=False)


# ------------------------------------------------------ plan tributary areas
#: Relative size (to the extent of the points) below which two plan
#: positions count as the same point, or the points as lying on one line:
#: far below any node spacing, far above round-off.
_PLAN_COINCIDENT = 1e-9

#: Relative mismatch allowed between the sum of the tributary areas and the
#: outline's area: round-off of the clipping is ~1e-15 per cell; 1e-9 still
#: catches any lost or doubled cell.
_AREA_SUM = 1e-9


def _coincident_pair(pts: np.ndarray) -> tuple[int, int] | None:
    """Two plan points at the same position (to a relative tolerance), if any."""
    if pts.shape[0] < 2:
        return None
    from scipy.spatial import cKDTree

    extent = max(float(np.ptp(pts, axis=0).max()), 1e-300)
    pairs = cKDTree(pts).query_pairs(_PLAN_COINCIDENT * extent, output_type="ndarray")
    if pairs.size == 0:
        return None
    first = pairs[np.lexsort((pairs[:, 1], pairs[:, 0]))[0]]
    return int(first[0]), int(first[1])


def _neighbour_pairs(xy: np.ndarray) -> np.ndarray:
    """(p, 2) int: Voronoi neighbour pairs of plan points."""
    k = xy.shape[0]
    if k < 2:
        return np.zeros((0, 2), dtype=np.int64)
    centred = xy - xy.mean(axis=0)
    sv = np.linalg.svd(centred, compute_uv=False)
    if k == 2 or sv[1] <= _PLAN_COINCIDENT * max(sv[0], 1e-300):
        # Collinear points: cells are strips between bisectors of consecutive
        # points along the line (Qhull cannot triangulate a line).
        direction = np.linalg.svd(centred, full_matrices=False)[2][0]
        order = np.argsort(centred @ direction, kind="stable")
        return np.stack([order[:-1], order[1:]], axis=1)
    from scipy.spatial import QhullError, Voronoi

    try:
        vor = Voronoi(xy)
    except QhullError as exc:
        raise ModelError(f"tributary areas: Qhull could not build the Voronoi diagram ({exc})") \
            from None
    return np.asarray(vor.ridge_points, dtype=np.int64)


def _clip(poly: np.ndarray, count: np.ndarray, w: np.ndarray, c: np.ndarray
          ) -> tuple[np.ndarray, np.ndarray]:
    """Clip each padded polygon by its half-plane {x : w.x <= c} (Sutherland-Hodgman).

    poly (k, M, 2), count (k,), w (k, 2), c (k,); returns the clipped padded
    polygons and their vertex counts.
    """
    k, big, _ = poly.shape
    j = np.arange(big)
    valid = j[None, :] < count[:, None]
    # Index of the next vertex, wrapping to 0 after the last valid one.
    nxt = (j[None, :] + 1) * (j[None, :] + 1 < count[:, None])
    nxt_pts = np.take_along_axis(poly, nxt[:, :, None], axis=1)
    s = np.einsum("kmi,ki->km", poly, w) - c[:, None]
    s_next = np.take_along_axis(s, nxt, axis=1)
    inside = s <= 0
    inside_next = s_next <= 0
    crossing = valid & (inside != inside_next)
    with np.errstate(invalid="ignore", divide="ignore"):
        t = np.where(crossing, s / (s - s_next), np.zeros_like(s))
    cut = poly + t[:, :, None] * (nxt_pts - poly)
    out = np.empty((k, 2 * big, 2))
    out[:, 0::2] = poly
    out[:, 1::2] = cut
    keep = np.empty((k, 2 * big), dtype=bool)
    keep[:, 0::2] = valid & inside
    keep[:, 1::2] = crossing
    order = np.argsort(~keep, axis=1, kind="stable")
    new_count = keep.sum(axis=1)
    width = max(int(new_count.max(initial=0)), 1)
    out = np.take_along_axis(out, order[:, :width, None], axis=1)
    return out, new_count


def _padded_area(poly: np.ndarray, count: np.ndarray) -> np.ndarray:
    big = poly.shape[1]
    j = np.arange(big)
    valid = j[None, :] < count[:, None]
    # Index of the next vertex, wrapping to 0 after the last valid one.
    nxt = (j[None, :] + 1) * (j[None, :] + 1 < count[:, None])
    q = np.take_along_axis(poly, nxt[:, :, None], axis=1)
    cross = poly[:, :, 0] * q[:, :, 1] - q[:, :, 0] * poly[:, :, 1]
    return 0.5 * np.abs((cross * valid).sum(axis=1))


def tributary_plan_areas(xy: Any, outline: Any = None) -> np.ndarray:
    """Plan tributary area of each point: its Voronoi cell clipped to an outline.

    Parameters
    ----------
    xy : (k, 2) float
        Plan positions, m.
    outline : (m, 2) float, optional
        Simple polygon (either orientation, convex or not) bounding the loaded
        area, m.  Default: the convex hull of ``xy``.

    Returns
    -------
    areas : (k,) float
        m²; they sum to the outline's area when every part of the outline is
        nearest to some point (always, for points inside it).

    Raises
    ------
    ModelError
        On bad shapes or values, two points at the same plan position, points
        on one line without an outline, an outline of zero area, or cells
        that do not add up to the outline's area (an outline that crosses
        itself).  The work is done relative to the centre of the points, so
        site coordinates give the same areas as coordinates near the origin.
    """
    pts = np.asarray(xy, dtype=float)
    if pts.ndim != 2 or pts.shape[1] != 2 or pts.shape[0] == 0:
        raise ModelError(f"tributary areas: expected (k, 2) plan positions, got shape {pts.shape}")
    if not np.all(np.isfinite(pts)):
        i = int(np.argwhere(~np.isfinite(pts))[0, 0])
        raise ModelError(f"tributary areas: point {i} is {pts[i].tolist()}")
    # Work relative to a local origin: at site coordinates (~1e6 m) the
    # bisector offsets and area cross products of absolute coordinates lose
    # all their digits to cancellation.
    local = 0.5 * (pts.min(axis=0) + pts.max(axis=0))
    pts = pts - local
    same = _coincident_pair(pts)
    if same is not None:
        i, j = same
        raise ModelError(
            f"tributary areas: points {i} and {j} share the plan position "
            f"{pts[i].tolist()} (e.g. nodes above one another): select one layer only"
        )
    if outline is None:
        if pts.shape[0] < 3:
            raise ModelError("tributary areas: give an outline for fewer than three points")
        centred = pts - pts.mean(axis=0)
        sv = np.linalg.svd(centred, compute_uv=False)
        if sv[1] <= _PLAN_COINCIDENT * sv[0]:
            raise ModelError(
                "tributary areas: the points lie on one line in plan, so their convex hull "
                "has no area: give an outline"
            )
        from scipy.spatial import ConvexHull

        ring = pts[ConvexHull(pts).vertices]
    else:
        ring = np.asarray(outline, dtype=float)
        if ring.ndim != 2 or ring.shape[1] != 2 or ring.shape[0] < 3:
            raise ModelError(
                f"tributary areas: outline must be (m >= 3, 2) plan points, got shape {ring.shape}"
            )
        if not np.all(np.isfinite(ring)):
            raise ModelError("tributary areas: outline has a non-finite coordinate")
        ring = ring - local
        if np.allclose(ring[0], ring[-1]):
            ring = ring[:-1]
        ring_area = _padded_area(ring[None], np.array([ring.shape[0]]))[0]
        if ring.shape[0] < 3 or ring_area <= 0:
            raise ModelError("tributary areas: the outline has zero area")

    k = pts.shape[0]
    pairs = _neighbour_pairs(pts)
    # Half-planes of each point's cell: for neighbour pair (i, j) the point i
    # keeps {x : (p_j - p_i).x <= (p_j - p_i).(p_i + p_j)/2} and j the opposite.
    own = np.concatenate([pairs[:, 0], pairs[:, 1]])
    other = np.concatenate([pairs[:, 1], pairs[:, 0]])
    w = pts[other] - pts[own]
    c = np.einsum("ij,ij->i", w, 0.5 * (pts[other] + pts[own]))
    order = np.argsort(own, kind="stable")
    own, w, c = own[order], w[order], c[order]
    per_point = np.bincount(own, minlength=k)
    width = int(per_point.max()) if per_point.size else 0
    slot = np.arange(own.size) - np.repeat(np.cumsum(per_point) - per_point, per_point)
    # Padding half-planes 0.x <= 1 keep everything.
    W = np.zeros((k, width, 2))
    C = np.ones((k, width))
    W[own, slot] = w
    C[own, slot] = c

    poly = np.broadcast_to(ring, (k, *ring.shape)).copy()
    count = np.full(k, ring.shape[0])
    for col in range(width):  # one pass per neighbour slot, all points at once
        poly, count = _clip(poly, count, W[:, col], C[:, col])
    areas = _padded_area(poly, count)
    # The cells tile the plane, so the areas must add up to the outline's.
    total = float(_padded_area(ring[None], np.array([ring.shape[0]]))[0])
    got = float(areas.sum())
    if not (math.isfinite(got) and abs(got - total) <= _AREA_SUM * total):
        raise ModelError(
            f"tributary areas: the {k} cells add up to {got:.6g} m^2 but the outline is "
            f"{total:.6g} m^2: does the outline cross itself?"
        )
    return areas


def tributary_plan_loads(
    nodes: np.ndarray, node_ids: Any, load: float, outline: Any = None
) -> np.ndarray:
    """Nodal forces along -z of a load per plan area, by plan tributary areas.

    Parameters
    ----------
    nodes : (n, 3) float
        Node coordinates, m.
    node_ids : (k,) int
        Nodes that carry the load (unique).
    load : float
        Pa of plan area; positive acts downwards.
    outline : (m, 2) float, optional
        Loaded outline in plan, m (default: convex hull of the nodes).

    Returns
    -------
    forces : (n, 3) float
        N; ``-load`` times each node's tributary area in z.
    """
    nodes = np.asarray(nodes, dtype=float)
    ids = np.asarray(node_ids, dtype=np.int64).ravel()
    if np.unique(ids).size != ids.size:
        raise ModelError("tributary loads: node ids repeat")
    q = float(load)
    if not math.isfinite(q):
        raise ModelError(f"tributary loads: load = {load!r} is not finite")
    same = _coincident_pair(nodes[ids, :2])
    if same is not None:
        i, j = (int(ids[v]) for v in same)
        raise ModelError(
            f"tributary loads: nodes {i} and {j} share the plan position "
            f"{nodes[i, :2].tolist()} (e.g. one above the other): select one layer only"
        )
    areas = tributary_plan_areas(nodes[ids, :2], outline)
    out = np.zeros((nodes.shape[0], 3))
    out[ids, 2] = -q * areas
    return out
