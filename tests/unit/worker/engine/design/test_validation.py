"""The validation comparison (``design.validation``) against ASME V&V 20-2009's definitions.

Source of every check value: ASME V&V 20-2009, *Standard for Verification and Validation in
Computational Fluid Dynamics and Heat Transfer*, §2 (comparison error E = S − D; validation
standard uncertainty u_val = √(u_num² + u_input² + u_D²); the modelling error δ_model lies in
E ± k·u_val) with the uncertainties of §§3–6. The worked example below is constructed here from
those definitions and computed by hand; its uncertainties are chosen as Pythagorean quadruples
(2² + 3² + 6² = 7², 1² + 4² + 8² = 9², 3² + 4² + 12² = 13²) so that every u_val is exact. The
numbers of S and D are invented inputs, not measurements.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from worker.engine.design.validation import (
    DEFAULT_COVERAGE_FACTOR,
    compare,
    validation_block,
)

# Worked example (hand computation, k = 2):
#   point 0: S = 0.50, D = 0.40 → E = +0.10; u = (0.02, 0.03, 0.06) → u_val = 0.07;
#            k·u_val = 0.14 ≥ |E| → not flagged; interval [0.10 − 0.14, 0.10 + 0.14] = [−0.04, 0.24]
#   point 1: S = 0.60, D = 0.80 → E = −0.20; u = (0.01, 0.04, 0.08) → u_val = 0.09;
#            k·u_val = 0.18 < |E| → flagged; interval [−0.38, −0.02]
#   point 2: S = 0.80, D = 0.50 → E = +0.30; u = (0.03, 0.04, 0.12) → u_val = 0.13;
#            k·u_val = 0.26 < |E| → flagged; interval [0.04, 0.56]
#   largest |E|/u_val = 0.30/0.13 = 2.3077
S = [0.50, 0.60, 0.80]
D = [0.40, 0.80, 0.50]
U_NUM = [0.02, 0.01, 0.03]
U_INPUT = [0.03, 0.04, 0.04]
U_D = [0.06, 0.08, 0.12]
TIMES = [3600.0, 7200.0, 14400.0]


def test_worked_example_by_hand():
    result = compare(S, D, U_NUM, U_INPUT, U_D)
    block = result.as_dict("VAL-1", "release_fraction", "1", TIMES)
    assert DEFAULT_COVERAGE_FACTOR == 2.0
    expected = [  # (E, u_val, interval, flagged) from the hand computation above
        (0.10, 0.07, (-0.04, 0.24), False),
        (-0.20, 0.09, (-0.38, -0.02), True),
        (0.30, 0.13, (0.04, 0.56), True),
    ]
    for point, (error, u_val, (low, high), flagged) in zip(block["points"], expected,
                                                           strict=True):
        assert point["comparison_error"] == pytest.approx(error, abs=1e-15)
        assert point["u_val"] == pytest.approx(u_val, rel=1e-14)
        assert point["interval"] == pytest.approx([low, high], abs=1e-14)
        assert point["flagged"] is flagged
    assert block["flagged"] == 2
    assert block["agrees"] is False
    assert block["largest_ratio"] == pytest.approx(0.30 / 0.13, rel=1e-14)
    assert block["u_input_assessed"] is True
    assert [p["time"] for p in block["points"]] == TIMES
    assert [p["u_D"] for p in block["points"]] == U_D
    assert (block["id"], block["quantity"], block["unit"]) == ("VAL-1", "release_fraction", "1")


@pytest.mark.parametrize("sign", [1.0, -1.0], ids=["simulation above", "simulation below"])
@pytest.mark.parametrize("k", [2.0, 3.0])
def test_flagged_beyond_u_val_and_not_within(sign, k):
    """A datum k·u_val·(1 ± 1e-6) away from the simulation, on either side, is flagged beyond
    and not within (u_val = 0.07 from the quadruple 0.02, 0.03, 0.06)."""
    u_val = 0.07
    for factor, flagged in ((1.0 + 1e-6, True), (1.0 - 1e-6, False)):
        measured = 0.5 - sign * factor * k * u_val
        result = compare([0.5], [measured], 0.02, 0.03, 0.06, coverage_factor=k)
        assert bool(result.flagged[0]) is flagged
        assert result.agrees is not flagged
        assert math.copysign(1.0, result.comparison_error[0]) == sign
        block = result.as_dict("s", "q", None, [1.0])
        assert block["flagged"] == int(flagged)
        assert block["largest_ratio"] == pytest.approx(factor * k, rel=1e-12)


def test_data_on_the_simulation_agree():
    result = compare(S, S, U_NUM, U_INPUT, U_D)
    assert result.agrees
    assert np.all(result.comparison_error == 0.0)
    assert result.as_dict("s", "q", "1", TIMES)["largest_ratio"] == 0.0


def test_input_uncertainty_not_assessed():
    """Without u_input, u_val = √(u_num² + u_D²) = √(0.02² + 0.06²) = √0.004; a point with
    E = 0.13 lies within 2·0.07 = 0.14 when u_input = 0.03 is counted, beyond 2·√0.004 = 0.1265
    when it is not."""
    assessed = compare([0.63], [0.50], 0.02, 0.03, 0.06)
    left_out = compare([0.63], [0.50], 0.02, None, 0.06)
    assert left_out.u_val[0] == pytest.approx(math.sqrt(0.004), rel=1e-14)
    assert assessed.u_val[0] == pytest.approx(0.07, rel=1e-14)
    assert not assessed.flagged[0] and left_out.flagged[0]
    block = left_out.as_dict("s", "q", "1", [60.0])
    assert block["u_input_assessed"] is False
    assert block["points"][0]["u_input"] is None
    assert assessed.as_dict("s", "q", "1", [60.0])["u_input_assessed"] is True


def test_one_number_applies_to_every_point():
    each = compare(S, D, [0.02] * 3, [0.03] * 3, [0.06] * 3)
    one = compare(S, D, 0.02, 0.03, 0.06)
    assert np.array_equal(each.u_val, one.u_val)


@pytest.mark.parametrize("args, kwargs, words", [
    (([0.5, 0.6], [0.5], 0.0, 0.0, 0.1), {}, "measured: expected 2 values"),
    (([0.5], [0.5], [0.0, 0.0], 0.0, 0.1), {}, "u_num: expected 1 values"),
    (([0.5], [0.5], 0.0, [0.1, 0.1], 0.1), {}, "u_input: expected 1 values"),
    (([0.5], [0.5], 0.0, 0.0, [0.1, 0.2]), {}, "u_D: expected 1 values"),
    (([0.5], [0.5], -0.01, 0.0, 0.1), {}, "u_num: expected non-negative"),
    (([0.5], [0.5], 0.0, -0.01, 0.1), {}, "u_input: expected non-negative"),
    (([0.5], [0.5], 0.0, 0.0, -0.1), {}, "u_D: expected non-negative"),
    (([0.5], [0.5], math.nan, 0.0, 0.1), {}, "u_num: expected finite"),
    (([0.5], [0.5], 0.0, math.inf, 0.1), {}, "u_input: expected finite"),
    (([math.nan], [0.5], 0.0, 0.0, 0.1), {}, "simulated: expected finite"),
    (([0.5], [math.inf], 0.0, 0.0, 0.1), {}, "measured: expected finite"),
    (([], [], 0.0, 0.0, 0.1), {}, "simulated: expected at least one point"),
    (([0.5], [0.4], 0.0, None, 0.0), {}, "u_val is zero at index 0"),
    (([0.5], [0.4], 0.0, 0.0, 0.1), {"coverage_factor": 0.0}, "coverage_factor: expected a "
                                                              "positive number"),
    (([0.5], [0.4], 0.0, 0.0, 0.1), {"coverage_factor": math.nan}, "coverage_factor"),
    (([[0.5]], [[0.4]], 0.0, 0.0, 0.1), {}, "simulated: expected a list of numbers"),
])
def test_bad_input_is_named(args, kwargs, words):
    with pytest.raises(ValueError, match=words):
        compare(*args, **kwargs)


def test_times_must_match_the_points():
    with pytest.raises(ValueError, match="times: expected 3 values"):
        compare(S, D, U_NUM, U_INPUT, U_D).as_dict("s", "q", "1", [1.0, 2.0])


def test_block_agrees_only_when_no_set_flags():
    flagged = compare(S, D, U_NUM, U_INPUT, U_D).as_dict("A", "q", "1", TIMES)
    clean = compare(S, S, U_NUM, U_INPUT, U_D).as_dict("B", "q", "1", TIMES)
    both = validation_block([clean, flagged], coverage_factor=2.0, u_input_method="m",
                            u_num_method="n")
    assert both["agrees"] is False and [s["id"] for s in both["sets"]] == ["B", "A"]
    assert validation_block([clean], coverage_factor=2.0, u_input_method="m",
                            u_num_method="n")["agrees"] is True
    with pytest.raises(ValueError, match="sets: expected at least one"):
        validation_block([], coverage_factor=2.0, u_input_method="m", u_num_method="n")
