"""Which overrides of a case's ``tolerances`` loosen a default limit (the record's
``deviations``). The defaults are the engine's own (worker/engine/limits.py); the rule is the
issue's: an override above the default it replaces is a deviation, a tighter one is not."""

from __future__ import annotations

from worker.engine.limits import STEADY_LIMITS, TRANSIENT_LIMITS, loosened_limits


def test_an_override_above_its_default_is_listed_with_both_values():
    assert loosened_limits({"mass_balance": 1e6}, STEADY_LIMITS) == [
        ("mass_balance", STEADY_LIMITS["mass_balance"], 1e6)]


def test_an_override_at_or_below_its_default_is_no_deviation():
    tolerances = {"mass_balance": STEADY_LIMITS["mass_balance"], "gci": 1e-6}
    assert loosened_limits(tolerances, STEADY_LIMITS) == []


def test_a_quantity_override_is_compared_with_its_family_default():
    # cross_check.flux_outer has no default of its own: the cross_check family's applies.
    assert loosened_limits({"cross_check.flux_outer": 2e-4}, STEADY_LIMITS) == [
        ("cross_check.flux_outer", STEADY_LIMITS["cross_check"], 2e-4)]
    # cross_check.depletion_front has its own (wider) default: 1e-3 is below it.
    assert loosened_limits({"cross_check.depletion_front": 1e-3}, STEADY_LIMITS) == []


def test_the_regime_chooses_the_defaults():
    # 5e-4 loosens the steady cross-check limit (1e-4) but not the transient one (1e-3).
    tolerances = {"cross_check": 5e-4}
    assert [name for name, *_ in loosened_limits(tolerances, STEADY_LIMITS)] == ["cross_check"]
    assert loosened_limits(tolerances, TRANSIENT_LIMITS) == []
