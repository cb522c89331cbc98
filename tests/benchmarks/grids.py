"""Generated double-layer grid roofs for benchmarks and scaling tests.

A square-on-square offset grid: a top layer of square bays, a bottom layer of
nodes under the bay centres, top chords, bottom chords and four diagonals from
every bottom node up to the corners of its bay.  The member count is exactly
``8 nx ny`` (see :func:`grid_for_members`), so a grid of any size is picked by
its number of members.

Everything is built by index arithmetic on ``(ny, nx)`` id arrays; no Python
loop runs over nodes or members, so a million-member roof builds in seconds.
"""

from __future__ import annotations

import math
import operator

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.model import Model

__all__ = ["ROOF_CASE", "double_layer_grid", "grid_for_members"]

#: Name of the load case that :func:`double_layer_grid` adds.
ROOF_CASE = "roof"


def _bays(value: object, name: str) -> int:
    try:
        k = operator.index(value)  # type: ignore[arg-type]
    except TypeError:
        raise ModelError(f"double_layer_grid: {name} must be an integer, got {value!r}") from None
    if k < 1:
        raise ModelError(f"double_layer_grid: {name} = {k}: needs at least one bay")
    return int(k)


def double_layer_grid(
    nx: int,
    ny: int,
    spacing: float = 3.0,
    depth: float = 2.0,
    area: float = 1.1e-3,
    E: float = 210e9,
    density: float = 7850.0,
    node_load: float = 12.0e3,
) -> Model:
    """A square-on-square double-layer grid roof, pinned along its top perimeter.

    Node numbering: top node (i, j), i = 0..nx along x and j = 0..ny along y,
    is ``j (nx + 1) + i`` at ``(i s, j s, 0)``; bottom node (i, j), i < nx,
    j < ny, is ``(nx + 1)(ny + 1) + j nx + i`` at ``((i + 1/2) s, (j + 1/2) s,
    -depth)``.

    Parameters
    ----------
    nx, ny : int
        Number of bays along x and y (at least 1 each).
    spacing : float
        Bay size s, m.
    depth : float
        Distance between the layers, m.
    area : float
        Cross-section area of every member, m² (the default is about that of
        a 114.3 x 3.2 mm circular hollow section).
    E : float
        Young's modulus, Pa.
    density : float
        Mass density, kg/m³.
    node_load : float
        Downward force on every top node in load case ``"roof"``, N (the
        default is 1.33 kPa on a 3 m x 3 m bay).

    Returns
    -------
    Model
        ``(nx + 1)(ny + 1) + nx ny`` nodes and ``8 nx ny`` members, in groups
        ``"top chords"``, ``"bottom chords"`` and ``"diagonals"``; node sets
        ``"top"``, ``"bottom"`` and ``"supports"``; every top perimeter node
        pinned in x, y and z; one load case ``"roof"``.

    Raises
    ------
    ModelError
        If ``nx`` or ``ny`` is not a positive integer, or a dimension or
        property is not a positive finite number.
    """
    nx = _bays(nx, "nx")
    ny = _bays(ny, "ny")
    for name, value in (("spacing", spacing), ("depth", depth)):
        if not (math.isfinite(value) and value > 0):
            raise ModelError(f"double_layer_grid: {name} = {value!r}: must be a positive length")

    n_top = (nx + 1) * (ny + 1)
    top = np.arange(n_top, dtype=np.int64).reshape(ny + 1, nx + 1)
    bottom = n_top + np.arange(nx * ny, dtype=np.int64).reshape(ny, nx)

    jt, it = np.divmod(np.arange(n_top), nx + 1)
    jb, ib = np.divmod(np.arange(nx * ny), nx)
    xyz = np.concatenate(
        [
            np.c_[it * spacing, jt * spacing, np.zeros(n_top)],
            np.c_[(ib + 0.5) * spacing, (jb + 0.5) * spacing, np.full(nx * ny, -depth)],
        ]
    )

    def pairs(a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return np.c_[a.ravel(), b.ravel()]

    top_chords = np.concatenate(
        [pairs(top[:, :-1], top[:, 1:]), pairs(top[:-1, :], top[1:, :])]
    )
    bottom_chords = np.concatenate(
        [pairs(bottom[:, :-1], bottom[:, 1:]), pairs(bottom[:-1, :], bottom[1:, :])]
    )
    diagonals = np.concatenate(
        [
            pairs(bottom, top[:-1, :-1]),
            pairs(bottom, top[:-1, 1:]),
            pairs(bottom, top[1:, :-1]),
            pairs(bottom, top[1:, 1:]),
        ]
    )

    model = Model()
    model.add_nodes(xyz)
    props = {"area": area, "E": E, "density": density}
    model.add_members(top_chords, group="top chords", **props)
    model.add_members(bottom_chords, group="bottom chords", **props)
    model.add_members(diagonals, group="diagonals", **props)

    rim = np.zeros(top.shape, dtype=bool)
    rim[[0, -1], :] = True
    rim[:, [0, -1]] = True
    supports = top[rim]
    model.add_support(supports)
    model.add_node_set("top", top.ravel())
    model.add_node_set("bottom", bottom.ravel())
    model.add_node_set("supports", supports)
    model.add_load(ROOF_CASE, top.ravel(), (0.0, 0.0, -node_load))
    model.meta["source"] = f"double_layer_grid({nx}, {ny})"
    return model


def grid_for_members(target_members: int) -> tuple[int, int]:
    """Bays ``(nx, ny)`` of the most nearly square grid with about this many members.

    The grid has ``8 nx ny`` members, so ``nx = round(sqrt(target / 8))`` and
    ``ny`` is then chosen to bring ``8 nx ny`` nearest the target.

    Raises
    ------
    ModelError
        If ``target_members`` is not a positive integer.
    """
    try:
        target = operator.index(target_members)
    except TypeError:
        raise ModelError(
            f"grid_for_members: target_members must be an integer, got {target_members!r}"
        ) from None
    if target < 1:
        raise ModelError(f"grid_for_members: target_members = {target}: must be positive")
    nx = max(1, round(math.sqrt(target / 8)))
    ny = max(1, round(target / (8 * nx)))
    return nx, ny
