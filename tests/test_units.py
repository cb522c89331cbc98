"""Units: quantity strings, dimension checks, input-unit factors, lazy pint.

Reference values: SI prefixes are exact by definition (BIPM, The International
System of Units, 9th ed. 2019, Table 7); the inch is 25.4 mm exactly
(International Yard and Pound Agreement, 1959).  The table of common unit
names is checked against pint, a general-purpose reference library.
"""

from __future__ import annotations

import math
import subprocess
import sys

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from spaceframe.errors import ModelError
from spaceframe.units import COMMON_UNITS, KINDS, InputUnits, parse_quantity, registry, unit_factor


@pytest.mark.parametrize("name", sorted(COMMON_UNITS))
def test_common_unit_table_agrees_with_pint(name: str) -> None:
    factor, dims = COMMON_UNITS[name]
    q = registry().Quantity(1.0, registry().parse_units(name))
    assert math.isclose(q.to_base_units().magnitude, factor, rel_tol=1e-12)
    d = q.dimensionality
    assert (d.get("[mass]", 0), d.get("[length]", 0), d.get("[time]", 0),
            d.get("[temperature]", 0)) == dims


@pytest.mark.parametrize(
    ("text", "kind", "si"),
    [
        ("210 GPa", "pressure or stress", 210e9),  # giga = 1e9 (SI Brochure Table 7)
        ("1.5 kN/m^2", "pressure or stress", 1.5e3),  # kilo = 1e3
        ("235 N/mm^2", "pressure or stress", 235e6),  # (1e-3 m)^-2 = 1e6 m^-2
        ("12e-6 1/K", "thermal expansion coefficient", 12e-6),
        ("12e-6 1/delta_degC", "thermal expansion coefficient", 12e-6),  # a kelvin step
        ("30 delta_degC", "temperature change", 30.0),
        ("5 kN / mm", "spring stiffness", 5e6),  # 1e3 N / 1e-3 m
        ("1 kN/(m*m)", "pressure or stress", 1e3),
        ("2 in", "length", 0.0508),  # 1 in = 25.4 mm exactly (1959 agreement)
        ("-7.5e1mm", "length", -0.075),
        ("0.1 %", "strain", 1e-3),
        ("7.85 t/m^3", "density", 7850.0),  # tonne = 1000 kg (SI Brochure Table 8)
        ("9.81 m/s^2", "acceleration", 9.81),
    ],
)
def test_parse_quantity_to_si(text: str, kind: str, si: float) -> None:
    assert parse_quantity(text, kind) == pytest.approx(si, rel=1e-12)


@pytest.mark.parametrize(
    ("text", "kind", "fragment"),
    [
        ("5 kN", "pressure or stress", "is a unit of force"),
        ("3 m", "force", "is a unit of length"),
        ("3 4 m", "length", "more than one number"),
        ("1 000 kN", "force", "more than one number"),
        ("5 kN/m2", "pressure or stress", "'m^2', not 'm2'"),
        ("1 W/m*K", "pressure or stress", "ambiguous"),
        ("1 kN/m/m", "pressure or stress", "ambiguous"),
        ("1 kN/m m", "pressure or stress", "ambiguous"),
        ("1,5 kN", "force", "decimal point"),
        ("kN", "force", "does not start with a number"),
        ("5", "force", "has no unit"),
        ("30 degC", "temperature change", "offset"),
        ("2 furlongz", "length", "unknown unit"),
        ("1 kN/(m", "pressure or stress", "unbalanced"),
    ],
)
def test_bad_quantity_strings_are_refused_with_the_string(
    text: str, kind: str, fragment: str
) -> None:
    with pytest.raises(ModelError) as info:
        parse_quantity(text, kind)
    assert repr(text) in str(info.value)
    assert fragment in str(info.value)


def test_unit_factor_checks_the_kind() -> None:
    assert unit_factor("mm", "length") == 1e-3
    assert unit_factor("kN/mm", "spring stiffness") == 1e6
    assert unit_factor("ft", "length") == pytest.approx(0.3048, rel=1e-12)  # 12 in, 1959
    with pytest.raises(ModelError, match="not a unit of a force"):
        unit_factor("MPa", "force")
    with pytest.raises(ModelError, match="is a unit of pressure"):
        unit_factor("psi", "force")


def test_input_units_convert_plain_numbers_by_role() -> None:
    u = InputUnits.from_names({"length": "mm", "section": "cm", "force": "kN",
                               "temperature": "K", "spring": "kN/mm"})
    assert u.to_si(1500, "length") == pytest.approx(1.5, rel=1e-15)
    assert u.to_si(2, "section_area") == pytest.approx(2e-4, rel=1e-15)  # cm^2
    assert u.to_si(3, "second_moment") == pytest.approx(3e-8, rel=1e-15)  # cm^4
    assert u.to_si(-2.5, "force") == -2500.0
    assert u.to_si(2, "spring") == 2e6
    assert u.to_si(12e-6, "expansion") == 12e-6
    assert u.to_si(1e-4, "strain") == 1e-4
    assert u.to_si("3 m", "length") == 3.0  # a string ignores the [units] setting
    # Defaults are SI.
    assert InputUnits().to_si(7, "pressure") == 7.0


@pytest.mark.parametrize("bad", [True, None, [1, 2], float("inf")])
def test_input_units_refuse_non_numbers(bad: object) -> None:
    with pytest.raises(ModelError):
        InputUnits().to_si(bad, "force")


def test_input_units_name_the_setting_with_the_wrong_kind() -> None:
    with pytest.raises(ModelError, match=r"^force: 'MPa' is not a unit of a force"):
        InputUnits.from_names({"force": "MPa"})
    with pytest.raises(ModelError, match="unknown unit setting 'lenght'"):
        InputUnits.from_names({"lenght": "m"})


def test_registry_is_created_once() -> None:
    assert registry() is registry()


@settings(max_examples=40, deadline=None)
@given(
    x=st.floats(min_value=-1e12, max_value=1e12, allow_nan=False, allow_infinity=False),
    unit=st.sampled_from(sorted(COMMON_UNITS)),
)
def test_number_and_table_unit_round_trip(x: float, unit: str) -> None:
    factor, dims = COMMON_UNITS[unit]
    kind = next(k for k in KINDS.values() if k.dims == dims)
    assert parse_quantity(f"{x!r} {unit}", kind.name) == pytest.approx(x * factor, rel=1e-12)


def test_pint_is_imported_only_for_strings_outside_the_table() -> None:
    code = (
        "import sys\n"
        "import spaceframe, spaceframe.units as u, spaceframe.project\n"
        "iu = u.InputUnits.from_names({'length': 'mm', 'force': 'kN', 'stress': 'MPa'})\n"
        "iu.to_si(5, 'force')\n"
        "print('pint' in sys.modules)\n"
        "assert u.parse_quantity('5 kN', 'force') == 5000.0\n"
        "print('pint' in sys.modules)\n"
        "assert abs(u.parse_quantity('5 kip', 'force') - 22241.1) < 0.1\n"
        "print('pint' in sys.modules)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.split()
    # 1 kip = 1000 lbf = 4448.2216 N (NIST SP 811, appendix B).
    assert out == ["False", "False", "True"]


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        ("2 m()", "empty parentheses"),
        ("2 m*()", "empty parentheses"),
        ("2 m(*)", "cannot read the unit"),  # pint's parser asserts internally here
    ],
)
def test_malformed_unit_expressions_are_model_errors(text: str, fragment: str) -> None:
    with pytest.raises(ModelError, match=fragment):
        parse_quantity(text, "length")
