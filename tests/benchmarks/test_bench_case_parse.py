"""Benchmark: validating a case document, and what the unit-string cache buys.

Target (case schema issue): a whole case validates in well under 1 ms once warm. Measured side by
side in one run: the first validation in the process (registry build included), warm
``validate_case``, the marshmallow load alone, and one unit parse with and without the
unit-string cache. Figures printed, nothing asserted about time (shared, noisy machines).

Run with ``make bench``.
"""

from __future__ import annotations

import statistics
import time

from schemas import validate_case
from schemas.build import load_case
from worker.engine import units

#: The example case of the design document (an invented scenario).
EXAMPLE_CASE = {
    "schema_version": 1,
    "title": "Hollow-fibre module B: oxygen across the fibre wall into the cell layer",
    "reference": "optional",
    "tags": ["module-b"],
    "geometry": "cylinder",
    "inner": "100 um",
    "length": "12 cm",
    "layers": [
        {"name": "fibre wall", "thickness": "40 um", "diffusivity": "1.5e-9 m^2/s",
         "partition": 0.8},
        {"name": "cell layer", "thickness": "150 um", "diffusivity": "2.0e-9 m^2/s",
         "partition": 1.0,
         "reaction": {"kind": "michaelis_menten", "vmax": "4e-3 mol/m^3/s", "km": "5e-3 mol/m^3"}},
    ],
    "inner_boundary": {"kind": "concentration", "value": "0.2 mol/m^3"},
    "outer_boundary": {"kind": "flux", "value": "0 mol/m^2/s"},
    "regime": {"kind": "steady"},
    "tolerances": {"cross_check": 1e-4},
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


def test_case_validation_speed():
    units.registry.cache_clear()
    units.unit_to_si.cache_clear()
    start = time.perf_counter()
    validate_case(EXAMPLE_CASE)
    first = time.perf_counter() - start

    warm = _per_call_seconds(lambda: validate_case(EXAMPLE_CASE), 500)
    load_only = _per_call_seconds(lambda: load_case(EXAMPLE_CASE), 500)

    def uncached_parse():
        units.unit_to_si.cache_clear()
        units.parse_quantity("1.5e-9 m^2/s", "diffusivity")

    cached = _per_call_seconds(lambda: units.parse_quantity("1.5e-9 m^2/s", "diffusivity"), 5000)
    uncached = _per_call_seconds(uncached_parse, 500)

    print()
    print(f"first validation in the process (registry build): {first * 1e3:9.1f} ms")
    print(f"validate_case, warm (example case):                {warm * 1e6:9.1f} us")
    print(f"  of which schema load and rules:                  {load_only * 1e6:9.1f} us")
    print(f"one unit parse, cached unit string:                {cached * 1e6:9.2f} us")
    print(f"one unit parse, unit string parsed by pint:        {uncached * 1e6:9.2f} us")
    print(f"cache speed-up per parse:                          {uncached / cached:9.1f} x")
    print(f"warm validation against the 1 ms target:           {warm / 1e-3:9.2f} of target")
    assert validate_case(EXAMPLE_CASE).problem.inner == 1e-4
