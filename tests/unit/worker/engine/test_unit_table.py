"""The second unit route (worker.engine.unit_table) against definitions and against pint.

Factors checked here are facts of unit definitions: SI prefixes (SI Brochure, 9th ed., BIPM 2019,
Table 7); minute, hour, day, litre and tonne (SI Brochure Table 8); 1 inch = 0.0254 m and
1 lb = 0.45359237 kg exactly (international yard and pound agreement of 1959); the US gallon of
231 cubic inches = 3.785411784 L (NIST SP 811, 2008, Appendix B.8); the Julian year of 365.25 d
(IAU); the Avogadro constant 6.02214076e23 /mol (SI Brochure Table 1); 1 M = 1 mol/L; the
enzyme unit 1 umol/min (IUB 1961) — all from memory.

The agreement tests compare the table with pint (through worker.engine.units) over every unit
string the test suite and the demo cases use, over every prefix x name of the table and over
compound expressions built from them.
"""

from __future__ import annotations

import itertools
import json
import logging
import random
import re
from fractions import Fraction
from pathlib import Path

import pytest

from worker.engine import units
from worker.engine.unit_table import (
    AMOUNT,
    LENGTH,
    MASS,
    PREFIXES,
    TIME,
    UNITS,
    UnitTableError,
    table_quantity,
    table_unit,
)

ROOT = Path(__file__).resolve().parents[4]
ORDER = ("[length]", "[mass]", "[time]", "[substance]")
#: Dimensions a case field may have (every kind of worker.engine.units).
VALID_DIMENSIONS = {
    frozenset((name, float(exp)) for name, exp in dims.items())
    for kind in units.KINDS.values() for dims in kind.dimensions.values() if dims
}
#: Names pint holds as units of their own, of a dimension a case field takes, that the table
#: reads as a prefix and another unit: "dgal" the US dry gallon (table: a tenth of the liquid
#: gallon), "Rd" the rutherford (table: a ronna-day), "Ta" and "Tt" textile units of mass per
#: length (table: tera-annum, tera-tonne), "mcc" a micro speed of light (table: micro-cc). The
#: only generated names on which the routes differ: a case using one fails ``inputs.units``.
READ_DIFFERENTLY = {"Rd", "Ta", "Tt", "dgal", "dgals", "dqt", "dqts", "mcc"}
#: Names the table reads as a prefixed unit while pint reads a unit no case field takes
#: ("Pa" pascal, "cd" candela, "at" technical atmosphere, ...): the first route refuses such a
#: case, so the table route never sees it.
PINT_READS_OTHERWISE = {"Eh", "Gb", "Pa", "Td", "at", "cd", "dat"}


def _pint(unit: str) -> tuple[Fraction, tuple[int, ...]] | None:
    """pint's reading of ``unit`` when it is one a case field accepts, else None."""
    try:
        factor, dims = units.unit_to_si(unit)
    except ValueError:
        return None
    if dims not in VALID_DIMENSIONS:
        return None
    exponents = dict(dims)
    return Fraction(factor), tuple(int(exponents.get(name, 0)) for name in ORDER)


def _table(unit: str) -> tuple[Fraction, tuple[int, ...]] | None:
    try:
        read = table_unit(unit)
    except UnitTableError:
        return None
    return read.factor, read.dimension


def _agree(unit: str) -> bool:
    a, b = _pint(unit), _table(unit)
    if a is None:
        return True  # not a unit any case field accepts: the table route never sees it
    if b is None or a[1] != b[1]:
        return False
    # pint's factors are 34-digit decimals: 1/60 is not exact there
    return abs(a[0] - b[0]) <= Fraction(1, 10**25) * abs(a[0])


# --- definitions --------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("unit", "factor", "dimension"),
    [
        ("um", Fraction(1, 10**6), LENGTH),
        ("\u00b5m", Fraction(1, 10**6), LENGTH),
        ("\u03bcm", Fraction(1, 10**6), LENGTH),
        ("nm", Fraction(1, 10**9), LENGTH),
        ("cm", Fraction(1, 100), LENGTH),
        ("inch", Fraction(254, 10**4), LENGTH),
        ("mg", Fraction(1, 10**6), MASS),
        ("ug", Fraction(1, 10**9), MASS),
        ("kg", Fraction(1), MASS),
        ("lb", Fraction(45359237, 10**8), MASS),
        ("h", Fraction(3600), TIME),
        ("day", Fraction(86400), TIME),
        ("min", Fraction(60), TIME),
        ("yr", Fraction(3155760000, 100), TIME),
        ("nmol", Fraction(1, 10**9), AMOUNT),
        ("molecule", Fraction(1, 602214076 * 10**15), AMOUNT),
        ("mL", Fraction(1, 10**6), (3, 0, 0, 0)),
        ("gal", Fraction(3785411784, 10**12), (3, 0, 0, 0)),
        ("M", Fraction(1000), (-3, 0, 0, 1)),
        ("U", Fraction(1, 60 * 10**6), (0, 0, -1, 1)),
        ("mg/mL", Fraction(1), (-3, 1, 0, 0)),
        ("ug/cm^2/d", Fraction(1, 10**5 * 86400), (-2, 1, -1, 0)),
        ("cm^2/s", Fraction(1, 10**4), (2, 0, -1, 0)),
    ],
)
def test_factors_follow_the_definitions(unit, factor, dimension):
    read = table_unit(unit)
    assert read.factor == factor
    assert read.dimension == dimension


@pytest.mark.parametrize(
    ("unit", "same_as"),
    [
        ("mol per m^3", "mol/m^3"),
        ("m squared/s", "m^2/s"),
        ("sq cm", "cm^2"),
        ("square cm", "cm^2"),
        ("cubic cm", "cm^3"),
        ("m cubed", "m^3"),
        ("mol m^-3", "mol/m^3"),
        ("mol/m^3/s", "mol/(m^3*s)"),
        ("mol/m s", "mol*s/m"),  # juxtaposition is a product of the same rank as / (left first)
        ("1/s", "s^-1"),
        ("s**(-1)", "1/s"),
        ("m^2^3", "m^8"),  # a run of powers is read right to left
        ("(m/s)^2/m", "m/s^2"),
        ("1m", "m"),
        ("days", "d"),
        ("mins", "min"),
    ],
)
def test_grammar_forms(unit, same_as):
    assert table_unit(unit) == table_unit(same_as)


@pytest.mark.parametrize(
    "unit",
    ["m1", "kgs", "furlongz", "parsec", "()", "(m", "m)", "/s", "m^2^-1", "m^12^12^12", "", "m 2",
     "per s", "square \u00b5m"],
)
def test_refusals(unit):
    with pytest.raises(UnitTableError):
        table_unit(unit)


def test_quantities_round_once():
    # 40 * 1e-6 in binary floating point is 3.9999999999999996e-05; exact scaling rounds once
    assert table_quantity("40 um") == (4e-05, LENGTH)
    assert table_quantity({"value": 40, "unit": "um"}) == (4e-05, LENGTH)
    assert table_quantity({"value": 0.1, "unit": "um"}) == (1e-07, LENGTH)
    assert table_quantity("1.2 mg/mL") == (1.2, (-3, 1, 0, 0))
    assert table_quantity(0) == (0.0, LENGTH)


@pytest.mark.parametrize("raw", ["40", "forty um", "40 furlongz", {"value": "1", "unit": "m"},
                                 {"value": 1, "unit": 3}, None, 3.0])
def test_quantity_refusals(raw):
    with pytest.raises(UnitTableError):
        table_quantity(raw)


# --- agreement with pint --------------------------------------------------------------------

_QUANTITY_RE = re.compile(
    r"""["']\s*[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?\s+([^"'\n]+?)\s*["']""")
_UNIT_FIELD_RE = re.compile(r"""["']unit["']\s*:\s*["']([^"'\n]+)["']""")


def _unit_strings_in_the_project() -> set[str]:
    found: set[str] = set()
    files = [*ROOT.joinpath("tests").rglob("*.py"), *ROOT.joinpath("tests").rglob("*.json"),
             *ROOT.joinpath("service", "demo_cases").glob("*.json")]
    for path in files:
        if path.name == Path(__file__).name:
            continue  # this file's refusals
        text = path.read_text(encoding="utf-8")
        found.update(m.group(1) for m in _QUANTITY_RE.finditer(text))
        found.update(m.group(1) for m in _UNIT_FIELD_RE.finditer(text))
    return {u for u in found if len(u) <= units.MAX_UNIT_LENGTH}


def test_every_unit_string_of_the_tests_and_demo_cases():
    strings = _unit_strings_in_the_project()
    accepted = {u for u in strings if _pint(u) is not None}
    assert len(accepted) > 30  # the harvest found the suite's units
    assert {"um", "mg/mL", "m^2/s", "1/s", "mol/m^3", "d", "cm^2"} <= accepted
    # "parsec" stands in tests/unit/schemas/test_independent_inputs.py for a unit outside the
    # table on purpose
    assert sorted(u for u in accepted if not _agree(u)) == ["parsec"]


def test_demo_cases_read_alike_value_by_value():
    for path in sorted(ROOT.joinpath("service", "demo_cases").glob("*.json")):
        case = json.loads(path.read_text(encoding="utf-8"))
        for layer in case["layers"]:
            value, _ = table_quantity(layer["thickness"])
            assert value == units.parse_quantity(layer["thickness"], "length"), path.name


def _generated_names() -> set[str]:
    names = set()
    for name in UNITS:
        names.add(name)
        for prefix in ("", *PREFIXES):
            names.add(prefix + name)
            if len(name) > 1:
                names.add(prefix + name + "s")
    return names


def test_every_prefix_and_name_of_the_table(caplog):
    """Both directions over every prefix x name (x plural) of the table: where pint reads a
    unit a case takes, the table reads the same; where the table reads a name, pint knows it."""
    caplog.set_level(logging.ERROR)  # pint logs a warning for each ambiguous name
    names = _generated_names()
    assert len(names) > 10_000
    differing, unknown_to_pint, otherwise = set(), set(), set()
    for unit in names:
        if not _agree(unit):
            differing.add(unit)
        if _table(unit) is None or _pint(unit) is not None:
            continue
        try:
            units.unit_to_si(unit)
        except ValueError:
            unknown_to_pint.add(unit)
            continue
        otherwise.add(unit)
    assert differing == READ_DIFFERENTLY
    assert unknown_to_pint == set()
    assert otherwise == PINT_READS_OTHERWISE


def test_compound_expressions(caplog):
    caplog.set_level(logging.ERROR)
    pool = sorted(prefix + name for prefix in ("", "m", "u", "\u00b5", "n", "c", "k", "mc")
                  for name in UNITS if prefix + name not in READ_DIFFERENTLY
                  and _pint(prefix + name) is not None)
    chooser = random.Random(20261204)
    templates = ["{a}/{b}", "{a}/{b}^2", "{a}*{b}", "{a} {b}", "{a}/({b}*{c})", "{a}/{b}/{c}",
                 "1/{a}", "{a}^-1", "({a}/{b})**2", "{a} per {b}", "{a}^(3)/{c}"]
    checked = 0
    for template, _ in itertools.product(templates, range(40)):
        a, b, c = (chooser.choice(pool) for _ in range(3))
        unit = template.format(a=a, b=b, c=c)
        if len(unit) > units.MAX_UNIT_LENGTH:
            continue
        checked += _pint(unit) is not None
        assert _agree(unit), unit
    assert checked > 60
