"""The flow case's body minimum against an independent solve of its layers.

The record of the Michaelis-Menten fibre (``FIBRE`` of tests/unit/schemas/test_flow_case.py,
invented, not data) puts the body's minimum on the sealed outer face at the outlet, where the
layers are in their steady radial state for the fluid's wall concentration there. So the
record's ``concentration_min`` must equal the layers' minimum solved at the record's own outlet
wall concentration by any accurate route, to within the record's band. The route here:
``scipy.integrate.solve_bvp`` (J. Kierzenka, L.F. Shampine, "A BVP solver based on residual
control and the MATLAB PSE", ACM TOMS 27 (2001) 299: fourth-order collocation with residual
control) on both layers at once, each mapped onto [0, 1] and scaled, at a residual tolerance
of 1e-10 and the boundary conditions to 1e-14 (it agrees with a DOP853 shooting at rtol 1e-13
to 1e-12 of the minimum); nothing of the engine's solvers, and the case's inputs read here
from the document's own strings (no partition: K = 1 at the wall and the interface).
"""

from __future__ import annotations

import copy
import re

import numpy as np
import pytest
from scipy.integrate import solve_bvp

from schemas.checking import check_case
from tests.unit.schemas.test_flow_case import FIBRE

#: SI factors of the units the fibre's document uses (from memory: 1 um = 1e-6 m, 1 cm = 1e-2
#: m; the rest are SI already).
FACTORS = {"um": 1e-6, "cm": 1e-2, "m^2/s": 1.0, "mol/m^3/s": 1.0, "mol/m^3": 1.0}


def _si(text: str) -> float:
    number, unit = re.fullmatch(r"\s*([-+0-9.eE]+)\s*(\S+)\s*", text).groups()
    return float(number) * FACTORS[unit]


def _layers_minimum_bvp(doc: dict, c_wall: float) -> float:
    """The layers' concentration at the sealed outer face with ``c_wall`` at the lumen wall.

    Per layer k on [a_k, b_k], with s = (r - a_k) / L_k, scaled by the wall concentration and
    the first layer's diffusivity D_1: y = (u, p), u = c / c_wall, p = r D dc/dr / (c_wall D_1),
    so that du/ds = L_k D_1 p / (r D_k) and dp/ds = L_k r R_k(c) / (c_wall D_1),
    R = vmax c / (km + c) (zero in a layer without reaction); u and p continuous at the
    interface (K = 1), u = 1 at the wall, p = 0 at the sealed outer face; reached by
    continuation in the wall concentration from the first-order regime."""
    inner = _si(doc["inner"])
    layers = []
    edge = inner
    for layer in doc["layers"]:
        thickness = _si(layer["thickness"])
        reaction = layer.get("reaction")
        vmax = _si(reaction["vmax"]) if reaction else 0.0
        km = _si(reaction["km"]) if reaction else 1.0
        layers.append((edge, thickness, _si(layer["diffusivity"]), vmax, km))
        edge += thickness
    d_1 = layers[0][2]

    def solve(level: float, s: np.ndarray, guess: np.ndarray):
        def rhs(s, y):
            out = np.empty_like(y)
            for k, (a, thickness, d, vmax, km) in enumerate(layers):
                r = a + s * thickness
                u, p = y[2 * k], y[2 * k + 1]
                out[2 * k] = thickness * d_1 * p / (r * d)
                out[2 * k + 1] = thickness * r * vmax * u / ((km + level * u) * d_1)
            return out

        def bc(left, right):
            conditions = [left[0] - 1.0]
            for k in range(len(layers) - 1):
                conditions += [right[2 * k] - left[2 * k + 2],
                               right[2 * k + 1] - left[2 * k + 3]]
            conditions.append(right[-1])
            return np.array(conditions)

        result = solve_bvp(rhs, bc, s, guess, tol=1e-10, bc_tol=1e-14, max_nodes=500000)
        assert result.success, result.message
        return result

    # continuation in the wall concentration, from far below km (where the uptake is first
    # order) up to c_wall, each solve starting from the last
    km = min(layer[4] for layer in layers)
    levels = np.geomspace(min(1e-3 * km, c_wall), c_wall, 8)
    s = np.linspace(0.0, 1.0, 401)
    guess = np.zeros((2 * len(layers), s.size))
    guess[0::2] = 1.0
    for level in levels:
        result = solve(float(level), s, guess)
        s, guess = result.x, result.y
    return c_wall * float(result.sol(1.0)[-2])


@pytest.fixture(scope="module")
def record():
    return check_case(copy.deepcopy(FIBRE))


def test_the_minimum_is_at_the_outlet_on_the_sealed_face(record):
    r, z = record["quantities"]["concentration_min_position"]["value"]
    edge = _si(FIBRE["inner"]) + sum(_si(ly["thickness"]) for ly in FIBRE["layers"])
    assert r == pytest.approx(edge, rel=1e-12)
    assert z == pytest.approx(_si(FIBRE["length"]), rel=1e-12)


def test_concentration_min_meets_solve_bvp_at_the_outlet_wall_within_its_band(record):
    low = record["quantities"]["concentration_min"]
    outlet_wall = record["series"]["axial"]["wall"][-1]
    independent = _layers_minimum_bvp(FIBRE, outlet_wall)
    # one default finite-volume mesh missed it by 4e-7, 180 times the band it then claimed
    assert abs(low["value"] - independent) <= low["uncertainty"]
    assert low["uncertainty"] < 1e-3 * independent
