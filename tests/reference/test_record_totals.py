"""Totals and per-size rates of the record (amount/s, amount/(m*s)) against closed forms.

The per-length and total rates are the face fluxes times the face's measure; a slip in that
measure (2*pi r for a cylinder, 4*pi r^2 for a sphere, the area of a slab) leaves every cross-check
of the fluxes themselves intact, so these figures are checked here from outside the engine:

* cylindrical shell, concentrations C1, C2 on radii r1 < r2: the rate per unit length is
  2*pi*D*(C1 - C2)/ln(r2/r1) (Crank 1975, The Mathematics of Diffusion, 2nd ed., §5.2), and the
  total over a length L is (C1 - C2)/R with R from the ``ht`` library's ``R_cylinder`` (thermal
  resistance of a cylindrical wall, ln(ro/ri)/(2*pi*k*L), by the heat-mass analogy with k = D);
* spherical shell: the rate is 4*pi*D*r1*r2*(C1 - C2)/(r2 - r1) (Crank 1975, §6.2);
* plane sheet of area A: A*D*(C1 - C2)/l (Crank 1975, ch. 4).

Scenario values are invented for these tests.
"""

from __future__ import annotations

import math

import ht.conduction
import pytest

from worker.engine import check_case

D = 2.0e-9          # m^2/s
C1, C2 = 1.5, 0.25  # mol/m^3
R1, R2 = 150e-6, 400e-6  # m


def _case(geometry: str, **size) -> dict:
    inner = 0.0 if geometry == "slab" else R1
    return {
        "schema_version": 1, "title": "totals against closed forms", "geometry": geometry,
        "inner": f"{inner!r} m", **size,
        "layers": [{"name": "shell", "thickness": f"{R2 - R1!r} m",
                    "diffusivity": f"{D!r} m^2/s", "partition": 1.0}],
        "inner_boundary": {"kind": "concentration", "value": f"{C1!r} mol/m^3"},
        "outer_boundary": {"kind": "concentration", "value": f"{C2!r} mol/m^3"},
        "regime": {"kind": "steady"},
    }


def _quantity(record: dict, name: str) -> float:
    assert record["verdict"] == "pass", record["checks"]
    return record["quantities"][name]["value"]


def test_cylinder_rates_per_length_and_total():
    length = 0.12
    record = check_case(_case("cylinder", length=f"{length!r} m"))
    per_length = 2 * math.pi * D * (C1 - C2) / math.log(R2 / R1)
    assert _quantity(record, "rate_per_length_inner") == pytest.approx(per_length, rel=1e-9)
    assert _quantity(record, "rate_per_length_outer") == pytest.approx(per_length, rel=1e-9)
    total = (C1 - C2) / ht.conduction.R_cylinder(Di=2 * R1, Do=2 * R2, k=D, L=length)
    assert _quantity(record, "rate_outer") == pytest.approx(total, rel=1e-9)
    assert _quantity(record, "rate_inner") == pytest.approx(total, rel=1e-9)


def test_sphere_total_rate():
    record = check_case(_case("sphere"))
    total = 4 * math.pi * D * R1 * R2 * (C1 - C2) / (R2 - R1)
    assert _quantity(record, "rate_inner") == pytest.approx(total, rel=1e-9)
    assert _quantity(record, "rate_outer") == pytest.approx(total, rel=1e-9)


def test_slab_total_rate_over_its_area():
    area = 2.5e-4  # m^2
    record = check_case(_case("slab", area=f"{area!r} m^2"))
    total = area * D * (C1 - C2) / (R2 - R1)
    assert _quantity(record, "rate_outer") == pytest.approx(total, rel=1e-9)
