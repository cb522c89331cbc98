"""Small frames built the same way in several test files."""

from __future__ import annotations

import spaceframe as sf


def pinned_bar(length: float, area: float, E: float) -> sf.Model:
    """One bar along x from the origin (node 0, pinned) to node 1 at (length, 0, 0), free."""
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [length, 0, 0]])
    m.add_members([[0, 1]], area=area, E=E)
    m.add_support([0])
    return m
