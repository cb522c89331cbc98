"""Cross-sections: area, second moment of area and radius of gyration, computed.

Dimensions go in in metres and every property comes out in SI (m², m⁴, m).
Only the axial area enters a pin-jointed analysis; the second moment and the
radius of gyration are kept for member buckling checks.

Hollow rectangular and square sections have rounded corners whose radii
follow the product standard of their manufacturing route (see
:data:`CORNER_RULES`); the corner terms are exact for circular arcs.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from types import MappingProxyType

from spaceframe.errors import ModelError

__all__ = [
    "BUILDERS",
    "CORNER_RULES",
    "SPIRAL_STRAND_FILL",
    "Section",
    "cable",
    "circular_hollow",
    "corner_radii",
    "rectangular_hollow",
    "round_bar",
    "square_hollow",
    "user_section",
]

#: Metallic-area (fill) factor of a spiral strand: metallic area over the
#: area of the circle of its nominal diameter.  About 0.75 (from memory; the
#: maker's value for the actual strand should be used in design).
SPIRAL_STRAND_FILL = 0.75

#: Corner rules of hollow sections: name -> where the radii come from.
CORNER_RULES: Mapping[str, str] = MappingProxyType(
    {
        "hot-finished": "EN 10210-2: outer radius 1.5 t, inner radius 1.0 t (from memory)",
        "cold-formed": (
            "EN 10219-2: outer radius 2 t (t <= 6 mm), 2.5 t (6 < t <= 10 mm), 3 t (t > 10 mm); "
            "inner radius = outer - t (from memory)"
        ),
        "sharp": "square corners (radii zero)",
    }
)


@dataclass(frozen=True)
class Section:
    """A member cross-section, its properties in SI.

    Raises
    ------
    ModelError
        From the constructor, on an area that is not a positive number or
        exceeds ``MAX_DIMENSION**2`` (a slip of units), or a negative second
        moment.
    """

    #: The section's name, for messages and reports.
    name: str
    #: "chs", "rhs", "shs", "bar", "cable" or "user".
    shape: str
    #: Cross-section area carrying axial force, m².
    area: float
    #: Smallest second moment of area, m⁴ (governs flexural buckling of a
    #: pin-ended strut); NaN when unknown (a user section given by area only),
    #: 0 for a cable.
    second_moment: float
    #: The defining dimensions in SI, for reports.
    dimensions: Mapping[str, float] = field(default_factory=dict)
    #: Where the formulas or factors come from.
    note: str = ""

    def __post_init__(self) -> None:
        _positive(self.name, power=2, area=self.area)
        if not (math.isnan(self.second_moment) or self.second_moment >= 0):
            raise ModelError(
                f"section {self.name!r}: second moment = {self.second_moment!r} "
                "must not be negative"
            )

    @property
    def radius_of_gyration(self) -> float:
        """sqrt(I / A), m (NaN when I is unknown)."""
        return math.sqrt(self.second_moment / self.area)


#: Largest section dimension accepted, m.  No member of a frame is a
#: kilometre thick, so a larger value is a slip of units or a typing error;
#: the bound also keeps D⁴ (and the area and second moment from it) far
#: inside the floating-point range.  Areas and second moments are bounded
#: by its square and fourth power.
MAX_DIMENSION = 1.0e3


def _positive(section: str, power: int = 1, **values: float) -> None:
    """Finite, positive values; of length to ``power`` below MAX_DIMENSION**power (0: no bound)."""
    limit = MAX_DIMENSION**power
    unit = "m" if power == 1 else f"m^{power}"
    for key, value in values.items():
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise ModelError(f"section {section!r}: {key} = {value!r} must be a number")
        if not (math.isfinite(value) and value > 0):
            raise ModelError(f"section {section!r}: {key} = {value!r} must be positive")
        if power and value > limit:
            raise ModelError(
                f"section {section!r}: {key} = {value:.6g} {unit} is larger than "
                f"{limit:.6g} {unit}: check the units"
            )


def circular_hollow(name: str, diameter: float, thickness: float) -> Section:
    """Circular hollow section: A = pi/4 (D² - d²), I = pi/64 (D⁴ - d⁴), d = D - 2t.

    Parameters
    ----------
    name : str
    diameter : float
        Outside diameter D, m.
    thickness : float
        Wall thickness t, m; less than D/2.

    Raises
    ------
    ModelError
        On a non-positive dimension or a wall thicker than the radius.
    """
    _positive(name, diameter=diameter, thickness=thickness)
    if 2 * thickness >= diameter:
        raise ModelError(
            f"section {name!r}: thickness {thickness!r} m is not less than half the diameter "
            f"{diameter!r} m (use a solid bar)"
        )
    d = diameter - 2 * thickness
    return Section(
        name=name,
        shape="chs",
        area=math.pi / 4 * (diameter**2 - d**2),
        second_moment=math.pi / 64 * (diameter**4 - d**4),
        dimensions={"diameter": diameter, "thickness": thickness},
        note="thin-walled tube, exact annulus formulas",
    )


def round_bar(name: str, diameter: float) -> Section:
    """Solid round bar or rod: A = pi d²/4, I = pi d⁴/64.

    Raises
    ------
    ModelError
        On a non-positive diameter.
    """
    _positive(name, diameter=diameter)
    return Section(
        name=name,
        shape="bar",
        area=math.pi / 4 * diameter**2,
        second_moment=math.pi / 64 * diameter**4,
        dimensions={"diameter": diameter},
        note="solid circle",
    )


def cable(name: str, diameter: float, fill: float = SPIRAL_STRAND_FILL) -> Section:
    """Cable or strand of nominal diameter d: metallic area fill * pi d²/4, no bending stiffness.

    A pin-jointed linear analysis treats a cable as a bar that could also take
    compression; results must be checked for members that go slack.

    Parameters
    ----------
    name : str
    diameter : float
        Nominal diameter, m.
    fill : float
        Metallic-area factor, 0 < fill <= 1 (default :data:`SPIRAL_STRAND_FILL`).

    Raises
    ------
    ModelError
        On a non-positive diameter or a fill factor outside (0, 1].
    """
    _positive(name, diameter=diameter)
    _positive(name, power=0, fill=fill)
    if fill > 1:
        raise ModelError(f"section {name!r}: fill = {fill!r} must not exceed 1")
    return Section(
        name=name,
        shape="cable",
        area=fill * math.pi / 4 * diameter**2,
        second_moment=0.0,
        dimensions={"diameter": diameter, "fill": fill},
        note=f"metallic area = {fill:g} x pi d^2/4; bending stiffness ignored",
    )


def corner_radii(rule: str, thickness: float) -> tuple[float, float]:
    """Outer and inner corner radii of a hollow section, m, by the rule's name.

    Raises
    ------
    ModelError
        On an unknown rule.
    """
    if rule == "hot-finished":
        return 1.5 * thickness, thickness
    if rule == "cold-formed":
        # The limits are in whole millimetres; the margin keeps 6 mm given as
        # 0.006 m on the intended side of them.
        mm = thickness * 1e3
        factor = 2.0 if mm <= 6 + 1e-9 else (2.5 if mm <= 10 + 1e-9 else 3.0)
        return factor * thickness, (factor - 1.0) * thickness
    if rule == "sharp":
        return 0.0, 0.0
    raise ModelError(f"unknown corner rule {rule!r} (rules: {', '.join(CORNER_RULES)})")


def _spandrel(r: float, c: float) -> tuple[float, float]:
    """Area and second moment about the section axis of the piece a rounded corner removes.

    The piece is the square of side r at the corner minus the quarter circle of
    radius r; its near edge lies at distance c from the axis.  With area
    r²(1 - pi/4), first moment r³/6 and second moment r⁴(1/3 - pi/16) about
    that edge (square minus quarter disc), the parallel-axis sum follows.
    """
    area = r * r * (1 - math.pi / 4)
    first = r**3 / 6
    second = r**4 * (1 / 3 - math.pi / 16)
    return area, c * c * area + 2 * c * first + second


def _rounded_rectangle(b: float, h: float, r: float) -> tuple[float, float, float]:
    """Area and second moments (about the axes parallel to b and to h) of a rounded rectangle."""
    a_c, i_x = _spandrel(r, h / 2 - r)
    _, i_y = _spandrel(r, b / 2 - r)
    area = b * h - 4 * a_c
    return area, b * h**3 / 12 - 4 * i_x, h * b**3 / 12 - 4 * i_y


def rectangular_hollow(
    name: str,
    width: float,
    thickness: float,
    height: float | None = None,
    corners: str = "hot-finished",
    outer_radius: float | None = None,
) -> Section:
    """Rectangular (or square) hollow section with rounded corners.

    Parameters
    ----------
    name : str
    width : float
        Outside width B, m.
    thickness : float
        Wall thickness t, m.
    height : float, optional
        Outside height H, m (default: square, H = B).
    corners : {"hot-finished", "cold-formed", "sharp"}
        Corner radius rule, see :data:`CORNER_RULES`; ignored when
        ``outer_radius`` is given.
    outer_radius : float, optional
        Outside corner radius, m; the inside radius is then ``max(r - t, 0)``.

    Returns
    -------
    Section
        ``second_moment`` is the smaller of the two principal values.

    Raises
    ------
    ModelError
        On non-positive dimensions, a wall thicker than half the smaller
        side, or corner radii that do not fit.
    """
    h_out = width if height is None else height
    _positive(name, width=width, height=h_out, thickness=thickness)
    if 2 * thickness >= min(width, h_out):
        raise ModelError(
            f"section {name!r}: thickness {thickness!r} m is not less than half the smaller "
            f"side {min(width, h_out)!r} m"
        )
    if outer_radius is not None:
        if isinstance(outer_radius, bool) or not (
            isinstance(outer_radius, int | float) and math.isfinite(outer_radius)
            and outer_radius >= 0
        ):
            raise ModelError(
                f"section {name!r}: outer_radius = {outer_radius!r} must be zero or positive"
            )
        r_out, r_in = float(outer_radius), max(float(outer_radius) - thickness, 0.0)
        rule = f"outer corner radius {outer_radius!r} m"
    else:
        try:
            r_out, r_in = corner_radii(corners, thickness)
        except ModelError as exc:
            raise ModelError(f"section {name!r}: {exc}") from None
        rule = CORNER_RULES[corners]
    b_in, h_in = width - 2 * thickness, h_out - 2 * thickness
    if 2 * r_out > min(width, h_out) or 2 * r_in > min(b_in, h_in):
        raise ModelError(
            f"section {name!r}: corner radius {r_out!r} m does not fit a "
            f"{width!r} x {h_out!r} m section of wall {thickness!r} m"
        )
    a_o, ix_o, iy_o = _rounded_rectangle(width, h_out, r_out)
    a_i, ix_i, iy_i = _rounded_rectangle(b_in, h_in, r_in)
    square = height is None or height == width
    dims = {"width": width, "thickness": thickness, "outer_radius": r_out, "inner_radius": r_in}
    if not square:
        dims["height"] = h_out
    return Section(
        name=name,
        shape="shs" if square else "rhs",
        area=a_o - a_i,
        second_moment=min(ix_o - ix_i, iy_o - iy_i),
        dimensions=dims,
        note=f"corners: {rule}",
    )


def square_hollow(
    name: str,
    width: float,
    thickness: float,
    corners: str = "hot-finished",
    outer_radius: float | None = None,
) -> Section:
    """Square hollow section; see :func:`rectangular_hollow`."""
    return rectangular_hollow(name, width, thickness, None, corners, outer_radius)


def user_section(name: str, area: float, second_moment: float | None = None) -> Section:
    """A section given by its area (and optionally its smallest second moment of area).

    Raises
    ------
    ModelError
        On a non-positive area or a negative second moment.
    """
    _positive(name, power=2, area=area)
    if second_moment is not None:
        if isinstance(second_moment, bool) or not isinstance(second_moment, int | float):
            raise ModelError(
                f"section {name!r}: second_moment = {second_moment!r} must be a number"
            )
        if not (math.isfinite(second_moment) and second_moment >= 0):
            raise ModelError(
                f"section {name!r}: second_moment = {second_moment!r} must not be negative"
            )
        if second_moment > 0:
            _positive(name, power=4, second_moment=second_moment)
    return Section(
        name=name,
        shape="user",
        area=float(area),
        second_moment=math.nan if second_moment is None else float(second_moment),
        dimensions={"area": float(area)},
        note="user-defined",
    )


#: Shape name -> constructor, for readers of section descriptions.
BUILDERS: Mapping[str, Callable[..., Section]] = MappingProxyType(
    {
        "chs": circular_hollow,
        "shs": square_hollow,
        "rhs": rectangular_hollow,
        "bar": round_bar,
        "cable": cable,
        "user": user_section,
    }
)
