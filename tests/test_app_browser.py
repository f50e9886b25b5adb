"""The browser app for real: ``auditmean app --demo`` served by Voila, driven in headless Chromium.

Two walks through the whole job on the invented demo ledger, one per design
(stratified, then by monetary units); this checks that the demo app runs.
The numbers on the page are compared with the engine run in this process on
the same engagement folder. Any JavaScript error on the page fails the test.

Needs Debian's chromium (``/usr/bin/chromium``, or ``AUDITMEAN_CHROMIUM``),
Playwright and Voila. Outside CI the test is skipped when one is missing;
under CI (``CI=true``) a missing one is a failure.
"""

from __future__ import annotations

import importlib.util
import os
import signal
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest

from auditmean._records import format_number
from auditmean.cli.app import free_port
from auditmean.cli.demo import DEMO_SETTINGS
from auditmean.core.estimators import METHOD_NAMES
from auditmean.errors import ParameterError
from auditmean.monetary_engagement import BOUND_NAMES, plan_monetary_units
from auditmean.plan import plan_sample
from auditmean.plan_check import check_plan
from auditmean.population import load_population
from auditmean.strata import stratify
from auditmean.widgets.state import DESIGN_NAMES
from auditmean.workflow import design_of, evaluate_engagement, open_engagement

PROJECT = Path(__file__).resolve().parents[1]
DEMO = PROJECT / "demo_data"
CHROMIUM = os.environ.get("AUDITMEAN_CHROMIUM", "/usr/bin/chromium")
UNDER_CI = os.environ.get("CI", "").lower() == "true"
CHROMIUM_ARGS = [
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync", "--disable-dev-shm-usage",
]
WAIT = 30_000


def _missing() -> str | None:
    if not Path(CHROMIUM).exists():
        return f"no chromium at {CHROMIUM} (apt-get install chromium)"
    for module in ("playwright", "voila"):
        if importlib.util.find_spec(module) is None:
            return f"the Python package {module} is not installed (pip install -e '.[test]')"
    return None


@pytest.fixture(scope="module")
def app_server():
    missing = _missing()
    if missing:
        if UNDER_CI:
            pytest.fail(f"the browser test must run under CI: {missing}")
        pytest.skip(missing)
    port = free_port()
    work = Path(tempfile.mkdtemp(prefix="auditmean-app-test-"))
    env = {**os.environ, "PLOTLY_RENDERER": "plotly_mimetype"}
    log = open(work / "server.log", "wb")
    proc = subprocess.Popen(
        [sys.executable, "-m", "auditmean", "app", "--demo", "--data", str(DEMO), "--port", str(port), "--no-browser"],
        cwd=work, env=env, stdout=log, stderr=subprocess.STDOUT, start_new_session=True,
    )
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            break
        try:
            with socket.create_connection(("127.0.0.1", port), timeout=0.5):
                break
        except OSError:
            time.sleep(0.3)
    if proc.poll() is not None:
        log.close()
        pytest.fail("auditmean app ended early:\n" + (work / "server.log").read_text(errors="replace")[-3000:])
    try:
        yield f"http://127.0.0.1:{port}/", work
    finally:
        for sig, wait in ((signal.SIGTERM, 10), (signal.SIGKILL, 5)):
            try:
                os.killpg(proc.pid, sig)
            except ProcessLookupError:
                break
            try:
                proc.wait(timeout=wait)
                break
            except subprocess.TimeoutExpired:
                continue
        log.close()


def _browser(p):
    context = p.chromium.launch_persistent_context(
        tempfile.mkdtemp(prefix="auditmean-chromium-"), executable_path=CHROMIUM, headless=True,
        args=CHROMIUM_ARGS, viewport={"width": 1400, "height": 1000},
    )
    # never wait on the network: only the app's own address is reached
    context.route("**/*", lambda r: r.continue_() if r.request.url.startswith("http://127.0.0.1") else r.abort())
    return context


def _folder_of(work: Path, design: str) -> Path:
    """The engagement folder the app started in ``work`` with the given design."""
    found = [f for f in work.glob("auditmean-demo-*") if (f / "plan.json").exists()
             and design_of(open_engagement(f)[0]) == design]
    assert len(found) == 1, found
    return found[0]


def _selected_option(page, css: str) -> str:
    text = page.locator(css).evaluate("s => s.options[s.selectedIndex] ? s.options[s.selectedIndex].text : ''")
    return text.replace("\xa0", " ")  # the dropdown shows spaces as no-break spaces


def test_the_whole_job_in_the_browser(app_server):
    from playwright.sync_api import expect, sync_playwright

    url, work = app_server
    population = load_population(str(DEMO / "invoices.csv"), id_column="invoice_no", value_column="book_value")
    strata = stratify(population, **DEMO_SETTINGS["stratify"])
    planned = plan_sample(strata, **DEMO_SETTINGS["plan"])
    # the check the panel runs once the plan is saved: its default pattern, 2,000 samples, seed 1 (where the
    # engine refuses to simulate the finite-sample bound on this design, the panel checks without it)
    try:
        checked = check_plan(strata, planned, replications=2000, seed=1)
    except ParameterError as exc:
        assert exc.parameter == "bounds", exc
        checked = check_plan(strata, planned, replications=2000, seed=1, include_bound=False)
    errors: list[str] = []
    with sync_playwright() as p:
        context = _browser(p)
        try:
            page = context.new_page()
            page.on("pageerror", lambda e: errors.append(str(e)))
            page.goto(url, timeout=90_000)

            # 1 Population: the demo prefills the ledger; read it
            page.locator("button.am-read-population").click(timeout=60_000)
            expect(page.locator(".am-profile")).to_contain_text("25,000", timeout=WAIT)
            expect(page.locator(".am-app-cautions")).to_contain_text("professional judgement")

            # 3 Sample size: the size the engine plans (plan_sample in this process)
            page.get_by_role("tab", name="3 Sample size").click()
            expect(page.locator(".am-plan-size")).to_contain_text(f"{planned.total_size:,}", timeout=WAIT)
            expect(page.locator(".am-allocation .main-svg").first).to_be_visible(timeout=WAIT)
            page.locator("button.am-save-plan").click()
            expect(page.get_by_text("The plan is fixed for this engagement")).to_be_visible(timeout=WAIT)
            # saving starts the plan's coverage check; its one line is shown (check_plan in this process)
            expect(page.locator(".am-plan-check-line")).to_contain_text(checked.line, timeout=60_000)
            expect(page.locator(".am-plan-check")).to_contain_text(f"{checked.monetary_unit_size:,}")

            # 5 Selection
            page.get_by_role("tab", name="5 Selection").click()
            page.locator("button.am-draw").click()
            expect(page.locator(".am-selection-done")).to_contain_text(f"{planned.total_size:,} items", timeout=WAIT)

            # 6 Audited values: one typed by hand, saved at once; the rest by the demo-only button
            page.get_by_role("tab", name="6 Audited values").click()
            first = page.locator(".am-audited-value input").first
            first.fill("100.00")
            first.press("Enter")
            expect(page.locator(".am-entered-count")).to_contain_text(f"1 of {planned.total_size:,}", timeout=WAIT)
            folder = _folder_of(work, "stratified")
            eng, _ = open_engagement(folder)
            assert len(eng.results().current) == 1  # on disk the moment it was entered
            page.locator("button.am-demo-fill").click()
            done = f"{planned.total_size:,} of {planned.total_size:,}"
            expect(page.locator(".am-entered-count")).to_contain_text(done, timeout=WAIT)

            # 7 Conclusion: the numbers the engine gives on the same folder
            page.get_by_role("tab", name="7 Conclusion").click()
            page.locator("button.am-evaluate").click()
            expect(page.locator(".am-verdict")).to_be_visible(timeout=60_000)
            eng, _ = open_engagement(folder)
            direct = evaluate_engagement(eng, save=False)
            c = direct.conclusion
            table = page.locator(".am-evaluation-table")
            expect(table).to_contain_text(format_number(c.upper_limit))
            expect(table).to_contain_text(format_number(c.projected_misstatement))
            expect(page.locator(".am-verdict")).to_contain_text(f"the sample {c.verdict} the conclusion")
            expect(page.locator(".am-basis")).to_contain_text(
                f"The verdict rests on the {c.basis}" if c.basis != "no limit that holds"
                else "No limit that holds is available")
            # the relied-on field names the method after evaluating (it was once blank)
            assert METHOD_NAMES[direct.primary] in _selected_option(page, ".am-relied-on select")
            expect(page.locator(".am-estimate-picture .js-plotly-plot .main-svg").first).to_be_visible(timeout=WAIT)
            assert len(eng.evaluations()) == 1
        finally:
            context.close()
    assert errors == [], f"JavaScript errors on the page: {errors}"


def test_the_monetary_unit_design_in_the_browser(app_server):
    from playwright.sync_api import expect, sync_playwright

    url, work = app_server
    population = load_population(str(DEMO / "invoices.csv"), id_column="invoice_no", value_column="book_value")
    settings = DEMO_SETTINGS["plan"]
    mplan = plan_monetary_units(population, tolerable=settings["tolerable"], expected=settings["expected"],
                                risk_incorrect_acceptance=settings["risk_incorrect_acceptance"])
    errors: list[str] = []
    with sync_playwright() as p:
        context = _browser(p)
        try:
            page = context.new_page()
            page.on("pageerror", lambda e: errors.append(str(e)))
            page.goto(url, timeout=90_000)
            page.locator("button.am-read-population").click(timeout=60_000)
            expect(page.locator(".am-profile")).to_contain_text("25,000", timeout=WAIT)

            # 3 Sample size: choose the monetary-unit design; its size is the engine's (plan_monetary_units here)
            page.get_by_role("tab", name="3 Sample size").click()
            page.locator(".am-design button", has_text=DESIGN_NAMES["monetary_unit"]).click()
            expect(page.locator(".am-mu-size")).to_contain_text(f"{mplan.sample_size:,}", timeout=WAIT)
            expect(page.locator(".am-mu-plan")).to_contain_text(format_number(mplan.interval))
            page.locator("button.am-save-plan").click()
            expect(page.get_by_text("The plan is fixed for this engagement")).to_be_visible(timeout=WAIT)

            # 2 Strata and 4 Coverage check say plainly that this design does not use them
            page.get_by_role("tab", name="2 Strata").click()
            expect(page.locator(".am-design-note").first).to_contain_text("does not use strata", timeout=WAIT)
            page.get_by_role("tab", name="4 Coverage check").click()
            expect(page.locator(".am-design-note").nth(1)).to_contain_text("does not use this check", timeout=WAIT)

            # 5 Selection: monetary units drawn from the seed
            page.get_by_role("tab", name="5 Selection").click()
            page.locator("button.am-draw").click()
            expect(page.locator(".am-selection-done")).to_contain_text(f"{mplan.sample_size:,} monetary units",
                                                                       timeout=WAIT)
            folder = _folder_of(work, "monetary_unit")
            eng, _ = open_engagement(folder)
            n_items = len(eng.selection())

            # 6 Audited values by the demo-only button
            page.get_by_role("tab", name="6 Audited values").click()
            page.locator("button.am-demo-fill").click()
            expect(page.locator(".am-entered-count")).to_contain_text(f"{n_items:,} of {n_items:,}", timeout=WAIT)

            # 7 Conclusion: every bound, the relied-on one marked; the numbers the engine gives on the folder
            page.get_by_role("tab", name="7 Conclusion").click()
            page.locator("button.am-evaluate").click()
            expect(page.locator(".am-mu-bounds")).to_be_visible(timeout=60_000)
            eng, _ = open_engagement(folder)
            direct = evaluate_engagement(eng, save=False)
            table = page.locator(".am-mu-bounds")
            for b in direct.bounds.values():
                expect(table).to_contain_text(format_number(b.upper))
            relied = page.locator(".am-mu-bounds tr.am-relied")
            expect(relied).to_contain_text(BOUND_NAMES[direct.relied_on])
            expect(relied).to_contain_text(format_number(direct.upper))
            expect(page.locator(".am-verdict")).to_contain_text(f"the sample {direct.verdict} the conclusion")
            assert BOUND_NAMES[direct.relied_on] in _selected_option(page, ".am-relied-on select")
            expect(page.locator(".am-estimate-picture .js-plotly-plot .main-svg").first).to_be_visible(timeout=WAIT)
            assert len(eng.evaluations()) == 1
        finally:
            context.close()
    assert errors == [], f"JavaScript errors on the page: {errors}"
