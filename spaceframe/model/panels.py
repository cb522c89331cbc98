"""Load panels (polygons of node ids) and marker points of a Model."""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.model.arrays import ModelArrays, _real_array

__all__ = ["Panels"]


class Panels(ModelArrays):
    """Adding load panels and marker points to the Model."""

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
