"""What every rendering says about a release with dispersed drug or finite compartments: the
dissolution front of each loaded layer and the compartment concentrations at the requested
times, and when the undissolved drug is gone.

Read from the record's ``series.front_position`` (one column per layer in its ``layers``: the
front's position in m, null once that layer's undissolved drug is gone),
``series.front_position_inner`` (same shape: the inner edge of an undissolved region whose
edges have both moved), ``series.compartment_inner`` / ``series.compartment_outer`` (the
well-stirred fluid's concentration at that face), ``quantities.time_depleted`` (s) and
``quantities.time_depleted_layers`` (``{"values", "unit", "layers"}``). A record without them
gives no columns and no rows, and every rendering looks as before.

Imports nothing beyond the standard library (and :mod:`service.report.readable`), so the text
report keeps to the base install.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from service.report.readable import readable_unit

#: The front series, each with the words of its column ({layer}: the layer's name).
FRONT_SERIES = (("front_position", "front in {layer}"),
                ("front_position_inner", "inner front in {layer}"))
#: The compartment series, each with the words of its column.
COMPARTMENT_SERIES = (("compartment_inner", "inner compartment"),
                      ("compartment_outer", "outer compartment"))


@dataclass(frozen=True)
class OverTimeColumn:
    """One column of values at the requested times (SI, ``unit``), with the unit it reads in.

    ``kind``: ``front`` or ``compartment``; ``layer``: the loaded layer of a front column;
    ``readable``: (symbol, SI size of one) shared by the whole column, None where SI reads well.
    """

    key: str
    kind: str
    label: str
    unit: str
    values: tuple[float | None, ...]
    uncertainty: tuple[float | None, ...]
    layer: str | None = None
    readable: tuple[str, float] | None = None

    @property
    def empty_word(self) -> str:
        """What a missing value means: an outer front's layer is out of undissolved drug
        ("dissolved"); an inner front has not left its starting edge, or a value is unknown
        ("—")."""
        return "dissolved" if self.key.startswith("front_position[") else "—"

    @property
    def shown_unit(self) -> str:
        """The unit the column is shown in (its readable unit, else SI)."""
        return self.readable[0] if self.readable else self.unit

    def shown(self, index: int) -> tuple[float | None, float | None]:
        """(value, uncertainty) at requested time ``index`` in :attr:`shown_unit`."""
        size = self.readable[1] if self.readable else 1.0
        value, spread = self.values[index], self.uncertainty[index]
        return (None if value is None else value / size,
                None if spread is None else spread / size)


def _number(value: Any) -> float | None:
    if isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value):
        return float(value)
    return None


def requested_times(record: Mapping[str, Any]) -> list[float]:
    """``series.time`` as numbers, or [] when the record is not transient."""
    entry = (record.get("series") or {}).get("time")
    values = entry.get("values") if isinstance(entry, Mapping) else None
    if not isinstance(values, list):
        return []
    numbers = [_number(v) for v in values]
    return [v for v in numbers if v is not None] if None not in numbers else []


def _column(values: Any, count: int) -> tuple[float | None, ...] | None:
    if not isinstance(values, list) or len(values) != count:
        return None
    return tuple(_number(v) for v in values)


def _spread(entry: Mapping[str, Any], count: int, layer: int | None) -> tuple[float | None, ...]:
    rows = entry.get("uncertainty")
    if not isinstance(rows, list) or len(rows) != count:
        return (None,) * count
    if layer is None:
        return tuple(_number(v) for v in rows)
    return tuple(_number(row[layer]) if isinstance(row, list) and layer < len(row) else None
                 for row in rows)


def front_columns(record: Mapping[str, Any]) -> list[OverTimeColumn]:
    """One column per loaded layer of ``series.front_position`` (then of
    ``front_position_inner``), in a length unit shared by all of them; [] without fronts or
    with rows that do not match ``series.time``."""
    series = record.get("series") or {}
    count = len(requested_times(record))
    columns: list[OverTimeColumn] = []
    for name, words in FRONT_SERIES:
        entry = series.get(name)
        if not count or not isinstance(entry, Mapping):
            continue
        layers = [str(n) for n in entry.get("layers") or []]
        rows = entry.get("values")
        if not layers or not isinstance(rows, list) or len(rows) != count or not all(
                isinstance(row, list) and len(row) == len(layers) for row in rows):
            continue
        for j, layer in enumerate(layers):
            if name == "front_position_inner" and all(row[j] is None for row in rows):
                continue  # this layer's undissolved region never parted from its inner edge
            columns.append(OverTimeColumn(
                key=f"{name}[{layer}]", kind="front", label=words.format(layer=layer),
                unit=str(entry.get("unit") or "m"),
                values=tuple(_number(row[j]) for row in rows),
                uncertainty=_spread(entry, count, j), layer=layer))
    return _shared_unit(columns)


def compartment_columns(record: Mapping[str, Any]) -> list[OverTimeColumn]:
    """One column per compartment face (``compartment_inner``, ``compartment_outer``), in a
    concentration unit shared by both; [] without compartments."""
    series = record.get("series") or {}
    count = len(requested_times(record))
    columns: list[OverTimeColumn] = []
    for name, label in COMPARTMENT_SERIES:
        entry = series.get(name)
        if not count or not isinstance(entry, Mapping):
            continue
        values = _column(entry.get("values"), count)
        if values is None:
            continue
        columns.append(OverTimeColumn(key=name, kind="compartment", label=label,
                                      unit=str(entry.get("unit") or ""), values=values,
                                      uncertainty=_spread(entry, count, None)))
    return _shared_unit(columns)


def _shared_unit(columns: list[OverTimeColumn]) -> list[OverTimeColumn]:
    """The columns, each in the readable unit of all their values together (one unit per
    panel and per table, so that columns compare at a glance)."""
    if not columns or len({c.unit for c in columns}) != 1:
        return [_alone(c) for c in columns]
    chosen = readable_unit(columns[0].unit, [v for c in columns for v in c.values])
    return [OverTimeColumn(**{**c.__dict__, "readable": chosen}) for c in columns]


def _alone(column: OverTimeColumn) -> OverTimeColumn:
    chosen = readable_unit(column.unit, list(column.values))
    return OverTimeColumn(**{**column.__dict__, "readable": chosen})


def over_time_columns(record: Mapping[str, Any]) -> list[OverTimeColumn]:
    """The front columns, then the compartment columns."""
    return front_columns(record) + compartment_columns(record)


@dataclass(frozen=True)
class DepletionTime:
    """When the undissolved drug is gone: ``layer`` None for the whole body; ``seconds`` None
    where it is not within the duration."""

    layer: str | None
    seconds: float | None


def depletion_times(record: Mapping[str, Any]) -> list[DepletionTime]:
    """``quantities.time_depleted`` (first; a front series without it means not within the
    duration) and each layer's ``quantities.time_depleted_layers``; [] for a record without
    dispersed drug."""
    quantities = record.get("quantities") or {}
    found: list[DepletionTime] = []
    whole = quantities.get("time_depleted")
    if isinstance(whole, Mapping):
        found.append(DepletionTime(None, _number(whole.get("value"))))
    elif front_columns(record):
        found.append(DepletionTime(None, None))
    per_layer = quantities.get("time_depleted_layers")
    if isinstance(per_layer, Mapping):
        layers = per_layer.get("layers") or []
        values = per_layer.get("value") or []
        if isinstance(layers, list) and isinstance(values, list) and len(layers) == len(values):
            found += [DepletionTime(str(layer), _number(v)) for layer, v in zip(
                layers, values, strict=True)]
    return found


def per_layer_values(quantity: Any) -> list[tuple[str, float | None]] | None:
    """(layer, value) of a quantity given per layer (``{"value": [...], "layers", "unit"}``,
    as ``time_depleted_layers``), or None for any other quantity."""
    if not isinstance(quantity, Mapping):
        return None
    layers, values = quantity.get("layers"), quantity.get("value")
    if not isinstance(layers, Sequence) or not isinstance(values, list) or isinstance(
            layers, str) or len(layers) != len(values):
        return None
    return [(str(layer), _number(v)) for layer, v in zip(layers, values, strict=True)]


def layer_edges(inputs: Mapping[str, Any] | None) -> dict[str, tuple[float, float]]:
    """Each layer's inner and outer edge (m) from the record's normalised inputs (``inner`` and
    each layer's ``thickness``, SI ``{value, unit}``), by the layer's name; {} when unknown."""
    inputs = inputs or {}
    inner = inputs.get("inner")
    start = _number(inner.get("value") if isinstance(inner, Mapping) else inner)
    layers = inputs.get("layers")
    if start is None or not isinstance(layers, list):
        return {}
    edges: dict[str, tuple[float, float]] = {}
    for index, layer in enumerate(layers):
        if not isinstance(layer, Mapping):
            return {}
        thickness = layer.get("thickness")
        size = _number(thickness.get("value") if isinstance(thickness, Mapping) else thickness)
        if size is None:
            return {}
        name = str(layer.get("name") or f"layer {index + 1}")
        edges[name] = (start, start + size)
        start += size
    return edges
