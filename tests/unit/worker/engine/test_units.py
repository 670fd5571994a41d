"""Tests of worker.engine.units: parsing dimensional values into SI, and the SI unit names of
results.

Conversion factors checked here are facts of the SI and of unit definitions (common practice):
1 um = 1e-6 m, 1 mL = 1e-6 m^3, 1 mg = 1e-6 kg, 1 d = 86400 s, 1 M = 1 mol/L = 1000 mol/m^3,
1 inch = 0.0254 m exactly (international yard and pound agreement of 1959), 1 mmHg =
133.322387415 Pa (conventional value; from memory).
"""

from __future__ import annotations

import math

import pytest

from worker.engine import units
from worker.engine.units import (
    UnitError,
    format_dimensionality,
    format_si,
    parse_concentration,
    parse_flux,
    parse_quantity,
    parse_volumetric_rate,
    parse_with_basis,
    si_unit,
    unit_to_si,
)

# --- conversions (common practice: SI prefixes and unit definitions) --------------------------


@pytest.mark.parametrize(
    ("raw", "kind", "expected"),
    [
        ("40 um", "length", 4e-5),
        ("40 µm", "length", 4e-5),
        ("12 cm", "length", 0.12),
        ("1 inch", "length", 0.0254),
        ("2 cm^2", "area", 2e-4),
        ("1 cm^2/s", "diffusivity", 1e-4),
        ("2.5e-11 m^2/s", "diffusivity", 2.5e-11),
        ("1e-6 cm**2/s", "diffusivity", 1e-10),
        ("30 d", "time", 30 * 86400.0),
        ("1.5 h", "time", 5400.0),
        ("0.01 1/s", "rate_constant", 0.01),
        ("0.6 1/min", "rate_constant", 0.01),
        ("2 s^-1", "rate_constant", 2.0),
        ("1e-3 cm/s", "velocity", 1e-5),
    ],
)
def test_conversion_to_si(raw, kind, expected):
    assert parse_quantity(raw, kind, "x") == pytest.approx(expected, rel=1e-14, abs=0.0)


@pytest.mark.parametrize(
    ("raw", "expected", "basis"),
    [
        ("1.2 mg/mL", 1.2, "mass"),
        ("0.2 mol/m^3", 0.2, "molar"),
        ("0.2 mM", 0.2, "molar"),
        ("1 M", 1000.0, "molar"),
        ("5 g/L", 5.0, "mass"),
        ("3 ug/mL", 3e-3, "mass"),
    ],
)
def test_concentration_reports_value_and_basis(raw, expected, basis):
    value, found = parse_concentration(raw, "c")
    assert found == basis
    assert value == pytest.approx(expected, rel=1e-14)


def test_decimal_factors_give_the_nearest_float():
    # 40 * 1e-6 in binary floating point is 3.9999999999999996e-05; exact decimal scaling
    # rounds once, to the float nearest 4e-5.
    assert parse_quantity("40 um", "length") == 4e-05
    assert parse_concentration("1.2 mg/mL")[0] == 1.2


def test_rates_and_fluxes_carry_a_basis():
    assert parse_volumetric_rate("4e-3 mol/m^3/s") == (pytest.approx(4e-3), "molar")
    # 1 ug/(mL*h) = 1e-9 kg / 1e-6 m^3 / 3600 s
    value, basis = parse_volumetric_rate("1 ug/mL/h")
    assert basis == "mass" and value == pytest.approx(1e-3 / 3600.0, rel=1e-14)
    # 2 ug/(cm^2*d) = 2e-9 kg / 1e-4 m^2 / 86400 s
    value, basis = parse_flux("2 ug/cm^2/d")
    assert basis == "mass" and value == pytest.approx(2e-5 / 86400.0, rel=1e-14)
    assert parse_flux("0 mol/m^2/s") == (0.0, "molar")


def test_both_forms_give_the_same_value():
    assert parse_quantity({"value": 2.5e-11, "unit": "m^2/s"}, "diffusivity") == parse_quantity(
        "2.5e-11 m^2/s", "diffusivity"
    )
    assert parse_quantity({"value": 40, "unit": "um"}, "length") == 4e-5
    assert parse_with_basis({"value": 1.2, "unit": "mg/mL"}, "concentration") == (1.2, "mass")


def test_kinds_without_basis_report_none():
    assert parse_with_basis("40 um", "length") == (4e-5, None)


# --- refusals --------------------------------------------------------------------------------


def _error(raw, kind, path="layers[0].thickness") -> UnitError:
    with pytest.raises(UnitError) as info:
        parse_with_basis(raw, kind, path)
    assert info.value.path == path
    return info.value


def test_wrong_dimension_names_expected_and_given():
    error = _error("40 um", "diffusivity", "layers[1].diffusivity")
    assert error.message == (
        'expected a diffusivity [length]^2/[time] (e.g. "1e-9 m^2/s"), got "40 um" ([length])'
    )
    assert str(error) == f"layers[1].diffusivity: {error.message}"


def test_pressure_is_not_a_concentration():
    error = _error("5 mmHg", "concentration")
    assert "expected a concentration [substance]/[length]^3 or [mass]/[length]^3" in error.message
    assert "([mass]/[length]/[time]^2)" in error.message


@pytest.mark.parametrize("raw", ["40", "40 ", {"value": 40}, {"value": 40, "unit": ""}, 40, 4.0])
def test_missing_unit(raw):
    assert "the unit is missing" in _error(raw, "length").message


@pytest.mark.parametrize("raw", ["nan m", "NaN m", "inf m", "-inf m", "Infinity m"])
def test_non_finite_strings(raw):
    assert "not finite" in _error(raw, "length").message


@pytest.mark.parametrize("number", [math.nan, math.inf, -math.inf, 10**400])
def test_non_finite_object_values(number):
    assert "not finite" in _error({"value": number, "unit": "m"}, "length").message


def test_number_out_of_float_range():
    assert "out of range" in _error("1e400 m", "length").message
    # in range as written, out of range once converted (1e300 km = 1e303 m is fine; 1e306 km
    # is 1e309 m, beyond the largest double, about 1.8e308)
    assert parse_quantity("1e300 km", "length") == pytest.approx(1e303)
    assert "out of range in SI units" in _error("1e306 km", "length").message


def test_unknown_kind_is_a_programming_error():
    with pytest.raises(ValueError, match="unknown kind 'speed'"):
        parse_quantity("1 m/s", "speed")


def test_unknown_unit():
    error = _error("3 furlongz", "length")
    assert "unknown unit 'furlongz'" in error.message


@pytest.mark.parametrize(
    "raw",
    [
        "40um",  # number and unit need a space between them
        "forty um",
        "1,5 um",
        "0x10 um",
        "1_000 um",
    ],
)
def test_number_part_must_be_a_plain_decimal(raw):
    assert "is not a number" in _error(raw, "length").message


@pytest.mark.parametrize(
    "raw",
    [
        "1 m^(9^9^9)",  # a power tower would take pint a very long time to evaluate
        "1 m^99",
        "1 __import__('os')",
        "1 m; del x",
        "1 m[0]",
        "1 2*m",
    ],
)
def test_unit_grammar_refuses_expressions(raw):
    error = _error(raw, "length")
    assert error.message.startswith("expected a length")


def test_unit_string_length_limit():
    long_unit = "m*" * 40 + "m"
    assert len(long_unit) > units.MAX_UNIT_LENGTH
    assert "longer than" in _error({"value": 1, "unit": long_unit}, "length").message
    assert "longer than" in _error("1 " + "m" * 120, "length").message


@pytest.mark.parametrize(
    "raw",
    [
        True,
        None,
        [1, "m"],
        {"value": True, "unit": "m"},
        {"value": "1", "unit": "m"},
        {"value": 1, "unit": 3},
        {"value": 1, "unit": "m", "note": "x"},
        {"unit": "m"},
    ],
)
def test_malformed_values(raw):
    assert _error(raw, "length").message.startswith("expected a length")


def test_scale_factor_in_unit_is_refused():
    # "10 1/s" would be fine; "1 10/s" puts a number inside the unit expression
    _error("1 10/s", "rate_constant")


# --- cache, registry, output units ------------------------------------------------------------


def test_unit_strings_are_cached():
    unit_to_si("mg/mL")
    before = unit_to_si.cache_info().hits
    unit_to_si("mg/mL")
    assert unit_to_si.cache_info().hits == before + 1


def test_one_registry():
    assert units.registry() is units.registry()


def test_unit_to_si_reports_factor_and_dimensionality():
    factor, dims = unit_to_si("um^2/s")
    assert float(factor) == 1e-12
    assert dims == frozenset({("[length]", 2.0), ("[time]", -1.0)})


@pytest.mark.parametrize(
    ("kind", "basis", "unit"),
    [
        ("concentration", "molar", "mol/m^3"),
        ("concentration", "mass", "kg/m^3"),
        ("flux", "molar", "mol/(m^2*s)"),
        ("flux", "mass", "kg/(m^2*s)"),
        ("volumetric_rate", "molar", "mol/(m^3*s)"),
        ("amount_rate", "molar", "mol/s"),
        ("amount_per_length", "mass", "kg/m"),
        ("amount_rate_per_length", "molar", "mol/(m*s)"),
        ("length", None, "m"),
        ("diffusivity", "mass", "m^2/s"),
        ("rate_constant", None, "1/s"),
        ("velocity", None, "m/s"),
        ("time", None, "s"),
    ],
)
def test_si_unit_names(kind, basis, unit):
    assert si_unit(kind, basis) == unit


def test_si_unit_names_parse_back_to_factor_one():
    for kind in units.KINDS.values():
        for basis, unit in kind.si_units.items():
            if kind.name == "dimensionless":
                continue
            factor, _ = unit_to_si(unit)
            assert float(factor) == 1.0, (kind.name, basis, unit)
            assert parse_with_basis(f"1 {unit}", kind.name) == (1.0, basis)


def test_format_si():
    assert format_si(-1.5e-9, "flux", "mass") == {"value": -1.5e-9, "unit": "kg/(m^2*s)"}
    assert format_si(None, "length") == {"value": None, "unit": "m"}


def test_si_unit_needs_basis_for_basis_kinds():
    with pytest.raises(ValueError, match="needs a basis"):
        si_unit("concentration")


def test_format_dimensionality():
    assert format_dimensionality({"[length]": 2, "[time]": -1}) == "[length]^2/[time]"
    assert format_dimensionality({"[time]": -1}) == "1/[time]"
    assert format_dimensionality({}) == "dimensionless"
