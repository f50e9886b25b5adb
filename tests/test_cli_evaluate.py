"""`auditmean evaluate`: the printed conclusion is the engine's."""

from __future__ import annotations

import json

import pytest

from auditmean.cli import main
from auditmean.evaluation import evaluate

from .test_estimate_worked import SAMPLE, STRATA


@pytest.fixture()
def files(tmp_path):
    s, t = tmp_path / "sample.csv", tmp_path / "strata.csv"
    SAMPLE.to_csv(s, index=False)
    STRATA.to_csv(t, index=False)
    return s, t


def test_json_equals_engine(files, capsys):
    s, t = files
    rc = main(["evaluate", str(s), str(t), "--item-column", "item_id", "--tolerable", "40", "--risk-acceptance", "0.05",
               "--risk-rejection", "0.2", "--rely-on", "difference", "--seed", "3", "--json"])
    assert rc == 0
    out = json.loads(capsys.readouterr().out)
    direct = evaluate(SAMPLE, STRATA, tolerable=40.0, risk_incorrect_acceptance=0.05, risk_incorrect_rejection=0.2,
                      primary="difference", seed=3)
    assert out["primary"] == "difference"
    for m, c in direct.conclusions.items():
        assert out["conclusions"][m]["upper_limit"] == pytest.approx(c.upper_limit, rel=1e-12)
        assert out["conclusions"][m]["verdict"] == c.verdict
    assert out["bootstrap_seed"] == 3


def test_text_has_conclusion_and_cautions(files, capsys):
    s, t = files
    # with each stratum's largest book value the finite-sample bound can be formed (4 of 10 items
    # of at most 40 each: its upper limit is far above the tolerable 20)
    STRATA.assign(largest_book_value=40.0).to_csv(t, index=False)
    assert main(["evaluate", str(s), str(t), "--tolerable", "20", "--risk-acceptance", "0.05", "--rely-on", "difference"]) == 0
    text = capsys.readouterr().out
    assert "does not support" in text and "Caution:" in text
    assert "finite-sample bound" in text and "for information only" in text


def test_bad_risk_is_a_one_line_error(files, capsys):
    s, t = files
    assert main(["evaluate", str(s), str(t), "--tolerable", "20", "--risk-acceptance", "1.5"]) == 2
    assert "risk_incorrect_acceptance" in capsys.readouterr().err
