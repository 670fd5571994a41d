"""The pages in a real browser: Debian's chromium driven by Playwright, JavaScript switched off.

A reviewer signs in, opens the runs list, opens a run, approves it and sees it signed; the
engineer who submitted a run, and a reviewer token held by that same person, see why they
cannot approve it and get no approve button. The run page is kept as a screenshot under
``test-artifacts/ui/``.

The browser is the system's ``chromium`` (``make test`` installs it with apt-get); Playwright
never downloads one. Without a browser the test is skipped, except with ``CI`` set, where it
fails.
"""

from __future__ import annotations

import copy
import os
import shutil
from pathlib import Path

import pytest

from service.people import change_user
from service.server import BackgroundServer
from tests.api.support import TEST_PASSWORD, make_case

CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
BROWSER_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
                "--no-first-run", "--disable-background-networking",
                "--disable-component-update", "--disable-sync"]
ARTIFACTS = Path(__file__).resolve().parents[2] / "test-artifacts" / "ui"


def _browser_or_stop():
    reasons = []
    if not os.access(CHROMIUM, os.X_OK):
        reasons.append(f"no chromium at {CHROMIUM} (apt-get install -y chromium)")
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        sync_playwright = None
        reasons.append("Playwright for Python is not installed (pip install playwright)")
    if reasons:
        message = "; ".join(reasons)
        if os.environ.get("CI"):
            pytest.fail(f"browser test cannot run with CI set: {message}")
        pytest.skip(message)
    return sync_playwright


@pytest.fixture
def served(app):
    with BackgroundServer(app) as server:
        yield server.url


def _person(playwright, profile: Path):
    """A fresh browser profile for one person, with JavaScript off (the pages need none)."""
    return playwright.chromium.launch_persistent_context(
        str(profile), executable_path=CHROMIUM, args=BROWSER_ARGS, headless=True,
        java_script_enabled=False, viewport={"width": 1280, "height": 900})


def _sign_in(page, url: str, login: str) -> None:
    page.goto(f"{url}/ui/runs")
    assert "/ui/login" in page.url
    page.get_by_label("Login").fill(login)
    page.get_by_label("Password").fill(TEST_PASSWORD)
    page.get_by_role("button", name="Sign in").click()
    assert page.url.endswith("/ui/runs"), page.url


def test_review_in_a_real_browser(served, store, tokens, tmp_path):
    sync_playwright = _browser_or_stop()
    from service.client import Client

    with Client(served, tokens["engineer"]) as engineer:
        # Invented test scenario, solved by the real engine.
        to_approve = engineer.submit(make_case(title="Browser test membrane A"))
        own_run = engineer.submit(make_case(title="Browser test membrane B",
                                            tags=["browser-test"]))
        for run_id in (to_approve, own_run):
            assert engineer.wait(run_id, timeout=60)["status"] == "succeeded"
    ARTIFACTS.mkdir(parents=True, exist_ok=True)

    with sync_playwright() as playwright:
        reviewer = _person(playwright, tmp_path / "reviewer-profile")
        try:
            page = reviewer.new_page()
            _sign_in(page, served, "rafael.reviewer")
            assert page.get_by_role("heading", name="Runs").is_visible()
            page.get_by_role("link", name="Browser test membrane A").first.wait_for()
            page.get_by_role("link", name=f"Open run {to_approve[:8]}").click()
            assert page.url.endswith(f"/ui/runs/{to_approve}")
            assert page.get_by_role("heading", name="Browser test membrane A").is_visible()
            assert page.locator("svg.plot").count() >= 1  # the profile plot is drawn
            page.get_by_label("Your reasons").fill("Browser test: figures and checks read.")
            page.get_by_label("Meaning of your signature").select_option("approval")
            page.get_by_label("Your password").fill("not my password")
            page.get_by_role("button", name="Approve this record").click()
            assert "the password is not yours" in page.locator("#review").inner_text()
            page.get_by_label("Your password").fill(TEST_PASSWORD)
            page.get_by_role("button", name="Approve this record").click()
            assert page.url.endswith(f"/ui/runs/{to_approve}")
            assert page.get_by_text("Signed off: approved (approval). The record is now "
                                    "sealed.").is_visible()
            signature = page.locator("#signoff")
            assert "approved" in signature.inner_text()
            assert "rafael.reviewer" in signature.inner_text()
            assert "approval" in page.locator("#signature-line").inner_text()
            assert page.get_by_role("button", name="Approve this record").count() == 0
            page.screenshot(path=str(ARTIFACTS / "run-page.png"), full_page=True)
            page.goto(f"{served}/ui/runs?signed=yes")
            assert page.get_by_text("approved by rafael.reviewer").is_visible()
        finally:
            reviewer.close()

        for name in ("engineer", "same-person-reviewer"):
            if name == "same-person-reviewer":  # the submitter, a reviewer now
                change_user(store, "erin.engineer", role="reviewer", actor="adi.admin")
            context = _person(playwright, tmp_path / f"{name}-profile")
            try:
                page = context.new_page()
                _sign_in(page, served, "erin.engineer")
                page.goto(f"{served}/ui/runs/{own_run}")
                refusal = page.locator("#cannot-sign").inner_text()
                assert "You submitted this run (erin.engineer), so you cannot sign it off" \
                    in refusal, name
                assert page.get_by_role("button", name="Approve this record").count() == 0
                assert page.get_by_text("Not signed off.").is_visible()
                if name == "engineer":
                    page.screenshot(path=str(ARTIFACTS / "run-page-submitter.png"),
                                    full_page=True)
            finally:
                context.close()
    assert (ARTIFACTS / "run-page.png").stat().st_size > 10_000


def test_measured_data_sections_in_a_real_browser(served, tokens, tmp_path):
    """A run whose case fits a diffusivity to release data and compares a second set: its run
    page shows which input came from the fit, the calibration, the validation table with its
    figure, and the credibility table, in a real browser (screenshot kept)."""
    sync_playwright = _browser_or_stop()
    from service.client import Client
    from tests.unit.schemas.test_measured_runs import CHECK_DAYS, FIT, FIT_DAYS, SHEET, _set

    case = copy.deepcopy(SHEET)  # invented scenario; data drawn from Crank's series there
    case.update(title="Browser test film fitted to release data",
                measurements=[_set("FIT", FIT_DAYS, "calibration"),
                              _set("CHK", CHECK_DAYS, "validation", seed=2)],
                calibration=FIT)
    with Client(served, tokens["engineer"]) as engineer:
        run_id = engineer.submit(case)
        assert engineer.wait(run_id, timeout=60)["status"] == "succeeded"
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    with sync_playwright() as playwright:
        reviewer = _person(playwright, tmp_path / "measured-profile")
        try:
            page = reviewer.new_page()
            _sign_in(page, served, "rafael.reviewer")
            page.goto(f"{served}/ui/runs/{run_id}")
            assert page.get_by_role("heading", name="Calibration").is_visible()
            assert "layers[0].diffusivity" in page.locator("p.fitted-inputs").inner_text()
            assert page.get_by_role("heading", name="Validation against measured data") \
                .is_visible()
            assert page.locator("#validation svg").count() == 1
            assert page.locator("#validation-headline").is_visible()
            rows = page.locator("table.credibility tbody tr")
            assert rows.count() == 7
            assert page.get_by_role("heading", name="Credibility evidence").is_visible()
            page.screenshot(path=str(ARTIFACTS / "run-page-measured.png"), full_page=True)
        finally:
            reviewer.close()
    assert (ARTIFACTS / "run-page-measured.png").stat().st_size > 10_000
