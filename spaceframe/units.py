"""Input units and quantity strings, converted once to SI.

A value in the model file is either a plain number, taken in the unit the
file declares for that kind of quantity (``[units] force = "kN"``), or a
quantity string such as ``"210 GPa"``, ``"1.5 kN/m^2"`` or ``"12e-6 1/K"``,
parsed by pint and checked for dimension.  Everything leaves this module in
SI: m, N, Pa, kg/m³, K, N/m.

pint costs a noticeable fraction of a second to import and to build its
registry, so it is imported only when a quantity string appears or a unit
name in ``[units]`` is not in the small table of common names below
(:data:`COMMON_UNITS`), and its registry is built once per process
(:func:`registry`).
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cache
from typing import TYPE_CHECKING, Any

from spaceframe.errors import ModelError

if TYPE_CHECKING:
    import pint

__all__ = [
    "COMMON_UNITS",
    "INSUNITS",
    "KINDS",
    "ROLES",
    "SETTINGS",
    "UNIT_CODES",
    "InputUnits",
    "Kind",
    "length_unit",
    "parse_quantity",
    "registry",
    "unit_factor",
]

#: Exponents of (mass, length, time, temperature): enough for every quantity
#: of a pin-jointed frame, and cheap to compare without pint.
Dims = tuple[int, int, int, int]


@dataclass(frozen=True)
class Kind:
    """A physical kind of quantity: its SI unit, dimension and examples for messages."""

    name: str
    si: str
    dims: Dims
    examples: str


KINDS: dict[str, Kind] = {
    k.name: k
    for k in (
        Kind("length", "m", (0, 1, 0, 0), "m, mm"),
        Kind("area", "m^2", (0, 2, 0, 0), "mm^2, cm^2"),
        Kind("second moment of area", "m^4", (0, 4, 0, 0), "mm^4, cm^4"),
        Kind("force", "N", (1, 1, -2, 0), "N, kN"),
        Kind("pressure or stress", "Pa", (1, -1, -2, 0), "kN/m^2, MPa, GPa"),
        Kind("density", "kg/m^3", (1, -3, 0, 0), "kg/m^3, t/m^3"),
        Kind("temperature change", "K", (0, 0, 0, 1), "K, delta_degC"),
        Kind("spring stiffness", "N/m", (1, 0, -2, 0), "kN/m, kN/mm"),
        Kind("thermal expansion coefficient", "1/K", (0, 0, 0, -1), "1/K"),
        Kind("strain", "", (0, 0, 0, 0), "a plain number, or percent"),
        Kind("acceleration", "m/s^2", (0, 1, -2, 0), "m/s^2"),
    )
}

#: Keys of the file's ``[units]`` table: the unit plain numbers of that kind are in.
#: ``section`` is separate from ``length`` because drawings are set out in
#: metres while sections are dimensioned in millimetres; ``stress`` is
#: separate from ``pressure`` because moduli come in GPa or MPa, loads in kN/m².
SETTINGS: dict[str, str] = {
    "length": "length",
    "section": "length",
    "force": "force",
    "pressure": "pressure or stress",
    "stress": "pressure or stress",
    "density": "density",
    "temperature": "temperature change",
    "spring": "spring stiffness",
}

#: Role of a value in the file -> (unit setting it is measured in, power, kind).
#: A role with no setting is always in SI when written as a plain number.
ROLES: dict[str, tuple[str | None, int, str]] = {
    "length": ("length", 1, "length"),
    "section": ("section", 1, "length"),
    "section_area": ("section", 2, "area"),
    "second_moment": ("section", 4, "second moment of area"),
    "force": ("force", 1, "force"),
    "pressure": ("pressure", 1, "pressure or stress"),
    "stress": ("stress", 1, "pressure or stress"),
    "density": ("density", 1, "density"),
    "temperature": ("temperature", 1, "temperature change"),
    "spring": ("spring", 1, "spring stiffness"),
    "expansion": ("temperature", -1, "thermal expansion coefficient"),
    "strain": (None, 1, "strain"),
    "acceleration": (None, 1, "acceleration"),
}

#: The DXF ``$INSUNITS`` codes (drawing units of the model space, as listed
#: for that header variable in the DXF reference) with a short name and the
#: length of one unit in metres.  Inch-based values are exact by the 1959
#: international yard and pound agreement (1 in = 25.4 mm); US survey units
#: by their definition 1 ft = 1200/3937 m; the astronomical unit by IAU 2012
#: resolution B2, the light year as 365.25 days of light travel (IAU), the
#: parsec as 648000/pi au (IAU 2015 B2).  Code 0 (unitless) is deliberately
#: absent: it has no length.  This is the only length-unit table; every other map
#: (name -> code, name -> metres, the lengths of :data:`COMMON_UNITS`) is
#: derived from it.
INSUNITS: dict[int, tuple[str, float]] = {
    1: ("inch", 0.0254),
    2: ("ft", 0.3048),
    3: ("mi", 1609.344),
    4: ("mm", 1.0e-3),
    5: ("cm", 1.0e-2),
    6: ("m", 1.0),
    7: ("km", 1.0e3),
    8: ("microinch", 2.54e-8),
    9: ("mil", 2.54e-5),
    10: ("yd", 0.9144),
    11: ("angstrom", 1.0e-10),
    12: ("nm", 1.0e-9),
    13: ("um", 1.0e-6),
    14: ("dm", 0.1),
    15: ("dam", 10.0),
    16: ("hm", 100.0),
    17: ("Gm", 1.0e9),
    18: ("au", 149_597_870_700.0),
    19: ("ly", 9_460_730_472_580_800.0),
    20: ("pc", 648_000.0 / math.pi * 149_597_870_700.0),
    21: ("us_ft", 1200.0 / 3937.0),
    22: ("us_inch", 100.0 / 3937.0),
    23: ("us_yd", 3600.0 / 3937.0),
    24: ("us_mi", 6_336_000.0 / 3937.0),
}

#: Unit name -> $INSUNITS code, derived from :data:`INSUNITS`.
UNIT_CODES: dict[str, int] = {name: code for code, (name, _) in INSUNITS.items()}

# Spellings people type for the common units, mapped to table names; anything
# else goes to pint.  Lower-case keys: unit names compare case-insensitively
# except "Gm", which is reached through pint ("gigameter").
_LENGTH_ALIASES: dict[str, str] = {
    "in": "inch",
    "inches": "inch",
    "foot": "ft",
    "feet": "ft",
    "millimetre": "mm",
    "millimeter": "mm",
    "centimetre": "cm",
    "centimeter": "cm",
    "metre": "m",
    "meter": "m",
    "kilometre": "km",
    "kilometer": "km",
    "yard": "yd",
}

_LENGTH = (0, 1, 0, 0)
_N = (1, 1, -2, 0)
_PA = (1, -1, -2, 0)

#: Common unit names -> (SI value of one unit, dimension).  Exact by the SI
#: prefix definitions; the test suite checks every entry against pint.  Names
#: not listed here are handed to pint.
COMMON_UNITS: dict[str, tuple[float, Dims]] = {
    **{name: (INSUNITS[UNIT_CODES[name]][1], _LENGTH) for name in ("m", "cm", "mm")},
    "N": (1.0, _N),
    "kN": (1e3, _N),
    "MN": (1e6, _N),
    "Pa": (1.0, _PA),
    "kPa": (1e3, _PA),
    "MPa": (1e6, _PA),
    "GPa": (1e9, _PA),
    "N/m^2": (1.0, _PA),
    "kN/m^2": (1e3, _PA),
    "N/mm^2": (1e6, _PA),
    "kN/mm^2": (1e9, _PA),
    "kg/m^3": (1.0, (1, -3, 0, 0)),
    "t/m^3": (1e3, (1, -3, 0, 0)),
    "K": (1.0, (0, 0, 0, 1)),
    "delta_degC": (1.0, (0, 0, 0, 1)),
    "N/m": (1.0, (1, 0, -2, 0)),
    "kN/m": (1e3, (1, 0, -2, 0)),
    "N/mm": (1e3, (1, 0, -2, 0)),
    "kN/mm": (1e6, (1, 0, -2, 0)),
    "MN/m": (1e6, (1, 0, -2, 0)),
}

_NUMBER = re.compile(r"^\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)(.*)$", re.DOTALL)
_SPACED_OPERATOR = re.compile(r"\s*(\*\*|\*|/|\^)\s*")
_EXPONENT = re.compile(r"(\^|\*\*)\(?[+-]?\d+(\.\d+)?\)?")
_LEADING_ONE = re.compile(r"^1/")
_DIGIT = re.compile(r"\d")
_INNERMOST_GROUP = re.compile(r"\([^()]*\)")


@cache
def registry() -> pint.UnitRegistry:
    """The one pint registry of the process, built on first use."""
    import pint

    return pint.UnitRegistry()


def length_unit(text: str) -> tuple[str, float] | None:
    """Name and metres per unit of a length unit given by name; None if it is not one.

    Names of :data:`INSUNITS` and common spellings ("millimetre", "feet")
    compare case-insensitively, except "Gm" (reached through pint as
    "gigameter"); any other name goes to pint, which is imported only then.
    """
    key = _LENGTH_ALIASES.get(text.lower(), text.lower())
    for name, scale in INSUNITS.values():
        if name.lower() == key and name != "Gm":
            return name, scale
    found = _pint_length(text)
    return None if found is None else (text, found)


def _pint_length(text: str) -> float | None:
    """Metres per ``text`` by pint; None when pint is missing or it is no length."""
    try:
        import pint
    except ImportError:
        return None
    try:
        quantity = registry().Quantity(1.0, text)
        if not quantity.check("[length]"):
            return None
        value = float(quantity.to("m").magnitude)
    except (pint.errors.PintError, ValueError, TypeError, AttributeError, SyntaxError):
        return None
    return value if math.isfinite(value) and value > 0 else None


def _describe(kind: Kind) -> str:
    return f"a {kind.name} (e.g. {kind.examples})"


def _check_unit_text(unit: str, original: str) -> str:
    """Normalise spacing and reject unit expressions whose reading is unclear."""
    text = _SPACED_OPERATOR.sub(r"\1", unit.strip())
    if not text:
        return text
    if _DIGIT.search(_EXPONENT.sub("", _LEADING_ONE.sub("", text))):
        raise ModelError(
            f"{original!r}: more than one number, or a digit in a unit name - give one "
            "number before the unit and write powers with '^' (e.g. 'm^2', not 'm2')"
        )
    top = text
    while True:
        inner = _INNERMOST_GROUP.sub("U", top)
        if inner == top:
            break
        top = inner
    if "(" in top or ")" in top:
        raise ModelError(f"{original!r}: unbalanced parentheses")
    if re.search(r"\(\s*\)", text):
        raise ModelError(f"{original!r}: empty parentheses in the unit")
    # pint reads 'a/b*c' as (a/b)*c while engineers often mean a/(b*c): refuse to guess.
    _, slash, tail = top.partition("/")
    if slash and ("/" in tail or " " in tail or "*" in tail.replace("**", "")):
        raise ModelError(
            f"{original!r} is ambiguous: after '/' write the whole denominator in "
            "parentheses, e.g. 'W/(m*K)'"
        )
    return text


def _split(text: str) -> tuple[float, str]:
    """Split a quantity string into its number and its (checked) unit text."""
    if not isinstance(text, str):
        raise ModelError(f"{text!r}: expected a quantity string such as '5 kN'")
    match = _NUMBER.match(text)
    if match is None:
        raise ModelError(
            f"{text!r} does not start with a number: write a number and a unit, e.g. '5 kN'"
        )
    number = float(match.group(1))
    rest = match.group(2)
    if rest.lstrip().startswith(","):
        raise ModelError(f"{text!r}: use a decimal point, not a comma")
    unit = _check_unit_text(rest, text)
    if not unit:
        raise ModelError(
            f"{text!r} has no unit: write the number without quotes to use the unit of "
            "[units], or add a unit"
        )
    if not math.isfinite(number):
        raise ModelError(f"{text!r}: the number is not finite")
    return number, unit


def _pint_si(unit: str, kind: Kind, original: str) -> float:
    """SI value of one ``unit`` via pint, after checking its dimension against ``kind``."""
    import pint

    ureg = registry()
    try:
        parsed = ureg.parse_units(unit)
    except (pint.errors.UndefinedUnitError, pint.errors.DefinitionSyntaxError) as exc:
        raise ModelError(f"{original!r}: unknown unit {unit!r} ({exc})") from None
    except (ValueError, TypeError, AttributeError, SyntaxError, AssertionError,
            RecursionError, ZeroDivisionError, OverflowError) as exc:
        # pint's expression parser fails on some malformed input ("m()")
        # with an internal assertion rather than its own error.
        why = str(exc) or type(exc).__name__
        raise ModelError(f"{original!r}: cannot read the unit {unit!r} ({why})") from None
    one = ureg.Quantity(1.0, parsed).to_base_units().magnitude
    two = ureg.Quantity(2.0, parsed).to_base_units().magnitude
    if not math.isclose(two, 2.0 * one, rel_tol=1e-12):
        raise ModelError(
            f"{original!r}: {unit!r} is a temperature scale with an offset; a temperature "
            "change or a coefficient must be written in K (or delta_degC)"
        )
    dims = parsed.dimensionality
    got = tuple(dims.get(d, 0) for d in ("[mass]", "[length]", "[time]", "[temperature]"))
    other = set(dims) - {"[mass]", "[length]", "[time]", "[temperature]"}
    if got != kind.dims or other:
        found = next((k.name for k in KINDS.values() if k.dims == got and not other), None)
        raise ModelError(
            f"{original!r} is not {_describe(kind)}: {unit!r} is a unit of "
            f"{found if found else 'dimension ' + str(dims)}"
        )
    try:
        return float(ureg.Quantity(1.0, parsed).to_base_units().magnitude)
    except pint.errors.PintError as exc:
        raise ModelError(f"{original!r}: cannot convert {unit!r} to SI ({exc})") from None


def unit_factor(unit: str, kind: str) -> float:
    """SI value of one ``unit`` of the given kind.

    Parameters
    ----------
    unit : str
        A unit name or expression (``"mm"``, ``"kN/m^2"``, ``"1/K"``).
    kind : str
        A key of :data:`KINDS`.

    Returns
    -------
    factor : float
        Multiply a number in ``unit`` by this to get SI.

    Raises
    ------
    ModelError
        On an unknown unit, an ambiguous expression or a wrong dimension.
    """
    k = KINDS[kind]
    if not isinstance(unit, str) or not unit.strip():
        raise ModelError(f"{unit!r}: expected a unit name for {_describe(k)}")
    text = _check_unit_text(unit, unit)
    if text in COMMON_UNITS:
        factor, dims = COMMON_UNITS[text]
        if dims != k.dims:
            raise ModelError(f"{unit!r} is not a unit of {_describe(k)}")
        return factor
    return _pint_si(text, k, unit)


def parse_quantity(text: str, kind: str) -> float:
    """Parse ``"<number> <unit>"`` to an SI value, checking the dimension.

    Parameters
    ----------
    text : str
        One number followed by one unit expression, e.g. ``"1.5 kN/m^2"``.
        Rejected as ambiguous: a second number (``"3 4 m"``), a digit in a
        unit (``"m2"``), more than one ``/`` or a product after ``/`` without
        parentheses (``"W/m*K"``), and offset temperature scales (``"degC"``).
    kind : str
        A key of :data:`KINDS`.

    Returns
    -------
    value : float
        In SI units of the kind.

    Raises
    ------
    ModelError
        Naming the string and what was expected.
    """
    k = KINDS[kind]
    number, unit = _split(text)
    common = COMMON_UNITS.get(unit)
    if common is not None and common[1] == k.dims:
        # The common units without pint (a model file with a thousand load
        # cases spent 1.7 s in pint's parser); others, and a common unit of
        # the wrong kind (for pint's message), go through pint.
        return number * common[0]
    return number * _pint_si(unit, k, text)


@dataclass(frozen=True)
class InputUnits:
    """The units plain numbers of the model file are in, as SI factors.

    Attributes
    ----------
    names : dict
        Setting (a key of :data:`SETTINGS`) -> unit name as written.
    factors : dict
        Setting -> SI value of one unit.
    """

    names: Mapping[str, str] = field(default_factory=dict)
    factors: Mapping[str, float] = field(default_factory=dict)

    @classmethod
    def from_names(cls, names: Mapping[str, str]) -> InputUnits:
        """Build from ``{setting: unit name}``; unset settings stay SI.

        Raises
        ------
        ModelError
            On an unknown setting or a unit of the wrong kind (message names the setting).
        """
        factors: dict[str, float] = {}
        for setting, unit in names.items():
            if setting not in SETTINGS:
                raise ModelError(f"unknown unit setting {setting!r}")
            try:
                factors[setting] = unit_factor(unit, SETTINGS[setting])
            except ModelError as exc:
                raise ModelError(f"{setting}: {exc}") from None
        return cls(names=dict(names), factors=factors)

    def factor(self, role: str) -> float:
        """SI value of one plain-number unit for a value of ``role`` (a key of :data:`ROLES`)."""
        setting, power, _ = ROLES[role]
        if setting is None:
            return 1.0
        return float(self.factors.get(setting, 1.0)) ** power

    def to_si(self, value: Any, role: str) -> float:
        """Convert a plain number (in the file's unit) or a quantity string to SI.

        Raises
        ------
        ModelError
            On a string that does not parse or has the wrong dimension, a
            boolean, or a number that is not finite.
        """
        kind = ROLES[role][2]
        if isinstance(value, bool) or not isinstance(value, int | float | str):
            raise ModelError(
                f"{value!r}: expected a number or a quantity string for {_describe(KINDS[kind])}"
            )
        if isinstance(value, str):
            return parse_quantity(value, kind)
        out = float(value) * self.factor(role)
        if not math.isfinite(out):
            raise ModelError(f"{value!r}: not a finite number")
        return out
