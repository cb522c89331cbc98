"""Node and member keys that compare frames read from different files, whatever their ids."""

from __future__ import annotations

import numpy as np

import spaceframe as sf


def coords_set(model: sf.Model) -> set[tuple[float, ...]]:
    """Node coordinates, rounded to 1e-9 m."""
    return {tuple(np.round(p, 9)) for p in model.nodes.tolist()}


def member_keys(
    model: sf.Model, ids: np.ndarray | None = None
) -> set[frozenset[tuple[float, ...]]]:
    """Members as unordered pairs of rounded end coordinates (independent of node ids)."""
    pairs = model.members if ids is None else model.members[ids]
    xyz = np.round(model.nodes, 9)
    return {frozenset((tuple(xyz[i]), tuple(xyz[j]))) for i, j in pairs.tolist()}
