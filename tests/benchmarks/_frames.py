"""Generated grids of a given size for the benchmark scripts.

Sizes are member counts as typed on a command line: ``"20k"``, ``"1.5m"``
or ``"5000"``.  Import it as the scripts import ``grids`` (with this folder
on ``sys.path``).
"""

from __future__ import annotations

from grids import double_layer_grid, grid_for_members

import spaceframe as sf


def member_count(text: str) -> int:
    """Members in a size such as "100k", "1M" or "5000"."""
    t = text.lower()
    mult = 1_000_000 if t.endswith("m") else 1000 if t.endswith("k") else 1
    return int(float(t.rstrip("mk")) * mult)


def grid_of(text: str) -> sf.Model:
    """The most nearly square double-layer grid roof with about ``text`` members."""
    return double_layer_grid(*grid_for_members(member_count(text)))
