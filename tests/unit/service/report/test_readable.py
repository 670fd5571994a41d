"""Readable units beside SI (``service.report.readable``).

Check values are the SI definitions, not the code: 1 L = 1 dm³ = 10⁻³ m³, so 1 mol/m³ =
1 mmol/L; 1 d = 86 400 s, 1 h = 3 600 s (SI Brochure, 9th ed., 2019, Table 8); 1 cm² = 10⁻⁴ m².
"""

from __future__ import annotations

import pytest

from service.report.readable import READABLE_UNITS, readable_text, readable_unit


@pytest.mark.parametrize(("value", "unit", "expected"), [
    (0.005, "mol/m^3", "5 µmol/L"),            # 0.005 mmol/L = 5 µmol/L
    (0.2, "mol/m^3", "200 µmol/L"),
    (3.0, "mol/m^3", "3 mmol/L"),
    (1.2, "kg/m^3", "1.2 g/L"),               # 1 kg/m³ = 1 g/L
    (2.592e6, "s", "30 d"),                   # 30 × 86 400 s
    (5400.0, "s", "1.5 h"),
    (1.75e-4, "m", "175 µm"),
    (2e-3, "m", "2 mm"),
    (1e-6 / 1e-4 / 86400.0, "mol/(m^2*s)", "1 µmol/(cm²·d)"),
    (1e-9 / 1e-4 / 86400.0, "kg/(m^2*s)", "1 µg/(cm²·d)"),
    (5e-6, "kg", "5 mg"),
])
def test_readable_text_by_the_si_definitions(value, unit, expected):
    assert readable_text(value, unit) == expected


def test_a_value_and_its_bound_share_one_unit():
    # the bound sets the scale: 0.0004 beside 0.005 reads in µmol/L, not nmol/L
    assert readable_text(0.0004, "mol/m^3", also=[0.005]) == "0.4 µmol/L"
    assert readable_text(0.0004, "mol/m^3") == "400 nmol/L"


def test_fractions_read_in_percent_other_numbers_stay_as_they_are():
    assert readable_text(0.42, "1", "release_fraction") == "42 %"
    assert readable_text(1.2, "1", "biot_outer") == ""
    assert readable_text(3.0, "1/s") == ""          # a unit with no readable list


def test_si_already_readable_gets_no_second_column():
    assert readable_unit("m", [2.5]) is None        # 2.5 m reads as metres already
    assert readable_unit("s", [30.0]) is None
    assert readable_text(None, "m") == "" and readable_text(float("nan"), "m") == ""


def test_every_list_is_largest_first():
    for unit, scales in READABLE_UNITS.items():
        sizes = [size for _, size in scales]
        assert sizes == sorted(sizes, reverse=True), unit
