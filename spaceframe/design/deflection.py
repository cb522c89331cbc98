"""Deflection limits as span / ratio.

EN 1990 Annex A1.4 leaves the limits to the national annex and the project;
the default ratio of 250 for a roof's vertical deflection is common
practice, not a clause, and the span defaults to the larger plan dimension of
the supported nodes' extent.  Both are arguments.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import ModelError

if TYPE_CHECKING:
    from spaceframe.model import Model

__all__ = ["DEFAULT_RATIO", "DeflectionCheck", "check_deflection"]

#: span / 250: a common-practice default for roofs (no clause).
DEFAULT_RATIO = 250.0
_AXES = {"x": 0, "y": 1, "z": 2}


@dataclass(frozen=True)
class DeflectionCheck:
    """Largest deflection of the selected nodes against span / ratio."""

    #: Name of the result (load case or combination) checked.
    result: str
    #: Span, m.
    span: float
    #: The ratio in the limit span / ratio.
    ratio: float
    #: span / ratio, m.
    limit: float
    #: Largest absolute displacement along ``direction`` of the selected nodes, m.
    deflection: float
    #: The node where it occurs.
    node: int
    #: The axis checked, "x", "y" or "z".
    direction: str

    @property
    def passes(self) -> bool:
        """Deflection within the limit."""
        return self.deflection <= self.limit

    @property
    def utilisation(self) -> float:
        """Deflection / limit."""
        return self.deflection / self.limit


def default_span(model: Model) -> float:
    """The larger plan dimension (x or y) of the supported nodes' extent, m."""
    held = np.flatnonzero(model.restraint.any(axis=1) | (model.springs > 0).any(axis=1))
    if held.size < 2:
        raise ModelError("deflection check: fewer than two supported nodes; give the span")
    xy = model.nodes[held, :2]
    span = float(np.max(xy.max(axis=0) - xy.min(axis=0)))
    if not span > 0:
        raise ModelError("deflection check: the supports share one plan position; give the span")
    return span


def check_deflection(
    model: Model,
    result: Any,
    *,
    nodes: Any = None,
    span: float | None = None,
    ratio: float = DEFAULT_RATIO,
    direction: str = "z",
) -> DeflectionCheck:
    """Check the largest deflection of ``nodes`` (default all) in one result.

    Raises
    ------
    ModelError
        On a bad ratio, span, direction or node id, or a non-finite displacement.
    """
    if direction not in _AXES:
        raise ModelError(f"deflection check: direction {direction!r} must be x, y or z")
    if not (isinstance(ratio, int | float) and np.isfinite(ratio) and ratio > 0):
        raise ModelError(f"deflection check: ratio = {ratio!r} must be a positive number")
    s = default_span(model) if span is None else float(span)
    if not (np.isfinite(s) and s > 0):
        raise ModelError(f"deflection check: span = {span!r} must be a positive length")
    u = np.asarray(result.displacements, dtype=float)[:, _AXES[direction]]
    ids = np.arange(model.n_nodes) if nodes is None else np.atleast_1d(np.asarray(nodes))
    if ids.size == 0 or not np.issubdtype(ids.dtype, np.integer):
        raise ModelError("deflection check: nodes must be a non-empty list of node ids")
    bad = ids[(ids < 0) | (ids >= model.n_nodes)]
    if bad.size:
        raise ModelError(f"deflection check: node {int(bad[0])} does not exist")
    sel = np.abs(u[ids])
    if not np.all(np.isfinite(sel)):
        raise ModelError("deflection check: the result holds non-finite displacements")
    k = int(np.argmax(sel))
    return DeflectionCheck(
        result=str(getattr(result, "name", "")),
        span=s,
        ratio=float(ratio),
        limit=s / float(ratio),
        deflection=float(sel[k]),
        node=int(ids[k]),
        direction=direction,
    )
