"""The published values the qualification kit expects (service/qualification/cases/*.json),
evaluated again here with mpmath from each case's own inputs (read in SI by the case schema),
so a slip in a case file's number, inputs or sign fails a test. Sources beside each formula."""

from __future__ import annotations

import json

import mpmath as mp
import pytest

import schemas
from service.qualification.operational import CASE_DIRECTORY

mp.mp.dps = 30


def _case(case_id: str) -> tuple[dict, dict]:
    data = json.loads((CASE_DIRECTORY / f"{case_id.lower()}.json").read_text(encoding="utf-8"))
    return data, dict(schemas.validate_case(data["case"]).normalised)


def _v(value) -> mp.mpf:
    return mp.mpf(value["value"] if isinstance(value, dict) else value)


def _layer(n: dict, i: int = 0) -> tuple[mp.mpf, mp.mpf]:
    layer = n["layers"][i]
    return _v(layer["thickness"]), _v(layer["diffusivity"])


def _faces(n: dict) -> tuple[mp.mpf, mp.mpf]:
    return _v(n["inner_boundary"]["value"]), _v(n["outer_boundary"]["value"])


def oq01(n):
    """Crank 1975 ch. 4, plane sheet: J = D (C1 - C2)/L."""
    (length, d), (c1, c2) = _layer(n), _faces(n)
    return d * (c1 - c2) / length


def oq02(n):
    """Crank 1975 ch. 5, hollow cylinder: J(b) = D (C1 - C2)/(b ln(b/a))."""
    (thickness, d), (c1, c2) = _layer(n), _faces(n)
    a = _v(n["inner"])
    b = a + thickness
    return d * (c1 - c2) / (b * mp.log(b / a))


def oq03(n):
    """Crank 1975 ch. 6, hollow sphere: J(b) = D (C1 - C2) a/(b (b - a))."""
    (thickness, d), (c1, c2) = _layer(n), _faces(n)
    a = _v(n["inner"])
    b = a + thickness
    return d * (c1 - c2) * a / (b * (b - a))


def oq04(n):
    """Bird, Stewart & Lightfoot 2002 §10.6: resistances in series, L/(D K) per layer."""
    resistance = 1 / _v(n["inner_boundary"]["coefficient"]) + 1 / _v(
        n["outer_boundary"]["coefficient"])
    for i, layer in enumerate(n["layers"]):
        length, d = _layer(n, i)
        resistance += length / (d * _v(layer["partition"]))
    return (_v(n["inner_boundary"]["bulk"]) - _v(n["outer_boundary"]["bulk"])) / resistance


def _outer(n):
    return _v(n["outer_boundary"]["value"])


def oq05(n):
    """Hill 1928, sheet with constant consumption: C(0) = C0 - k L^2/(2 D)."""
    length, d = _layer(n)
    return _outer(n) - _v(n["layers"][0]["reaction"]["rate"]) * length**2 / (2 * d)


def oq06(n):
    """Hill 1928, depth of penetration sqrt(2 D C0/k): the front at L minus it."""
    length, d = _layer(n)
    return length - mp.sqrt(2 * d * _outer(n) / _v(n["layers"][0]["reaction"]["rate"]))


def oq07(n):
    """Hill 1928, sphere with constant consumption: C(0) = C0 - k R^2/(6 D)."""
    radius, d = _layer(n)
    return _outer(n) - _v(n["layers"][0]["reaction"]["rate"]) * radius**2 / (6 * d)


def _phi(n, k):
    length, d = _layer(n)
    return length * mp.sqrt(k / d), d


def oq08(n):
    """Thiele 1939, slab: inward flux C0 sqrt(k D) tanh(phi); outward sign negative."""
    k = _v(n["layers"][0]["reaction"]["rate_constant"])
    phi, d = _phi(n, k)
    return -_outer(n) * mp.sqrt(k * d) * mp.tanh(phi)


def oq09(n):
    """Crank 1975 ch. 14, solid cylinder: C(0) = C0/I0(phi)."""
    phi, _ = _phi(n, _v(n["layers"][0]["reaction"]["rate_constant"]))
    return _outer(n) / mp.besseli(0, phi)


def oq10(n):
    """Thiele 1939, sphere: C(0) = C0 phi/sinh(phi)."""
    phi, _ = _phi(n, _v(n["layers"][0]["reaction"]["rate_constant"]))
    return _outer(n) * phi / mp.sinh(phi)


def oq11(n):
    """Michaelis & Menten 1913 for C << Km is first order with k = Vmax/Km; Thiele 1939, slab."""
    reaction = n["layers"][0]["reaction"]
    k = _v(reaction["vmax"]) / _v(reaction["km"])
    phi, d = _phi(n, k)
    return -_outer(n) * mp.sqrt(k * d) * mp.tanh(phi)


def oq12(n):
    """Crank 1975 §4.3 (Daynes 1920): time lag L^2/(6 D)."""
    length, d = _layer(n)
    return length**2 / (6 * d)


def _half_time(fraction, guess):
    return mp.findroot(lambda t: fraction(t) - mp.mpf(1) / 2, guess)


def oq13(n):
    """Crank 1975 eq. 4.18, sheet of thickness 2L (here L, sealed base): the half time."""
    length, d = _layer(n)
    return _half_time(lambda t: 1 - mp.nsum(
        lambda m: 8 / ((2 * m + 1)**2 * mp.pi**2)
        * mp.exp(-d * (2 * m + 1)**2 * mp.pi**2 * t / (4 * length**2)), [0, mp.inf]),
        0.2 * length**2 / d)


def oq14(n):
    """Crank 1975 eq. 6.20, sphere: 1 - 6/pi^2 sum exp(-D n^2 pi^2 t/a^2)/n^2 = 1/2."""
    a, d = _layer(n)
    return _half_time(lambda t: 1 - 6 / mp.pi**2 * mp.nsum(
        lambda m: mp.exp(-d * m**2 * mp.pi**2 * t / a**2) / m**2, [1, mp.inf]),
        0.03 * a**2 / d)


def oq15(n):
    """Crank 1975 eq. 5.23, cylinder: 1 - sum 4/(a alpha_n)^2 exp(-D alpha_n^2 t) = 1/2."""
    a, d = _layer(n)
    roots = [mp.besseljzero(0, m) for m in range(1, 120)]
    return _half_time(lambda t: 1 - mp.fsum(4 / j**2 * mp.exp(-d * j**2 * t / a**2)
                                            for j in roots), 0.06 * a**2 / d)


FORMULAS = {f"OQ-{i:02d}": f for i, f in enumerate(
    (oq01, oq02, oq03, oq04, oq05, oq06, oq07, oq08, oq09, oq10, oq11, oq12, oq13, oq14,
     oq15), start=1)}


def test_every_case_file_has_an_independent_evaluation_here():
    files = {json.loads(p.read_text(encoding="utf-8"))["id"]
             for p in CASE_DIRECTORY.glob("*.json")}
    assert files == set(FORMULAS)


@pytest.mark.parametrize("case_id", sorted(FORMULAS))
def test_expected_value_is_the_published_form_of_the_case_inputs(case_id):
    data, normalised = _case(case_id)
    published = FORMULAS[case_id](normalised)
    stored = data["expected"]["value"]
    assert float(abs(stored - published) / abs(published)) < 1e-10, (stored, published)
