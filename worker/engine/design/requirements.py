"""Design requirements: which quantities a requirement may name, and the design verdict.

A requirement bounds one figure of the record: a scalar quantity (``t90``, ``flux_outer``),
a layer's extreme (``concentration_min`` with ``layer``), or a series at a time
(``release_fraction`` with ``at``); the figures a case offers are listed once, in
:func:`worker.engine.design.targets.quantities`. Its *margin* is positive when met:
``value − bound`` for a lower bound, ``bound − value`` for an upper one, the smaller of the two
for a range. The requirement is
``indeterminate`` when |margin| ≤ the value's numerical uncertainty (the record's own
``uncertainty`` of that figure): the calculation cannot tell which side of the bound the design
is on.

A time the run did not reach (``t90`` beyond the duration) is known only to exceed the duration:
the requirement is then decided where that suffices (``t90 ≤ 21 d`` in a 30-day run: not met),
and ``indeterminate`` where it does not.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Protocol

#: Record statuses of a requirement and of the design as a whole.
MET, NOT_MET, INDETERMINATE, NONE_STATED = "met", "not_met", "indeterminate", "none_stated"


#: Scalar quantities that are event times: absent from the record when not reached in the run.
EVENT_TIMES = frozenset({"t50", "t90", "time_lag", "time_to_steady", "time_depleted"})


@dataclass(frozen=True)
class Requirement:
    """One requirement in SI: ``low`` ≤ value ≤ ``high`` (either may be None).

    ``layer`` is the layer's index (``layer_name`` its name) for a per-layer quantity; ``at`` the
    time in s for a series quantity; ``unit`` the quantity's SI unit.
    """

    id: str
    quantity: str
    low: float | None = None
    high: float | None = None
    layer: int | None = None
    layer_name: str | None = None
    at: float | None = None
    source: str | None = None
    unit: str = "1"

    def margin(self, value: float) -> float:
        """Positive when ``value`` meets the requirement, in the quantity's SI unit."""
        margins = []
        if self.low is not None:
            margins.append(value - self.low)
        if self.high is not None:
            margins.append(self.high - value)
        return min(margins)

    @property
    def bound(self) -> float | list[float]:
        """The bound as the record states it: one number, or [low, high] for a range."""
        if self.low is not None and self.high is not None:
            return [self.low, self.high]
        return self.low if self.low is not None else self.high  # type: ignore[return-value]

    def nearest_bound(self, value: float) -> float:
        """The bound the margin is measured from."""
        if self.low is None:
            return self.high  # type: ignore[return-value]
        if self.high is None:
            return self.low
        return self.low if value - self.low <= self.high - value else self.high

    def describe(self) -> str:
        """``concentration_min [islet] ≥ 0.005`` (SI numbers), for details and warnings."""
        what = self.quantity
        if self.layer_name is not None:
            what += f" [{self.layer_name}]"
        if self.at is not None:
            what += f" at {self.at:.6g} s"
        if self.low is not None and self.high is not None:
            return f"{self.low:.6g} ≤ {what} ≤ {self.high:.6g}"
        if self.low is not None:
            return f"{what} ≥ {self.low:.6g}"
        return f"{what} ≤ {self.high:.6g}"


@dataclass(frozen=True)
class Reading:
    """The value a requirement reads from a record: ``value`` (None when the record has none),
    its numerical ``uncertainty`` (None when not stated), and for an event time not reached,
    ``beyond``: the duration it is known to exceed."""

    value: float | None
    uncertainty: float | None = None
    beyond: float | None = None
    missing: str | None = None


def _entry_value(entry: Mapping, index: int | None) -> tuple[float | None, float | None]:
    value, band = entry.get("value"), entry.get("uncertainty")
    if index is not None:
        value = value[index] if isinstance(value, list) and index < len(value) else None
        band = band[index] if isinstance(band, list) and index < len(band) else None
    return (None if value is None else float(value)), (None if band is None else float(band))


class Figure(Protocol):
    """Names one figure of a record: ``quantity``, optionally ``layer`` (index) and ``at`` (s).
    A :class:`Requirement` and a design run's ``Target`` both do."""

    @property
    def quantity(self) -> str: ...

    @property
    def layer(self) -> int | None: ...

    @property
    def at(self) -> float | None: ...

    @property
    def layer_name(self) -> str | None: ...


def _item(row, index: int):
    """``row[index]`` of a per-layer row, None where there is none."""
    return row[index] if isinstance(row, list) and index < len(row) else None


def _listed_column(entry: Mapping, figure: Figure) -> tuple[int | None, str | None]:
    """The column of ``figure``'s layer in an entry that lists its layers by name (``"layers"``:
    ``front_position``, ``time_depleted_layers``): (column, None), or (None, why not). With no
    layer named, the one listed layer's column."""
    listed = entry.get("layers")
    names = list(listed) if isinstance(listed, list) else []
    if figure.layer is None:
        if len(names) == 1:
            return 0, None
        return None, f"the record lists {len(names)} layers for {figure.quantity}: name one"
    name = figure.layer_name
    if name in names:
        return names.index(name), None
    return None, f"the record gives no {figure.quantity} for the layer {name!r}"


def read_figure(figure: Figure, quantities: Mapping, series: Mapping,
                duration: float | None = None) -> Reading:
    """A figure (a requirement's, or a design run's target) read from a record's
    ``quantities`` and ``series``.

    A per-layer extreme reads ``<quantity>_layers`` at the layer's index; a series quantity reads
    its value at the time ``at`` (which the run adds to its output times). An entry that lists
    its own layers by name (``"layers"``: ``front_position``, ``time_depleted_layers``) is read
    at the named layer's place in that list. A per-layer event time (``time_depleted``) that is
    null was not reached within the run.
    """
    name = figure.quantity
    probe = getattr(figure, "probe", None)
    if probe is not None and figure.at is not None:
        return _read_probe(probe, figure.at, series)
    if figure.at is not None:
        own = series.get(name)
        if isinstance(own, Mapping) and "layers" in own:
            return _read_listed_series(figure, own, series)
        series_name = name if figure.layer is None else f"{name}_layers"
        entry = series.get(series_name)
        times = series.get("time", {}).get("values", [])
        if not isinstance(entry, Mapping):
            return Reading(None, missing=f"the record has no series {series_name}")
        row = _row_at(times, figure.at)
        if row is None:
            return Reading(None, missing=f"the series {name} has no value at {figure.at} s")
        values, bands = entry.get("values", []), entry.get("uncertainty")
        value = values[row] if row < len(values) else None
        band = bands[row] if isinstance(bands, list) and row < len(bands) else None
        if figure.layer is not None:
            value = _item(value, figure.layer)
            band = _item(band, figure.layer)
        return Reading(None if value is None else float(value),
                       None if band is None else float(band))
    if figure.layer is not None:
        entry = quantities.get(f"{name}_layers")
        if not isinstance(entry, Mapping):
            return Reading(None, missing=f"the record has no {name}_layers")
        index: int | None = figure.layer
        if "layers" in entry:
            index, why = _listed_column(entry, figure)
            if index is None:
                return Reading(None, missing=why)
        value, band = _entry_value(entry, index)
        if value is None and name in EVENT_TIMES and duration is not None:
            return Reading(None, beyond=duration)
        return Reading(value, band)
    entry = quantities.get(name)
    if not isinstance(entry, Mapping) or entry.get("value") is None:
        if name in EVENT_TIMES and duration is not None:
            return Reading(None, beyond=duration)
        return Reading(None, missing=f"the record has no {name}")
    value, band = _entry_value(entry, None)
    return Reading(value, band)


def _row_at(times: Sequence[float], at: float) -> int | None:
    """The first row of a record's output ``times`` (s) at ``at`` (s, to 1e-12 relative)."""
    return next((i for i, t in enumerate(times) if math.isclose(t, at, rel_tol=1e-12)), None)


def _read_probe(probe: int, at: float, series: Mapping) -> Reading:
    """Probe ``probe``'s concentration at ``at`` from the record's ``probes`` rows (one row per
    requested time), with its numerical uncertainty where the record states one."""
    entry = series.get("probes")
    if not isinstance(entry, Mapping):
        return Reading(None, missing="the record has no probe series")
    times = entry.get("time", [])
    row = _row_at(times, at)
    if row is None:
        return Reading(None, missing=f"the probe series has no row at {at} s")
    rows, bands = entry.get("concentration", []), entry.get("uncertainty")
    value = _item(rows[row] if row < len(rows) else None, probe)
    band = _item(bands[row], probe) if isinstance(bands, list) and row < len(bands) else None
    return Reading(None if value is None else float(value),
                   None if band is None else float(band))


def _read_listed_series(figure: Figure, entry: Mapping, series: Mapping) -> Reading:
    """A series whose rows hold one value per listed layer (``front_position``), at ``at``."""
    column, why = _listed_column(entry, figure)
    if column is None:
        return Reading(None, missing=why)
    at = figure.at
    assert at is not None  # a series figure (read_figure's branch)
    times = series.get("time", {}).get("values", [])
    row = _row_at(times, at)
    if row is None:
        return Reading(None, missing=f"the series {figure.quantity} has no value at "
                                     f"{figure.at} s")
    values, bands = entry.get("values", []), entry.get("uncertainty")
    value = _item(_item(values, row), column)
    band = _item(_item(bands, row), column)
    if value is None:
        return Reading(None, missing=f"no {figure.quantity} at {figure.at} s: the layer holds "
                                     "no undissolved solute then")
    return Reading(float(value), None if band is None else float(band))


def judge(requirement: Requirement, reading: Reading) -> dict:
    """One entry of the record's ``design.requirements``."""
    entry: dict = {"id": requirement.id, "quantity": requirement.quantity,
                   "value": reading.value, "bound": requirement.bound, "margin": None,
                   "relative_margin": None,
                   "numerical_uncertainty": reading.uncertainty, "status": INDETERMINATE,
                   "unit": requirement.unit}
    if requirement.layer_name is not None:
        entry["layer"] = requirement.layer_name
    if requirement.at is not None:
        entry["at"] = requirement.at
    if requirement.source is not None:
        entry["source"] = requirement.source
    if reading.value is None or not math.isfinite(reading.value):
        if reading.beyond is not None:
            entry["beyond"] = reading.beyond
            entry["status"] = _judge_beyond(requirement, reading.beyond)
            entry["reason"] = (f"{requirement.quantity} not reached within the run "
                               f"({reading.beyond:.6g} s)")
        else:
            entry["reason"] = reading.missing or f"no value of {requirement.quantity}"
        return entry
    margin = requirement.margin(reading.value)
    bound = requirement.nearest_bound(reading.value)
    entry["margin"] = margin
    entry["relative_margin"] = margin / abs(bound) if bound != 0.0 else None
    band = reading.uncertainty or 0.0
    if abs(margin) <= band:
        entry["status"] = INDETERMINATE
        entry["reason"] = (f"the margin {margin:.3g} is inside the value's numerical uncertainty "
                           f"{band:.3g}")
    else:
        entry["status"] = MET if margin > 0.0 else NOT_MET
    return entry


def _judge_beyond(requirement: Requirement, beyond: float) -> str:
    """A value known only to exceed ``beyond``: decided where that suffices."""
    if requirement.high is not None and requirement.high <= beyond:
        return NOT_MET
    if requirement.high is None and requirement.low is not None and requirement.low <= beyond:
        return MET
    return INDETERMINATE


def overall_status(statuses: Sequence[str]) -> str:
    """The design's status: ``not_met`` if any requirement is, else ``indeterminate`` if any
    is, else ``met``; ``none_stated`` without requirements."""
    if not statuses:
        return NONE_STATED
    if NOT_MET in statuses:
        return NOT_MET
    if INDETERMINATE in statuses:
        return INDETERMINATE
    return MET


def design_block(requirements: Sequence[Requirement], quantities: Mapping, series: Mapping,
                 duration: float | None = None) -> dict:
    """The record's ``design`` block: each requirement judged on the record's figures."""
    judged = [judge(r, read_figure(r, quantities, series, duration)) for r in requirements]
    return {"status": overall_status([j["status"] for j in judged]), "requirements": judged}
