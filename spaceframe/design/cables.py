"""Cable presets: strand modulus and minimum breaking force, each with its source.

Every value here is recalled from the named standard without the text in hand
("from memory"): check it against the standard and the manufacturer's data
sheet before design use.  The breaking force follows the usual form
F_min = K d² R_r, with d the nominal diameter, R_r the wire tensile grade and
K the minimum breaking force factor of the construction.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from spaceframe.errors import ModelError

__all__ = ["CABLE_PRESETS", "CablePreset", "cable_preset"]


@dataclass(frozen=True)
class CablePreset:
    """A cable construction: strand modulus, fill and breaking-force terms."""

    #: The preset's name.
    name: str
    #: Modulus of the metallic area, Pa.
    E: float
    #: Metallic area / (pi d²/4).
    fill: float
    #: K in F_min = K d² R_r.
    breaking_factor: float
    #: Wire tensile grade R_r, Pa.
    grade: float
    #: Where the values come from.
    source: str

    def breaking_force(self, diameter: float) -> float:
        """Minimum breaking force F_min = K d² R_r, N, for a nominal diameter in m."""
        if not (isinstance(diameter, int | float) and math.isfinite(diameter) and diameter > 0):
            raise ModelError(f"cable {self.name!r}: diameter = {diameter!r} must be positive")
        return self.breaking_factor * diameter**2 * self.grade


CABLE_PRESETS: dict[str, CablePreset] = {
    "spiral-strand": CablePreset(
        "spiral-strand", E=150e9, fill=0.75, breaking_factor=0.525, grade=1570e6,
        source="E 150 kN/mm² for spiral strand, EN 1993-1-11 Table B.2; fill 0.75 and "
        "K 0.525 typical of 1x37 strands (all from memory: check the data sheet)",
    ),
    "full-locked-coil": CablePreset(
        "full-locked-coil", E=160e9, fill=0.85, breaking_factor=0.584, grade=1570e6,
        source="E 160 kN/mm² for full locked coil, EN 1993-1-11 Table B.2; fill and K "
        "typical of the construction (all from memory: check the data sheet)",
    ),
    "wire-rope-iwrc": CablePreset(
        "wire-rope-iwrc", E=100e9, fill=0.58, breaking_factor=0.356, grade=1770e6,
        source="E about 100 kN/mm² for strand ropes with a steel core, EN 1993-1-11 "
        "Table B.2; K of 6x36 IWRC ropes, EN 12385-4 (all from memory: check)",
    ),
}


def cable_preset(name: str) -> CablePreset:
    """A cable preset by name.

    Raises
    ------
    ModelError
        For an unknown name, listing the presets.
    """
    try:
        return CABLE_PRESETS[name]
    except KeyError:
        raise ModelError(
            f"unknown cable preset {name!r} (presets: {', '.join(CABLE_PRESETS)})"
        ) from None
