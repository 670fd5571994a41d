"""The text report's release table (``service.report.text.format_release_table``).

The outcome is the engine's for an invented sheet; only the table's shape is checked here (the
values are checked against published forms in test_transient_check and the reference tests).
"""

from __future__ import annotations

from service.report.text import format_release_table
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
