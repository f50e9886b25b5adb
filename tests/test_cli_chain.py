"""The chain on the command line: plan -> select -> record -> evaluate -> verify, and the demo.

Numbers are compared with the engine called directly (auditmean.evaluate on
the same sample and strata), and keys with hashlib from the documented rule.
"""

from __future__ import annotations

import hashlib
import json

import numpy as np
import pandas as pd
import pytest

from auditmean.cli import main
from auditmean.evaluation import evaluate
from auditmean.workflow import engagement_plan, open_engagement, strata_table

from .conclusion_helpers import ledger


@pytest.fixture()
def ledger_file(tmp_path):
    path = tmp_path / "ledger.csv"
    ledger().to_csv(path, index=False)
    return path


def test_whole_chain(tmp_path, ledger_file, capsys):
    eng_dir = tmp_path / "eng"
    assert main(["plan", str(ledger_file), "--id-column", "doc", "--value-column", "amount", "--tolerable", "50000",
                 "--expected", "5000", "--risk-acceptance", "0.1", "--strata", "3", "--top-items", "5",
                 "--engagement", str(eng_dir)]) == 0
    assert "Engagement started" in capsys.readouterr().out
    assert main(["select", "--engagement", str(eng_dir), "--seed", "årsbokslut ✓", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["seed"] == "årsbokslut ✓"
    for row in out["selection"][:20]:  # the documented rule, recomputed with hashlib
        digest = hashlib.sha256(("årsbokslut ✓" + ":" + row["item_id"]).encode("utf-8")).hexdigest()
        assert row["key"] == digest[:16]
    sel = pd.read_csv(eng_dir / "selection.csv", dtype=str)
    book = ledger().set_index("doc")["amount"]
    results = tmp_path / "found.csv"
    audited = book.loc[sel["item_id"]].to_numpy() * 0.99  # every item 1% overstated
    pd.DataFrame({"id": sel["item_id"], "value": audited}).to_csv(results, index=False)
    # evaluating before results are in is refused, with what to do
    assert main(["evaluate", "--engagement", str(eng_dir)]) == 2
    assert "missing" in capsys.readouterr().err.lower()
    assert main(["record", "--engagement", str(eng_dir), str(results), "--id-column", "id", "--value-column", "value"]) == 0
    capsys.readouterr()
    assert main(["evaluate", "--engagement", str(eng_dir), "--json"]) == 0
    ev_cli = json.loads(capsys.readouterr().out)
    eng, _pop = open_engagement(eng_dir)
    plan = engagement_plan(eng)
    frame = eng.sample_frame().frame
    direct = evaluate(frame[["stratum", "item_id", "book_value", "audited_value"]], strata_table(plan),
                      tolerable=50000.0, expected=5000.0, risk_incorrect_acceptance=0.1, primary="mpu", seed="årsbokslut ✓")
    for m, c in direct.conclusions.items():
        assert ev_cli["conclusions"][m]["upper_limit"] == pytest.approx(c.upper_limit, rel=1e-12)
    assert len(list((eng_dir / "evaluations").glob("*.json"))) == 1
    assert main(["verify", "--engagement", str(eng_dir)]) == 0
    assert "matches" in capsys.readouterr().out


def test_changed_population_is_refused(tmp_path, ledger_file, capsys):
    eng_dir = tmp_path / "eng"
    assert main(["plan", str(ledger_file), "--id-column", "doc", "--value-column", "amount", "--tolerable", "50000",
                 "--strata", "3", "--engagement", str(eng_dir)]) == 0
    changed = ledger()
    changed.loc[3, "amount"] += 1.0
    changed.to_csv(ledger_file, index=False)
    capsys.readouterr()
    assert main(["select", "--engagement", str(eng_dir)]) == 2
    assert "not the one this engagement was built on" in capsys.readouterr().err


def test_demo_runs_the_whole_job(tmp_path, capsys):
    from .conftest import PROJECT_ROOT

    folder = tmp_path / "demo"
    assert main(["demo", "--folder", str(folder), "--data", str(PROJECT_ROOT / "demo_data")]) == 0
    text = capsys.readouterr().out
    assert "invented data" in text and "Relied-on method" in text and "Caution:" in text
    eng = folder / "receivables-2024"  # the demo's folder holds its data and the engagement
    assert (eng / "selection.csv").exists() and list((eng / "evaluations").glob("*.json"))


def test_simulate_on_an_engagement_keeps_the_result(tmp_path, ledger_file, capsys):
    from auditmean.coverage import FixedTaint, MisstatementModel, simulate_coverage
    from auditmean.workflow import engagement_strata

    eng_dir = tmp_path / "eng"
    assert main(["plan", str(ledger_file), "--id-column", "doc", "--value-column", "amount", "--tolerable", "50000",
                 "--strata", "3", "--engagement", str(eng_dir)]) == 0
    capsys.readouterr()
    assert main(["simulate", "--engagement", str(eng_dir), "--error-rate", "0.05", "--taint", "0.3",
                 "--replications", "300", "--seed", "5", "--json", "--no-progress"]) == 0
    out = json.loads(capsys.readouterr().out)
    saved = json.loads((eng_dir / "coverage.json").read_text(encoding="utf-8"))
    assert saved["by_estimator"] == out["by_estimator"]
    # the same design called directly gives the same numbers (same seed)
    eng, pop = open_engagement(eng_dir)
    strata = engagement_strata(eng, pop)
    import numpy as np

    labels = np.asarray(strata.labels, dtype=object)[strata.codes]
    direct = simulate_coverage(strata.book_values, labels, engagement_plan(eng).sizes,
                               MisstatementModel(0.05, FixedTaint(0.3)), replications=300, seed=5,
                               tolerable=50000.0, expected=0.0)
    assert direct.to_dict()["by_estimator"] == saved["by_estimator"]


def test_chain_with_preassigned_strata(tmp_path, capsys):
    # a stock-count style population whose strata are locations given in the file
    df = ledger(300)
    df["where"] = np.where(np.arange(300) % 3 == 0, "North bay", "Cold store")
    path = tmp_path / "stock.csv"
    df.to_csv(path, index=False)
    eng_dir = tmp_path / "eng"
    assert main(["plan", str(path), "--id-column", "doc", "--value-column", "amount", "--stratum-column", "where",
                 "--strata-rule", "preassigned", "--tolerable", "20000", "--engagement", str(eng_dir)]) == 0
    assert main(["select", "--engagement", str(eng_dir), "--seed", "s"]) == 0
    assert main(["verify", "--engagement", str(eng_dir)]) == 0
    sel = pd.read_csv(eng_dir / "selection.csv", dtype=str)
    assert set(sel["stratum"]) <= {"North bay", "Cold store"}


def test_stopping_before_saving_leaves_the_record_as_it_was(tmp_path, ledger_file):
    from auditmean.errors import Stopped
    from auditmean.workflow import draw_selection

    eng_dir = tmp_path / "eng"
    assert main(["plan", str(ledger_file), "--id-column", "doc", "--value-column", "amount", "--tolerable", "50000",
                 "--strata", "3", "--engagement", str(eng_dir)]) == 0
    eng, pop = open_engagement(eng_dir)
    with pytest.raises(Stopped, match="nothing was saved"):
        draw_selection(eng, pop, seed="s", proceed=lambda: False)
    assert eng.selection() is None and not (eng_dir / "selection.json").exists()
