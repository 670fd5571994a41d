"""Benchmark: calibrating one diffusivity to 20 release points (issue "Measured data", target
≤ 3 s): the weighted least-squares fit, its profile-likelihood interval, and the full check of
the fitted case, in one ``check_case``; beside it, the same case checked without measurements
(the full check alone), so the calibration's own share is a ratio measured in the same run.

Case (invented): a 100 um film, one face sealed, into a sink, 20 release fractions over 14 days
drawn from the plane-sheet series at an invented diffusivity with 1 % noise. Nothing asserted
about time (shared, noisy machines). Run with ``make bench``.
"""

from __future__ import annotations

import copy
import math
import time

import numpy as np

from worker.engine import check_case

DAY = 86400.0
TARGET_SECONDS = 3.0
THICKNESS = 100e-6
INVENTED_D = 1.7e-14  # m^2/s (benchmark input, not a check value)
CASE = {
    "schema_version": 1, "title": "benchmark film (invented)", "geometry": "slab",
    "inner": "0 m",
    "layers": [{"name": "film", "thickness": "100 um", "diffusivity": "1e-14 m^2/s",
                "initial": "1 mol/m^3"}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": "0 mol/m^3"},
    "regime": {"kind": "transient", "duration": "14 d",
               "times": ["1 d", "3 d", "7 d", "14 d"]},
}


def _fraction(t: float) -> float:
    return 1.0 - sum(8.0 / ((2 * n + 1) ** 2 * math.pi ** 2)
                     * math.exp(-INVENTED_D * (2 * n + 1) ** 2 * math.pi ** 2 * t
                                / (4 * THICKNESS ** 2)) for n in range(300))


def _calibrated_case() -> dict:
    rng = np.random.default_rng(3)
    days = np.linspace(0.5, 14.0, 20)
    doc = copy.deepcopy(CASE)
    doc["measurements"] = [{
        "id": "BENCH", "quantity": "release_fraction", "times": [f"{d:.6g} d" for d in days],
        "values": [_fraction(d * DAY) + float(rng.normal(0, 0.01)) for d in days],
        "standard_uncertainty": [0.01] * days.size, "use": "calibration"}]
    doc["calibration"] = {"parameters": [{"field": "layers[0].diffusivity",
                                          "bounds": ["1e-16 m^2/s", "1e-12 m^2/s"],
                                          "scale": "log"}]}
    return doc


def _best_of(run, repeats: int = 3) -> tuple[float, dict]:
    best, record = math.inf, {}
    for _ in range(repeats):
        started = time.perf_counter()
        record = run()
        best = min(best, time.perf_counter() - started)
    return best, record


def test_bench_calibrating_one_diffusivity_to_20_points():
    calibrated = _calibrated_case()
    plain = copy.deepcopy(CASE)
    plain["regime"]["times"] = [m["times"] for m in calibrated["measurements"]][0]
    check_case(calibrated)  # warm the imports and caches
    whole, record = _best_of(lambda: check_case(calibrated))
    alone, _ = _best_of(lambda: check_case(plain))
    (parameter,) = record["calibration"]["parameters"]
    print(f"\ncalibration of one diffusivity to 20 points, profile interval and full check: "
          f"{whole:.3f} s (target {TARGET_SECONDS:g} s: {whole / TARGET_SECONDS:.2f} of it); "
          f"the full check alone at the same times {alone:.3f} s (calibration share "
          f"{(whole - alone) / whole:.0%}); estimate {parameter['estimate']:.4g} ± "
          f"{parameter['standard_error']:.2g} m^2/s, interval {parameter['interval']} "
          f"({parameter['interval_method']}), verdict {record['verdict']}, "
          f"{record['calibration'].get('evaluations')} model evaluations")
