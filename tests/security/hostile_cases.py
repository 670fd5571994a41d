"""The hostile case documents of the review (issue 13): invented inputs chosen to be costly,
never check values."""

from __future__ import annotations

from typing import Any


def steep_many_layer_steady() -> dict[str, Any]:
    """20 one-micrometre layers alternating 1e-6 and 1e-16 m^2/s, each with a steep
    Michaelis-Menten uptake, steady: 3.4 KB that asked an unlimited service for 11.6 GB."""
    layers = [{"name": f"L{i}", "thickness": "1 um",
               "diffusivity": "1e-6 m^2/s" if i % 2 == 0 else "1e-16 m^2/s",
               "reaction": {"kind": "michaelis_menten", "vmax": "1e3 mol/m^3/s",
                            "km": "1e-6 mol/m^3"}} for i in range(20)]
    return {"schema_version": 1, "title": "hostile: steep many-layer steady", "geometry": "slab",
            "inner": "0 m", "layers": layers,
            "inner_boundary": {"kind": "concentration", "value": "1 mol/m^3"},
            "outer_boundary": {"kind": "concentration", "value": "1 mol/m^3"},
            "regime": {"kind": "steady"}}


def long_transient() -> dict[str, Any]:
    """20 millimetre layers alternating 1e-9 and 1e-15 m^2/s, released for a century with the
    first output after a millisecond: minutes of integration over fifteen decades of time."""
    layers = [{"name": f"L{i}", "thickness": "1 mm",
               "diffusivity": "1e-9 m^2/s" if i % 2 == 0 else "1e-15 m^2/s",
               "initial": "1 mol/m^3"} for i in range(20)]
    return {"schema_version": 1, "title": "hostile: long transient", "geometry": "slab",
            "inner": "0 m", "layers": layers, "inner_boundary": {"kind": "symmetry"},
            "outer_boundary": {"kind": "concentration", "value": "0 mol/m^3"},
            "regime": {"kind": "transient", "duration": "100 year",
                       "times": ["1e-3 s", "1 s", "100 s", "1e4 s", "1e6 s", "1e8 s", "3e9 s"]}}
