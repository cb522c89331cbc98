"""Materials: elastic constants, density, thermal expansion and strengths, in SI.

Presets carry the source of every value.  Values marked "from memory" were
recalled from the named standard without the text in hand and should be
checked against it before design use.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType

from spaceframe.errors import ModelError

__all__ = ["PRESETS", "Material", "preset", "preset_names"]


@dataclass(frozen=True)
class Material:
    """An isotropic linear-elastic material, in SI.

    Raises
    ------
    ModelError
        From the constructor, on a non-positive or non-finite E, a negative
        density, a non-finite alpha or a non-positive strength.
    """

    #: The material's name, for messages and reports.
    name: str
    #: Young's modulus, Pa.
    E: float
    #: Mass density, kg/m³ (used for self-weight).
    density: float
    #: Coefficient of linear thermal expansion, 1/K.
    alpha: float = 0.0
    #: Nominal yield strength f_y, Pa, where the material has one.
    yield_strength: float | None = None
    #: Nominal ultimate tensile strength f_u, Pa.
    ultimate_strength: float | None = None
    #: Where the values come from.
    source: str = "user-defined"

    def __post_init__(self) -> None:
        if not (math.isfinite(self.E) and self.E > 0):
            raise ModelError(f"material {self.name!r}: E = {self.E!r} must be positive")
        if not (math.isfinite(self.density) and self.density >= 0):
            raise ModelError(
                f"material {self.name!r}: density = {self.density!r} must not be negative"
            )
        if not math.isfinite(self.alpha):
            raise ModelError(f"material {self.name!r}: alpha = {self.alpha!r} must be finite")
        for label, value in (("yield", self.yield_strength), ("ultimate", self.ultimate_strength)):
            if value is not None and not (math.isfinite(value) and value > 0):
                raise ModelError(
                    f"material {self.name!r}: {label} strength = {value!r} must be positive"
                )
        if (
            self.yield_strength is not None
            and self.ultimate_strength is not None
            and self.ultimate_strength < self.yield_strength
        ):
            raise ModelError(
                f"material {self.name!r}: ultimate strength {self.ultimate_strength!r} Pa is "
                f"below the yield strength {self.yield_strength!r} Pa"
            )


_STEEL_CONSTANTS = (
    "E and alpha: EN 1993-1-1:2005 §3.2.6(1) (E = 210 000 N/mm², alpha = 12e-6 per K); "
    "density 7850 kg/m³: common practice (77.0 kN/m³ with g = 9.81 m/s², the lower end of "
    "the 77.0-78.5 kN/m³ of EN 1991-1-1:2002 Annex A Table A.4; from memory)"
)


def _steel(name: str, fy_mpa: float | None, fu_mpa: float | None) -> Material:
    grade = (
        ""
        if fy_mpa is None
        else f"; f_y = {fy_mpa:g}, f_u = {fu_mpa:g} N/mm² for t <= 40 mm: EN 1993-1-1:2005 "
        "Table 3.1 for EN 10025-2 (from memory)"
    )
    return Material(
        name=name,
        E=210e9,
        density=7850.0,
        alpha=12e-6,
        yield_strength=None if fy_mpa is None else fy_mpa * 1e6,
        ultimate_strength=None if fu_mpa is None else fu_mpa * 1e6,
        source=_STEEL_CONSTANTS + grade,
    )


_ALUMINIUM = Material(
    name="aluminium",
    E=70e9,
    density=2700.0,
    alpha=23e-6,
    source=(
        "EN 1999-1-1:2007 §3.2.5 (E = 70 000 N/mm², density 2700 kg/m³, alpha = 23e-6 per K; "
        "from memory); strengths depend on alloy and temper, so none is preset"
    ),
)

_PRESETS: dict[str, Material] = {
    "steel": _steel("steel", None, None),
    "S235": _steel("S235", 235.0, 360.0),
    "S275": _steel("S275", 275.0, 430.0),
    "S355": _steel("S355", 355.0, 510.0),
    "aluminium": _ALUMINIUM,
}

#: Read-only table of preset materials by name.
PRESETS: Mapping[str, Material] = MappingProxyType(_PRESETS)

#: Other spellings accepted for preset names (compared case-insensitively).
_ALIASES = {"aluminum": "aluminium", "alu": "aluminium"}


def preset_names() -> list[str]:
    """Names of the preset materials."""
    return list(_PRESETS)


def preset(name: str) -> Material:
    """A preset material by name (case-insensitive; "aluminum" is accepted).

    Raises
    ------
    ModelError
        For an unknown name, with the closest preset names.
    """
    if isinstance(name, str):
        lowered = name.strip().lower()
        lowered = _ALIASES.get(lowered, lowered)
        for key, material in _PRESETS.items():
            if key.lower() == lowered:
                return material
    close = difflib.get_close_matches(str(name), list(_PRESETS) + list(_ALIASES), n=3)
    hint = f"; did you mean {' or '.join(repr(c) for c in close)}?" if close else ""
    raise ModelError(
        f"unknown material preset {name!r}{hint} (presets: {', '.join(_PRESETS)})"
    )
