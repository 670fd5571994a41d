"""The design verdict: margins, the indeterminate band, event times not reached, and a
requirement judged on a record whose figure has a published closed form."""

from __future__ import annotations

import math

import pytest

from tests.unit.worker.engine.design.support import sphere_problem
from worker.engine.design.requirements import (
    INDETERMINATE,
    MET,
    NONE_STATED,
    NOT_MET,
    Reading,
    Requirement,
    design_block,
    judge,
    overall_status,
    read_figure,
)
from worker.engine.design.targets import quantities
from worker.engine.run import run_problem
from worker.engine.units import KINDS


def _req(**kwargs) -> Requirement:
    return Requirement(id="R", quantity=kwargs.pop("quantity", "concentration_min"), **kwargs)


@pytest.mark.parametrize(("low", "high", "value", "margin"), [
    (1.0, None, 1.5, 0.5),      # at least: value - bound
    (1.0, None, 0.5, -0.5),
    (None, 2.0, 1.5, 0.5),      # at most: bound - value
    (None, 2.0, 2.5, -0.5),
    (1.0, 2.0, 1.2, 0.2),       # between: the nearer bound
    (1.0, 2.0, 1.9, 0.1),
    (1.0, 2.0, 2.3, -0.3),
    (1.0, 2.0, 0.4, -0.6),
])
def test_margin_is_positive_exactly_when_met(low, high, value, margin):
    requirement = _req(low=low, high=high)
    assert requirement.margin(value) == pytest.approx(margin)
    entry = judge(requirement, Reading(value, 0.0))
    assert entry["status"] == (MET if margin > 0 else NOT_MET)
    assert entry["margin"] == pytest.approx(margin)


def test_relative_margin_is_taken_against_the_nearer_bound():
    entry = judge(_req(low=1.0, high=4.0), Reading(3.5, 0.0))
    assert entry["relative_margin"] == pytest.approx(0.5 / 4.0)
    entry = judge(_req(low=2.0), Reading(1.0, 0.0))
    assert entry["relative_margin"] == pytest.approx(-0.5)
    assert judge(_req(low=0.0), Reading(1.0, 0.0))["relative_margin"] is None


@pytest.mark.parametrize(("value", "band", "status"), [
    (1.0 + 1e-6, 2e-6, INDETERMINATE),   # met by less than the numerical uncertainty
    (1.0 - 1e-6, 2e-6, INDETERMINATE),   # missed by less than it
    (1.0 + 3e-6, 2e-6, MET),
    (1.0 - 3e-6, 2e-6, NOT_MET),
    (1.0 + 3e-6, None, MET),             # no stated band: judged on the value
])
def test_indeterminate_when_the_margin_is_inside_the_numerical_uncertainty(value, band, status):
    assert judge(_req(low=1.0), Reading(value, band))["status"] == status


@pytest.mark.parametrize(("low", "high", "status"), [
    (None, 21 * 86400.0, NOT_MET),        # t90 <= 21 d, not reached in 30 d: missed
    (None, 40 * 86400.0, INDETERMINATE),  # t90 <= 40 d, not reached in 30 d: unknown
    (5 * 86400.0, None, MET),             # t90 >= 5 d, not reached in 30 d: met
    (40 * 86400.0, None, INDETERMINATE),  # t90 >= 40 d: unknown
    (5 * 86400.0, 40 * 86400.0, INDETERMINATE),
])
def test_an_event_time_not_reached_is_decided_only_where_the_duration_suffices(low, high,
                                                                                 status):
    requirement = _req(quantity="t90", low=low, high=high)
    reading = read_figure(requirement, {}, {}, duration=30 * 86400.0)
    assert reading.value is None and reading.beyond == 30 * 86400.0
    entry = judge(requirement, reading)
    assert entry["status"] == status
    assert entry["margin"] is None


def test_a_missing_figure_is_indeterminate_and_says_why():
    entry = judge(_req(quantity="depletion_front", low=1e-4),
                  read_figure(_req(quantity="depletion_front", low=1e-4), {}, {}))
    assert entry["status"] == INDETERMINATE
    assert "no depletion_front" in entry["reason"]


def test_overall_status_orders_not_met_before_indeterminate_before_met():
    assert overall_status([]) == NONE_STATED
    assert overall_status([MET, MET]) == MET
    assert overall_status([MET, INDETERMINATE]) == INDETERMINATE
    assert overall_status([INDETERMINATE, NOT_MET, MET]) == NOT_MET


def test_reads_a_layer_extreme_and_a_series_value_at_its_time():
    quantities = {"concentration_min_layers": {"value": [0.0, 0.012], "uncertainty": [0.0, 2e-7],
                                               "unit": "mol/m^3"}}
    reading = read_figure(_req(layer=1, layer_name="shell", low=0.005), quantities, {})
    assert (reading.value, reading.uncertainty) == (0.012, 2e-7)
    series = {"time": {"values": [3600.0, 7200.0]},
              "release_fraction": {"values": [0.1, 0.3], "uncertainty": [1e-6, 3e-6]}}
    reading = read_figure(_req(quantity="release_fraction", at=7200.0, low=0.2), {}, series)
    assert (reading.value, reading.uncertainty) == (0.3, 3e-6)
    missing = read_figure(_req(quantity="release_fraction", at=5000.0, low=0.2), {}, series)
    assert missing.value is None and "no value at 5000" in (missing.missing or "")


def test_every_requirable_quantity_names_a_dimension_of_the_unit_table():
    for spec in quantities(sphere_problem()).values():
        assert spec.dimension in KINDS, spec.quantity


def test_design_block_on_the_zero_order_sphere_matches_the_closed_form_minimum():
    """A solid sphere of zero-order uptake Q with its surface held at Cs has, while
    Cs ≥ Q R²/(6D), C(r) = Cs − Q (R² − r²)/(6D): its minimum at the centre is
    Cs − Q R²/(6D) (Crank 1975, *The Mathematics of Diffusion*, §6.3 with a constant source;
    Hill 1928, Proc. R. Soc. B 104, 39). The requirement's margin is that minimum minus the
    bound."""
    problem = sphere_problem(radius=200e-6, diffusivity=2e-9, rate=0.02, surface=0.2)
    closed = 0.2 - 0.02 * (200e-6) ** 2 / (6 * 2e-9)
    outcome = run_problem(problem)
    met = Requirement(id="A", quantity="concentration_min", low=closed * 0.9)
    missed = Requirement(id="B", quantity="concentration_min", low=closed * 1.1)
    block = design_block([met, missed], outcome.quantities, outcome.series)
    assert block["status"] == NOT_MET
    first, second = block["requirements"]
    assert first["status"] == MET and second["status"] == NOT_MET
    assert first["value"] == pytest.approx(closed, rel=1e-9)
    assert first["margin"] == pytest.approx(0.1 * closed, rel=1e-6)
    assert second["margin"] == pytest.approx(-0.1 * closed, rel=1e-6)
    assert math.isfinite(first["numerical_uncertainty"])
