"""A hostile engagement for the workpaper tests (generated here, seeded; not demo data).

The ledger's item ids, stratum labels, notes, seed, file and folder names are
chosen to break a careless writer: texts a spreadsheet would read as formulas
(``=HYPERLINK(...)``, ``+1``, ``-2``, ``@SUM(A1)``), tab- and CR-leading notes,
markup and script in notes and labels, a note longer than a spreadsheet cell
holds, a control character, right-to-left text, a bidi override and emoji.
Every hostile item has one of the largest book values, so it lands in the
top stratum, which is examined in full: every one of them is selected.
(Stratum labels cannot be made hostile through the chain: preassigned strata
cannot be re-stratified by the engagement chain yet, see the report of this
change; the figure tests give hostile labels to the figure functions.)
The plan is checked by simulation when it is made (``check_plan``, kept in
``plan.json`` under ``"plan_check"``).

:func:`build_rare_error_engagement` makes a second, plain engagement
(invented ledger, no credits) in which a few items are overstated by much
of their book value: the normal-approximation warnings fire for the
relied-on method, so its verdict rests on the finite-sample bound.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd

from auditmean._atomic import json_text, write_text_atomic
from auditmean._records import json_safe
from auditmean.coverage import FixedTaint, MisstatementModel, simulate_coverage
from auditmean.plan import MisstatementPattern
from auditmean.plan_check import check_plan
from auditmean.workflow import (
    PopulationReading,
    draw_selection,
    engagement_strata,
    evaluate_engagement,
    start_engagement,
)

HOSTILE_IDS = (
    '=HYPERLINK("http://evil.example/x","click me")',
    "+1",
    "-2",
    "@SUM(A1)",
    "=1+2",
    "<script>alert(1)</script>",
    "\u05d7\u05e9\u05d1\u05d5\u05e0\u05d9\u05ea 17",  # Hebrew (right to left)
    "\u202eexe.txt",  # a right-to-left override
    "r\u00e9sum\u00e9 \U0001f9fe\u2705",
    "a&b \"q\" 'single'",
    "\uff1dSUM(1)",  # full-width equals sign
    "x" * 3000,
)

HOSTILE_LABELS = ("=SUM(9)", "<b>bold</b>", "<img src=x onerror=alert(4)>", "\u05e2\u05d1\u05e8\u05d9\u05ea")

HOSTILE_NOTES = (
    "\tTAB-leading note",
    "\rCR-leading note",
    '=HYPERLINK("http://evil.example","x")',
    "<script>alert(1)</script>",
    "x</script><script>alert(3)</script>",
    "-5 a note that starts with a minus",
    "+7 plus",
    "@cmd",
    "bell \x07 inside",
    "\u05d4\u05e2\u05e8\u05d4 note \U0001f600",
    "line one\nline two",
    "n" * 40_000,
)

SEED = '=1+1 <script>alert("seed")</script> \U0001f9fe'
PURPOSE = "<script>alert('purpose')</script> =1+1 & more"
TOLERABLE = 60_000.0
EXPECTED = 5_000.0


def hostile_ledger(n: int = 500, seed: int = 11) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    amount = np.round(rng.lognormal(6.5, 1.2, n), 2)
    amount[:12] = -np.round(rng.uniform(10, 400, 12), 2)  # credits
    amount[12:18] = 0.0  # zero balances
    ids = [f"D{i:05d}" for i in range(n)]
    top = np.argsort(amount)[::-1][: len(HOSTILE_IDS)]  # the largest items get the hostile ids
    for j, i in enumerate(sorted(top)):
        ids[i] = HOSTILE_IDS[j]
    return pd.DataFrame({"item": ids, "amount": amount})


def build_hostile_engagement(root: Path) -> dict:
    """Plan, select, record (with hostile notes), evaluate and run a coverage check; returns what was made."""
    data_dir = root / "data =1+1 <u>x</u>"
    data_dir.mkdir(parents=True)
    ledger_path = data_dir / "ledger=cmd <b>.csv"
    ledger = hostile_ledger()
    ledger.to_csv(ledger_path, index=False)
    folder = root / "eng=cmd|calc <img src=x onerror=alert(2)>"
    reading = PopulationReading(str(ledger_path), id_column="item", value_column="amount")
    eng, population, strata, plan = start_engagement(
        folder,
        reading,
        stratify_options={"method": "cumulative_sqrt", "n_strata": 3, "top_items": len(HOSTILE_IDS)},
        plan_options={
            "tolerable": TOLERABLE,
            "expected": EXPECTED,
            "risk_incorrect_acceptance": 0.10,
            "risk_incorrect_rejection": 0.25,
            "method": "ratio",
            "std_dev_source": MisstatementPattern(0.05, 0.25),
            "minimum": 30,
        },
        check=lambda strata, plan: check_plan(strata, plan, replications=200, seed=17),
    )
    selection, _ = draw_selection(eng, population, seed=SEED)
    book = population.items.set_index("item_id")["book_value"]
    ids = selection["item_id"].tolist()
    audited = book.loc[ids].to_numpy().copy()
    rng = np.random.default_rng(5)
    wrong = rng.random(len(ids)) < 0.15
    audited[wrong] = np.round(audited[wrong] * 0.8, 2)
    results_file = root / "found.csv"
    pd.DataFrame({"id": ids, "value": audited, "note": ["checked"] * len(ids)}).to_csv(results_file, index=False)
    eng.record_results_file(results_file, id_column="id", value_column="value", note_column="note")
    noted = {}
    hostile_first = [i for i in ids if i in HOSTILE_IDS] + [i for i in ids if i not in HOSTILE_IDS]
    for item, note in zip(hostile_first, HOSTILE_NOTES):  # same value again, with a hostile note ("repeat" entries)
        eng.record_result(item, float(audited[ids.index(item)]), note)
        noted[item] = note
    evaluation = evaluate_engagement(eng, bootstrap_replicates=300)
    st = engagement_strata(eng, population)
    labels = np.asarray(st.labels, dtype=object)[st.codes]
    coverage = simulate_coverage(
        st.book_values, labels, plan.sizes, MisstatementModel(0.05, FixedTaint(0.3)),
        replications=200, seed=3, tolerable=TOLERABLE, expected=EXPECTED,
    )
    write_text_atomic(folder / "coverage.json", json_text(json_safe(coverage.to_dict())))
    saved = eng.evaluations()[-1]
    return {
        "folder": folder,
        "engagement": eng,
        "population": population,
        "plan": plan,
        "selection": selection,
        "evaluation": evaluation,
        "saved": saved,
        "coverage": json.loads((folder / "coverage.json").read_text(encoding="utf-8")),
        "notes": noted,
        "ledger_path": ledger_path,
    }


RARE_TOLERABLE = 150_000.0


def rare_error_ledger(n: int = 2000, seed: int = 23) -> tuple[pd.DataFrame, pd.Series]:
    """An invented ledger of positive book values, and audited values with a few large overstatements."""
    rng = np.random.default_rng(seed)
    book = np.round(rng.lognormal(6.8, 1.0, n), 2) + 1.0
    audited = book.copy()
    wrong = rng.choice(n, 30, replace=False)  # 1.5% of the items
    audited[wrong[:20]] = 0.0  # overstated by all of their book value
    audited[wrong[20:]] = np.round(book[wrong[20:]] * 0.4, 2)  # overstated by 60%
    ids = [f"R{i:05d}" for i in range(n)]
    return pd.DataFrame({"item": ids, "amount": book}), pd.Series(audited, index=ids)


def build_rare_error_engagement(root: Path) -> dict:
    """Plan (checked by simulation), select, record the true audited values and evaluate."""
    ledger, truth = rare_error_ledger()
    path = root / "rare.csv"
    ledger.to_csv(path, index=False)
    folder = root / "rare-engagement"
    reading = PopulationReading(str(path), id_column="item", value_column="amount")
    eng, population, strata, plan = start_engagement(
        folder,
        reading,
        stratify_options={"method": "cumulative_sqrt", "n_strata": 3, "top_items": 5},
        plan_options={
            "tolerable": RARE_TOLERABLE,
            "expected": 10_000.0,
            "risk_incorrect_acceptance": 0.05,
            "method": "ratio",
            "std_dev_source": MisstatementPattern(0.015, 0.8),
        },
        check=lambda strata, plan: check_plan(strata, plan, replications=200, seed=29),
    )
    selection, _ = draw_selection(eng, population, seed="rare errors, invented")
    ids = selection["item_id"].tolist()
    results = root / "rare-found.csv"
    pd.DataFrame({"id": ids, "value": truth.loc[ids].to_numpy()}).to_csv(results, index=False)
    eng.record_results_file(results, id_column="id", value_column="value")
    evaluation = evaluate_engagement(eng, bootstrap_replicates=200)
    return {
        "folder": folder,
        "engagement": eng,
        "population": population,
        "plan": plan,
        "evaluation": evaluation,
        "saved": eng.evaluations()[-1],
        "plan_record": eng.plan(),
    }
