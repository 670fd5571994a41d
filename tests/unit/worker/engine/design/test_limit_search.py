"""Design-limit search (``design.limit_search``).

Check value: a sphere consuming at zero order with its surface held at Cs has the centre
concentration C(0) = Cs - Q R^2 / (6 D) (Hill 1928, *Proc. R. Soc. B* 104, 39; Crank 1975,
*The Mathematics of Diffusion*, §6.4 with a constant sink), so the requirement C_min >= 0 holds
for R <= R_c = sqrt(6 D Cs / Q). Scenario values are invented.
"""

from __future__ import annotations

import math

import pytest

from worker.engine.design import limit_search
from worker.engine.design.limit_search import find_limit

D, CS, Q = 2e-9, 0.2, 2e-2        # m^2/s, mol/m^3, mol/m^3/s
R_C = math.sqrt(6 * D * CS / Q)   # about 3.46e-4 m


def centre_margin(radius):
    return CS - Q * radius**2 / (6 * D)


def _limit_agrees(result, xtol=1e-8):
    return result.value is not None and abs(result.value - R_C) <= 2 * xtol * R_C


@pytest.mark.parametrize("scale", ["log", "linear"])
def test_critical_radius_of_a_zero_order_sphere(scale):
    result = find_limit(centre_margin, 50e-6, 2e-3, scale=scale, xtol_relative=1e-8)
    assert _limit_agrees(result)
    assert result.met_side == "below"
    assert result.bracket[0] <= R_C <= result.bracket[1]
    assert result.reason == "limit found"
    assert result.evaluations > limit_search.DEFAULT_GRID_POINTS


@pytest.mark.parametrize("factor", [1 - 1e-6, 1 + 1e-6])
def test_limit_check_catches_a_root_off_by_one_part_in_a_million(monkeypatch, factor):
    original = limit_search.brentq

    def off(*args, **kwargs):
        root, report = original(*args, **kwargs)
        return root * factor, report

    monkeypatch.setattr(limit_search, "brentq", off)
    assert not _limit_agrees(find_limit(centre_margin, 50e-6, 2e-3, xtol_relative=1e-8))


def test_met_side_above_when_the_margin_grows_with_the_input():
    # the same requirement read on the surface concentration: met for Cs >= Q R^2 / (6 D)
    radius = 3e-4
    cs_min = Q * radius**2 / (6 * D)
    result = find_limit(lambda cs: cs - Q * radius**2 / (6 * D), 0.01, 1.0)
    assert result.value == pytest.approx(cs_min, rel=1e-6)
    assert result.met_side == "above"


@pytest.mark.parametrize("low, high, words", [
    (10e-6, 100e-6, "met everywhere"),
    (1e-3, 5e-3, "missed everywhere"),
])
def test_no_limit_in_range_is_a_result(low, high, words):
    result = find_limit(centre_margin, low, high)
    assert result.value is None and result.met_side is None
    assert words in result.reason and result.bracket == (low, high)


def test_margin_not_finite_is_reported():
    def failing(radius):
        return math.nan if radius > 1e-3 else centre_margin(radius)

    found = find_limit(failing, 50e-6, 2e-3)
    assert _limit_agrees(found, 1e-6) and "not finite at" in found.reason
    nowhere = find_limit(lambda r: math.nan, 50e-6, 2e-3)
    assert nowhere.value is None and "not finite at every scan point" in nowhere.reason


def test_several_sign_changes_take_the_one_nearest_the_nominal_and_name_the_others():
    def window(x):          # met between 1 and 3 only: (x - 1)(3 - x)
        return (x - 1.0) * (3.0 - x)

    lowest = find_limit(window, 0.1, 10.0)
    assert lowest.value == pytest.approx(1.0, rel=1e-6) and lowest.met_side == "above"
    assert len(lowest.other_brackets) == 1 and "other sign change" in lowest.reason
    near = find_limit(window, 0.1, 10.0, nominal=2.5)
    assert near.value == pytest.approx(3.0, rel=1e-6) and near.met_side == "below"


def test_zero_on_a_scan_point_is_the_limit():
    result = find_limit(lambda x: 5.0 - x, 0.0, 10.0, scale="linear", grid_points=11)
    assert result.value == 5.0 and result.met_side == "below"


def test_bad_range_names_the_field():
    with pytest.raises(ValueError, match=r"design_limit\.range"):
        find_limit(centre_margin, 2e-3, 50e-6)
