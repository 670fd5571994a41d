"""The text report's release table (``service.report.text.format_release_table``).

The outcome is the engine's for an invented sheet; only the table's shape is checked here (the
values are checked against published forms in test_transient_check and the reference tests).
"""

from __future__ import annotations

from service.report.numbers import readable_time
from service.report.text import format_minimum_table, format_release_table
from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.transient import run_transient

TIMES = (0.0, 60.0, 600.0, 3000.0, 9000.0)


def test_release_table_text():
    sheet = Problem("slab", 0.0, (Layer("matrix", 0.3e-3, 1.0e-11, 1.0, initial=2.0),),
                    Boundary("symmetry"), Boundary("concentration", 0.0),
                    Regime("transient", 12000.0, TIMES), area=2.0e-4)
    outcome = run_transient(sheet)
    for source in (outcome, {"series": outcome.series, "quantities": outcome.quantities}):
        lines = format_release_table(source).splitlines()
        assert lines[0] == "Release"
        assert "release_fraction" in lines[1] and "out outer [mol]" in lines[1]
        assert len([line for line in lines if line.strip()[:1].isdigit()]) == len(TIMES)
        assert any(line.startswith("t50 (50 % released): ") for line in lines)
    assert format_release_table({"series": {}, "quantities": {}}) == ""


def test_uptake_table_text_has_no_release_fraction_and_reads_times():
    fed = Problem("slab", 0.0, (Layer("gel", 1e-3, 1e-9, 1.0),), Boundary("symmetry"),
                  Boundary("concentration", 0.2), Regime("transient", 7200.0, (600.0, 7200.0)))
    outcome = run_transient(fed)
    lines = format_release_table(outcome).splitlines()
    assert lines[0] == "Uptake"
    assert "uptake [mol/m^2]" in lines[1] and "release_fraction" not in lines[1]
    assert "10 min" in lines[3] and "2 h" in lines[4]
    (steady,) = [line for line in lines if line.startswith("time to steady")]
    seconds = outcome.quantities["time_to_steady"]["value"]
    assert f"{seconds:.6g} s ({seconds / 60:.4g} min)" in steady
    table = format_minimum_table(outcome).splitlines()
    assert table[0].startswith("Lowest concentration")
    assert len(table) == 3 + 2 and "gel" in table[1]


def test_readable_time_picks_the_unit_that_reads():
    # 30 days reads in days, 3 h in hours, 90 s stays in seconds (common practice)
    assert readable_time(30 * 86400.0) == "30 d"
    assert readable_time(570518.0) == "6.603 d"
    assert readable_time(3 * 3600.0) == "3 h"
    assert readable_time(90.0) is None
    assert readable_time(None) is None
