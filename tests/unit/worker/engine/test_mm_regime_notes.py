"""Michaelis-Menten regime notes: built on the concentration the solution actually has at the
fed face, not on vmax/km alone.

Check values from the definitions: the Thiele modulus L sqrt(k/D) (E.W. Thiele, Ind. Eng. Chem.
31 (1939) 916) and the generalised modulus ``Phi = L R(Cs) / sqrt(2 D int_0^Cs R dc)``
(K.B. Bischoff, AIChE J. 11 (1965) 351; R. Aris, *The Mathematical Theory of Diffusion and
Reaction in Permeable Catalysts*, 1975, ch. 3), with ``int_0^Cs vmax c/(km + c) dc =
vmax (Cs - km ln(1 + Cs/km))`` worked by hand here. Scenario values are invented.
"""

from __future__ import annotations

import math
import re

import pytest

from worker.engine import check_case
from worker.engine.model import Layer, Reaction
from worker.engine.reaction_measures import generalised_modulus, michaelis_menten_regime

L, D, KM, VMAX = 1.0e-3, 1.0e-9, 1.0e-3, 1.0e-4  # m, m^2/s, mol/m^3, mol/m^3/s


def _phi_bischoff(surface: float, vmax: float = VMAX, km: float = KM) -> float:
    rate = vmax * surface / (km + surface)
    integral = vmax * (surface - km * math.log(1.0 + surface / km))
    return L * rate / math.sqrt(2.0 * D * integral)


def _layer(vmax: float = VMAX, km: float = KM) -> Layer:
    return Layer("cells", L, D, 1.0, Reaction("michaelis_menten", vmax=vmax, km=km))


def _case(surface: float, *, film: str | None = None, regime: dict | None = None) -> dict:
    outer = ({"kind": "concentration", "value": f"{surface} mol/m^3"} if film is None else
             {"kind": "mass_transfer", "coefficient": film, "bulk": f"{surface} mol/m^3"})
    return {
        "schema_version": 1, "title": "MM regime scenario", "geometry": "slab", "inner": "0 m",
        "layers": [{"name": "cells", "thickness": f"{L} m", "diffusivity": f"{D} m^2/s",
                    "partition": 1.0,
                    "reaction": {"kind": "michaelis_menten", "vmax": f"{VMAX} mol/m^3/s",
                                 "km": f"{KM} mol/m^3"}}],
        "inner_boundary": {"kind": "symmetry"}, "outer_boundary": outer,
        "regime": regime or {"kind": "steady"},
    }


def _mm_note(record: dict) -> str:
    (note,) = [w for w in record["warnings"] if "layers[0]" in w]
    return note


def _number(note: str, label: str) -> float:
    return float(re.search(label + r" ([-+0-9.e]+)", note).group(1))


def test_modulus_limits_follow_the_definition():
    # C << km: first order with k = vmax/km; C >> km: zero order, L sqrt(vmax / (2 D Cs))
    assert generalised_modulus(_layer(), 1e-6 * KM) == pytest.approx(
        L * math.sqrt(VMAX / KM / D), rel=1e-5)
    assert generalised_modulus(_layer(), 1e8 * KM) == pytest.approx(
        L * math.sqrt(VMAX / (2.0 * D * 1e8 * KM)), rel=1e-6)
    assert generalised_modulus(_layer(), 3.0 * KM) == pytest.approx(_phi_bischoff(3.0 * KM),
                                                                    rel=1e-12)


@pytest.mark.parametrize("level", [1e-200, 1e-300, 5e-324])
def test_modulus_at_a_vanishing_level_is_the_first_order_limit(level):
    """A level so small that (C/km)^2 underflows still gives L sqrt(vmax/(km D)) (the drawn
    case that once divided by zero)."""
    assert generalised_modulus(_layer(), level) == pytest.approx(
        L * math.sqrt(VMAX / KM / D), rel=1e-9)


@pytest.mark.parametrize("ratio, regime", [(0.05, "first-order-like"), (1.0, "mixed"),
                                           (10.0, "saturated"), (200.0, "saturated")])
def test_regime_by_saturation(ratio, regime):
    found = michaelis_menten_regime(_layer(), ratio * KM)
    assert found.regime == regime
    assert found.effective_rate_constant == pytest.approx(VMAX / (KM + ratio * KM), rel=1e-14)


def test_saturated_layer_is_not_called_reaction_limited():
    # vmax/km gives L sqrt(vmax/(km D)) = 10 > 3, but fed at 200 km the layer is saturated:
    # the generalised modulus is about 0.50 and the old note would have misled
    record = check_case(_case(0.2))
    assert record["quantities"]["thiele_modulus"]["value"][0] == pytest.approx(10.0, rel=1e-12)
    note = _mm_note(record)
    assert "saturated" in note and "reaction-limited" in note and "not reaction-limited" in note
    assert _number(note, "C/km =") == pytest.approx(200.0, rel=1e-3)
    assert _number(note, r"vmax/\(km \+ C\) =") == pytest.approx(VMAX / (KM + 0.2), rel=1e-3)
    assert _number(note, "generalised Thiele modulus") == pytest.approx(_phi_bischoff(0.2),
                                                                         rel=1e-2)
    assert _phi_bischoff(0.2) < 3.0


def test_dilute_layer_is_reaction_limited_at_its_first_order_modulus():
    # fed at 0.01 km the kinetics are first order and both moduli are about 10
    record = check_case(_case(1e-5))
    note = _mm_note(record)
    assert "close to first order" in note and "not reaction-limited" not in note
    assert _number(note, "generalised Thiele modulus") == pytest.approx(_phi_bischoff(1e-5),
                                                                         rel=1e-2)
    assert _phi_bischoff(1e-5) > 3.0


def test_the_fed_level_is_the_solution_s_not_the_bulk():
    # through a film the face sits below the bulk: the note reads the solution's surface value
    record = check_case(_case(0.05, film="1e-6 m/s"))
    surface = record["quantities"]["surface_outer"]["value"]
    assert surface < 0.05
    note = _mm_note(record)
    assert _number(note, "fed at C =") == pytest.approx(surface, rel=1e-3)
    assert _number(note, "generalised Thiele modulus") == pytest.approx(
        _phi_bischoff(surface), rel=1e-2)


def test_transient_record_carries_the_note_at_its_final_state():
    record = check_case(_case(0.2, regime={"kind": "transient", "duration": "2 h",
                                           "times": ["1 h", "2 h"]}))
    note = _mm_note(record)
    assert "at t = 7200 s" in note and "saturated" in note
    assert _number(note, "C/km =") == pytest.approx(200.0, rel=1e-3)
