"""Sections: properties against closed forms derived here, numerical integration
and published table values."""

from __future__ import annotations

import math

import numpy as np
import pytest

from spaceframe.errors import ModelError
from spaceframe.sections import (
    SPIRAL_STRAND_FILL,
    Section,
    cable,
    circular_hollow,
    corner_radii,
    rectangular_hollow,
    round_bar,
    square_hollow,
    user_section,
)

CM2 = 1e-4
CM4 = 1e-8


def _annulus_by_quadrature(outer: float, inner: float, n: int = 20_000) -> tuple[float, float]:
    """Area and I of an annulus: the theta integrals are exact (2 pi and pi), r by midpoints."""
    dr = (outer - inner) / n
    r = inner + (np.arange(n) + 0.5) * dr
    area = 2 * math.pi * float(np.sum(r) * dr)
    # I_x = int r^2 sin^2(t) r dr dt = pi int r^3 dr
    inertia = math.pi * float(np.sum(r**3) * dr)
    return area, inertia


def _raster_hollow_rectangle(b: float, h: float, t: float, ro: float, ri: float,
                             n: int = 1500) -> tuple[float, float]:
    """Area and I about the axis parallel to b of a rounded hollow rectangle, by pixels."""
    def inside(x: np.ndarray, y: np.ndarray, hb: float, hh: float, r: float) -> np.ndarray:
        ax, ay = np.abs(x), np.abs(y)
        box = (ax <= hb) & (ay <= hh)
        corner = (ax > hb - r) & (ay > hh - r)
        return box & ~(corner & ((ax - (hb - r)) ** 2 + (ay - (hh - r)) ** 2 > r * r))

    xs = (np.arange(n) + 0.5) / n * b - b / 2
    ys = (np.arange(n) + 0.5) / n * h - h / 2
    x, y = np.meshgrid(xs, ys)
    da = (b / n) * (h / n)
    ring = inside(x, y, b / 2, h / 2, ro) & ~inside(x, y, b / 2 - t, h / 2 - t, ri)
    return float(ring.sum() * da), float((y**2 * ring).sum() * da)


def test_chs_against_closed_form_and_quadrature() -> None:
    d_out, t = 0.1683, 0.008
    s = circular_hollow("c", d_out, t)
    d_in = d_out - 2 * t
    # Closed form: A = pi/4 (D² - d²), I = pi/64 (D⁴ - d⁴).
    assert s.area == pytest.approx(math.pi / 4 * (d_out**2 - d_in**2), rel=1e-14)
    assert s.second_moment == pytest.approx(math.pi / 64 * (d_out**4 - d_in**4), rel=1e-14)
    area, inertia = _annulus_by_quadrature(d_out / 2, d_in / 2)
    assert s.area == pytest.approx(area, rel=1e-8)
    assert s.second_moment == pytest.approx(inertia, rel=1e-8)


def test_chs_168_3_x_8_against_the_product_table() -> None:
    # EN 10210-2:2006 table, CHS 168.3 x 8.0: A = 40.3 cm², I = 1297 cm⁴, i = 5.67 cm
    # (from memory); tables round to 3-4 figures.
    s = circular_hollow("CHS 168.3x8.0", 0.1683, 0.008)
    assert s.area / CM2 == pytest.approx(40.3, rel=2e-3)
    assert s.second_moment / CM4 == pytest.approx(1297, rel=1e-3)
    assert s.radius_of_gyration * 100 == pytest.approx(5.67, rel=2e-3)


def test_shs_100_x_5_against_the_product_tables() -> None:
    hot = square_hollow("SHS hot", 0.100, 0.005)
    # EN 10210-2:2006, SHS 100 x 100 x 5.0 hot finished: A = 18.7 cm², I = 279 cm⁴,
    # i = 3.86 cm (from memory).
    assert hot.area / CM2 == pytest.approx(18.7, rel=3e-3)
    assert hot.second_moment / CM4 == pytest.approx(279, rel=2e-3)
    assert hot.radius_of_gyration * 100 == pytest.approx(3.86, rel=2e-3)
    cold = square_hollow("SHS cold", 0.100, 0.005, corners="cold-formed")
    # EN 10219-2:2006, SHS 100 x 100 x 5.0 cold formed: A = 18.4 cm², I = 271 cm⁴ (from memory).
    assert cold.area / CM2 == pytest.approx(18.4, rel=3e-3)
    assert cold.second_moment / CM4 == pytest.approx(271, rel=2e-3)


@pytest.mark.parametrize("corners", ["hot-finished", "cold-formed"])
def test_rounded_corners_against_pixel_integration(corners: str) -> None:
    b, h, t = 0.120, 0.080, 0.006
    s = rectangular_hollow("r", b, t, height=h, corners=corners)
    ro, ri = corner_radii(corners, t)
    area, i_strong = _raster_hollow_rectangle(b, h, t, ro, ri)
    _, i_weak = _raster_hollow_rectangle(h, b, t, ro, ri)  # same section turned 90°
    assert s.area == pytest.approx(area, rel=2e-3)
    assert s.second_moment == pytest.approx(min(i_strong, i_weak), rel=2e-3)
    assert s.shape == "rhs"


def test_sharp_corners_closed_form() -> None:
    b, h, t = 0.2, 0.1, 0.01
    s = rectangular_hollow("r", b, t, height=h, corners="sharp")
    bi, hi = b - 2 * t, h - 2 * t
    assert s.area == pytest.approx(b * h - bi * hi, rel=1e-14)
    # The weak axis is the one parallel to h: I = (h b³ - hi bi³)/12 vs (b h³ - bi hi³)/12.
    assert s.second_moment == pytest.approx((b * h**3 - bi * hi**3) / 12, rel=1e-14)
    sq = square_hollow("s", 0.1, 0.01, corners="sharp")
    assert sq.second_moment == pytest.approx((0.1**4 - 0.08**4) / 12, rel=1e-14)


def test_cold_formed_radius_steps() -> None:
    # EN 10219-2: outer radius 2 t up to 6 mm, 2.5 t up to 10 mm, 3 t above (from memory).
    assert corner_radii("cold-formed", 0.006) == pytest.approx((0.012, 0.006))
    assert corner_radii("cold-formed", 0.008) == pytest.approx((0.020, 0.012))
    assert corner_radii("cold-formed", 0.012) == pytest.approx((0.036, 0.024))
    assert corner_radii("hot-finished", 0.010) == pytest.approx((0.015, 0.010))


def test_explicit_outer_radius() -> None:
    s = square_hollow("s", 0.1, 0.004, outer_radius=0.004)
    # Outer radius = t gives a sharp inside corner: inner radius 0.
    assert s.dimensions["inner_radius"] == 0.0
    sharp = square_hollow("t", 0.1, 0.004, corners="sharp")
    # Rounding only the outer corners removes 4 (1 - pi/4) r² of area.
    assert sharp.area - s.area == pytest.approx(4 * (1 - math.pi / 4) * 0.004**2, rel=1e-12)


def test_round_bar_closed_form() -> None:
    d = 0.024
    s = round_bar("rod", d)
    assert s.area == pytest.approx(math.pi * d**2 / 4, rel=1e-15)
    assert s.second_moment == pytest.approx(math.pi * d**4 / 64, rel=1e-15)
    # i = sqrt(I/A) = d/4 for a solid circle.
    assert s.radius_of_gyration == pytest.approx(d / 4, rel=1e-14)


def test_cable_metallic_area() -> None:
    d = 0.030
    s = cable("strand", d)
    # Spiral strand fill factor ~0.75 (from memory).
    assert SPIRAL_STRAND_FILL == 0.75
    assert s.area == pytest.approx(0.75 * math.pi * d**2 / 4, rel=1e-15)
    assert s.second_moment == 0.0 and s.radius_of_gyration == 0.0
    assert cable("rope", d, fill=0.6).area == pytest.approx(0.6 * math.pi * d**2 / 4, rel=1e-15)


def test_user_section() -> None:
    s = user_section("u", 1.25e-3, 1.1e-6)
    assert s.radius_of_gyration == pytest.approx(math.sqrt(1.1e-6 / 1.25e-3), rel=1e-15)
    only_area = user_section("a", 1e-3)
    assert math.isnan(only_area.second_moment) and math.isnan(only_area.radius_of_gyration)


@pytest.mark.parametrize(
    ("build", "fragment"),
    [
        (lambda: circular_hollow("c", 0.1, 0.05), "not less than half the diameter"),
        (lambda: circular_hollow("c", -0.1, 0.005), "diameter = -0.1"),
        (lambda: circular_hollow("c", 0.1, 0.0), "thickness = 0.0"),
        (lambda: round_bar("c", math.nan), "diameter = nan"),
        (lambda: round_bar("c", True), "must be a number"),
        (lambda: cable("c", 0.02, fill=1.2), "fill = 1.2"),
        (lambda: square_hollow("c", 0.1, 0.06), "not less than half the smaller side"),
        (lambda: square_hollow("c", 0.1, 0.005, corners="rolled"), "unknown corner rule"),
        (lambda: square_hollow("c", 0.1, 0.005, outer_radius=0.06), "does not fit"),
        (lambda: square_hollow("c", 0.1, 0.005, outer_radius=-1.0), "outer_radius = -1.0"),
        (lambda: user_section("c", 0.0), "area = 0.0"),
        (lambda: user_section("c", 1e-3, -1e-6), "second_moment = -1e-06"),
        # A Section made directly is checked as the builders check their area.
        (lambda: Section("c", "user", area=-1.0, second_moment=0.0), "area = -1.0"),
        (lambda: Section("c", "user", area=True, second_moment=0.0), "must be a number"),
        (lambda: Section("c", "user", area=1e-3, second_moment=-1.0), "second moment = -1.0"),
    ],
)
def test_bad_dimensions_are_refused(build: object, fragment: str) -> None:
    with pytest.raises(ModelError) as info:
        build()  # type: ignore[operator]
    assert "'c'" in str(info.value) and fragment in str(info.value)


@pytest.mark.parametrize(
    ("build", "fragment"),
    [
        (lambda: round_bar("huge", 1e200), r"diameter = 1e\+200 m is larger than 1000 m"),
        (lambda: circular_hollow("huge", 1e200, 1.0), "diameter = 1e\\+200 m"),
        (lambda: cable("huge", 1e155), "diameter = 1e\\+155 m"),
        (lambda: square_hollow("huge", 1e120, 0.01), "width = 1e\\+120 m"),
        (lambda: user_section("huge", 1e300), r"area = 1e\+300 m\^2 is larger than 1e\+06 m\^2"),
        (lambda: user_section("huge", 1.0, 1e300), r"second_moment = 1e\+300 m\^4"),
        (lambda: Section("huge", "user", 1e300, 0.0), r"area = 1e\+300 m\^2 is larger"),
    ],
)
def test_overflowing_dimensions_are_refused_not_raised(build: object, fragment: str) -> None:
    # 1e200**2 overflows a double (max ~1.8e308): the dimension is refused by name.
    with pytest.raises(ModelError, match=fragment):
        build()  # type: ignore[operator]
