"""The design status in the runs list, the case history and batches; drift of a requirement's
status; a batch with a failed run or a failed check never summed up as within tolerance.

The engine is replaced by one whose records the test chooses (as ``controlled_engine`` does),
so these test the service's own logic, not any figure of the engine.
"""

from __future__ import annotations

from typing import Any

import pytest
from click.testing import CliRunner

import worker.engine
from service import listing
from service.batches import WITHIN_TOLERANCE, batch_summary, compare_requirements, start_batch
from service.cli import main
from service.runs import create_run, execute_run
from service.store import default_store
from tests.api.support import controlled_result, make_case
from tests.ui.support import queue_and_run, sign_in


def _design(*statuses: str) -> dict[str, Any]:
    requirements = [{"id": f"R{i}", "quantity": "flux_outer", "value": 1.0, "bound": 0.0,
                     "margin": 1.0, "relative_margin": None, "numerical_uncertainty": 0.0,
                     "status": s} for i, s in enumerate(statuses, 1)]
    overall = ("none_stated" if not statuses else "not_met" if "not_met" in statuses
               else "indeterminate" if "indeterminate" in statuses else "met")
    return {"status": overall, "requirements": requirements}


class ChosenEngine:
    """Records with chosen design statuses and verdict (figures fixed)."""

    def __init__(self) -> None:
        self.statuses: tuple[str, ...] = ("met",)
        self.verdict = "pass"
        self.design = True

    def __call__(self, case: dict) -> dict:
        record = controlled_result(case, {"flux_outer": 2e-6}, verdict=self.verdict)
        if self.design:
            record["design"] = _design(*self.statuses)
        return record


@pytest.fixture
def chosen_engine(monkeypatch: pytest.MonkeyPatch) -> ChosenEngine:
    engine = ChosenEngine()
    monkeypatch.setattr(worker.engine, "check_case", engine)
    return engine


# --- drift of requirement statuses ---------------------------------------------------------

def test_compare_requirements_both_directions():
    met, missed = {"design": _design("met", "met")}, {"design": _design("met", "not_met")}
    assert compare_requirements(met, met) == []
    assert compare_requirements(met, missed) == [{"id": "R2", "baseline": "met",
                                                  "now": "not_met"}]
    assert compare_requirements(missed, met) == [{"id": "R2", "baseline": "not_met",
                                                  "now": "met"}]
    one = {"design": _design("met")}
    assert compare_requirements(one, met) == [{"id": "R2", "baseline": None, "now": "met"}]
    assert compare_requirements({}, {}) == []  # records made before requirements


def _document(**changes: Any) -> dict[str, Any]:
    document = {"status": "finished", "counts": {"queued": 0, "running": 0, "succeeded": 2,
                                                 "failed": 0},
                "verdicts": {"pass": 2, "fail": 0}, "drifted": []}
    document.update(changes)
    return document


def test_batch_summary_says_within_tolerance_only_when_everything_is():
    assert batch_summary(_document()) == WITHIN_TOLERANCE
    failed = _document(counts={"queued": 0, "running": 0, "succeeded": 1, "failed": 1})
    assert batch_summary(failed).startswith("1 run(s) failed")
    unverified = _document(verdicts={"pass": 1, "fail": 1})
    assert "1 run(s) failed a check" in batch_summary(unverified)
    changed = _document(drifted=[{"quantities": [], "requirements": [{"id": "R1"}]}])
    assert "1 case(s) drifted" in batch_summary(changed)
    assert "changed design requirement status" in batch_summary(changed)
    assert batch_summary(_document(status="running")) == "not finished"


def test_reverify_reports_a_changed_requirement_status_as_drift(data_dir, chosen_engine):
    execute_run(create_run(default_store(), actor="eng",
                           document=make_case(tags=["n"]))["run_id"], default_store())
    same = CliRunner().invoke(main, ["reverify", "--all"])
    assert same.exit_code == 0 and WITHIN_TOLERANCE in same.output, same.output
    chosen_engine.statuses = ("not_met",)  # the figures are the same; the status is not
    changed = CliRunner().invoke(main, ["reverify", "--all"])
    assert changed.exit_code == 1, changed.output
    assert "requirement R1 met -> not_met" in changed.output
    assert WITHIN_TOLERANCE not in changed.output


def test_reverify_never_sums_a_failed_check_up_as_within_tolerance(data_dir, chosen_engine):
    execute_run(create_run(default_store(), actor="eng",
                           document=make_case(tags=["n"]))["run_id"], default_store())
    chosen_engine.verdict = "fail"  # same figures, same design, but a check failed
    result = CliRunner().invoke(main, ["reverify", "--all"])
    assert result.exit_code == 1, result.output
    assert "1 run(s) failed a check" in result.output
    assert WITHIN_TOLERANCE not in result.output


def test_batch_page_names_failed_checks_and_requirement_drift(client, tokens, store,
                                                              chosen_engine):
    queue_and_run(store, make_case(tags=["n"]))
    chosen_engine.statuses, chosen_engine.verdict = ("not_met",), "fail"
    sign_in(client, tokens["admin"])
    batch = start_batch(store, actor="admin", all_cases=True)
    execute_run(batch["run_ids"][0], store)
    page = client.get(f"/ui/batches/{batch['batch_id']}").get_data(as_text=True)
    assert 'id="batch-failures"' in page and "1 run(s) failed a check" in page
    assert "requirement <code>R1</code>" in page and "badge-not_met" in page
    assert "every re-verified figure is within its tolerance" not in page


# --- the runs list and the case history -----------------------------------------------------

def test_runs_list_shows_and_filters_the_design_status(client, tokens, store, chosen_engine):
    chosen_engine.statuses = ("not_met", "met")
    missed = queue_and_run(store, make_case(title="missed"))
    chosen_engine.statuses = ("met",)
    met = queue_and_run(store, make_case(title="met"))
    chosen_engine.design = False  # a record made before requirements existed
    older = queue_and_run(store, make_case(title="older"))
    page = listing.list_runs(store, listing.RunFilters())
    by_id = {item["run_id"]: item["design"] for item in page["items"]}
    assert by_id == {missed: "not_met", met: "met", older: "none_stated"}
    for status, expected in (("not_met", {missed}), ("met", {met}), ("none_stated", {older}),
                             ("indeterminate", set())):
        found = listing.list_runs(store, listing.RunFilters(design=status))["items"]
        assert {item["run_id"] for item in found} == expected, status
    sign_in(client, tokens["reviewer"])
    html = client.get("/ui/runs").get_data(as_text=True)
    assert "Design requirements" in html and "✗ NOT MET" in html and "badge-not_met" in html
    filtered = client.get("/ui/runs?design=not_met").get_data(as_text=True)
    assert "missed" in filtered and ">met<" not in filtered.split("<tbody>")[1]
    assert client.get("/ui/runs?design=bogus").status_code == 422


def test_case_history_has_a_design_row(client, tokens, store, chosen_engine):
    chosen_engine.statuses = ("indeterminate",)
    run_id = queue_and_run(store, make_case(title="undecided"))
    [item] = listing.list_runs(store, listing.RunFilters())["items"]
    assert item["run_id"] == run_id
    [row] = listing.case_runs_with_figures(store, item["case_id"])
    assert row["design"] == "indeterminate"
    sign_in(client, tokens["reviewer"])
    page = client.get(f"/ui/cases/{item['case_id']}").get_data(as_text=True)
    assert "Design requirements" in page and "badge-indeterminate" in page
