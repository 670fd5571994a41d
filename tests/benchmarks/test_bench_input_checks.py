"""Benchmark: what the two inputs checks add to a check.

Measured in one run: the independent reading of a case (the unit table and the independent
problem) with both inputs checks, beside a whole ``check_case`` of the same case, warm; and one
unit expression by the table route with and without its cache, beside pint's uncached parse.
Figures printed, nothing asserted about time (shared, noisy machines).

Run with ``make bench``.
"""

from __future__ import annotations

import statistics
import time

from schemas.build import validate_case
from schemas.checking import check_case
from worker.engine import unit_table, units
from worker.engine.independent_problem import build_independent_problem
from worker.engine.input_checks import interpretation_check, unit_routes_check

#: An invented two-layer shell (not a design value).
EXAMPLE_CASE = {
    "schema_version": 1, "title": "benchmark: coated fibre (invented)",
    "geometry": "cylinder", "inner": "100 um", "length": "12 cm",
    "layers": [
        {"name": "fibre wall", "thickness": "40 um", "diffusivity": "1.5e-9 m^2/s",
         "partition": 0.8},
        {"name": "cell layer", "thickness": "150 um", "diffusivity": "2.0e-9 m^2/s",
         "reaction": {"kind": "michaelis_menten", "vmax": "4e-3 mol/m^3/s", "km": "5 umol/L"}},
    ],
    "inner_boundary": {"kind": "concentration", "value": "0.2 mol/m^3", "partition": 0.9},
    "outer_boundary": {"kind": "flux", "value": "0 mol/m^2/s"},
    "regime": {"kind": "steady"},
    "probes": ["120 um", "200 um"],
}


def _per_call_seconds(fn, calls: int, repeats: int = 7) -> float:
    """Median over ``repeats`` batches of the time per call."""
    batches = []
    for _ in range(repeats):
        start = time.perf_counter()
        for _ in range(calls):
            fn()
        batches.append((time.perf_counter() - start) / calls)
    return statistics.median(batches)


def test_inputs_checks_speed():
    validated = validate_case(EXAMPLE_CASE)

    def inputs_checks():
        independent = build_independent_problem(validated.original)
        unit_routes_check(validated.problem, independent, validated.normalised,
                          validated.original)
        return interpretation_check(validated.problem, independent)

    assert inputs_checks().passed
    reading = _per_call_seconds(inputs_checks, 200)
    whole = _per_call_seconds(lambda: check_case(EXAMPLE_CASE), 5, repeats=5)

    def table_uncached():
        unit_table.table_unit.cache_clear()
        unit_table.table_unit("mol/m^3/s")

    def pint_uncached():
        units.unit_to_si.cache_clear()
        units.unit_to_si("mol/m^3/s")

    table_cold = _per_call_seconds(table_uncached, 500)
    table_warm = _per_call_seconds(lambda: unit_table.table_unit("mol/m^3/s"), 5000)
    pint_cold = _per_call_seconds(pint_uncached, 200)

    print()
    print(f"independent reading + both inputs checks (example):  {reading * 1e3:8.3f} ms")
    print(f"whole check_case of the same case, warm:             {whole * 1e3:8.3f} ms")
    print(f"share of the check:                                  {reading / whole:8.1%}")
    print(f"'mol/m^3/s' by the table, parsed / cached:   {table_cold * 1e6:8.1f} / "
          f"{table_warm * 1e6:.2f} us")
    print(f"'mol/m^3/s' by pint, parsed:                 {pint_cold * 1e6:8.1f} us")
