"""``auditmean report`` and the workpaper written by ``auditmean demo``.

The commands the workbook lists for re-performance are run as written
(shlex-split) and must reproduce the selection and the evaluation; the key
command is checked with hashlib.
"""

from __future__ import annotations

import hashlib
import json
import shlex

import openpyxl
import pandas as pd
import pytest

from auditmean.cli import SUBCOMMANDS, main

from .conclusion_helpers import ledger


@pytest.fixture()
def engagement(tmp_path, capsys):
    """A small engagement planned, selected, recorded and evaluated on the command line."""
    path = tmp_path / "ledger.csv"
    ledger().to_csv(path, index=False)
    eng_dir = tmp_path / "eng"
    assert main(["plan", str(path), "--id-column", "doc", "--value-column", "amount", "--tolerable", "50000",
                 "--expected", "5000", "--risk-acceptance", "0.1", "--strata", "3", "--top-items", "5",
                 "--engagement", str(eng_dir)]) == 0
    assert main(["select", "--engagement", str(eng_dir), "--seed", "report test"]) == 0
    capsys.readouterr()
    return eng_dir, path


def _record_and_evaluate(eng_dir, path, tmp_path, capsys):
    sel = pd.read_csv(eng_dir / "selection.csv", dtype=str)
    book = ledger().set_index("doc")["amount"]
    results = tmp_path / "found.csv"
    pd.DataFrame({"id": sel["item_id"], "value": book.loc[sel["item_id"]].to_numpy() * 0.98}).to_csv(results, index=False)
    assert main(["record", "--engagement", str(eng_dir), str(results), "--id-column", "id", "--value-column", "value"]) == 0
    assert main(["evaluate", "--engagement", str(eng_dir), "--replicates", "300"]) == 0
    capsys.readouterr()


def _rows(ws):
    return [r for r in ws.iter_rows(values_only=True)]


def test_report_is_a_subcommand_after_verify():
    assert SUBCOMMANDS.index("report") == SUBCOMMANDS.index("verify") + 1


def test_report_writes_both_files_into_the_folder(engagement, tmp_path, capsys):
    eng_dir, path = engagement
    _record_and_evaluate(eng_dir, path, tmp_path, capsys)
    assert main(["report", "--engagement", str(eng_dir)]) == 0
    out = capsys.readouterr().out
    xlsx, html = eng_dir / "workpaper.xlsx", eng_dir / "workpaper.html"
    assert f"Workbook: {xlsx}" in out and f"HTML report: {html}" in out
    assert xlsx.stat().st_size > 0 and html.stat().st_size > 4_000_000  # plotly.js is embedded (about 4.8 MB)


def test_only_the_files_asked_for(engagement, tmp_path, capsys):
    eng_dir, path = engagement
    _record_and_evaluate(eng_dir, path, tmp_path, capsys)
    target = tmp_path / "out.xlsx"
    assert main(["report", "--engagement", str(eng_dir), "--xlsx", str(target), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out == {"xlsx": str(target), "notes": []}
    assert target.exists() and not (eng_dir / "workpaper.html").exists()


def test_the_listed_commands_re_perform_the_work(engagement, tmp_path, capsys):
    eng_dir, path = engagement
    _record_and_evaluate(eng_dir, path, tmp_path, capsys)
    target = tmp_path / "w.xlsx"
    assert main(["report", "--engagement", str(eng_dir), "--xlsx", str(target)]) == 0
    capsys.readouterr()
    ws = openpyxl.load_workbook(target)["Re-performance"]
    cmds = [r[1] for r in _rows(ws) if isinstance(r[1], str) and r[1].startswith(("auditmean ", "printf "))]
    verify = next(c for c in cmds if c.startswith("auditmean verify"))
    evaluate = next(c for c in cmds if c.startswith("auditmean evaluate"))
    assert "--replicates 300" in evaluate  # the options of the saved evaluation
    assert main(shlex.split(verify)[1:]) == 0
    assert "matches" in capsys.readouterr().out
    before = sorted((eng_dir / "evaluations").glob("*.json"))
    assert main(shlex.split(evaluate)[1:] + ["--json"]) == 0
    again = json.loads(capsys.readouterr().out)
    first = json.loads(before[-1].read_text(encoding="utf-8"))["evaluation"]
    for m, c in first["conclusions"].items():  # the same numbers, bootstrap included (same seed)
        assert again["conclusions"][m]["upper_limit"] == c["upper_limit"]
        assert again["conclusions"][m]["second_opinion_upper"] == c["second_opinion_upper"]
    printf = shlex.split(next(c for c in cmds if c.startswith("printf ")).split(" | ")[0])
    key_row = next(r for r in _rows(ws) if isinstance(r[0], str) and r[0].startswith("key of item"))
    expected_key = key_row[0].split("must be ")[1].rstrip(")")
    assert hashlib.sha256(printf[2].encode("utf-8")).hexdigest()[:16] == expected_key  # hashlib, the README's rule


def test_report_before_the_evaluation(engagement, capsys):
    eng_dir, _ = engagement
    assert main(["report", "--engagement", str(eng_dir)]) == 0
    out = capsys.readouterr().out
    assert "have no audited value entered yet" in out
    wb = openpyxl.load_workbook(eng_dir / "workpaper.xlsx")
    texts = [r[0] for r in _rows(wb["Summary"])]
    assert "No evaluation has been saved yet: record the audited values and evaluate." in texts


def test_errors_are_one_line(tmp_path, engagement, capsys):
    assert main(["report", "--engagement", str(tmp_path / "nowhere")]) == 2
    assert "not an engagement folder" in capsys.readouterr().err
    eng_dir, _ = engagement
    assert main(["report", "--engagement", str(eng_dir), "--evaluation", "evaluation-x.json"]) == 2
    assert "no evaluation has been saved" in capsys.readouterr().err
    assert main(["report", "--engagement", str(eng_dir), "--html", str(tmp_path / "no" / "such" / "r.html")]) == 2
    assert "does not exist" in capsys.readouterr().err


def test_demo_ends_with_the_workpaper(tmp_path, capsys):
    from .conftest import PROJECT_ROOT

    folder = tmp_path / "demo"
    assert main(["demo", "--folder", str(folder), "--data", str(PROJECT_ROOT / "demo_data")]) == 0
    out = capsys.readouterr().out
    folder = folder / "receivables-2024"  # the engagement inside the demo's folder
    assert f"Workpaper: {folder / 'workpaper.xlsx'}" in out and str(folder / "workpaper.html") in out
    from auditmean.cli.demo import DEMO_SETTINGS

    ws = openpyxl.load_workbook(folder / "workpaper.xlsx")["Re-performance"]
    assert next(r[1] for r in _rows(ws) if r[0] == "selection seed, exactly") == DEMO_SETTINGS["seed"]
    assert (folder / "workpaper.html").read_text(encoding="utf-8").count('data-auditmean="plotly-bundle"') == 1
