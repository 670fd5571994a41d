"""Parse dimensional input values into SI magnitudes, and name the SI units used in results.

A dimensional value arrives either as a string ``"<number> <unit>"`` (``"40 um"``,
``"2.5e-11 m^2/s"``) or as an object ``{"value": <number>, "unit": "<unit>"}``. The number is read
by ``float()`` only, after a strict decimal pattern has matched it; the unit expression is checked
against a small grammar (unit names, ``*``, ``/``, ``^`` or ``**`` with a small integer exponent,
parentheses, a leading ``1``) and then handed to pint's unit parser (``UnitRegistry.parse_units``),
which reads it with its own tokenizer and never with Python's ``eval``. Nothing else of the
user's text reaches pint.

SI inside: metre, second, kilogram, mole. Concentration-like quantities come on one of two bases,
``"molar"`` (amount of substance, mol) or ``"mass"`` (kg), and the parsers report which one they
found so that a case can insist on a single basis.

The registry works in ``decimal.Decimal`` so that unit factors are exact decimal numbers
(``um`` is exactly 1e-6, ``mg/mL`` exactly 1 kg/m^3) and the number times the factor is rounded to
a float once: ``"40 um"`` gives exactly the float ``4e-05``.

Unit strings are resolved once and cached (:func:`unit_to_si`), so a warm parse costs a regular
expression match, a dictionary look-up and one decimal multiplication.
"""

from __future__ import annotations

import decimal
import math
import re
import tokenize
from collections.abc import Mapping
from dataclasses import dataclass
from functools import cached_property, lru_cache
from types import MappingProxyType
from typing import Any, cast

#: Longest unit expression accepted, in characters.
MAX_UNIT_LENGTH = 64
#: Longest ``"<number> <unit>"`` string accepted, in characters.
MAX_QUANTITY_STRING_LENGTH = 100
#: Largest magnitude of an exponent inside a unit expression (``m^-3`` is fine, ``m^999`` is not).
MAX_UNIT_EXPONENT = 12

BASES = ("molar", "mass")

#: A JSON-style decimal number: optional sign, digits with optional fraction, optional exponent.
NUMBER_PATTERN = r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?"
_NUMBER_RE = re.compile(rf"^{NUMBER_PATTERN}$")
_QUANTITY_STRING_RE = re.compile(r"^\s*(\S+)(?:\s+(.*?))?\s*$", re.DOTALL)
#: What the JSON Schema export uses for the string form: a number, whitespace, a unit.
QUANTITY_STRING_PATTERN = rf"^\s*{NUMBER_PATTERN}\s+\S[\s\S]*$"

# Tokens of the unit grammar. A unit name is letters (with either micro sign) and underscores;
# an exponent is a small integer, optionally negative, optionally parenthesised.
_UNIT_TOKEN_RE = re.compile(
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
_EXPONENT_DIGITS_RE = re.compile(r"-?[0-9]{1,2}")


class UnitError(ValueError):
    """A dimensional value that cannot be accepted.

    Parameters
    ----------
    path : str
        Where the value sits in the case document (``layers[1].diffusivity``); empty for the
        document itself or when the caller does not know it.
    message : str
        What was expected and what was given.
    """

    def __init__(self, path: str, message: str) -> None:
        super().__init__(f"{path}: {message}" if path else message)
        self.path = path
        self.message = message


@dataclass(frozen=True)
class Kind:
    """A physical kind of value: its description, accepted dimensions and SI unit per basis.

    ``dimensions`` maps a basis (``"molar"``, ``"mass"``, or ``None`` for kinds without one) to a
    dimensionality, itself a mapping of pint base dimension to exponent.
    """

    name: str
    description: str
    dimensions: Mapping[str | None, Mapping[str, int]]
    si_units: Mapping[str | None, str]
    examples: tuple[str, ...]

    @property
    def has_basis(self) -> bool:
        return None not in self.dimensions

    @cached_property
    def expected(self) -> str:
        """The "expected ..." phrase of error messages."""
        return _expected_text(self)

    @cached_property
    def dimension_keys(self) -> tuple[tuple[str | None, frozenset[tuple[str, float]]], ...]:
        return tuple((b, _dimensionality_key(d.items())) for b, d in self.dimensions.items())


def _kind(name, description, dimensions, si_units, examples) -> Kind:
    return Kind(
        name,
        description,
        MappingProxyType({k: MappingProxyType(v) for k, v in dimensions.items()}),
        MappingProxyType(dict(si_units)),
        tuple(examples),
    )


def _with_basis(name, description, per, si_molar, si_mass, examples) -> Kind:
    """A kind whose dimension is (amount or mass) times ``per``."""
    return _kind(
        name,
        description,
        {"molar": {"[substance]": 1, **per}, "mass": {"[mass]": 1, **per}},
        {"molar": si_molar, "mass": si_mass},
        examples,
    )


#: Every kind of value fluxproof reads or reports, by name.
KINDS: Mapping[str, Kind] = MappingProxyType(
    {
        k.name: k
        for k in (
            _kind("dimensionless", "a dimensionless number", {None: {}}, {None: "1"}, ["0.8"]),
            _kind("length", "a length", {None: {"[length]": 1}}, {None: "m"}, ["40 um"]),
            _kind("area", "an area", {None: {"[length]": 2}}, {None: "m^2"}, ["2 cm^2"]),
            _kind(
                "volume", "a volume", {None: {"[length]": 3}}, {None: "m^3"}, ["1 mL"]
            ),
            _kind("time", "a time", {None: {"[time]": 1}}, {None: "s"}, ["30 d"]),
            _kind(
                "diffusivity",
                "a diffusivity",
                {None: {"[length]": 2, "[time]": -1}},
                {None: "m^2/s"},
                ["1e-9 m^2/s"],
            ),
            _kind(
                "volume_flow_rate",
                "a volume flow rate",
                {None: {"[length]": 3, "[time]": -1}},
                {None: "m^3/s"},
                ["0.5 mL/min"],
            ),
            _kind(
                "rate_constant",
                "a first-order rate constant",
                {None: {"[time]": -1}},
                {None: "1/s"},
                ["0.01 1/s"],
            ),
            _kind(
                "velocity",
                "a mass-transfer coefficient",
                {None: {"[length]": 1, "[time]": -1}},
                {None: "m/s"},
                ["1e-5 m/s"],
            ),
            _with_basis(
                "concentration",
                "a concentration",
                {"[length]": -3},
                "mol/m^3",
                "kg/m^3",
                ["0.2 mol/m^3", "1.2 mg/mL"],
            ),
            _with_basis(
                "volumetric_rate",
                "a volumetric reaction rate",
                {"[length]": -3, "[time]": -1},
                "mol/(m^3*s)",
                "kg/(m^3*s)",
                ["4e-3 mol/m^3/s", "1 ug/mL/h"],
            ),
            _with_basis(
                "flux",
                "a flux density",
                {"[length]": -2, "[time]": -1},
                "mol/(m^2*s)",
                "kg/(m^2*s)",
                ["0 mol/m^2/s", "2 ug/cm^2/d"],
            ),
            _with_basis("amount", "an amount", {}, "mol", "kg", ["1 mmol", "5 mg"]),
            _with_basis(
                "amount_per_area",
                "an amount per unit area",
                {"[length]": -2},
                "mol/m^2",
                "kg/m^2",
                ["1 mol/m^2", "1 ug/cm^2"],
            ),
            _with_basis(
                "amount_per_length",
                "an amount per unit length",
                {"[length]": -1},
                "mol/m",
                "kg/m",
                ["1 mol/m", "1 mg/cm"],
            ),
            _with_basis(
                "amount_rate",
                "an amount per unit time",
                {"[time]": -1},
                "mol/s",
                "kg/s",
                ["1 umol/h", "1 ug/d"],
            ),
            _with_basis(
                "amount_rate_per_length",
                "an amount per unit time and length",
                {"[length]": -1, "[time]": -1},
                "mol/(m*s)",
                "kg/(m*s)",
                ["1 mol/m/s", "1 ug/cm/d"],
            ),
        )
    }
)


@lru_cache(maxsize=1)
def registry():
    """The one pint ``UnitRegistry`` of the process, built on first use (about a second)."""
    import pint

    return pint.UnitRegistry(non_int_type=decimal.Decimal)


# Private context: the arithmetic must not depend on whatever the process set as its default.
_DECIMAL = decimal.Context(prec=34, Emax=999_999, Emin=-999_999)


def _check_unit_grammar(unit: str) -> None:
    """Refuse unit expressions outside the small grammar (see the module docstring)."""
    position = 0
    while position < len(unit):
        match = _UNIT_TOKEN_RE.match(unit, position)
        if match is None:
            raise ValueError(
                f"unexpected {unit[position]!r} at character {position + 1}: a unit expression "
                "holds unit names, '*', '/', '^' with a small integer exponent, and parentheses"
            )
        if match.lastgroup == "power":
            digits = cast(re.Match[str], _EXPONENT_DIGITS_RE.search(match.group()))
            exponent = int(digits.group())
            if abs(exponent) > MAX_UNIT_EXPONENT:
                raise ValueError(f"exponent {exponent} is larger than {MAX_UNIT_EXPONENT}")
        position = match.end()


def _dimensionality_key(pairs) -> frozenset[tuple[str, float]]:
    return frozenset((name, float(exp)) for name, exp in pairs if exp != 0)


@lru_cache(maxsize=2048)
def unit_to_si(unit: str) -> tuple[decimal.Decimal, frozenset[tuple[str, float]]]:
    """Resolve a unit expression once.

    Parameters
    ----------
    unit : str
        A unit expression such as ``"mg/mL"`` or ``"mol/m^3/s"``.

    Returns
    -------
    factor : decimal.Decimal
        Multiplier from the unit to SI base units (m, s, kg, mol): ``"um"`` gives 1e-6.
    dimensionality : frozenset of (str, float)
        Pint base dimensions and their exponents, e.g. ``{("[length]", 2.0), ("[time]", -1.0)}``.

    Raises
    ------
    ValueError
        The expression is too long, breaks the grammar, names an unknown unit or carries a
        scale factor.
    """
    if len(unit) > MAX_UNIT_LENGTH:
        raise ValueError(f"unit expression longer than {MAX_UNIT_LENGTH} characters")
    _check_unit_grammar(unit)
    import pint

    ureg = registry()
    try:
        parsed = ureg.parse_units(unit)
        in_base_units = ureg.Quantity(decimal.Decimal(1), parsed).to_base_units()
        factor = decimal.Decimal(in_base_units.magnitude)
    except (
        pint.errors.PintError,
        ValueError,
        TypeError,
        AttributeError,
        SyntaxError,
        decimal.DecimalException,
        # pint's tokenizer and parser on malformed input ("(", "m**"), found by fuzzing
        tokenize.TokenError,
        AssertionError,
        IndexError,
        KeyError,
    ) as exc:
        raise ValueError(f"unknown unit {unit!r} ({str(exc) or type(exc).__name__})") from None
    if not factor.is_finite() or factor == 0:
        raise ValueError(f"unit {unit!r} has no usable factor to SI")
    return factor, _dimensionality_key(parsed.dimensionality.items())


def format_dimensionality(dims) -> str:
    """``{"[length]": 2, "[time]": -1}`` → ``"[length]^2/[time]"``; empty → ``"dimensionless"``."""
    items = dict(dims)
    order = ["[substance]", "[mass]", "[length]", "[time]"]
    names = sorted(items, key=lambda n: (order.index(n) if n in order else len(order), n))

    def term(name, exp):
        exp = abs(exp)
        exp = int(exp) if float(exp).is_integer() else exp
        return name if exp == 1 else f"{name}^{exp}"

    top = [term(n, items[n]) for n in names if items[n] > 0]
    bottom = [term(n, items[n]) for n in names if items[n] < 0]
    if not top and not bottom:
        return "dimensionless"
    text = "*".join(top) if top else "1"
    for b in bottom:
        text += "/" + b
    return text


def _kind_named(name: str) -> Kind:
    try:
        return KINDS[name]
    except KeyError:
        raise ValueError(f"unknown kind {name!r}; known: {', '.join(KINDS)}") from None


def _expected_text(kind: Kind) -> str:
    dims = " or ".join(format_dimensionality(d) for d in kind.dimensions.values())
    examples = " or ".join(f'"{e}"' for e in kind.examples)
    return f"expected {kind.description} {dims} (e.g. {examples})"


def _split(raw: Any, kind: Kind, path: str) -> tuple[decimal.Decimal, str, str]:
    """Return (number, unit expression, text for messages) from either input form."""
    if isinstance(raw, str):
        if len(raw) > MAX_QUANTITY_STRING_LENGTH:
            raise UnitError(
                path,
                f"{kind.expected}, got a string longer than "
                f"{MAX_QUANTITY_STRING_LENGTH} characters",
            )
        match = _QUANTITY_STRING_RE.match(raw)
        if match is None:
            raise UnitError(path, f'{kind.expected}, got "{raw}" (no number)')
        number_text, unit = match.group(1), match.group(2) or ""
        shown = f'"{raw}"'
        if not _NUMBER_RE.match(number_text):
            if number_text.lower().lstrip("+-") in ("nan", "inf", "infinity"):
                raise UnitError(path, f"{kind.expected}, got {shown}: the number is not finite")
            raise UnitError(
                path,
                f'{kind.expected}, got {shown}: "{number_text}" is not a number followed '
                "by a space",
            )
        if not math.isfinite(float(number_text)):
            raise UnitError(path, f"{kind.expected}, got {shown}: the number is out of range")
        try:
            number = decimal.Decimal(number_text)
        except decimal.InvalidOperation:  # an exponent too large for any decimal
            raise UnitError(path, f"{kind.expected}, got {shown}: the number is out of range"
                            ) from None
    elif isinstance(raw, Mapping):
        extra = sorted(set(raw) - {"value", "unit"})
        if extra:
            raise UnitError(
                path, f"{kind.expected}; an object form takes only 'value' and 'unit', got {extra}"
            )
        if "value" not in raw:
            raise UnitError(path, f"{kind.expected}; the object form needs a 'value'")
        given, unit = raw["value"], raw.get("unit")
        if isinstance(given, bool) or not isinstance(given, int | float):
            raise UnitError(path, f"{kind.expected}; 'value' must be a number, got {given!r}")
        if unit is None:
            unit = ""
        if not isinstance(unit, str):
            raise UnitError(path, f"{kind.expected}; 'unit' must be a string, got {unit!r}")
        try:
            given = float(given)
        except OverflowError:
            given = math.inf
        shown = f'"{given!r} {unit}"' if unit else f"{given!r}"
        if not math.isfinite(given):
            raise UnitError(path, f"{kind.expected}, got {shown}: the number is not finite")
        number = decimal.Decimal(repr(given))
    elif isinstance(raw, bool) or raw is None or not isinstance(raw, int | float):
        raise UnitError(path, f"{kind.expected}, got {raw!r}")
    else:
        raise UnitError(path, f"{kind.expected}, got the bare number {raw!r}: the unit is missing")
    if not unit.strip():
        raise UnitError(path, f"{kind.expected}, got {shown}: the unit is missing")
    return number, unit.strip(), shown


def parse_with_basis(raw: Any, kind: str, path: str = "") -> tuple[float, str | None]:
    """Parse a dimensional value of the given kind into its SI magnitude.

    Parameters
    ----------
    raw : str or mapping
        ``"<number> <unit>"`` or ``{"value": number, "unit": str}``.
    kind : str
        A key of :data:`KINDS` (``"length"``, ``"diffusivity"``, ``"concentration"``, ...).
    path : str
        Location of the value in the document, for the error.

    Returns
    -------
    value : float
        Magnitude in the SI unit of the kind (``si_unit(kind, basis)``).
    basis : str or None
        ``"molar"`` or ``"mass"`` for kinds with a basis, else None.

    Raises
    ------
    UnitError
        Missing or unknown unit, wrong dimension, NaN or infinity, malformed input.
    """
    spec = _kind_named(kind)
    number, unit, shown = _split(raw, spec, path)
    try:
        factor, dims = unit_to_si(unit)
    except ValueError as exc:
        raise UnitError(path, f"{spec.expected}, got {shown}: {exc}") from None
    for basis, key in spec.dimension_keys:
        if dims == key:
            try:
                value = float(_DECIMAL.multiply(number, factor))
            except decimal.DecimalException:
                value = math.inf
            if not math.isfinite(value):
                raise UnitError(path, f"{spec.expected}, got {shown}: out of range in SI units")
            return value, basis
    raise UnitError(path, f"{spec.expected}, got {shown} ({format_dimensionality(dims)})")


def parse_quantity(raw: Any, dimension: str, path: str = "") -> float:
    """SI magnitude of a dimensional value; ``dimension`` is a key of :data:`KINDS`.

    See :func:`parse_with_basis`, which also reports the basis of concentration-like kinds.
    """
    return parse_with_basis(raw, dimension, path)[0]


def parse_concentration(raw: Any, path: str = "") -> tuple[float, str]:
    """A concentration in mol/m^3 (basis ``"molar"``) or kg/m^3 (basis ``"mass"``)."""
    return cast(tuple[float, str], parse_with_basis(raw, "concentration", path))


def parse_volumetric_rate(raw: Any, path: str = "") -> tuple[float, str]:
    """A reaction rate in mol/(m^3*s) (``"molar"``) or kg/(m^3*s) (``"mass"``)."""
    return cast(tuple[float, str], parse_with_basis(raw, "volumetric_rate", path))


def parse_flux(raw: Any, path: str = "") -> tuple[float, str]:
    """A flux density in mol/(m^2*s) (``"molar"``) or kg/(m^2*s) (``"mass"``)."""
    return cast(tuple[float, str], parse_with_basis(raw, "flux", path))


def si_unit(kind: str, basis: str | None = None) -> str:
    """The SI unit string fluxproof reports for a kind (``"flux"``, ``"molar"`` → ``mol/(m^2*s)``).

    Kinds without a basis ignore ``basis``; kinds with one require ``"molar"`` or ``"mass"``.
    """
    spec = _kind_named(kind)
    if not spec.has_basis:
        return spec.si_units[None]
    if basis not in BASES:
        raise ValueError(f"kind {kind!r} needs a basis 'molar' or 'mass', got {basis!r}")
    return spec.si_units[basis]


def format_si(value: float | None, kind: str, basis: str | None = None) -> dict:
    """``{"value": value, "unit": si_unit(kind, basis)}``, the shape used in results."""
    return {"value": None if value is None else float(value), "unit": si_unit(kind, basis)}
