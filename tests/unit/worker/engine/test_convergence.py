"""Three-grid study (``worker.engine.convergence``) against the published worked example.

Check values: I.B. Celik, U. Ghia, P.J. Roache, C.J. Freitas, H. Coleman, P.E. Raad,
"Procedure for estimation and reporting of uncertainty due to discretization in CFD
applications", J. Fluids Eng. 130 (2008) 078001, Table 1 (column phi = dimensionless reattachment
length, three grids of 18000, 8000 and 4500 cells in two dimensions).
"""

from __future__ import annotations

import math

import pytest

from worker.engine.convergence import fallback_gci, gci_or_fallback, grid_study

# Celik et al. 2008, Table 1: N1, N2, N3 and phi1, phi2, phi3 (inputs)
CELIK_CELLS = (18000, 8000, 4500)
CELIK_VALUES = (6.063, 5.972, 5.863)


def test_celik_table_1_worked_example():
    study = grid_study(CELIK_VALUES, CELIK_CELLS, dimension=2)
    # Table 1: r21 = 1.5, r32 = 1.333
    assert study.ratio_21 == pytest.approx(1.5, rel=1e-12)
    assert study.ratio_32 == pytest.approx(4.0 / 3.0, rel=1e-12)
    # Table 1: p = 1.53, phi_ext21 = 6.1685, e_a21 = 1.5 %, e_ext21 = 1.7 %, GCI_fine21 = 2.2 %
    assert study.apparent_order == pytest.approx(1.53, abs=0.005)
    assert study.extrapolated == pytest.approx(6.1685, abs=5e-4)
    assert study.approximate_relative_error == pytest.approx(0.015, abs=5e-4)
    assert study.extrapolated_relative_error == pytest.approx(0.017, abs=5e-4)
    assert study.gci_fine == pytest.approx(0.022, abs=5e-4)
    assert study.convergence == "monotonic"
    assert study.iterations > 1  # unequal ratios need the fixed-point iteration


def test_ratios_given_directly_match_cell_counts():
    by_cells = grid_study(CELIK_VALUES, CELIK_CELLS, dimension=2)
    by_ratios = grid_study(CELIK_VALUES, ratios=(1.5, 4.0 / 3.0))
    assert by_ratios.apparent_order == pytest.approx(by_cells.apparent_order, rel=1e-9)


def test_second_order_sequence_recovers_order_and_limit():
    # phi(h) = 3 + 0.7 h^2 on h = 1/400, 1/200, 1/100: exact limit 3, order 2 (Richardson
    # extrapolation of an exactly quadratic error; common practice)
    values = [3.0 + 0.7 * h**2 for h in (1 / 400, 1 / 200, 1 / 100)]
    study = grid_study(values, (400, 200, 100))
    assert study.apparent_order == pytest.approx(2.0, abs=1e-6)
    assert study.extrapolated == pytest.approx(3.0, rel=1e-12)
    assert study.convergence == "monotonic"


def test_identical_values_are_converged_to_roundoff_not_a_crash():
    study = grid_study((2.5, 2.5, 2.5), (400, 200, 100))
    assert study.convergence == "converged_to_roundoff"
    assert study.gci_fine == 0.0
    assert study.extrapolated == 2.5
    assert math.isnan(study.apparent_order)


def test_one_zero_difference_is_degenerate():
    study = grid_study((1.0, 1.0, 1.2), (400, 200, 100))
    assert study.convergence == "degenerate"
    assert math.isnan(study.gci_fine)


def test_oscillatory_convergence_is_flagged():
    study = grid_study((1.0, 1.01, 0.97), (400, 200, 100))
    assert study.convergence == "oscillatory"
    assert not study.reliable


def test_growing_differences_are_divergent():
    study = grid_study((1.0, 1.2, 1.3), (400, 200, 100))
    assert study.convergence == "divergent"
    assert math.isnan(study.apparent_order)


def test_growing_oscillation_is_divergent():
    study = grid_study((1.0, 1.2, 1.1), (400, 200, 100))
    assert study.convergence == "divergent"


def test_non_finite_value_is_degenerate():
    study = grid_study((float("nan"), 1.0, 1.1), (400, 200, 100))
    assert study.convergence == "degenerate"


@pytest.mark.parametrize(
    ("kwargs", "fragment"),
    [
        ({"cells": (100, 200, 400)}, "r21 > 1"),
        ({"cells": (400, 200)}, "three cell counts"),
        ({}, "exactly one of"),
        ({"cells": (400, 200, 100), "ratios": (2, 2)}, "exactly one of"),
        ({"cells": (400, 0, 100)}, "positive"),
    ],
)
def test_bad_input_names_the_argument(kwargs, fragment):
    with pytest.raises(ValueError, match=fragment):
        grid_study((1.0, 1.1, 1.2), **kwargs)


def test_wrong_number_of_values():
    with pytest.raises(ValueError, match="three values"):
        grid_study((1.0, 1.1), (400, 200, 100))


def test_gci_or_fallback_takes_the_gci_then_roaches_formal_order_then_zero_at_roundoff():
    # Roache (J. Fluids Eng. 116 (1994) 405): without an observed order, GCI = 3 e_a / (r^p - 1)
    # at the formal order p; e_a = |phi2 - phi1| / |phi1|.
    monotonic = grid_study([1.0 + 1e-4, 1.0 + 4e-4, 1.0 + 1.6e-3], ratios=(2.0, 2.0))
    assert gci_or_fallback(monotonic, 2, 3.0) == monotonic.gci_fine
    wobbling = grid_study([1.0, 1.0 + 1e-3, 1.0], ratios=(2.0, 2.0))
    assert not math.isfinite(wobbling.gci_fine)
    assert gci_or_fallback(wobbling, 2, 3.0) == pytest.approx(3.0 * 1e-3 / 3.0, rel=1e-9)
    assert fallback_gci(wobbling, 1, 3.0) == pytest.approx(3.0 * 1e-3 / 1.0, rel=1e-9)
    flat = grid_study([1.0, 1.0 + 1e-15, 1.0], ratios=(2.0, 2.0))
    assert gci_or_fallback(flat, 2, 3.0) == 0.0
