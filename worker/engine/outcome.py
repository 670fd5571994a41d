"""What the engine produces for one case: its checks and the other parts of the record."""

from __future__ import annotations

import math
from dataclasses import dataclass, field


@dataclass
class Check:
    """One verification check: ``passed`` is decided by the check, ``limit`` is what it used.

    ``value`` and ``limit`` are dimensionless (relative) unless the detail says otherwise.
    """

    name: str
    value: float | None
    limit: float | None
    passed: bool
    detail: str

    def as_dict(self) -> dict:
        return {
            "name": self.name,
            "value": _finite_or_none(self.value),
            "limit": _finite_or_none(self.limit),
            "passed": bool(self.passed),
            "detail": self.detail,
        }


def _finite_or_none(value: float | None) -> float | None:
    if value is None:
        return None
    value = float(value)
    return value if value == value and abs(value) != float("inf") else None


@dataclass
class Outcome:
    """What the engine found for one solved case, steady or transient.

    ``quantities``: name -> {"value", "unit"} and, where the run verified the figure by two
    routes, ``uncertainty`` (same unit), ``routes`` and ``verified_by``; ``series``: name ->
    series (profile, probes, and for a transient case the release series); ``methods``: list
    of {role, name, reference};
    ``checks``: list of :class:`Check`; ``warnings``: list of str. These make the record.
    ``diagnostics``: solver facts (meshes, steps, series terms, event times per method) that
    the record does not carry.
    """

    quantities: dict = field(default_factory=dict)
    series: dict = field(default_factory=dict)
    methods: list = field(default_factory=list)
    checks: list[Check] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    diagnostics: dict = field(default_factory=dict)

    def check(self, name: str) -> Check | None:
        """The check called ``name``, or None."""
        return next((c for c in self.checks if c.name == name), None)

    def add_quantity(self, name: str, value, unit: str, *, uncertainty=None,
                     routes: list[str] | None = None, verified_by: str | None = None) -> None:
        """Record a figure. ``uncertainty`` is its numerical uncertainty in the same unit (a
        number, or a list matching a list value); ``routes`` names the independent routes that
        produced it and ``verified_by`` the check that compared them."""
        entry: dict = {"value": value, "unit": unit}
        if isinstance(uncertainty, float) and not math.isfinite(uncertainty):
            uncertainty = None  # no usable band: said by the check that compared the routes
        if uncertainty is not None:
            entry["uncertainty"] = uncertainty
        if routes:
            entry["routes"] = list(routes)
        if verified_by is not None:
            entry["verified_by"] = verified_by
        self.quantities[name] = entry

    def mark_verified(self, routes: list[str], series: dict[str, str]) -> None:
        """Name the routes and the comparing check on each series entry (series name -> check
        name) whose check is in the record."""
        present = {check.name for check in self.checks}
        for name, check in series.items():
            entry = self.series.get(name)
            if isinstance(entry, dict) and check in present:
                entry["routes"] = list(routes)
                entry["verified_by"] = check

    def add_check(
        self, name: str, value: float | None, limit: float | None, passed: bool, detail: str
    ) -> Check:
        check = Check(name, value, limit, passed, detail)
        self.checks.append(check)
        return check

    def check_at_most(self, name: str, value: float, limit: float, detail: str) -> Check:
        """A check passing when ``value <= limit`` (NaN fails)."""
        passed = bool(value <= limit)
        return self.add_check(name, value, limit, passed, detail)
