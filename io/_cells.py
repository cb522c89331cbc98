"""Cells of a mesh in blocks of one kind: what every mesh reader fills."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np


@dataclass
class _Cells:
    """Cells of a mesh, grouped in blocks of one kind and size."""

    points: np.ndarray
    blocks: list[tuple[str, np.ndarray, np.ndarray]] = field(default_factory=list)
    sets: dict[str, np.ndarray] = field(default_factory=dict)
    point_sets: dict[str, np.ndarray] = field(default_factory=dict)
    ignored: dict[str, dict[str, Any]] = field(default_factory=dict)
    n_cells: int = 0
    extra: dict[str, Any] = field(default_factory=dict)

    def add(self, kind: str, conn: np.ndarray, ids: np.ndarray | None = None) -> np.ndarray:
        """Add a block; returns its global cell ids (consecutive unless given)."""
        conn = np.asarray(conn, dtype=np.int64)
        if conn.ndim == 1:
            conn = conn.reshape(-1, 1)
        if ids is None:
            ids = np.arange(self.n_cells, self.n_cells + conn.shape[0], dtype=np.int64)
            self.n_cells += conn.shape[0]
        self.blocks.append((kind, conn, ids))
        return ids
