"""The short-time diffusivity estimate (``design.short_time``).

Check values: Crank, *The Mathematics of Diffusion*, 2nd ed., 1975, §4.3 (M_t/M_inf =
2 (D t/(pi l^2))^(1/2)) evaluated here; the weighted slope through the origin against
numpy.linalg.lstsq on the weighted system; the propagated standard error against the scatter of
seeded Monte Carlo replicates (first-order propagation, JCGM 100:2008 §5.1.2, is accurate when
the relative standard error is small). Diffusivities, thicknesses and times are invented.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from worker.engine.design.short_time import FRACTION_LIMIT, short_time_diffusivity

D = 3.0e-12  # m^2/s, invented
L = 0.4e-3  # m, invented


def short_form(t, d=D, length=L):
    """Crank 1975 §4.3: M_t/M_inf = 2 (D t / (pi l^2))^(1/2)."""
    return 2.0 * np.sqrt(d * np.asarray(t) / (math.pi * length**2))


TIMES = np.linspace(100.0, 6000.0, 12)  # fractions 0.05 to 0.38


def test_exact_short_form_data_return_d():
    """Data on the short form itself give D back to rounding."""
    result = short_time_diffusivity(TIMES, short_form(TIMES), 0.01, L)
    assert result.diffusivity == pytest.approx(D, rel=1e-12, abs=0)
    assert result.points == 12 and result.available and result.reason is None


def test_slope_matches_weighted_lstsq_and_d_formula():
    """Slope through the origin from numpy.linalg.lstsq on sqrt(w) x, sqrt(w) y, and
    D = pi l^2 s^2 / 4 (Crank 1975 §4.3 rearranged)."""
    rng = np.random.default_rng(1)
    u = np.linspace(0.005, 0.02, TIMES.size)
    y = short_form(TIMES) + rng.normal(0.0, u)
    result = short_time_diffusivity(TIMES, y, u, L)
    x = np.sqrt(TIMES)
    slope = np.linalg.lstsq((x / u)[:, None], y / u, rcond=None)[0][0]
    assert result.slope == pytest.approx(slope, rel=1e-12, abs=0)
    assert result.diffusivity == pytest.approx(math.pi * L**2 * slope**2 / 4.0, rel=1e-12, abs=0)


def test_standard_error_matches_monte_carlo_scatter():
    """4000 seeded replicates with noise 0.01: the standard deviation of the D estimates is
    within 5 % of the propagated standard error (the sampling error of a standard deviation
    from 4000 draws is ~1.1 %; first-order propagation errs by ~(u/D)^2, here ~0.1 %)."""
    rng = np.random.default_rng(2)
    clean = short_form(TIMES)
    estimates = [short_time_diffusivity(TIMES, clean + rng.normal(0, 0.01, TIMES.size), 0.01,
                                        L).diffusivity for _ in range(4000)]
    stated = short_time_diffusivity(TIMES, clean, 0.01, L).standard_error
    assert np.std(estimates, ddof=1) == pytest.approx(stated, rel=0.05, abs=0)


def test_points_above_the_limit_are_left_out():
    """A point beyond the 0.5 limit (here a wild 0.9 at a late time) does not move D."""
    t = np.append(TIMES, 20000.0)
    y = np.append(short_form(TIMES), 0.9)
    result = short_time_diffusivity(t, y, 0.01, L)
    assert result.points == 12
    assert result.diffusivity == pytest.approx(D, rel=1e-12, abs=0)
    assert FRACTION_LIMIT == 0.5


def test_fewer_than_two_qualifying_points_give_none_with_a_reason():
    """One point at or below 0.5 (t = 0 does not count): no estimate, the reason says why;
    two points do give one."""
    t = np.array([0.0, 3000.0, 40000.0, 90000.0])
    y = np.array([0.0, 0.3, 0.7, 0.9])
    result = short_time_diffusivity(t, y, 0.01, L)
    assert result.diffusivity is None and result.standard_error is None
    assert not result.available
    assert "1 point(s)" in result.reason and "at least 2" in result.reason
    assert result.agrees_with(D, 1e-13) is None
    assert result.as_dict()["estimate"] is None

    two = short_time_diffusivity(t[:3] * [1, 1, 0.1], [0.0, 0.3, 0.45], 0.01, L)
    assert two.available and two.points == 2


def test_non_positive_slope_gives_none_with_a_reason():
    result = short_time_diffusivity(TIMES, -short_form(TIMES), 0.01, L)
    assert result.diffusivity is None and "not positive" in result.reason


def test_agreement_test_both_ways():
    """|D1 - D2| <= 2 sqrt(u1^2 + u2^2): inside agrees, outside does not."""
    result = short_time_diffusivity(TIMES, short_form(TIMES), 0.01, L)
    u = result.standard_error
    assert result.agrees_with(D + 2.0 * math.hypot(u, u) * 0.99, u) is True
    assert result.agrees_with(D + 2.0 * math.hypot(u, u) * 1.01, u) is False


@pytest.mark.parametrize("args, match", [
    (([1.0, 2.0], [0.1], 0.01, L), "times, fractions: expected two lists of equal"),
    (([1.0, 2.0], [0.1, 0.2], [0.01], L), "standard_uncertainty: expected 2 values"),
    (([1.0, 2.0], [0.1, 0.2], 0.0, L), "standard_uncertainty: expected positive"),
    (([1.0, 2.0], [0.1, math.nan], 0.01, L), "expected finite numbers"),
    (([1.0, 2.0], [0.1, 0.2], 0.01, 0.0), "thickness: expected a positive length"),
])
def test_bad_input_names_the_field(args, match):
    with pytest.raises(ValueError, match=match):
        short_time_diffusivity(*args)


def test_record_block():
    block = short_time_diffusivity(TIMES, short_form(TIMES), 0.01, L).as_dict()
    assert block["unit"] == "m^2/s" and block["points"] == 12
    assert "Crank 1975" in block["source"] and "§4.3" in block["source"]
    assert block["estimate"] == pytest.approx(D, rel=1e-12, abs=0)
