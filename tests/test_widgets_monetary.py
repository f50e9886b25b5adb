"""The monetary-unit design driven through the panels without a browser: set values, click, read.

The ledger is invented here from a fixed seed (lognormal book values, a few
credits and zero balances, a few items above any sampling interval, and
overstatements put in by the test, so every audited value is known). The
demo data is not used for any asserted number. Outside checks, named beside
each:

* the sample size against the expansion-factor rule computed here with
  scipy.stats.gamma (AICPA Audit Guide *Audit Sampling*: Poisson confidence
  factors with the expansion for expected misstatement; the rule as written
  in the notes of :func:`auditmean.monetary_unit_sample_size`, the factors
  from scipy, not from a table);
* the selection re-performed with hashlib alone from the documented rule
  (items in id order, cumulative book value in cents, draw ``k`` at the
  first 13 hexadecimal digits of SHA-256 of ``"{seed}:unit:{k}"``);
* the Stringer bound worked by hand from the taints (Stringer 1963: taints
  ranked descending, incremental Poisson factors from scipy.stats.gamma).

Every other number a panel shows is compared with the engine's public
function called directly on the same inputs (named beside the check).
"""

from __future__ import annotations

import hashlib
import html
import json
import os

os.environ.setdefault("PLOTLY_RENDERER", "plotly_mimetype")

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from auditmean._records import format_number
from auditmean.engagement import Engagement
from auditmean.monetary_engagement import BOUND_NAMES, MONETARY_UNIT_BOUNDS, plan_monetary_units
from auditmean.plan import plan_sample
from auditmean.population import load_population
from auditmean.widgets import (
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
from auditmean.widgets.coverage import NOT_USED as COVERAGE_NOT_USED
from auditmean.widgets.strata import NOT_USED as STRATA_NOT_USED
from auditmean.workflow import design_of, evaluate_engagement, open_engagement

TOLERABLE = 60_000.0
EXPECTED = 5_000.0
RISK = 0.05
SEED = "widget-mu ✓ seed"
STRATIFY = {"method": "cumulative_sqrt", "n_strata": 3}
PLAN = {"tolerable": TOLERABLE, "expected": EXPECTED, "risk_incorrect_acceptance": RISK, "method": "mpu",
        "minimum": 10}


@pytest.fixture(scope="module")
def ledger(tmp_path_factory):
    """An invented ledger of 1,200 items (rows not in id order) and the true audited value of each."""
    rng = np.random.default_rng(41)
    n = 1_200
    book = np.round(rng.lognormal(6.2, 1.1, n), 2)
    book[:4] = [-120.0, -35.5, 0.0, 0.0]  # two credits, two zero balances
    book[4:7] = [45_000.0, 61_250.75, 80_000.0]  # above any interval these inputs give
    ids = np.array([f"K-{i:05d}" for i in range(n)])
    audited = book.copy()
    wrong = rng.random(n) < 0.04
    wrong[:7] = False
    audited[wrong] = np.round(book[wrong] * 0.6, 2)  # 40% overstatements
    audited[5] = book[5] - 1_000.0  # one large item overstated by 1,000
    order = rng.permutation(n)  # the file is not in id order
    folder = tmp_path_factory.mktemp("mu-ledger")
    path = folder / "ledger.csv"
    pd.DataFrame({"item": ids[order], "amount": [f"{v:.2f}" for v in book[order]]}).to_csv(path, index=False)
    return path, dict(zip(ids, audited))


def _planned(tmp_path, path, **plan_kwargs):
    state = EngagementState()
    pop = PopulationPanel(state, source=path, id_column="item", value_column="amount")
    pop.read_button.click()
    assert pop.message.value == "", pop.message.value
    strata = StrataPanel(state, **STRATIFY)
    plan = PlanPanel(state, **{**PLAN, **plan_kwargs}, check_replications=200, folder=tmp_path / "engagement")
    return state, strata, plan


def _sample_size_by_hand(book_total: float, tolerable: float, expected: float, risk: float) -> int:
    """The smallest n with B F(n EM / B) / n <= TM, F(k) = gamma.ppf(1 - risk, k + 1) (scipy).

    The expansion-factor rule of the AICPA Audit Guide *Audit Sampling*, with the
    Poisson factor interpolated by the gamma quantile (as the function's notes say).
    """
    n = 1
    while book_total * stats.gamma.ppf(1 - risk, n * expected / book_total + 1) / n > tolerable:
        n += 1
    return n


def _reperformed(items: pd.DataFrame, n: int, seed: str) -> tuple[dict[str, int], int]:
    """Hits per item of the documented rule, with hashlib and integers only, and the total in cents."""
    cents = {i: round(v * 100) for i, v in zip(items["item_id"], items["book_value"])}
    ids = sorted(i for i, c in cents.items() if c > 0)  # Python's str order: Unicode code points
    bounds = np.cumsum([cents[i] for i in ids])
    total = int(bounds[-1])
    hits: dict[str, int] = {}
    for k in range(1, n + 1):
        u = int(hashlib.sha256(f"{seed}:unit:{k}".encode()).hexdigest()[:13], 16)
        point = u * total // 2**52
        item = ids[int(np.searchsorted(bounds, point, side="right"))]  # C_{i-1} <= point < C_i
        hits[item] = hits.get(item, 0) + 1
    for i in ids:  # items at or above the interval are examined whether or not a draw fell in them
        if cents[i] * n >= total:
            hits.setdefault(i, 0)
    return hits, total


def test_the_design_choice_plans_by_monetary_units_like_the_engine(tmp_path, ledger):
    path, _ = ledger
    state, strata, plan = _planned(tmp_path, path)
    cov = CoveragePanel(state)
    assert state.chosen_design == "stratified" and state.plan is not None
    assert STRATA_NOT_USED not in strata.design_html.value
    plan.design.value = "monetary_unit"
    assert plan.message.value == "", plan.message.value
    mplan = state.monetary_plan
    population = load_population(str(path), id_column="item", value_column="amount")
    # source: plan_monetary_units called directly with the same inputs
    direct = plan_monetary_units(population, tolerable=TOLERABLE, expected=EXPECTED, risk_incorrect_acceptance=RISK)
    assert mplan.to_dict() == direct.to_dict()
    # source: the expansion-factor rule computed here with scipy (see the module notes)
    assert mplan.sample_size == _sample_size_by_hand(mplan.book_total, TOLERABLE, EXPECTED, RISK)
    # arithmetic: the two credits and two zero balances of the ledger are kept apart, the rest is positive
    assert (mplan.credits_count, mplan.credits_total, mplan.zeros_count) == (2, -155.5, 2)
    assert mplan.positive_items == 1_196
    shown = plan.monetary_html.value
    assert f"<b>{mplan.sample_size:,}</b>" in shown and format_number(mplan.interval) in shown
    assert "credits, kept apart and not drawn" in shown and format_number(-155.5) in shown
    assert plan._stratified_box.layout.display == "none" and plan._monetary_box.layout.display == ""
    # the steps only the stratified design uses say so plainly
    assert html.escape(STRATA_NOT_USED) in strata.design_html.value
    assert html.escape(COVERAGE_NOT_USED) in cov.design_html.value and cov.run_button.disabled
    # an input changed: the monetary-unit plan follows
    plan.tolerable.value = 45_000.0
    assert state.monetary_plan.sample_size == _sample_size_by_hand(mplan.book_total, 45_000.0, EXPECTED, RISK)
    plan.bound.value = "stringer"
    assert state.monetary_plan.bound == "stringer"
    # bad input: a clear message naming the parameter, no plan
    plan.expected.value = 50_000.0
    assert "am-error" in plan.message.value and "expected" in plan.message.value
    assert state.monetary_plan is None
    plan.expected.value = EXPECTED
    # back to the stratified design: its plan (plan_sample directly) and no notes
    plan.design.value = "stratified"
    assert state.plan.sizes == plan_sample(state.strata, **{**PLAN, "tolerable": 45_000.0}).sizes
    assert strata.design_html.value == "" and cov.design_html.value == ""


def test_a_monetary_unit_engagement_through_every_panel(tmp_path, ledger):
    path, truth = ledger
    state, _strata, plan = _planned(tmp_path, path, design="monetary_unit")
    assert state.chosen_design == "monetary_unit"
    plan.save_button.click()
    assert plan.message.value == "", plan.message.value
    folder = tmp_path / "engagement"
    eng = Engagement.open(folder)
    assert design_of(eng) == "monetary_unit"
    n = state.monetary_plan.sample_size
    assert eng.plan()["monetary_unit_plan"]["sample_size"] == n
    assert plan.tolerable.disabled and plan.design.disabled  # the plan is fixed in the folder

    # the selection: re-performed here with hashlib from the documented rule
    sel = SelectionPanel(state, seed=SEED)
    sel.draw_button.click()
    sel.wait(60)
    assert sel.message.value == "", sel.message.value
    hits, total = _reperformed(state.population.items, n, SEED)
    got = dict(zip(state.selection["item_id"], state.selection["hits"].astype(int)))
    assert got == hits
    assert total == state.monetary_plan.book_total_cents
    assert f"{len(hits):,} items selected by {n:,} monetary units" in sel.selection_html.value
    sel.verify_button.click()
    assert "am-note" in sel.verify_html.value and "matches" in sel.verify_html.value

    # the audited values: one typed, the rest from a file
    results = ResultsPanel(state, entered_by="tester")
    first = results._page_items[0]
    results.rows[0].value.value = f"{truth[first]:.2f}"
    assert Engagement.open(folder).results().value_of(first) == round(truth[first], 2)
    assert results._group_label.value == "<b>group</b>"
    ids = list(state.selection["item_id"])
    found = tmp_path / "found.csv"
    pd.DataFrame({"item_id": ids[1:], "audited_value": [f"{truth[i]:.2f}" for i in ids[1:]]}).to_csv(found, index=False)
    results.record_file(found, id_column="item_id", value_column="audited_value")
    assert f"<b>{len(ids)}</b> of {len(ids)}" in results.counts_html.value

    # the conclusion: every bound, the relied-on one marked
    panel = EvaluationPanel(state)
    assert panel.primary.description == "Bound relied on"
    assert panel.replicates.layout.display == "none"  # no bootstrap for this design
    panel.evaluate_button.click()
    panel.wait(60)
    assert "am-error" not in panel.message.value, panel.message.value
    ev = state.evaluation
    # source: evaluate_engagement called directly on the same folder
    direct = evaluate_engagement(open_engagement(folder)[0], save=False)
    assert ev.relied_on == direct.relied_on and ev.verdict == direct.verdict
    shown = panel.result_html.value
    assert set(ev.bounds) == set(MONETARY_UNIT_BOUNDS)
    for m, b in direct.bounds.items():
        assert ev.bounds[m].upper == b.upper
        assert format_number(b.upper) in shown
    relied_row = shown.split('<tr class="am-relied">')[1].split("</tr>")[0]
    assert html.escape(BOUND_NAMES[direct.relied_on]) in relied_row and format_number(direct.upper) in relied_row
    assert shown.count("<b>(relied on)</b>") == 1  # one row of the table marked
    assert f"the sample {ev.verdict} the conclusion" in shown
    assert BOUND_NAMES[direct.relied_on] in panel.primary.label  # the field names the bound, never blank
    assert len(eng.evaluations()) == 1  # saved in the folder
    fig = panel.figure.figure
    assert list(fig.data[1].x) == [b.upper for b in ev.bounds.values()]

    # source: Stringer (1963) worked by hand: taints ranked descending, incremental Poisson factors (scipy)
    frame = state.selection.assign(audited=[truth[i] for i in state.selection["item_id"]])
    full = frame["examined_in_full"].astype(bool)
    exact = float((frame.loc[full, "book_value"] - frame.loc[full, "audited"]).sum())
    rest = frame[~full]
    taints = np.repeat(((rest["book_value"] - rest["audited"]) / rest["book_value"]).to_numpy(),
                       rest["hits"].astype(int).to_numpy())
    n_r = len(taints)
    b_r = state.monetary_plan.book_total - float(frame.loc[full, "book_value"].sum())
    ranked = np.sort(np.clip(taints, 0, None)[taints > 0])[::-1]
    factor = stats.gamma.ppf(1 - RISK, np.arange(len(ranked) + 1) + 1)
    u = (factor[0] + float(np.sum(ranked * np.diff(factor)))) / n_r
    assert ev.bounds["stringer"].upper == pytest.approx(exact + b_r * u, rel=1e-9)

    # another bound chosen to rely on: the conclusion rests on it
    panel.primary.value = "stringer"
    panel.evaluate_button.click()
    panel.wait(60)
    assert state.evaluation.relied_on == "stringer"
    assert panel.primary.label == f"{BOUND_NAMES['stringer']} bound"

    # the workpaper of this design is written from the panel too
    paper = WorkpaperPanel(state, purpose="monetary-unit test of the widgets")
    paper.write_button.click()
    paper.wait(300)
    assert "am-error" not in paper.message.value, paper.message.value
    assert paper.written["xlsx"].stat().st_size > 0
    assert "monetary-unit test of the widgets" in paper.written["html"].read_text(encoding="utf-8")

    # extended: the items drawn stay with their values; the new draws follow the same rule
    sel.extend_size.value = n + 15
    sel.extend_button.click()
    sel.wait(60)
    assert sel.message.value == "", sel.message.value
    hits2, _ = _reperformed(state.population.items, n + 15, SEED)
    assert dict(zip(state.selection["item_id"], state.selection["hits"].astype(int))) == hits2
    assert set(ids) <= set(state.selection["item_id"])
    assert state.evaluation is None  # the selection changed: the conclusion must be drawn again
    added = len(hits2) - len(ids)
    assert f"{added:,} items added" in sel.extend_html.value
    assert f"<b>{len(ids)}</b> of {len(hits2)}" in results.counts_html.value
    saved = Engagement.open(folder).results()
    assert saved.value_of(first) == round(truth[first], 2)


def test_a_monetary_unit_engagement_resumes_in_the_panels(tmp_path, ledger):
    path, truth = ledger
    state, _strata, plan = _planned(tmp_path, path, design="monetary_unit")
    plan.save_button.click()
    sel = SelectionPanel(state, seed=SEED)
    sel.draw_button.click()
    sel.wait(60)
    folder = tmp_path / "engagement"
    resumed = EngagementState.from_folder(folder)
    assert resumed.chosen_design == "monetary_unit" and resumed.strata is None and resumed.plan is None
    assert resumed.monetary_plan.to_dict() == state.monetary_plan.to_dict()
    strata = StrataPanel(resumed)
    plan2 = PlanPanel(resumed)
    sel2 = SelectionPanel(resumed)
    ev = EvaluationPanel(resumed)
    assert html.escape(STRATA_NOT_USED) in strata.design_html.value and strata.message.value == ""
    assert plan2.design.value == "monetary_unit" and plan2.design.disabled
    assert f"<b>{state.monetary_plan.sample_size:,}</b>" in plan2.monetary_html.value
    assert "am-selection-done" in sel2.selection_html.value and sel2._extend_box.layout.display == ""
    assert [v for _label, v in ev.primary.options] == ["planned", *MONETARY_UNIT_BOUNDS]
    assert json.loads(json.dumps(resumed.selection["item_id"].tolist())) == state.selection["item_id"].tolist()


def test_monetary_bounds_picture_shows_every_bound(tmp_path, ledger):
    path, truth = ledger
    state, _strata, plan = _planned(tmp_path, path, design="monetary_unit")
    plan.save_button.click()
    sel = SelectionPanel(state, seed=SEED)
    sel.draw_button.click()
    sel.wait(60)
    ResultsPanel(state).record_file(_answers(tmp_path, state, truth), id_column="item_id", value_column="audited_value")
    ev = evaluate_engagement(state.engagement, save=False)
    fig = figures.monetary_bounds(ev)
    table = ev.table()
    # source: MonetaryUnitEvaluation.table(): each bound's upper, the relied-on marker the larger
    assert list(fig.data[1].x) == table["upper"].tolist()
    assert [s == 16 for s in fig.data[1].marker.size] == table["relied_on"].tolist()
    assert any("(relied on)" in t for t in fig.layout.yaxis.ticktext)


def _answers(tmp_path, state, truth):
    ids = list(state.selection["item_id"])
    path = tmp_path / "answers.csv"
    pd.DataFrame({"item_id": ids, "audited_value": [f"{truth[i]:.2f}" for i in ids]}).to_csv(path, index=False)
    return path
