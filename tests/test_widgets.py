"""The panels driven without a browser: set values, click, read, and compare with the engine.

Every number a panel shows must be the engine's: each check below calls
the same auditmean function directly, on the same inputs, and compares
(source of every expected value: the engine's public function named beside
the check). The population is invented here, from a fixed seed; the demo
data is not used for any asserted number.
"""

from __future__ import annotations

import html
import json
import math
import os
from datetime import datetime, timezone

os.environ.setdefault("PLOTLY_RENDERER", "plotly_mimetype")

import numpy as np
import pandas as pd
import pytest

from auditmean._records import format_number
from auditmean.cautions import CAUTIONS
from auditmean.core.estimators import METHOD_NAMES
from auditmean.coverage import FixedTaint, MisstatementModel, UniformTaint, simulate_coverage
from auditmean.engagement import Engagement
from auditmean.evaluation import evaluate
from auditmean.evaluation.overstatement import overstatement_bound
from auditmean.plan import MisstatementPattern, plan_sample
from auditmean.plan_check import LOW_ERROR_DEFAULT_TEXT, check_plan
from auditmean.population import load_population, profile
from auditmean.selection import select
from auditmean.strata import stratify
from auditmean.widgets import (
    App,
    CoveragePanel,
    EngagementState,
    EvaluationPanel,
    PlanPanel,
    PopulationPanel,
    ResultsPanel,
    SelectionPanel,
    StrataPanel,
    WorkpaperPanel,
    figures,
)
from auditmean.widgets.app import STEP_TITLES
from auditmean.widgets.evaluation import evaluation_html
from auditmean.workflow import evaluate_engagement

STRATIFY = {"method": "cumulative_sqrt", "n_strata": 3, "top_cutoff": 5_000.0}
PLAN = {
    "tolerable": 60_000.0,
    "expected": 10_000.0,
    "risk_incorrect_acceptance": 0.05,
    "risk_incorrect_rejection": 0.20,
    "method": "ratio",
    "std_dev_source": MisstatementPattern(0.05, 0.2),
    "minimum": 10,
}
SEED = "widget-test-seed"
CHECK_SAMPLES = 300  # simulated samples of the plan's coverage check in these tests (the panel's default is 2,000)


@pytest.fixture(scope="module")
def ledger(tmp_path_factory) -> tuple:
    """An invented ledger of 2,000 items (seeded) and the 'true' audited value of each."""
    rng = np.random.default_rng(20240607)
    n = 2_000
    book = np.round(rng.lognormal(5.5, 1.0, n), 2)
    book[:20] = -np.round(rng.uniform(5, 200, 20), 2)  # credits
    book[20:30] = 0.0  # zero balances
    book[30:36] = [6_000.0, 7_500.5, 9_999.99, 12_000.0, 15_500.0, 8_250.25]  # large items
    ids = [f"A-{i:05d}" for i in range(n)]
    wrong = rng.random(n) < 0.05
    audited = np.where(wrong, np.round(book * 0.8, 2), book)
    folder = tmp_path_factory.mktemp("ledger")
    path = folder / "ledger.csv"
    pd.DataFrame({"item": ids, "amount": [f"{v:.2f}" for v in book]}).to_csv(path, index=False)
    truth = dict(zip(ids, audited))
    return path, truth


def _population_panel(state, ledger_path):
    panel = PopulationPanel(state, source=ledger_path, id_column="item", value_column="amount")
    panel.read_button.click()
    assert panel.message.value == "", panel.message.value
    return panel


def _planned(tmp_path, ledger_path):
    state = EngagementState()
    pop = _population_panel(state, ledger_path)
    strata = StrataPanel(state, **STRATIFY)
    plan = PlanPanel(state, **PLAN, check_replications=CHECK_SAMPLES, folder=tmp_path / "engagement")
    return state, pop, strata, plan


def _selected(tmp_path, ledger_path):
    state, pop, strata, plan = _planned(tmp_path, ledger_path)
    plan.save_button.click()
    plan.wait_check(120)  # saving starts the plan's coverage check
    assert plan.message.value == "", plan.message.value
    sel = SelectionPanel(state, seed=SEED)
    sel.draw_button.click()
    sel.wait(60)
    assert sel.message.value == "", sel.message.value
    return state, plan, sel


def _all_entered(tmp_path, ledger):
    path, truth = ledger
    state, plan, sel = _selected(tmp_path, path)
    results = ResultsPanel(state, entered_by="tester")
    frame = pd.DataFrame({"item_id": state.selection["item_id"],
                          "audited_value": [f"{truth[i]:.2f}" for i in state.selection["item_id"]]})
    found = tmp_path / "found.csv"
    frame.to_csv(found, index=False)
    results.record_file(found, id_column="item_id", value_column="audited_value")
    assert "am-error" not in results.message.value, results.message.value
    return state, results


# --------------------------------------------------------------------------- the state


def test_state_clears_what_was_computed_from_a_changed_value():
    seen = []
    state = EngagementState(population="P", strata="S", plan="L", evaluation="E", coverage="C")
    state.observe(lambda ch: seen.append(ch.names), names=("plan", "coverage"))
    changed = state.update(strata="S2")
    # strata clears plan, coverage and evaluation (the chain in auditmean.widgets.state.CLEARS)
    assert changed == {"strata", "plan", "coverage", "evaluation"}
    assert state.population == "P" and state.plan is None and state.evaluation is None
    assert seen == [changed]  # one notification per update
    # values given together are kept together
    state.update(strata="S3", plan="L3")
    assert state.strata == "S3" and state.plan == "L3"
    with pytest.raises(AttributeError):
        state.plan = "direct"  # must go through update() so the panels are told


# --------------------------------------------------------------------------- population, strata, plan


def test_population_panel_reads_and_profiles_like_the_engine(ledger):
    path, _ = ledger
    state = EngagementState()
    panel = _population_panel(state, path)
    direct = load_population(str(path), id_column="item", value_column="amount")
    # source: load_population called directly on the same file
    assert state.population.content_sha256 == direct.content_sha256
    assert state.population.total == direct.total
    prof = profile(direct)
    assert state.profile.skewness == prof.skewness
    assert format_number(prof.total) in panel.profile_html.value
    # the picture's bins: numpy's histogram of the positive values on the same edges
    fig = panel.figure.figure
    counts = np.histogram(direct.book_values[direct.book_values > 0], bins=np.asarray(fig.data[0].x))[0]
    assert list(fig.data[0].y[:-1]) == counts.tolist()


def test_population_panel_shows_a_missing_file_as_a_message(tmp_path):
    state = EngagementState()
    panel = PopulationPanel(state)
    panel.source.value = str(tmp_path / "nothere.csv")
    assert "am-error" in panel.message.value and "no such file" in panel.message.value
    assert "Traceback" not in panel.message.value
    panel.read_button.click()
    assert state.population is None


def test_strata_panel_stratifies_like_the_engine(ledger):
    path, _ = ledger
    state = EngagementState()
    _population_panel(state, path)
    panel = StrataPanel(state, **STRATIFY)
    direct = stratify(load_population(str(path), id_column="item", value_column="amount"), **STRATIFY)
    # source: stratify called directly with the same arguments
    pd.testing.assert_frame_equal(state.strata.table, direct.table)
    panel.n_strata.value = 4
    again = stratify(state.population, **{**STRATIFY, "n_strata": 4})
    pd.testing.assert_frame_equal(state.strata.table, again.table)
    # the boundary lines of the picture are at the engine's boundaries
    xs = [x for x in panel.distribution.figure.data[1].x if x is not None]
    assert sorted(set(xs)) == sorted(b for b in again.boundaries if b > 0)


def test_plan_panel_replans_and_redraws_in_place(tmp_path, ledger):
    path, _ = ledger
    state, _pop, _strata, panel = _planned(tmp_path, path)
    fw = panel.figure
    direct = plan_sample(state.strata, **PLAN)
    # source: plan_sample called directly on the same strata
    assert state.plan.sizes == direct.sizes
    assert state.plan.total_size == direct.total_size
    panel.tolerable.value = 45_000.0
    direct2 = plan_sample(state.strata, **{**PLAN, "tolerable": 45_000.0})
    assert state.plan.sizes == direct2.sizes
    assert panel.figure is fw  # the same FigureWidget, changed in place
    shown = [a if a is not None else b for a, b in zip(fw.data[0].y, fw.data[1].y)]
    assert shown == direct2.table["size"].tolist()
    assert f"<b>{direct2.total_size:,}</b>" in panel.headline.value


def test_plan_panel_hides_only_the_inputs_that_do_not_apply(ledger):
    path, _ = ledger
    state = EngagementState()
    _population_panel(state, path)
    StrataPanel(state, **STRATIFY)
    panel = PlanPanel(state, tolerable=60_000.0)  # the defaults: minimum from the checks, no rejection risk
    hidden = {panel.minimum, panel.risk_rejection, panel.error_rate, panel.typical_taint}
    assert panel.check_taint_kind.value == "uniform"  # the low-error default: a share between two values
    for w in (panel.tolerable, panel.expected, panel.risk_acceptance, panel.method, panel.allocation,
              panel.check_error_rate, panel.check_taint, panel.check_taint_high, panel.check_replications, *hidden):
        assert (w.layout.display == "none") == (w in hidden), w.description
    coverage = CoveragePanel(state)
    for w in (coverage.error_rate, coverage.taint, coverage.understatement, coverage.replications, coverage.seed):
        assert w.layout.display != "none", w.description
    assert coverage.taint_high.layout.display == "none"


def test_plan_panel_shows_a_bad_input_as_a_message(tmp_path, ledger):
    path, _ = ledger
    state, _pop, _strata, panel = _planned(tmp_path, path)
    panel.expected.value = 100_000.0  # above the tolerable misstatement
    assert "am-error" in panel.message.value and "tolerable" in panel.message.value
    assert state.plan is None
    panel.method.value = "mpu"
    panel.source.value = "book"
    panel.expected.value = 10_000.0
    assert panel.message.value == ""
    # source: plan_sample directly with mean-per-unit on the book values
    assert state.plan.sizes == plan_sample(state.strata, **{**PLAN, "method": "mpu", "std_dev_source": "book"}).sizes


# --------------------------------------------------------------------------- the plan's coverage check


def test_plan_panel_checks_the_plan_against_its_stated_risk(tmp_path, ledger):
    path, _ = ledger
    state, _pop, _strata, panel = _planned(tmp_path, path)
    # the pattern simulated is in plain view: the one the plan assumed (PLAN's MisstatementPattern(0.05, 0.2)),
    # every misstated item misstated by the typical share (auditmean.plan_check.default_model)
    assert (panel.check_error_rate.value, panel.check_taint_kind.value, panel.check_taint.value) == (0.05, "fixed", 0.2)
    assert "the pattern the plan assumed" in panel.check_default_html.value
    # every input of the pattern is on show (hiding "up to" for a fixed share once hid its neighbours too)
    shown_inputs = (panel.check_error_rate, panel.check_taint_kind, panel.check_taint, panel.check_understatement,
                    panel.check_replications, panel.check_seed)
    assert [w.layout.display for w in shown_inputs] == [None] * 6 and panel.check_taint_high.layout.display == "none"
    panel.check_seed.value = 5
    panel.check_button.click()
    panel.wait_check(120)
    assert "am-error" not in panel.message.value, panel.message.value
    check = state.plan_check
    # source: check_plan called directly on the same strata and plan, with its default pattern, samples and seed
    direct, no_bound = _engine_check(state, None, seed=5)
    assert ("The finite-sample bound was not simulated" in panel.check_html.value) == bool(no_bound)
    assert (check.simulated_risk, check.line, check.model) == (direct.simulated_risk, direct.line, direct.model)
    assert not check.model_is_default  # the plan's own pattern, not the low-error default
    shown = panel.check_html.value
    assert "am-plan-check-line" in shown and html.escape(direct.line) in shown
    assert f"{direct.monetary_unit_size:,}" in shown
    assert format_number(direct.monetary_unit_zero_error_bound) in shown
    # arithmetic: the Monte Carlo standard error of a share p of R samples is sqrt(p (1 - p) / R)
    p = check.simulated_risk
    assert check.simulated_risk_mc_se == pytest.approx(math.sqrt(p * (1 - p) / CHECK_SAMPLES), rel=1e-9)

    # another pattern, typed in: the check simulates exactly that one
    panel.check_taint_kind.value = "uniform"
    panel.check_taint.value, panel.check_taint_high.value = 0.1, 0.9
    panel.check_understatement.value = 0.25
    assert "You changed the pattern" in panel.check_default_html.value
    panel.check_button.click()
    panel.wait_check(120)
    model = MisstatementModel(error_rate=0.05, taint=UniformTaint(0.1, 0.9), understatement_share=0.25)
    direct, _ = _engine_check(state, model, seed=5)
    assert state.plan_check.simulated_risk == direct.simulated_risk
    assert state.plan_check.model == direct.model
    panel.check_reset_button.click()
    assert (panel.check_taint_kind.value, panel.check_taint.value, panel.check_understatement.value) == ("fixed", 0.2, 0.0)

    # a plan without an assumed pattern is checked under the stated low-error default
    panel.method.value = "mpu"
    panel.source.value = "book"
    assert panel.message.value == "", panel.message.value
    assert (panel.check_error_rate.value, panel.check_taint_kind.value) == (0.02, "uniform")
    assert html.escape(LOW_ERROR_DEFAULT_TEXT) in panel.check_default_html.value
    assert state.plan_check is None  # the plan changed: the earlier check is gone
    panel.check_button.click()
    panel.wait_check(120)
    assert state.plan_check.model_is_default
    assert "(the default)" in panel.check_html.value


def _engine_check(state, model, **kwargs):
    """check_plan on the state's plan, as the panel calls it, and why the finite-sample bound was left out
    ("" when it was simulated)."""
    check = check_plan(state.strata, state.plan, model, replications=CHECK_SAMPLES, **kwargs)
    return check, check.bound_note


def test_plan_check_can_be_stopped_and_says_so(tmp_path, ledger):
    path, _ = ledger
    state, _pop, _strata, panel = _planned(tmp_path, path)
    panel.check_replications.value = 100_000
    panel.check_button.click()
    panel.check_task.stop_button.click()
    panel.wait_check(300)
    check = state.plan_check
    assert check is not None and check.replications < 100_000
    assert "Stopped early" in panel.check_html.value
    assert f"{check.replications:,} of 100,000" in panel.check_html.value


def test_saving_the_plan_runs_its_check_and_keeps_it_in_the_folder(tmp_path, ledger):
    path, _ = ledger
    state, _pop, _strata, panel = _planned(tmp_path, path)
    assert state.plan_check is None
    panel.save_button.click()  # not checked before: the check starts once the plan is saved
    panel.wait_check(120)
    assert "am-error" not in panel.message.value, panel.message.value
    check = state.plan_check
    assert check is not None and check.replications == CHECK_SAMPLES
    saved = Engagement.open(tmp_path / "engagement").plan()
    assert saved["plan_check"] == json.loads(json.dumps(check.to_dict()))
    # checked before saving: the same check is saved with the plan, and none runs again
    panel.restart_button.click()
    panel.folder.value = str(tmp_path / "second")
    panel.save_button.click()
    assert not panel.check_task.running and state.plan_check is check
    assert Engagement.open(tmp_path / "second").plan()["plan_check"] == saved["plan_check"]
    # a resumed engagement shows its saved check
    resumed = EngagementState.from_folder(tmp_path / "second")
    assert resumed.plan_check.line == check.line
    again = PlanPanel(resumed)
    assert html.escape(check.line) in again.check_html.value


# --------------------------------------------------------------------------- the engagement


def test_save_plan_and_draw_selection_record_what_the_engine_gives(tmp_path, ledger):
    path, _ = ledger
    state, plan_panel, panel = _selected(tmp_path, path)
    folder = tmp_path / "engagement"
    saved = Engagement.open(folder).plan()
    # the saved plan is the plan shown (its JSON record)
    assert saved["plan"]["total_size"] == state.plan.total_size
    assert saved["plan"]["table"] == json.loads(json.dumps(state.plan.to_dict()["table"]))
    # source: select() on the strata's items with the plan's sizes and the same seed
    frame = state.strata.assignment_frame()[["item_id", "stratum"]]
    direct = select(frame, state.plan.sizes, SEED)
    assert sorted(state.selection["item_id"]) == sorted(direct["item_id"])
    assert Engagement.open(folder).seed() == SEED
    assert "am-selection-done" in panel.selection_html.value
    panel.verify_button.click()
    assert "am-note" in panel.verify_html.value  # re-performed and matching
    assert plan_panel.tolerable.disabled  # the plan can no longer change


def test_every_typed_value_is_on_disk_at_once(tmp_path, ledger):
    path, _ = ledger
    state, _plan, _sel = _selected(tmp_path, path)
    panel = ResultsPanel(state, entered_by="tester")
    folder = tmp_path / "engagement"
    first, second = panel._page_items[0], panel._page_items[1]
    panel.rows[0].note.value = "agreed to the invoice"
    panel.rows[0].value.value = "1,234.50"
    # a fresh handle on the folder, as after a killed kernel: the value is there
    assert Engagement.open(folder).results().value_of(first) == 1234.50
    panel.rows[1].value.value = "99"
    panel.rows[1].value.value = "98.75"  # a correction: replaces, the earlier value stays in the log
    res = Engagement.open(folder).results()
    assert res.value_of(second) == 98.75
    assert res.log.loc[res.log["item_id"] == second, "action"].tolist() == ["new", "replace"]
    assert res.current.set_index("item_id").at[first, "note"] == "agreed to the invoice"
    assert "<b>2</b> of" in panel.counts_html.value
    # a value that cannot be read: a message in the panel, nothing recorded
    panel.rows[2].value.value = "twelve"
    assert "am-error" in panel.message.value and "not saved" in panel.rows[2].status.value
    assert len(Engagement.open(folder).results().log) == 3
    # reopening the folder in a new state shows the same entries
    resumed = EngagementState.from_folder(folder)
    again = ResultsPanel(resumed)
    assert "<b>2</b> of" in again.counts_html.value


def test_an_uploaded_results_file_is_kept_in_the_folder_and_recorded(tmp_path, ledger):
    path, truth = ledger
    state, _plan, _sel = _selected(tmp_path, path)
    panel = ResultsPanel(state)
    ids = list(state.selection["item_id"])
    text = "item,value,comment\n" + "".join(f"{i},{truth[i]:.2f},ok\n" for i in ids)
    panel.upload.value = ({"name": "found.csv", "type": "text/csv", "size": len(text),
                           "content": memoryview(text.encode()),
                           "last_modified": datetime(2024, 12, 31, tzinfo=timezone.utc)},)
    kept = tmp_path / "engagement" / "uploads" / "found.csv"
    assert kept.read_text() == text
    assert (panel.file_id.value, panel.file_value.value, panel.file_note.value) == ("item", "value", "comment")
    panel.file_button.click()
    res = Engagement.open(tmp_path / "engagement").results()
    assert len(res.current) == len(ids)
    assert res.value_of(ids[0]) == round(truth[ids[0]], 2)


def test_evaluation_panel_shows_the_engines_conclusion(tmp_path, ledger):
    state, _results = _all_entered(tmp_path, ledger)
    panel = EvaluationPanel(state, bootstrap_replicates=400)
    eng = state.engagement
    before = len(eng.evaluations())
    panel.evaluate_button.click()
    panel.wait(120)
    assert "am-error" not in panel.message.value, panel.message.value
    # source: evaluate_engagement called directly with the same options
    direct = evaluate_engagement(eng, bootstrap_replicates=400, save=False)
    ev = state.evaluation
    assert ev.primary == direct.primary
    for m, c in direct.conclusions.items():
        assert ev.conclusions[m].upper_limit == c.upper_limit
        assert ev.conclusions[m].verdict == c.verdict
        assert format_number(c.upper_limit) in panel.result_html.value
    assert len(eng.evaluations()) == before + 1  # saved in the folder
    shown = panel.result_html.value
    # what the verdict rests on, method by method (source: the same direct call)
    for m, c in direct.conclusions.items():
        assert ev.conclusions[m].basis == c.basis
        assert ev.conclusions[m].relied_upper_limit == pytest.approx(c.relied_upper_limit, nan_ok=True)
    # the relied-on field names the method (it was once blank after evaluating)
    assert METHOD_NAMES[direct.primary] in panel.primary.label
    c = direct.conclusion
    # this ledger's credits form a sampled stratum, where the finite-sample bound cannot be formed
    # (auditmean.evaluate's rule); warnings fire, so no limit that holds is available, and the panel says so
    assert direct.estimates[direct.primary].flags and c.basis == "no limit that holds"
    assert "No limit that holds is available" in shown
    assert html.escape(direct.bound_note) in shown
    assert f"{format_number(c.upper_limit)} (for information)" in shown  # the normal limit, for information
    fig = panel.figure.figure
    xs = [x for x in fig.data[0].x if x is not None]
    assert xs[:2] == [direct.conclusions[list(direct.conclusions)[0]].lower_limit,
                      direct.conclusions[list(direct.conclusions)[0]].upper_limit]
    for caution in CAUTIONS:
        assert caution.replace("'", "&#x27;") in panel.result_html.value


def test_the_conclusion_shows_the_bound_it_rests_on():
    # an invented sample of two strata, 1% of items misstated: the warnings about the normal approximation
    # fire for ratio estimation and the verdict rests on the finite-sample bound (auditmean.evaluate's rule)
    rng = np.random.default_rng(1)
    rows, strata = [], []
    for h, (count, scale) in enumerate(((2000, 200.0), (800, 2000.0))):
        book = np.round(rng.uniform(0.2, 1.0, count) * scale, 2)
        taint = np.where(rng.random(count) < 0.01, rng.uniform(0.01, 1.0, count), 0.0)
        audited = np.round(book * (1 - taint), 2)
        take = rng.choice(count, size=40, replace=False)
        rows.append(pd.DataFrame({"stratum": str(h), "item_id": [f"S{h}-{i}" for i in take],
                                  "book_value": book[take], "audited_value": audited[take]}))
        strata.append({"stratum": str(h), "count": count, "book_total": float(book.sum()),
                       "largest_book_value": float(book.max())})
    sample, table = pd.concat(rows, ignore_index=True), pd.DataFrame(strata)
    ev = evaluate(sample, table, tolerable=200_000, risk_incorrect_acceptance=0.05, primary="ratio")
    c = ev.conclusion
    assert ev.estimates["ratio"].flags and c.basis == "finite-sample bound"
    shown = evaluation_html(ev)
    # source: auditmean.overstatement_bound called directly on the same tables
    bound = overstatement_bound(sample, table, confidence=0.95)
    assert c.relied_upper_limit == pytest.approx(bound.upper)
    assert f"The verdict rests on the finite-sample bound: upper limit of misstatement {format_number(c.relied_upper_limit)}" in shown
    assert f"{format_number(c.upper_limit)} (for information)" in shown
    assert 'class="am-box am-note am-finite-bound"' in shown and format_number(bound.upper) in shown
    for assumption in bound.assumptions:
        assert html.escape(assumption) in shown
    # the picture marks the limit relied on beside the normal limits
    fig = figures.estimate_limits(ev)
    assert list(fig.data[3].x) == [x.relied_upper_limit for x in ev.conclusions.values()
                                   if x.basis == "finite-sample bound"]


def test_coverage_panel_runs_the_engine_and_can_be_stopped(tmp_path, ledger):
    path, _ = ledger
    state, _pop, _strata, _plan = _planned(tmp_path, path)
    panel = CoveragePanel(state, replications=300, seed=11)
    panel.estimators.value = ("ratio", "mpu")
    panel.run_button.click()
    panel.wait(120)
    assert "am-error" not in panel.message.value, panel.message.value
    labels = np.asarray(state.strata.labels, dtype=object)[state.strata.codes]
    model = MisstatementModel(error_rate=0.05, taint=FixedTaint(0.2))
    # source: simulate_coverage called directly with the same design, model and seed
    direct = simulate_coverage(state.strata.book_values, labels, state.plan.sizes, model,
                               estimators=["ratio", "mpu"], replications=300, seed=11,
                               tolerable=state.plan.tolerable, expected=state.plan.expected)
    pd.testing.assert_frame_equal(state.coverage.by_estimator, direct.by_estimator)
    # Stop: the run ends after the batch under way, and what was done is reported as partial
    panel.replications.value = 100_000
    panel.fixed.value = True
    panel.run_button.click()
    panel.task.stop_button.click()
    panel.wait(300)
    assert state.coverage.partial
    assert state.coverage.replications < 100_000
    assert "Stopped early" in panel.result_html.value


def test_workpaper_panel_writes_both_files(tmp_path, ledger):
    state, _results = _all_entered(tmp_path, ledger)
    ev = EvaluationPanel(state, bootstrap_replicates=200)
    ev.evaluate_button.click()
    ev.wait(120)
    panel = WorkpaperPanel(state, purpose="test of the widgets")
    panel.write_button.click()
    panel.wait(300)
    assert "am-error" not in panel.message.value, panel.message.value
    assert panel.written["xlsx"].stat().st_size > 0
    assert panel.written["html"].read_text(encoding="utf-8").count("test of the widgets") >= 1


def test_app_has_every_step_and_shows_the_cautions():
    app = App()
    assert tuple(app.tabs.titles) == STEP_TITLES
    assert len(app.tabs.children) == len(STEP_TITLES)
    for caution in CAUTIONS:
        assert caution.replace("'", "&#x27;") in app.cautions.value
    assert "Next:" in app.status.value


# --------------------------------------------------------------------------- the pictures


def test_allocation_picture_shows_the_plans_sizes(ledger):
    path, _ = ledger
    pop = load_population(str(path), id_column="item", value_column="amount")
    plan = plan_sample(stratify(pop, **STRATIFY), **PLAN)
    fig = figures.allocation(plan)
    shown = [a if a is not None else b for a, b in zip(fig.data[0].y, fig.data[1].y)]
    assert shown == plan.table["size"].tolist()  # source: Plan.table
    assert [str(s) for s in fig.data[0].x] == [str(s) for s in plan.table["stratum"]]


def test_book_value_bins_count_every_positive_item():
    values = np.array([-5.0, 0.0, 0.0, 1.0, 10.0, 100.0, 1000.0])
    bins = figures.book_value_bins(values, bins=3)
    # arithmetic: 4 positive items, one credit, two zeros; edges 1, 10, 100, 1000 (log-spaced)
    assert bins.counts.sum() == 4 and bins.credits == 1 and bins.zeros == 2
    np.testing.assert_allclose(bins.edges, [1.0, 10.0, 100.0, 1000.0])
    assert bins.counts.tolist() == [1, 1, 2]  # numpy's last bin includes its upper edge


def test_selection_can_be_stopped_and_nothing_is_recorded(tmp_path, ledger, monkeypatch):
    import auditmean.widgets.selection as selection_module
    from auditmean.workflow import draw_selection as real_draw

    path, _truth = ledger
    state, pop, strata, plan = _planned(tmp_path, path)
    plan.save_button.click()
    plan.wait_check(120)
    sel = SelectionPanel(state, seed=SEED)

    def pressed_stop_meanwhile(eng, population, seed=None, *, proceed=None):
        sel.task.stop()  # the user presses Stop while the keys are being computed
        return real_draw(eng, population, seed=seed, proceed=proceed)

    monkeypatch.setattr(selection_module, "draw_selection", pressed_stop_meanwhile)
    sel.draw_button.click()
    sel.wait(60)
    assert state.selection is None and state.engagement.selection() is None
    assert "Stopped" in sel.message.value
    # drawing again, without Stop, records it
    monkeypatch.setattr(selection_module, "draw_selection", real_draw)
    sel.draw_button.click()
    sel.wait(60)
    assert state.selection is not None and len(state.engagement.selection()) == plan_total(state)


def plan_total(state):
    return int(state.plan.total_size)
