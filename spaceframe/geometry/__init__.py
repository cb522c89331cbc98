"""Healing of raw space-frame centrelines into a clean pin-jointed frame.

Centrelines taken from drawings are rarely a clean frame: joints miss by a
fraction of a millimetre, a chord is drawn as one long line through the
joints where the diagonals end, lines are drawn twice, and some lines have
both ends on the same point.  :func:`heal` turns raw ``(nodes, members)``
into a clean frame and reports every change it made, step by step.

All functions here work on plain arrays: ``nodes`` is an ``(n, 3)`` float
array of coordinates in metres and ``members`` an ``(b, 2)`` integer array of
node ids.  Nothing reads or writes files.

The search for "which nodes lie on which member" and "which members cross"
is done with a k-d tree over points sampled along the members, followed by
an exact vectorised distance test, so the cost grows with the total member
length over the node spacing rather than with the square of the size.
"""

from spaceframe.geometry.checks import check_coordinate_range
from spaceframe.geometry.graph import connected_components, merge_close_nodes
from spaceframe.geometry.heal import heal, remap_groups, remap_node_sets
from spaceframe.geometry.members import find_mid_member_nodes, merge_collinear_chains
from spaceframe.geometry.reports import STEP_NAMES, HealReport, HealResult, StepReport

__all__ = [
    "STEP_NAMES",
    "HealReport",
    "HealResult",
    "StepReport",
    "check_coordinate_range",
    "connected_components",
    "find_mid_member_nodes",
    "heal",
    "merge_close_nodes",
    "merge_collinear_chains",
    "remap_groups",
    "remap_node_sets",
]
