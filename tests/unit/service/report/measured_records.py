"""Records with the measured-data blocks (``calibration``, ``validation``, ``credibility``) for
the report tests, in the shape of CONTRACT15. The validation sets are computed by the engine's
comparison (``worker.engine.design.validation.compare``) and the credibility block by
``schemas.credibility.credibility_block``; the calibration figures, the simulated and the
measured values are invented for these tests: they check the rendering, not the physics.
"""

from __future__ import annotations

import copy
from typing import Any

from schemas.credibility import credibility_block
from tests.unit.service.report import design_records
from worker.engine.design.validation import compare

TIMES = [3600.0, 7200.0, 14400.0, 28800.0]   # 1 h, 2 h, 4 h, 8 h
SIMULATED = [0.10, 0.30, 0.50, 0.70]

CALIBRATION: dict[str, Any] = {
    "parameters": [{"field": "layers[0].diffusivity", "estimate": 2.4e-14, "unit": "m^2/s",
                    "standard_error": 1.1e-15, "interval": [2.2e-14, 2.63e-14],
                    "interval_method": "profile likelihood", "scale": "log",
                    "bounds": [1e-16, 1e-12], "start": 1e-14}],
    "correlation": [[1.0]], "covariance": [[1.21e-30]],
    "chi_square": 17.3, "degrees_of_freedom": 19, "reduced_chi_square": 0.911,
    "residuals": [{"index": 0, "predicted": 0.101, "measured": 0.097,
                   "standard_uncertainty": 0.005, "normalised": -0.8},
                  {"index": 1, "predicted": 0.212, "measured": 0.219,
                   "standard_uncertainty": 0.005, "normalised": 1.4}],
    "warnings": ["only early data: the fit does not test the late release"],
    "converged": True, "evaluations": 23, "method": "weighted least squares (trust region)",
    "sets": ["REL-CAL"], "points": 20, "fitted_inputs": ["layers[0].diffusivity"],
    "short_time": {"estimate": 2.5e-14, "standard_error": 2e-15, "points": 6, "agrees": True,
                   "source": "Crank 1975 §4.3 short-time form"},
}


def validation(shift_at_2h: float = 0.0, u_input: float | None = 0.01) -> dict[str, Any]:
    """One set: the data equal the simulation except at 2 h, shifted by ``shift_at_2h``
    (u_num 0.002, u_input 0.01, u_D 0.02: u_val = √(0.002² + 0.01² + 0.02²) ≈ 0.0224)."""
    measured = list(SIMULATED)
    measured[1] += shift_at_2h
    result = compare(SIMULATED, measured, 0.002, u_input, 0.02)
    return {"coverage_factor": 2.0, "u_input_method": "Monte Carlo over the uncertainty block",
            "u_num_method": "the record's numerical uncertainty of the series",
            "sets": [result.as_dict("REL-VAL", "release_fraction", "1", TIMES)],
            "agrees": result.agrees}


def record(*blocks: str, shift_at_2h: float = 0.1, u_input: float | None = 0.01
           ) -> dict[str, Any]:
    """A record with the named blocks (``calibration``, ``validation``, ``credibility``)."""
    out = design_records.record("none_stated")
    out["provenance"] = {"engine_version": "0.1.0", "numpy": "2", "scipy": "1"}
    if "calibration" in blocks:
        out["calibration"] = copy.deepcopy(CALIBRATION)
    if "validation" in blocks:
        out["validation"] = validation(shift_at_2h, u_input)
    if "credibility" in blocks:
        out["credibility"] = credibility_block(out)
    return out


def case() -> dict[str, Any]:
    return design_records.case(without_requirements=True)
