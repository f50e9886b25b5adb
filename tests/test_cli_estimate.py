"""`auditmean estimate` on files: the numbers printed are the engine's."""

from __future__ import annotations

import json
import math
import subprocess
import sys

import pandas as pd
import pytest

from auditmean.cli import main
from auditmean.evaluation import estimate_total

from .conftest import PROJECT_ROOT


@pytest.fixture()
def api_files(tmp_path, api_sample, api_strata):
    sample = tmp_path / "sample.csv"
    strata = tmp_path / "strata.xlsx"
    api_sample.rename(columns={"audited_value": "api00", "book_value": "api99"}).to_csv(sample, index=False)
    api_strata.to_excel(strata, index=False)
    return sample, strata


def test_json_output_equals_engine_on_api_data(api_files, api_sample, api_strata, capsys):
    sample, strata = api_files
    rc = main([
        "estimate", str(sample), str(strata), "--json",
        "--audited-column", "api00", "--book-column", "api99", "--item-column", "item_id",
    ])
    assert rc == 0
    out = json.loads(capsys.readouterr().out)
    methods = [e["method"] for e in out["estimates"]]
    assert methods == ["mpu", "difference", "ratio", "combined_ratio", "regression"]
    for e in out["estimates"]:
        direct = estimate_total(api_sample, api_strata, method=e["method"])
        assert e["total"] == pytest.approx(direct.total, rel=1e-12)
        assert e["std_error"] == pytest.approx(direct.std_error, rel=1e-12)
    # and the published value of R's survey package for the combined ratio's SE (0.003643922)
    comb = out["estimates"][3]
    assert comb["std_error"] / api_strata["book_total"].sum() == pytest.approx(0.003643922, abs=5e-10)


def test_table_output_lists_methods_and_cautions(api_files, capsys):
    sample, strata = api_files
    rc = main(["estimate", str(sample), str(strata), "--audited-column", "api00", "--book-column", "api99"])
    assert rc == 0
    text = capsys.readouterr().out
    assert "mean-per-unit" in text and "regression estimation (separate)" in text
    assert "never replaces" in text


def test_mpu_only_when_no_book_values(tmp_path, capsys):
    sample = tmp_path / "count.csv"
    strata = tmp_path / "locations.csv"
    pd.DataFrame({"stratum": ["a"] * 3, "audited_value": ["10", "12", "14"]}).to_csv(sample, index=False)
    pd.DataFrame({"stratum": ["a"], "count": [10]}).to_csv(strata, index=False)
    assert main(["estimate", str(sample), str(strata), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert [e["method"] for e in out["estimates"]] == ["mpu"]
    # 10 * 12 = 120; SE = sqrt(100 * 0.7 / 3 * 4) (hand arithmetic)
    assert out["estimates"][0]["total"] == pytest.approx(120.0)
    assert out["estimates"][0]["std_error"] == pytest.approx(math.sqrt(100 * 0.7 / 3 * 4))


def test_bad_file_gives_one_line_error_and_exit_2(tmp_path, capsys):
    strata = tmp_path / "strata.csv"
    pd.DataFrame({"stratum": ["a"], "count": [10]}).to_csv(strata, index=False)
    assert main(["estimate", str(tmp_path / "missing.csv"), str(strata)]) == 2
    err = capsys.readouterr().err
    assert "missing.csv" in err and "no such file" in err and "Traceback" not in err
    bad = tmp_path / "bad.csv"
    bad.write_text("stratum,audited_value\na,10\na,ten\n", encoding="utf-8")
    assert main(["estimate", str(bad), str(strata)]) == 2
    err = capsys.readouterr().err
    assert "bad.csv" in err and "row 3" in err and "audited_value" in err


def test_demo_files_run_through_the_installed_command():
    # the README's first command runs this on the bundled (invented) demo data
    proc = subprocess.run(
        [sys.executable, "-m", "auditmean", "estimate", "demo_data/invoice_sample.csv",
         "demo_data/invoice_strata.csv", "--item-column", "invoice_no"],
        capture_output=True, text=True, check=False, cwd=PROJECT_ROOT,
    )
    assert proc.returncode == 0, proc.stderr
    assert "ratio estimation (combined)" in proc.stdout
