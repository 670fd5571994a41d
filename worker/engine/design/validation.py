"""Comparison of a simulation with measured data, by the arithmetic of ASME V&V 20-2009.

ASME V&V 20-2009, *Standard for Verification and Validation in Computational Fluid Dynamics and
Heat Transfer*, §2 (the validation comparison) and §§3–6 (the uncertainties that enter it):

- comparison error ``E = S − D`` (simulation minus data, at each measured point);
- validation standard uncertainty ``u_val = √(u_num² + u_input² + u_D²)``, where ``u_num`` is
  the numerical (discretisation and solver) standard uncertainty of ``S`` (§3, §4), ``u_input``
  the standard uncertainty of ``S`` from the uncertainty of its inputs (§5) and ``u_D`` that of
  the data (§6); the three are taken as independent, as the standard's combination assumes;
- the modelling error ``δ_model`` then lies within ``E ± k·u_val`` (§2-4), ``k`` a coverage
  factor (2 by default, about 95 % for a near-normal distribution: JCGM 100:2008 §6.3.3).

A point is flagged when ``|E| > k·u_val``: the data disagree with the simulation by more than the
uncertainties of both can explain, so a model error of that size is indicated. When ``u_input``
was not assessed (``None``), ``u_val`` holds only ``u_num`` and ``u_D`` (it is then too small,
and flags too easily); the result says so (``u_input_assessed``).

All values are in one unit, the quantity's (SI in a record); ``u_val``, ``E`` and the interval
are in the same unit.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

DEFAULT_COVERAGE_FACTOR = 2.0

__all__ = ["DEFAULT_COVERAGE_FACTOR", "ValidationSet", "compare", "validation_block"]

Numbers = Sequence[float] | np.ndarray


def _values(name: str, values: Numbers) -> np.ndarray:
    array = np.asarray(values, dtype=float)
    if array.ndim != 1:
        raise ValueError(f"{name}: expected a list of numbers, got an array of shape "
                         f"{array.shape}")
    bad = np.flatnonzero(~np.isfinite(array))
    if bad.size:
        raise ValueError(f"{name}: expected finite numbers, got {array[bad[0]]!r} at index "
                         f"{int(bad[0])}")
    return array


def _uncertainty(name: str, values: Numbers | float, n: int) -> np.ndarray:
    """One standard uncertainty per point; a single number applies to every point."""
    array = np.asarray(values, dtype=float)
    if array.ndim == 0:
        array = np.full(n, float(array))
    array = _values(name, array)
    if array.size != n:
        raise ValueError(f"{name}: expected {n} values (one per measured point), got "
                         f"{array.size}")
    negative = np.flatnonzero(array < 0.0)
    if negative.size:
        raise ValueError(f"{name}: expected non-negative standard uncertainties, got "
                         f"{array[negative[0]]!r} at index {int(negative[0])}")
    return array


@dataclass(frozen=True)
class ValidationSet:
    """One set of measured points against the simulation (ASME V&V 20-2009, §2).

    Arrays have one entry per point, in the quantity's unit; ``u_input`` is None when the input
    uncertainty was not assessed.
    """

    simulated: np.ndarray
    measured: np.ndarray
    u_num: np.ndarray
    u_input: np.ndarray | None
    u_d: np.ndarray
    coverage_factor: float

    @property
    def comparison_error(self) -> np.ndarray:
        """``E = S − D`` (V&V 20-2009, §2-4)."""
        return self.simulated - self.measured

    @property
    def u_val(self) -> np.ndarray:
        """``u_val = √(u_num² + u_input² + u_D²)`` (V&V 20-2009, §2-4); without ``u_input``
        when it was not assessed."""
        total = self.u_num ** 2 + self.u_d ** 2
        if self.u_input is not None:
            total = total + self.u_input ** 2
        return np.sqrt(total)

    @property
    def interval(self) -> tuple[np.ndarray, np.ndarray]:
        """The interval ``E ± k·u_val`` that holds the modelling error ``δ_model``."""
        half = self.coverage_factor * self.u_val
        error = self.comparison_error
        return error - half, error + half

    @property
    def ratio(self) -> np.ndarray:
        """``|E| / u_val`` at each point (a point is flagged when it exceeds ``k``)."""
        return np.abs(self.comparison_error) / self.u_val

    @property
    def flagged(self) -> np.ndarray:
        """True where ``|E| > k·u_val``."""
        return np.abs(self.comparison_error) > self.coverage_factor * self.u_val

    @property
    def agrees(self) -> bool:
        """No point flagged."""
        return not bool(np.any(self.flagged))

    def as_dict(self, id: str, quantity: str, unit: str | None,
                times: Numbers) -> dict:
        """The record's entry for this set (``times`` in s, one per point)."""
        when = _values("times", times)
        if when.size != self.simulated.size:
            raise ValueError(f"times: expected {self.simulated.size} values (one per measured "
                             f"point), got {when.size}")
        low, high = self.interval
        u_val, error, flagged = self.u_val, self.comparison_error, self.flagged
        points = []
        for i in range(self.simulated.size):
            points.append({
                "time": float(when[i]),
                "simulated": float(self.simulated[i]),
                "measured": float(self.measured[i]),
                "comparison_error": float(error[i]),
                "u_num": float(self.u_num[i]),
                "u_input": None if self.u_input is None else float(self.u_input[i]),
                "u_D": float(self.u_d[i]),
                "u_val": float(u_val[i]),
                "interval": [float(low[i]), float(high[i])],
                "flagged": bool(flagged[i]),
            })
        return {"id": id, "quantity": quantity, "unit": unit, "points": points,
                "largest_ratio": float(np.max(self.ratio)),
                "flagged": int(np.count_nonzero(flagged)),
                "agrees": self.agrees,
                "u_input_assessed": self.u_input is not None}


def compare(simulated: Numbers, measured: Numbers, u_num: Numbers | float,
            u_input: Numbers | float | None, u_d: Numbers | float, *,
            coverage_factor: float = DEFAULT_COVERAGE_FACTOR) -> ValidationSet:
    """Compare the simulation ``S`` with the data ``D`` point by point (ASME V&V 20-2009, §2).

    Parameters
    ----------
    simulated, measured : sequences of n finite numbers, in the quantity's unit.
    u_num, u_input, u_d : standard uncertainties of the simulation from its numerics, of the
        simulation from its inputs, and of the data (same unit; each n non-negative numbers,
        or one number for every point). ``u_input=None``: not assessed, left out of ``u_val``.
    coverage_factor : k of the interval ``E ± k·u_val`` and of the flag ``|E| > k·u_val``
        (positive; 2 by default).

    Raises
    ------
    ValueError
        naming the argument: lengths that differ, no point, a value that is not finite, a
        negative uncertainty, a point whose ``u_val`` is zero (nothing to judge ``E`` against)
        or a coverage factor that is not a positive number.
    """
    if isinstance(coverage_factor, bool) or not isinstance(coverage_factor, (int, float)) \
            or not math.isfinite(coverage_factor) or coverage_factor <= 0.0:
        raise ValueError(f"coverage_factor: expected a positive number, got {coverage_factor!r}")
    s = _values("simulated", simulated)
    d = _values("measured", measured)
    if s.size == 0:
        raise ValueError("simulated: expected at least one point, got none")
    if d.size != s.size:
        raise ValueError(f"measured: expected {s.size} values (as many as simulated), got "
                         f"{d.size}")
    result = ValidationSet(
        simulated=s, measured=d,
        u_num=_uncertainty("u_num", u_num, s.size),
        u_input=None if u_input is None else _uncertainty("u_input", u_input, s.size),
        u_d=_uncertainty("u_D", u_d, s.size),
        coverage_factor=float(coverage_factor))
    zero = np.flatnonzero(result.u_val == 0.0)
    if zero.size:
        raise ValueError(f"u_D: the validation uncertainty u_val is zero at index "
                         f"{int(zero[0])} (u_num, u_input and u_D all zero); expected a "
                         f"positive standard uncertainty of the data")
    return result


def validation_block(sets: Sequence[dict], *, coverage_factor: float, u_input_method: str,
                     u_num_method: str) -> dict:
    """The record's ``validation`` block from the sets' :meth:`ValidationSet.as_dict` entries
    (all compared with ``coverage_factor``): it agrees when no point of any set is flagged."""
    if not sets:
        raise ValueError("sets: expected at least one validation set, got none")
    return {"coverage_factor": float(coverage_factor), "u_input_method": u_input_method,
            "u_num_method": u_num_method, "sets": list(sets),
            "agrees": all(entry["agrees"] for entry in sets)}
