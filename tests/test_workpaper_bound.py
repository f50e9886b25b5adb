"""The workpaper says what the verdict rests on, shows the finite-sample bound, and the plan's own check.

The engagement is the rare-error one of ``workpaper_helpers`` (an invented
ledger in which 1.5% of the items are overstated by 60% to 100% of their
book value), run through the chain with the plan checked by simulation.
Every number shown is checked against the engagement's records (the saved
evaluation, ``plan.json``) and against the engine called directly on the
same sample (``auditmean.overstatement_bound``), the workbook read back
with openpyxl and the report parsed with the standard library.
"""

from __future__ import annotations

import math

import openpyxl
import pytest

import auditmean
from auditmean.evaluation.conclusion import BASIS_BOUND, BASIS_NORMAL
from auditmean.workflow import strata_table
from auditmean.workpaper import write_html_report, write_workbook

from .test_workpaper_html import _Report
from .workpaper_helpers import RARE_TOLERABLE, build_rare_error_engagement


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    root = tmp_path_factory.mktemp("wp-bound")
    made = build_rare_error_engagement(root)
    made["wb"] = openpyxl.load_workbook(write_workbook(made["folder"], root / "w.xlsx"))
    text = write_html_report(made["folder"], root / "w.html").read_text(encoding="utf-8")
    parser = _Report()
    parser.feed(text)
    parser.close()
    made["parsed"] = parser
    return made


def _rows(ws):
    return list(ws.iter_rows(values_only=True))


def _field(ws, label: str):
    for r in ws.iter_rows(values_only=True):
        if r and r[0] == label:
            return r[1]
    raise AssertionError(f"no field {label!r} in sheet {ws.title!r}")


def _table_after(ws, caption: str):
    """Rows (dicts by header) of the table under ``caption``."""
    rows = _rows(ws)
    i = next(i for i, r in enumerate(rows[:-1]) if r and r[0] == caption and rows[i + 1][0] is not None)
    header = [h for h in rows[i + 1] if h is not None]
    out = []
    for body in rows[i + 2:]:
        if body[0] is None:
            break
        out.append(dict(zip(header, body)))
    return out


def test_the_warnings_move_the_verdict_to_the_bound(made):
    # the engagement is built so that they do (rare large overstatements); the workpaper checks below need it
    ev = made["saved"]["evaluation"]
    c = ev["conclusions"][ev["primary"]]
    assert ev["estimates"][ev["primary"]]["flags"]
    assert c["basis"] == BASIS_BOUND
    assert ev["overstatement_bound"] is not None


def test_summary_says_what_the_verdict_rests_on(made):
    ws = made["wb"]["Summary"]
    ev = made["saved"]["evaluation"]
    c = ev["conclusions"][ev["primary"]]
    assert _field(ws, "the verdict rests on") == BASIS_BOUND
    # the upper limit relied on is the bound's, to the 16 digits openpyxl writes
    assert _field(ws, "upper limit of overstatement relied on") == pytest.approx(c["relied_upper_limit"], rel=1e-15)
    assert c["relied_upper_limit"] == pytest.approx(ev["overstatement_bound"]["upper"], rel=1e-15)
    # the normal limits are there, marked as information only
    info = _field(ws, "upper misstatement limit, normal approximation (for information only)")
    assert info == pytest.approx(c["upper_limit"], rel=1e-15)
    assert _field(ws, "what the sample supports") == c["verdict"]
    texts = [r[0] for r in _rows(ws) if r and isinstance(r[0], str)]
    assert "The finite-sample bound the verdict rests on" in texts
    assert any(t.startswith("What it guarantees: ") for t in texts)
    assert any(t.startswith("Assumption: ") for t in texts)


def test_the_bound_is_the_engines(made):
    eng, plan = made["engagement"], made["plan"]
    frame = eng.sample_frame().frame
    strata = strata_table(plan, made["plan_record"]["strata"])
    ria = plan.risk_incorrect_acceptance
    direct = auditmean.overstatement_bound(
        frame[["stratum", "item_id", "book_value", "audited_value"]], strata, confidence=1.0 - ria
    )
    ws = made["wb"]["Evaluation"]
    assert _field(ws, "upper bound of overstatement") == pytest.approx(direct.upper, rel=1e-12)
    rows = _table_after(ws, "The finite-sample bound by stratum")
    assert len(rows) == len(direct.by_stratum)
    evaluation = _table_after(ws, next(r[0] for r in _rows(ws) if r and str(r[0]).startswith("Every estimator")))
    primary = next(r for r in evaluation if r["relied on"] == "yes")
    assert primary["verdict rests on"] == BASIS_BOUND
    assert primary["upper limit relied on"] == pytest.approx(direct.upper, rel=1e-12)
    assert primary["the sample"] == ("supports" if direct.upper <= RARE_TOLERABLE else "does not support")


def test_the_plans_own_check_is_shown(made):
    pc = made["plan_record"]["plan_check"]
    ws = made["wb"]["Strata and sizes"]
    assert _field(ws, "risk of incorrect acceptance, planned") == pc["planned_risk"] == 0.05  # the plan's input
    assert _field(ws, "risk of incorrect acceptance, simulated (normal limit)") == pytest.approx(pc["simulated_risk"], rel=1e-15)
    assert _field(ws, "samples simulated") == pc["replications"] == 200  # as asked in workpaper_helpers
    assert _field(ws, "monetary-unit design for the same risk: monetary units to draw") == pc["monetary_unit_size"]
    assert _field(ws, "  its upper limit of overstatement if no misstatement is found") == pytest.approx(
        pc["monetary_unit_zero_error_bound"], rel=1e-15
    )
    summary = [r[0] for r in _rows(made["wb"]["Summary"]) if r]
    assert pc["line"] in summary and "Does the plan reach its stated risk?" in summary
    # the per-stratum minimum the checks asked for, beside each planned size
    table = made["plan"].table
    rows = _table_after(ws, "Strata and sample sizes")
    assert [r["fewest items allowed"] for r in rows] == [int(v) for v in table["minimum"]]


def test_methods_name_the_new_sources(made):
    rows = _table_after(made["wb"]["Methods"], "Every formula auditmean uses, and its source")
    used = {r["what"]: r for r in rows}
    bound = used["finite-sample bound for stratified samples"]
    assert "Waudby-Smith" in bound["published source"] and "Spertus" in bound["published source"]
    assert bound["used here"] == "yes"
    least = used["fewest items per stratum, from the checks"]
    assert "Sugden" in least["published source"] and "rule of thumb" in least["published source"]
    assert least["used here"] == "yes"  # the plan's default minimum ("checks")
    assert used["does the plan reach its stated risk?"]["used here"] == "yes"
    assert used["the verdict rests on a limit that holds"]["used here"] == "yes"
    assert not any(r["step"] == "monetary units" for r in rows)  # the other design's formulas are not listed


def test_html_says_the_same(made):
    p = made["parsed"]
    text = "".join(p.text)
    ev = made["saved"]["evaluation"]
    c = ev["conclusions"][ev["primary"]]
    assert "the verdict rests on" in text and "(for information only)" in text
    assert made["plan_record"]["plan_check"]["line"] in text
    cells = {}
    for t in p.tables:
        for r in t["rows"]:
            if len(r) == 2:
                cells.setdefault(r[0]["text"], r[1])
    shown = cells["upper limit of overstatement relied on"]
    assert float(shown["value"]) == c["relied_upper_limit"]  # every digit of the record
    # the cautions still come first
    assert text.index("Cautions") < text.index("the verdict rests on")


def test_no_warning_keeps_the_normal_limit_in_the_workpaper():
    """A record whose verdict rests on the normal limit shows its limits without the 'information' mark."""
    from auditmean.workpaper._sheets import _conclusion_fields

    c = {"verdict": "supports", "basis": BASIS_NORMAL, "relied_upper_limit": 10.0, "projected_misstatement": 1.0,
         "upper_limit": 10.0, "lower_limit": -8.0}
    ev = {"primary": "ratio", "tolerable": 100.0, "overstatement_bound": {"upper": 50.0}, "conclusions": {"ratio": c}}

    class _Wp:
        evaluation_file = "evaluation-x.json"

    rows = {label: value for label, value, _ in _conclusion_fields(_Wp(), ev, c)}
    assert rows["the verdict rests on"] == BASIS_NORMAL
    assert rows["upper misstatement limit, normal approximation"] == 10.0
    assert rows["finite-sample upper bound of overstatement"] == 50.0  # shown beside it
    assert not any("for information only" in k for k in rows if k.startswith("upper misstatement"))
    assert math.isfinite(rows["upper limit of overstatement relied on"])
