"""``front_staircase.staircase_inflow_band`` on a chain of equal elements (a slab on a uniform
mesh): the quasi-steady inflow through m elements in series of conductance k each is
dU k / m (resistances in series, common practice), and moving the saturation point half a cell
either way moves it to dU k / (m -+ 1/2); the band, the first-order change dU k / (2 m^2), lies
between those two changes. Values are invented; the check values are that arithmetic."""

from __future__ import annotations

import numpy as np
import pytest

from worker.engine.transient.front_staircase import staircase_inflow_band

K_ELEMENT = 3.0e-9  # conductance of one element, r^n-weighted, arbitrary
U_SAT = 0.5


def _chain(nodes: int, holding: slice, face_u: float = 0.01):
    stiffness = np.full(nodes - 1, K_ELEMENT)
    solid = np.zeros(nodes)
    solid[holding] = 1.0
    saturation = np.full(nodes, U_SAT)
    u = np.full(nodes, U_SAT)
    return stiffness, solid, np.full(nodes, 1e-12), u, saturation, face_u


@pytest.mark.parametrize(("side", "holding", "elements"),
                         [("outer", slice(0, 6), 15), ("inner", slice(12, 21), 12),
                          ("outer", slice(0, 19), 2)])
def test_the_band_is_the_half_cell_change_of_the_series_flow(side, holding, elements):
    stiffness, solid, present, u, saturation, face_u = _chain(21, holding)
    u[0 if side == "inner" else -1] = face_u
    band = staircase_inflow_band(stiffness, solid, present, u, saturation, side)
    drop = U_SAT - face_u
    flow = drop * K_ELEMENT / elements
    nearer = drop * K_ELEMENT / (elements - 0.5) - flow
    farther = flow - drop * K_ELEMENT / (elements + 0.5)
    assert farther < band < nearer
    assert band == pytest.approx(drop * K_ELEMENT / (2 * elements**2), rel=1e-12)


@pytest.mark.parametrize("film", [0.3 * K_ELEMENT, 3.0 * K_ELEMENT, 300.0 * K_ELEMENT])
def test_behind_a_film_the_chain_to_the_face_node_bounds_the_step(film):
    # m elements and a film of conductance ``film`` in series (common practice): the flow
    # q = dU_b / (rho + rho_film), rho = m / k, the face node at u_b + q rho_film. Half an
    # element's resistance d_rho = 1 / (2 k) changes q by q d_rho / (rho + rho_film) to first
    # order; the band read from the chain to the face node is q d_rho / rho, no smaller, and
    # it lies between the exact changes half a cell farther and nearer of a film-less chain
    elements, u_bulk = 10, 0.0
    stiffness, solid, present, u, saturation, _ = _chain(21, slice(0, 21 - elements))
    rho, rho_film, d_rho = elements / K_ELEMENT, 1.0 / film, 0.5 / K_ELEMENT
    flow = (U_SAT - u_bulk) / (rho + rho_film)
    u[-1] = u_bulk + flow * rho_film
    band = staircase_inflow_band(stiffness, solid, present, u, saturation, "outer")
    first_order = flow * d_rho / (rho + rho_film)
    assert first_order < band
    assert band == pytest.approx(flow * d_rho / rho, rel=1e-12)
    farther = flow - (U_SAT - u_bulk) / (rho + d_rho + rho_film)
    assert farther < band


def test_no_band_without_a_dissolving_node_away_from_the_face():
    stiffness, solid, present, u, saturation, face_u = _chain(9, slice(0, 0))
    assert staircase_inflow_band(stiffness, solid, present, u, saturation, "outer") == 0.0
    # the face node itself holds undissolved solute: no dissolved region between
    stiffness, solid, present, u, saturation, face_u = _chain(9, slice(0, 9))
    assert staircase_inflow_band(stiffness, solid, present, u, saturation, "outer") == 0.0
    # solid below the amount that counts as present
    stiffness, solid, present, u, saturation, face_u = _chain(9, slice(0, 4))
    assert staircase_inflow_band(stiffness, 1e-13 * solid, present, u, saturation,
                                 "outer") == 0.0


def test_a_side_that_is_not_a_face_is_refused():
    stiffness, solid, present, u, saturation, _ = _chain(9, slice(0, 4))
    with pytest.raises(ValueError, match="side"):
        staircase_inflow_band(stiffness, solid, present, u, saturation, "middle")
