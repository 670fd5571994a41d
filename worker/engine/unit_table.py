"""A second route from unit expressions to SI, written without pint.

:mod:`worker.engine.units` reads a unit expression with pint. This module reads the same
expressions with its own tokenizer, its own parser and its own table of definitions, so that a
slip in either route shows as a disagreement (the ``inputs.units`` check). Every factor is an
exact :class:`fractions.Fraction`, built from the definitions written out below; the value of a
quantity is rounded to a float once, at the end.

The table holds the SI base units of the four dimensions a case uses (m, kg, s, mol), the SI
prefixes, and the non-SI units an engineer writes for lengths, times, masses, amounts, volumes,
areas, concentrations and rates. Sources: the SI Brochure, 9th edition (BIPM 2019), Tables 1, 2,
4, 7 and 8; NIST Special Publication 811 (2008), Appendix B, for the non-SI units; IEC 80000-13 for
the binary prefixes. Values are written from memory of those documents.

The grammar is the one :mod:`worker.engine.units` admits: unit names (letters, either micro
sign, underscores), ``*``, ``/``, implicit multiplication by juxtaposition, ``^`` or ``**`` with
a small integer exponent (optionally negative, optionally parenthesised; a run of exponents is
read right to left), parentheses, the number ``1``, and the English forms ``per``, ``squared``,
``cubed``, ``square``, ``cubic`` and ``sq``. A name is read as a whole name first, then as a
prefix followed by a name, then as either followed by a plural ``s`` (never after a one-letter
symbol: ``ms`` is a millisecond, ``kgs`` is nothing). Units outside the table raise
:class:`UnitTableError`: the second route then has no reading, and says so, rather than borrow
the first route's.

Dimension vectors are exponents of (length, mass, time, amount of substance).
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache
from types import MappingProxyType

#: Exponents of (length, mass, time, amount of substance).
Dimension = tuple[int, int, int, int]

DIMENSIONLESS: Dimension = (0, 0, 0, 0)
LENGTH: Dimension = (1, 0, 0, 0)
MASS: Dimension = (0, 1, 0, 0)
TIME: Dimension = (0, 0, 1, 0)
AMOUNT: Dimension = (0, 0, 0, 1)

#: Largest magnitude of a combined exponent the parser evaluates (a tower like 2^3^4 is refused
#: before it is computed).
MAX_COMBINED_EXPONENT = 64

#: A decimal number as a case writes it (the same shape :mod:`worker.engine.units` accepts).
_NUMBER_RE = re.compile(r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")
_QUANTITY_RE = re.compile(r"\s*(\S+)(?:\s+(.*?))?\s*", re.DOTALL)
_TOKEN_RE = re.compile(
    r"""
    (?P<space>\s+)
  | (?P<name>[A-Za-z\u00b5\u03bc_]+)
  | (?P<one>1(?![0-9.]))
  | (?P<power>(?:\^|\*\*)\s*(?:-?[0-9]{1,2}|\(\s*-?[0-9]{1,2}\s*\)))
  | (?P<op>[*/])
  | (?P<open>\()
  | (?P<close>\))
    """,
    re.VERBOSE,
)
_EXPONENT_RE = re.compile(r"-?[0-9]{1,2}")
#: What the English forms must sit next to: an identifier of ASCII letters, digits and
#: underscores that starts with a letter or underscore.
_IDENTIFIER_RE = re.compile(r"[_A-Za-z][_A-Za-z0-9]*")


class UnitTableError(ValueError):
    """A unit expression the table route cannot read (unknown name, broken grammar)."""


@dataclass(frozen=True)
class TableUnit:
    """A unit's exact factor to SI base units (m, kg, s, mol) and its dimension vector."""

    factor: Fraction
    dimension: Dimension

    def __mul__(self, other: TableUnit) -> TableUnit:
        return TableUnit(self.factor * other.factor,
                         _add(self.dimension, other.dimension))

    def __truediv__(self, other: TableUnit) -> TableUnit:
        return TableUnit(self.factor / other.factor,
                         _add(self.dimension, tuple(-e for e in other.dimension)))

    def __pow__(self, exponent: int) -> TableUnit:
        return TableUnit(self.factor**exponent,
                         tuple(e * exponent for e in self.dimension))  # type: ignore[arg-type]


def _add(a: tuple[int, ...], b: tuple[int, ...]) -> Dimension:
    return tuple(x + y for x, y in zip(a, b, strict=True))  # type: ignore[return-value]


_ONE = TableUnit(Fraction(1), DIMENSIONLESS)

# ------------------------------------------------------------------------------- definitions

# SI Brochure (2019) Table 2: the base units. The kilogram is the base unit of mass; the gram
# is defined below from it.
_METRE = TableUnit(Fraction(1), LENGTH)
_KILOGRAM = TableUnit(Fraction(1), MASS)
_SECOND = TableUnit(Fraction(1), TIME)
_MOLE = TableUnit(Fraction(1), AMOUNT)
_GRAM = TableUnit(Fraction(1, 1000), MASS)  # SI Brochure §3: prefixes attach to the gram
_MINUTE = _SECOND * TableUnit(Fraction(60), DIMENSIONLESS)  # SI Brochure Table 8
_HOUR = _MINUTE * TableUnit(Fraction(60), DIMENSIONLESS)  # SI Brochure Table 8
_DAY = _HOUR * TableUnit(Fraction(24), DIMENSIONLESS)  # SI Brochure Table 8
# Julian year, 365.25 d (IAU; NIST SP 811 B.8 lists it beside the 365-day year)
_YEAR = _DAY * TableUnit(Fraction(36525, 100), DIMENSIONLESS)
_LITRE = _METRE**3 * TableUnit(Fraction(1, 1000), DIMENSIONLESS)  # SI Brochure Table 8 (1964)
_INCH = _METRE * TableUnit(Fraction(254, 10000), DIMENSIONLESS)  # exact since 1959 (NIST SP 811)
_FOOT = _INCH * TableUnit(Fraction(12), DIMENSIONLESS)
_SURVEY_FOOT = _METRE * TableUnit(Fraction(1200, 3937), DIMENSIONLESS)
_POUND = _KILOGRAM * TableUnit(Fraction(45359237, 10**8), DIMENSIONLESS)  # exact (1959)
# US liquid gallon, 231 in^3 exactly (NIST SP 811 B.8: 3.785 411 784 L)
_GALLON = _INCH**3 * TableUnit(Fraction(231), DIMENSIONLESS)
# Avogadro constant, a defining constant of the SI since 2019 (SI Brochure Table 1)
_AVOGADRO = Fraction(602214076) * Fraction(10) ** 15


def _scaled(unit: TableUnit, factor: Fraction | int) -> TableUnit:
    return TableUnit(unit.factor * Fraction(factor), unit.dimension)


#: Each unit: (its names, symbols and aliases; its definition).
_DEFINITIONS: tuple[tuple[tuple[str, ...], TableUnit], ...] = (
    # SI base units (SI Brochure Table 2) and the gram
    (("m", "meter", "metre"), _METRE),
    (("s", "sec", "second"), _SECOND),
    (("g", "gram"), _GRAM),
    (("mol", "mole"), _MOLE),
    # Non-SI units accepted for use with the SI (SI Brochure Table 8)
    (("min", "minute"), _MINUTE),
    (("h", "hr", "hour"), _HOUR),
    (("d", "day"), _DAY),
    (("l", "L", "liter", "litre"), _LITRE),
    (("t", "tonne", "metric_ton"), _scaled(_KILOGRAM, 1000)),
    (("ha", "hectare"), _scaled(_METRE**2, 10_000)),
    # Units NIST SP 811 (2008) Appendix B lists with exact factors
    (("week",), _scaled(_DAY, 7)),
    (("a", "yr", "year", "julian_year"), _YEAR),
    (("month",), _scaled(_YEAR, Fraction(1, 12))),  # a twelfth of the Julian year
    (("micron", "\u00b5", "\u03bc"), _scaled(_METRE, Fraction(1, 10**6))),
    (("angstrom",), _scaled(_METRE, Fraction(1, 10**10))),
    (("in", "inch", "inches", "international_inch", "international_inches"), _INCH),
    (("ft", "foot", "feet", "international_foot", "international_feet"), _FOOT),
    (("yd", "yard", "international_yard"), _scaled(_FOOT, 3)),
    (("mi", "mile", "international_mile"), _scaled(_FOOT, 5280)),
    (("nmi", "nautical_mile"), _scaled(_METRE, 1852)),
    # US survey units: the survey foot is 1200/3937 m exactly (NIST SP 811 B.6)
    (("sft", "survey_foot"), _SURVEY_FOOT),
    (("li", "link", "survey_link"), _scaled(_SURVEY_FOOT, Fraction(66, 100))),
    (("rd", "rod", "pole", "perch"), _scaled(_SURVEY_FOOT, Fraction(33, 2))),
    (("fathom",), _scaled(_SURVEY_FOOT, 6)),
    (("chain",), _scaled(_SURVEY_FOOT, 66)),
    (("fur", "furlong"), _scaled(_SURVEY_FOOT, 660)),
    (("smi", "survey_mile", "us_statute_mile"), _scaled(_SURVEY_FOOT, 5280)),
    (("league",), _scaled(_SURVEY_FOOT, 3 * 5280)),
    (("acre",), _scaled(_SURVEY_FOOT**2, 43560)),
    (("are",), _scaled(_METRE**2, 100)),
    (("b", "barn"), _scaled(_METRE**2, Fraction(1, 10**28))),
    (("cc", "cubic_centimeter"), _scaled(_METRE**3, Fraction(1, 10**6))),
    (("lambda",), _scaled(_LITRE, Fraction(1, 10**6))),  # the microlitre's old name
    (("gal", "gallon", "liquid_gallon", "US_liquid_gallon"), _GALLON),
    (("qt", "quart", "liquid_quart", "US_liquid_quart"), _scaled(_GALLON, Fraction(1, 4))),
    (("pt", "pint", "liquid_pint", "US_pint"), _scaled(_GALLON, Fraction(1, 8))),
    (("floz", "fluid_ounce", "US_fluid_ounce", "US_liquid_ounce"),
     _scaled(_GALLON, Fraction(1, 128))),
    (("lb", "pound", "avoirdupois_pound", "avdp_pound"), _POUND),
    (("oz", "ounce", "avoirdupois_ounce", "avdp_ounce"), _scaled(_POUND, Fraction(1, 16))),
    (("gr", "grain"), _scaled(_POUND, Fraction(1, 7000))),
    (("ct", "carat"), _scaled(_GRAM, Fraction(2, 10))),  # metric carat, 200 mg
    (("St", "stokes"), _scaled(_METRE**2 / _SECOND, Fraction(1, 10**4))),  # CGS, cm^2/s
    (("kn", "kt", "knot", "knot_international", "international_knot"),
     _scaled(_METRE / _SECOND, Fraction(1852, 3600))),  # a nautical mile per hour
    # SI derived units with special names (SI Brochure Table 4)
    (("Hz", "hertz"), TableUnit(Fraction(1), (0, 0, -1, 0))),
    (("Bq", "becquerel"), TableUnit(Fraction(1), (0, 0, -1, 0))),
    (("kat", "katal"), _MOLE / _SECOND),
    # Amount-based units of chemistry: molar (mol/L, IUPAC Green Book), the enzyme unit
    # (1 umol/min, IUB 1961), and one entity (1/N_A mol)
    (("M", "molar"), _MOLE / _LITRE),
    (("U", "enzyme_unit", "enzymeunit"), _scaled(_MOLE / _MINUTE, Fraction(1, 10**6))),
    (("particle", "molec", "molecule"), _scaled(_MOLE, 1 / _AVOGADRO)),
)

#: Every name of the table, to its unit.
UNITS: Mapping[str, TableUnit] = MappingProxyType(
    {name: unit for names, unit in _DEFINITIONS for name in names})

#: Prefixes, in increasing factor (SI Brochure Table 7; 2022 additions quecto ... quetta from
#: memory of CGPM resolution 3 of 2022), each as (name or symbol, factor); the micro sign, the
#: Greek mu and the ASCII spellings u, mu and mc all mean micro. Then the binary prefixes
#: (IEC 80000-13) and the plain-English semi, demi and sesqui.
_SI_PREFIXES: tuple[tuple[tuple[str, ...], int], ...] = (
    (("quecto", "q"), -30), (("ronto", "r"), -27), (("yocto", "y"), -24),
    (("zepto", "z"), -21), (("atto", "a"), -18), (("femto", "f"), -15),
    (("pico", "p"), -12), (("nano", "n"), -9),
    (("micro", "\u00b5", "\u03bc", "u", "mu", "mc"), -6),
    (("milli", "m"), -3), (("centi", "c"), -2), (("deci", "d"), -1),
    (("deca", "da", "deka"), 1), (("hecto", "h"), 2), (("kilo", "k"), 3),
    (("mega", "M"), 6), (("giga", "G"), 9), (("tera", "T"), 12), (("peta", "P"), 15),
    (("exa", "E"), 18), (("zetta", "Z"), 21), (("yotta", "Y"), 24), (("ronna", "R"), 27),
    (("quetta", "Q"), 30),
)
_BINARY_PREFIXES: tuple[tuple[tuple[str, ...], int], ...] = (
    (("kibi", "Ki"), 10), (("mebi", "Mi"), 20), (("gibi", "Gi"), 30), (("tebi", "Ti"), 40),
    (("pebi", "Pi"), 50), (("exbi", "Ei"), 60), (("zebi", "Zi"), 70), (("yobi", "Yi"), 80),
)

#: Prefix spellings to factors, in the order a name is tried against them.
PREFIXES: Mapping[str, Fraction] = MappingProxyType(
    {
        **{name: Fraction(10) ** power for names, power in _SI_PREFIXES for name in names},
        **{name: Fraction(2) ** power for names, power in _BINARY_PREFIXES for name in names},
        "semi": Fraction(1, 2),
        "demi": Fraction(1, 2),
        "sesqui": Fraction(3, 2),
    }
)


def _resolve_name(name: str) -> TableUnit:
    """One unit name: whole, else prefix + name, else either with a plural ``s``."""
    unit = UNITS.get(name)
    if unit is not None:
        return unit
    for suffix in ("", "s"):
        if suffix and not name.endswith(suffix):
            continue
        stem_of_name = name[: len(name) - len(suffix)]
        for prefix, factor in (("", Fraction(1)), *PREFIXES.items()):
            if not stem_of_name.startswith(prefix):
                continue
            stem = stem_of_name[len(prefix):]
            if suffix and len(stem) == 1:  # a one-letter symbol takes no plural
                continue
            if stem in UNITS:
                return _scaled(UNITS[stem], factor)
    raise UnitTableError(f"unit name {name!r} is not in the table")


# ------------------------------------------------------------------------------------- parser


@dataclass(frozen=True)
class _Token:
    kind: str  # name, one, power, op, open, close
    text: str
    space_before: str  # the whitespace between this token and the previous one
    exponent: int = 0


def _tokens(unit: str) -> list[_Token]:
    tokens: list[_Token] = []
    position, space = 0, ""
    while position < len(unit):
        match = _TOKEN_RE.match(unit, position)
        if match is None:
            raise UnitTableError(f"unexpected {unit[position]!r} at character {position + 1}")
        kind = match.lastgroup or ""
        text = match.group()
        position = match.end()
        if kind == "space":
            space = text
            continue
        exponent = 0
        if kind == "power":
            digits = _EXPONENT_RE.search(text)
            exponent = int(digits.group()) if digits else 0
        tokens.append(_Token(kind, text, space, exponent))
        space = ""
    return _english_forms(tokens)


def _english_forms(tokens: list[_Token]) -> list[_Token]:
    """Rewrite ``a per b`` (single spaces) as ``a / b``; ``x squared`` / ``x cubed`` and
    ``square x`` / ``cubic x`` / ``sq x`` (x an ASCII identifier) as powers of x."""
    out: list[_Token] = []
    index = 0
    while index < len(tokens):
        token = tokens[index]
        following = tokens[index + 1] if index + 1 < len(tokens) else None
        if (token.kind == "name" and token.text == "per" and token.space_before == " "
                and following is not None and following.space_before == " " and out):
            out.append(_Token("op", "/", token.space_before))
            index += 1
            continue
        if (token.kind == "name" and token.text in ("squared", "cubed") and out
                and token.space_before and out[-1].kind == "name"
                and _ends_with_identifier(out[-1].text)):
            out.append(_Token("power", "^", "", 2 if token.text == "squared" else 3))
            index += 1
            continue
        if (token.kind == "name" and token.text in ("square", "cubic", "sq")
                and following is not None and following.kind == "name"
                and following.space_before and _IDENTIFIER_RE.fullmatch(following.text)):
            out.append(following)
            out.append(_Token("power", "^", "", 3 if token.text == "cubic" else 2))
            index += 2
            continue
        out.append(token)
        index += 1
    return out


def _ends_with_identifier(text: str) -> bool:
    return bool(re.search(r"[_A-Za-z][_A-Za-z0-9]*$", text))


class _Parser:
    """Recursive descent over the tokens: product := factor ((* | / | juxtaposition) factor)*,
    factor := atom power*, atom := name | 1 | ( product )."""

    def __init__(self, tokens: list[_Token]) -> None:
        self.tokens = tokens
        self.index = 0

    def _peek(self) -> _Token | None:
        return self.tokens[self.index] if self.index < len(self.tokens) else None

    def parse(self) -> TableUnit:
        if not self.tokens:
            raise UnitTableError("empty unit expression")
        result = self._product()
        if self._peek() is not None:
            raise UnitTableError(f"unexpected {self._peek().text!r}")  # type: ignore[union-attr]
        return result

    def _product(self) -> TableUnit:
        result = self._factor()
        while True:
            token = self._peek()
            if token is None or token.kind == "close":
                return result
            if token.kind == "op":
                self.index += 1
                right = self._factor()
                result = result * right if token.text == "*" else result / right
            elif token.kind in ("name", "one", "open"):
                previous = self.tokens[self.index - 1]
                if (token.kind in ("name", "one") and not token.space_before
                        and previous.kind in ("name", "one")):
                    # "m1", "1m1", "mm" would be one identifier to a tokenizer of names
                    if previous.kind == "name" or token.kind == "one":
                        raise UnitTableError(f"{previous.text + token.text!r} is not a name")
                result = result * self._factor()
            else:
                raise UnitTableError(f"unexpected {token.text!r}")

    def _factor(self) -> TableUnit:
        base = self._atom()
        exponents = []
        while (token := self._peek()) is not None and token.kind == "power":
            exponents.append(token.exponent)
            self.index += 1
        if not exponents:
            return base
        combined = exponents[-1]
        for exponent in reversed(exponents[:-1]):  # a run of powers is read right to left
            if abs(combined) > MAX_COMBINED_EXPONENT or (exponent == 0 and combined < 0):
                raise UnitTableError("exponent tower out of range")
            power = Fraction(exponent) ** combined
            if power.denominator != 1:
                raise UnitTableError(f"exponent {power} is not an integer")
            combined = int(power)
        if abs(combined) > MAX_COMBINED_EXPONENT:
            raise UnitTableError(f"exponent {combined} is too large")
        return base**combined

    def _atom(self) -> TableUnit:
        token = self._peek()
        if token is None:
            raise UnitTableError("expression ends where a unit was expected")
        self.index += 1
        if token.kind == "name":
            return _resolve_name(token.text)
        if token.kind == "one":
            return _ONE
        if token.kind == "open":
            inner = self._product()
            closing = self._peek()
            if closing is None or closing.kind != "close":
                raise UnitTableError("unclosed parenthesis")
            self.index += 1
            return inner
        raise UnitTableError(f"unexpected {token.text!r}")


@lru_cache(maxsize=1024)
def table_unit(unit: str) -> TableUnit:
    """Exact factor to SI base units and dimension vector of a unit expression.

    Parameters
    ----------
    unit : str
        A unit expression (``"mg/mL"``, ``"um^2/s"``, ``"mol per m^3"``).

    Raises
    ------
    UnitTableError
        A name outside the table, or an expression outside the grammar.
    """
    return _Parser(_tokens(unit.strip())).parse()


def table_quantity(raw: object) -> tuple[float, Dimension]:
    """SI value (one rounding) and dimension vector of a case's dimensional value.

    ``raw`` is ``"<number> <unit>"``, ``{"value": number, "unit": str}`` or the bare number 0
    (which a case may give for ``inner``). A number in the object form is read as the decimal
    it prints as (its ``repr``), as a JSON text would carry it.

    Raises
    ------
    UnitTableError
        A value of another shape, a number that is not a plain decimal, or an unreadable unit.
    """
    if isinstance(raw, str):
        match = _QUANTITY_RE.fullmatch(raw)
        if match is None or match.group(2) is None:
            raise UnitTableError(f"expected '<number> <unit>', got {raw!r}")
        number_text, unit = match.group(1), match.group(2)
        if not _NUMBER_RE.fullmatch(number_text):
            raise UnitTableError(f"{number_text!r} is not a decimal number")
        number = Fraction(number_text)
    elif isinstance(raw, Mapping) and set(raw) == {"value", "unit"}:
        value, unit = raw["value"], raw["unit"]
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise UnitTableError(f"expected a number as 'value', got {value!r}")
        if not isinstance(unit, str):
            raise UnitTableError(f"expected a string as 'unit', got {unit!r}")
        number = Fraction(repr(value)) if isinstance(value, float) else Fraction(value)
    elif type(raw) in (int, float) and raw == 0:
        return 0.0, LENGTH
    else:
        raise UnitTableError(f"expected '<number> <unit>' or {{value, unit}}, got {raw!r}")
    converted = table_unit(unit)
    return float(number * converted.factor), converted.dimension  # one rounding, exact before
