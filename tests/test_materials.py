"""Materials: preset values against their standards, lookup, validation."""

from __future__ import annotations

import math

import pytest

from spaceframe.errors import ModelError
from spaceframe.materials import PRESETS, Material, preset, preset_names


@pytest.mark.parametrize("name", ["steel", "S235", "S275", "S355"])
def test_steel_constants(name: str) -> None:
    m = preset(name)
    # EN 1993-1-1:2005 §3.2.6(1): E = 210 000 N/mm², alpha = 12e-6 per K (from memory).
    assert m.E == pytest.approx(210_000e6, rel=1e-12)
    assert m.alpha == pytest.approx(12e-6, rel=1e-12)
    # 7850 kg/m³: common practice; with g = 9.81 m/s² it is the 77.0 kN/m³ at the lower
    # end of the 77.0-78.5 kN/m³ of EN 1991-1-1:2002 Annex A Table A.4 for steel (from memory).
    assert m.density * 9.81 / 1e3 == pytest.approx(77.0, abs=0.05)
    assert "EN 1993-1-1" in m.source


@pytest.mark.parametrize(
    ("grade", "fy", "fu"),
    # EN 1993-1-1:2005 Table 3.1, EN 10025-2 grades, t <= 40 mm, N/mm² (from memory).
    [("S235", 235, 360), ("S275", 275, 430), ("S355", 355, 510)],
)
def test_steel_grade_strengths(grade: str, fy: float, fu: float) -> None:
    m = preset(grade)
    assert m.yield_strength == pytest.approx(fy * 1e6, rel=1e-12)
    assert m.ultimate_strength == pytest.approx(fu * 1e6, rel=1e-12)
    assert "Table 3.1" in m.source


def test_aluminium_constants() -> None:
    m = preset("aluminium")
    # EN 1999-1-1:2007 §3.2.5: E = 70 000 N/mm², rho = 2700 kg/m³, alpha = 23e-6 per K
    # (from memory).
    assert (m.E, m.density, m.alpha) == pytest.approx((70_000e6, 2700.0, 23e-6), rel=1e-12)
    assert m.yield_strength is None
    assert "EN 1999-1-1" in m.source


def test_preset_lookup_is_case_insensitive_with_aliases() -> None:
    assert preset("s355") is PRESETS["S355"]
    assert preset("Aluminum") is PRESETS["aluminium"]
    assert set(preset_names()) == {"steel", "S235", "S275", "S355", "aluminium"}


def test_unknown_preset_suggests_the_closest() -> None:
    with pytest.raises(ModelError, match=r"unknown material preset 'S353'.*did you mean 'S355'"):
        preset("S353")


def test_presets_cannot_be_changed() -> None:
    with pytest.raises(TypeError):
        PRESETS["steel"] = PRESETS["S235"]  # type: ignore[index]


def test_user_material() -> None:
    m = Material("rod", E=205e9, density=7850.0, alpha=12e-6, yield_strength=460e6)
    assert m.ultimate_strength is None and m.source == "user-defined"


@pytest.mark.parametrize(
    ("kwargs", "fragment"),
    [
        ({"E": 0.0}, "E = 0.0"),
        ({"E": -1.0}, "E = -1.0"),
        ({"E": math.inf}, "E = inf"),
        ({"density": -1.0}, "density = -1.0"),
        ({"alpha": math.nan}, "alpha = nan"),
        ({"yield_strength": 0.0}, "yield strength = 0.0"),
        ({"yield_strength": 355e6, "ultimate_strength": 300e6}, "below the yield strength"),
    ],
)
def test_bad_material_values_are_refused(kwargs: dict[str, float], fragment: str) -> None:
    base: dict[str, float] = {"E": 210e9, "density": 7850.0}
    with pytest.raises(ModelError) as info:
        Material("bad", **{**base, **kwargs})  # type: ignore[arg-type]
    assert "'bad'" in str(info.value) and fragment in str(info.value)
