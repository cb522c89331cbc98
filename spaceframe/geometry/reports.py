"""What healing reports: one StepReport per step, the HealReport and the HealResult."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.geometry._types import FloatArray, IntArray

#: Names of the healing steps, in the order :func:`heal` runs them.
STEP_NAMES = (
    "merge_nodes",
    "remove_zero_length",
    "split_at_nodes",
    "split_crossings",
    "remove_duplicates",
    "drop_unused_nodes",
    "components",
)


# A report lists only the first few places a step acted: enough to find the
# problem in the drawing without flooding the log for a million-line file.
_MAX_LOCATIONS = 10


# A node moved by less than this fraction of the tolerance moved by
# round-off (exactly coincident points in the drawing's own units that do
# not coincide in metres), not by a drawing error.
_ROUND_OFF = 1e-6


# Queries go to the k-d tree in chunks of this many points so the (chunk, k)
# result arrays stay a few tens of megabytes whatever the model size.
_QUERY_CHUNK = 1 << 20


# Sampling members more finely than this many points in all gives no benefit
# and would exhaust memory for a drawing with a few huge lines among tiny
# details; beyond it the sample spacing is widened.
_MAX_SAMPLES = 1 << 25


def _no_locations() -> FloatArray:
    return np.zeros((0, 3), dtype=np.float64)


def _positive_float(value: Any, not_number: str, not_positive: str | None = None) -> float:
    """``value`` as a finite float > 0.

    Raises ModelError ``"<not_number>; got <value>"`` when it is not a number,
    ``"<not_positive>; got <value>"`` (default the same) when not finite and > 0.
    """
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise ModelError(f"{not_number}; got {value!r}") from None
    if not (math.isfinite(number) and number > 0.0):
        raise ModelError(f"{not_positive or not_number}; got {value!r}")
    return number


@dataclass
class StepReport:
    """What one healing step did.

    Attributes
    ----------
    name : str
        Step name, one of :data:`STEP_NAMES`.
    count : int
        How many things the step changed (nodes removed by merging, members
        removed, members split, crossing nodes added, nodes dropped); for
        ``"components"`` the number of connected parts.  0 when the step did
        nothing or was switched off.
    locations : (k, 3) float
        Coordinates in metres of the first ``k <= 10`` places it acted.
    detail : str
        One human sentence describing what was done.
    skipped : bool
        True when the step was switched off by the caller.
    seconds : float
        Wall-clock time the step took.
    lengths : tuple of float
        Lengths in metres quoted in the detail (tolerance, largest move).
    template : str
        The detail with ``{0}``, ``{1}``, ... in place of ``lengths``, so
        that :meth:`format` prints them in drawing units ("" when the
        detail quotes no length).
    """

    name: str
    count: int
    locations: FloatArray = field(default_factory=_no_locations)
    detail: str = ""
    skipped: bool = False
    seconds: float = 0.0
    lengths: tuple[float, ...] = ()
    template: str = ""

    def format(self, scale: float = 1.0, unit: str = "m") -> str:
        """Describe the step with its locations in drawing units.

        Parameters
        ----------
        scale : float
            Metres per drawing unit; a location is printed as
            ``coordinate / scale`` (e.g. ``scale=0.001, unit="mm"``).
        unit : str
            Name of the drawing unit, printed after the locations.

        Returns
        -------
        str
            ``"name: detail"`` followed by the locations, if any.
        """
        factor = _positive_float(scale, "scale must be a finite positive number")
        detail = self.detail
        if self.template:
            detail = self.template.format(*(_unit_length(x, factor, unit) for x in self.lengths))
        text = f"{self.name}: {detail}"
        locs = np.asarray(self.locations, dtype=np.float64).reshape(-1, 3) / factor
        if len(locs):
            points = "; ".join(f"({x:.6g}, {y:.6g}, {z:.6g})" for x, y, z in locs.tolist())
            more = ", ..." if self.count > len(locs) else ""
            text += f" [at {points} {unit}{more}]"
        return text

    def as_dict(self) -> dict[str, Any]:
        """JSON-able dictionary of the step (locations in metres)."""
        return {
            "name": self.name,
            "count": int(self.count),
            "locations": np.asarray(self.locations, dtype=np.float64).reshape(-1, 3).tolist(),
            "detail": self.detail,
            "skipped": bool(self.skipped),
            "seconds": float(self.seconds),
        }


@dataclass
class HealReport:
    """Step-by-step account of a :func:`heal` run.

    Attributes
    ----------
    steps : list of StepReport
        One entry per step in :data:`STEP_NAMES`, in run order.
    n_components : int
        Number of connected parts of the healed frame.
    """

    steps: list[StepReport]
    n_components: int

    def step(self, name: str) -> StepReport:
        """Return the report of the step called ``name``."""
        for rep in self.steps:
            if rep.name == name:
                return rep
        raise KeyError(f"no healing step called {name!r}; steps are {[s.name for s in self.steps]}")

    def format(self, scale: float = 1.0, unit: str = "m") -> str:
        """Multi-line text of every step, locations in drawing units."""
        parts = "part" if self.n_components == 1 else "parts"
        lines = [f"Healing report: frame in {self.n_components} {parts}"]
        lines += ["  " + rep.format(scale, unit) for rep in self.steps]
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.format()

    def as_dict(self) -> dict[str, Any]:
        """JSON-able dictionary of the whole report."""
        return {
            "n_components": int(self.n_components),
            "steps": [rep.as_dict() for rep in self.steps],
        }


@dataclass
class HealResult:
    """A healed frame and the maps back to the raw input.

    Attributes
    ----------
    nodes : (n', 3) float
        Healed node coordinates, metres.
    members : (b', 2) int64
        Healed members as node-id pairs into ``nodes``.
    origin : (b',) int64
        For each healed member, the raw member it came from; the pieces of a
        split member share their origin.
    duplicates : (d, 2) int64
        Pairs ``(removed raw member, kept healed member)``: the kept member
        stands for the removed one too, so it should carry the groups of both.
    node_map : (n,) int64
        Raw node id -> healed node id, ``-1`` when the node was dropped.
    components : (n',) int64
        Connected-component label of each healed node, numbered from 0 in
        order of first node.
    report : HealReport
        What each step did.
    n_raw_members : int
        Number of raw members given to :func:`heal` (for checking ids).
    largest_move : float
        Largest distance, m, a raw node moved by merging (never more than
        the tolerance).
    short_removed : (s,) int64
        Raw members drawn with a length that merging made zero-length and
        healing removed (shorter than the tolerance); they are warned about.
    """

    nodes: FloatArray
    members: IntArray
    origin: IntArray
    duplicates: IntArray
    node_map: IntArray
    components: IntArray
    report: HealReport
    n_raw_members: int = -1
    largest_move: float = 0.0
    short_removed: IntArray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))


def _fmt_length(x: float) -> str:
    """Length in metres as short text, small lengths in mm."""
    if x < 1.0:
        return f"{x * 1e3:.3g} mm"
    return f"{x:.4g} m"


def _unit_length(x: float, scale: float, unit: str) -> str:
    """Length in metres as short text in a drawing unit (``scale`` metres per unit)."""
    return f"{x / scale:.4g} {unit}"


def _step(name: str, count: int, locations: FloatArray, template: str,
          lengths: tuple[float, ...] = ()) -> StepReport:
    """A step report whose detail quotes ``lengths`` (m) through ``template``."""
    detail = template.format(*(_fmt_length(x) for x in lengths))
    return StepReport(name, count, locations, detail, lengths=lengths, template=template)


def _skipped(name: str) -> StepReport:
    return StepReport(name, 0, _no_locations(), "skipped (switched off)", skipped=True)
