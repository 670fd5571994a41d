"""Benchmark: the lumen's marching solver and its three-mesh refinement study (issue 16).

Printed: one march per mesh, and the three-mesh study (32, 64, 128 cells and steps, refined in
r and z together: the meshes tests/reference/test_lumen_graetz_marching.py uses) for a wall
held at one concentration, a conductance wall and a Michaelis-Menten wall law (Newton at every
step), each with the outlet mixing cup's apparent order and GCI; and the Graetz series (60
terms) for comparison; and once, the study with a Michaelis-Menten tissue layer solved at every
evaluation of the wall law (the coupling the lead wires later, before any tabulation). Medians
of repeated ``time.perf_counter`` timings; figures printed, nothing asserted about time
(shared, noisy machines).

Run with ``make bench``.
"""

from __future__ import annotations

import math
import time

from tests.benchmarks.timing import median_seconds
from worker.engine.lumen.graetz import graetz_series
from worker.engine.lumen.layer_walls import layer_wall_law
from worker.engine.lumen.marching import (
    ConductanceWall,
    FixedWall,
    FunctionWall,
    Tube,
    march,
    refinement_study,
)
from worker.engine.model import Boundary, Layer, Problem, Reaction

REPEATS = 7
BASE = 32
# invented scenario (benchmark input, not a check value): z* = 0.05 at the outlet
D, R, F = 1e-9, 1e-4, 1e-10
TUBE = Tube(R, 0.05 * 4 * F / (math.pi * D), F, D, 1.0)


def _law(c: float) -> tuple[float, float]:
    vmax, km = 4e-7, 0.2
    if c <= 0.0:
        return 0.0, 0.0
    return vmax * c / (km + c), vmax * km / (km + c) ** 2


WALLS = {
    "fixed wall": FixedWall(0.0),
    "conductance wall (Bi = 2)": ConductanceWall(2 * D / R, 0.0),
    "Michaelis-Menten wall": FunctionWall(_law),
}


def test_lumen_marching_costs():
    print()
    for n in (BASE, 2 * BASE, 4 * BASE):
        seconds = median_seconds(lambda n=n: march(TUBE, WALLS["fixed wall"], n, n), REPEATS)
        print(f"march, fixed wall, {n} cells x {n} steps: {1e3 * seconds:.1f} ms")
    for name, wall in WALLS.items():
        seconds = median_seconds(
            lambda wall=wall: refinement_study(TUBE, wall, BASE, BASE), REPEATS)
        studies, _ = refinement_study(TUBE, wall, BASE, BASE)
        study = studies["outlet_mixing_cup"]
        print(f"three-mesh study ({BASE}/{2 * BASE}/{4 * BASE}), {name}: "
              f"{1e3 * seconds:.1f} ms; outlet mixing cup order {study.apparent_order:.3f}, "
              f"GCI {100 * study.gci_fine:.2g} %")
    # a Michaelis-Menten tissue layer around the lumen: every evaluation of the wall law is
    # three steady layer solves (value and central difference), several per axial step
    layer = Problem("cylinder", R, (Layer("tissue", 80e-6, 4e-10, reaction=Reaction(
        "michaelis_menten", vmax=1e-3, km=0.05)),), Boundary("concentration", 0.0),
        Boundary("flux", 0.0))
    law = layer_wall_law(layer)
    start = time.perf_counter()
    studies, _ = refinement_study(TUBE, law, BASE, BASE)
    seconds = time.perf_counter() - start
    study = studies["through_wall"]  # the mixing cup falls by 0.4 % only: study what crossed
    print(f"three-mesh study ({BASE}/{2 * BASE}/{4 * BASE}), Michaelis-Menten layer around the "
          f"lumen (layer_wall_law, one run): {seconds:.2f} s; amount through the wall: order "
          f"{study.apparent_order:.3f}, GCI {100 * study.gci_fine:.2g} %")
    seconds = median_seconds(lambda: graetz_series(60), REPEATS)
    print(f"Graetz series, 60 terms: {1e3 * seconds:.1f} ms")
