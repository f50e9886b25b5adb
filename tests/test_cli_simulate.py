"""`auditmean simulate` on files: the numbers printed are the engine's (simulate_coverage with the same seed)."""

from __future__ import annotations

import json
import signal

import numpy as np
import pandas as pd
import pytest

from auditmean.cli import main
from auditmean.cli import simulate as cli_simulate
from auditmean.core import simulation as core_sim
from auditmean.coverage import (
    FixedTaint,
    MisstatementModel,
    ObservedTaints,
    UniformTaint,
    simulate_coverage,
)


@pytest.fixture()
def files(tmp_path):
    rng = np.random.default_rng(2)
    book = np.round(rng.lognormal(6, 1.1, 2_500), 2) + 1
    cuts = np.quantile(book, [0.6, 0.9, 0.99])
    grp = np.searchsorted(cuts, book) + 1
    pop = pd.DataFrame({"id": [f"A{i}" for i in range(book.size)],
                        "amount": [f"{v:,.2f}" for v in book], "grp": grp})
    pop_file = tmp_path / "population.csv"
    pop.to_csv(pop_file, index=False)
    sizes = {"1": 30, "2": 30, "3": 25, "4": int(np.sum(grp == 4))}
    sizes_file = tmp_path / "sizes.csv"
    pd.DataFrame({"grp": list(sizes), "n": list(sizes.values())}).to_csv(sizes_file, index=False)
    return dict(book=book, strata=grp.astype(str), sizes=sizes, pop=pop_file, sizes_file=sizes_file, tmp=tmp_path)


BASE = ["--value-column", "amount", "--stratum-column", "grp", "--id-column", "id"]


def test_json_equals_the_engine(files, capsys):
    rc = main(["simulate", str(files["pop"]), "--sizes", str(files["sizes_file"]), "--size-column", "n", *BASE,
               "--error-rate", "0.05", "--taint-uniform", "0.1", "0.7", "--understatement-share", "0.1",
               "--large-errors", "3", "1.0", "0.5", "--tolerable", "40000", "--expected", "5000",
               "--replications", "400", "--seed", "9", "--json", "--no-progress"])
    assert rc == 0
    out = json.loads(capsys.readouterr().out)
    model = MisstatementModel(error_rate=0.05, taint=UniformTaint(0.1, 0.7), understatement_share=0.1,
                              large_items=3, large_item_taint=1.0, large_item_probability=0.5)
    ref = simulate_coverage(files["book"], files["strata"], files["sizes"], model, replications=400, seed=9,
                            tolerable=40_000.0, expected=5_000.0)
    assert out["kind"] == "coverage_check" and out["seed"] == "9"
    for got, want in zip(out["by_estimator"], ref.by_estimator.to_dict(orient="records")):
        for key in ("coverage", "one_sided_coverage", "bias", "mean_std_error", "risk_incorrect_acceptance",
                    "risk_incorrect_rejection"):
            assert got[key] == pytest.approx(want[key], rel=1e-12), key


def test_text_output_per_stratum_rates_and_taint_list(files, capsys):
    taints = files["tmp"] / "taints.csv"
    pd.DataFrame({"taint": [0.05, 0.3, 1.0, -0.2]}).to_csv(taints, index=False)
    rc = main(["simulate", str(files["pop"]), "--sizes", str(files["sizes_file"]), "--size-column", "n", *BASE,
               "--error-rate", "0.02", "--stratum-error-rate", "4=0.3", "--taint-list", str(taints),
               "--replications", "300", "--seed", "1", "--fixed-population", "--estimator", "difference",
               "--no-progress"])
    assert rc == 0
    text = capsys.readouterr().out
    assert "difference estimation" in text and "drawn from 4 observed taints" in text
    assert "4: 30%" in text and "1: 2%" in text
    assert "--seed 1" in text and "Caution:" in text
    model = MisstatementModel(error_rate={"1": 0.02, "2": 0.02, "3": 0.02, "4": 0.3},
                              taint=ObservedTaints((0.05, 0.3, 1.0, -0.2)))
    ref = simulate_coverage(files["book"], files["strata"], files["sizes"], model, estimators="difference",
                            replications=300, seed=1, fixed_population=True)
    assert f"{100 * ref.by_estimator['coverage'].iloc[0]:.1f}%" in text


def test_plan_record_sizes_and_tolerable(files, capsys):
    from auditmean.plan import plan_sample

    frame = pd.DataFrame({"stratum": files["strata"], "book": files["book"]})
    g = frame.groupby("stratum")["book"]
    table = pd.DataFrame({"stratum": g.size().index, "count": g.size().to_numpy(),
                          "std_dev": g.std().to_numpy(), "book_total": g.sum().to_numpy()})
    plan = plan_sample(table, tolerable=0.05 * files["book"].sum(), expected=0.01 * files["book"].sum())
    plan_file = files["tmp"] / "plan.json"
    plan_file.write_text(json.dumps(plan.to_dict()), encoding="utf-8")
    rc = main(["simulate", str(files["pop"]), "--plan", str(plan_file), *BASE, "--error-rate", "0.05",
               "--taint", "0.5", "--replications", "100", "--seed", "3", "--json", "--estimator", "mpu"])
    assert rc == 0
    out = json.loads(capsys.readouterr().out)
    assert {r["stratum"]: r["size"] for r in out["strata"]} == plan.sizes
    assert out["tolerable"] == pytest.approx(plan.tolerable) and out["expected"] == pytest.approx(plan.expected)

    # a plan for another population is refused, naming the stratum
    d = plan.to_dict()
    d["table"][0]["count"] += 1
    plan_file.write_text(json.dumps(d), encoding="utf-8")
    rc = main(["simulate", str(files["pop"]), "--plan", str(plan_file), *BASE, "--error-rate", "0.05",
               "--taint", "0.5"])
    assert rc == 2
    assert "another population" in capsys.readouterr().err


def test_ctrl_c_stops_after_the_batch_and_keeps_partial_results(files, capsys, monkeypatch):
    monkeypatch.setattr(core_sim, "_BLOCK_BUDGET", 1)  # batches of 256 replications
    original = cli_simulate.ProgressBar.__call__

    def press_ctrl_c_once(self, done, total):
        if done == 256:
            signal.raise_signal(signal.SIGINT)  # a real interrupt, caught by the bar's handler
        return original(self, done, total)

    monkeypatch.setattr(cli_simulate.ProgressBar, "__call__", press_ctrl_c_once)
    before = signal.getsignal(signal.SIGINT)
    rc = main(["simulate", str(files["pop"]), "--sizes", str(files["sizes_file"]), "--size-column", "n", *BASE,
               "--error-rate", "0.05", "--taint", "0.5", "--replications", "2000", "--seed", "4", "--json",
               "--progress", "--estimator", "mpu"])
    assert rc == 0
    captured = capsys.readouterr()
    out = json.loads(captured.out)
    assert out["partial"] is True and out["replications"] == 256 and out["replications_requested"] == 2000
    assert "simulating [" in captured.err and "256/2,000" in captured.err
    assert signal.getsignal(signal.SIGINT) is before  # the previous handler is back


@pytest.mark.parametrize(
    ("extra", "words"),
    [
        (["--value-column", "nothing", "--error-rate", "0.1", "--taint", "0.5"], "no column 'nothing'"),
        (["--taint", "0.5"], "--error-rate"),
        (["--error-rate", "2", "--taint", "0.5"], "error_rate"),
        (["--error-rate", "0.1", "--stratum-error-rate", "nine", "--taint", "0.5"], "STRATUM=RATE"),
        (["--error-rate", "0.1", "--stratum-error-rate", "7=0.1", "--taint", "0.5"], "'7' is not in the population"),
    ],
)
def test_errors_are_one_line_with_exit_code_2(files, capsys, extra, words):
    args = ["simulate", str(files["pop"]), "--sizes", str(files["sizes_file"]), "--size-column", "n", *BASE, *extra]
    assert main(args) == 2
    err = capsys.readouterr().err
    assert words in err and "Traceback" not in err


def test_duplicate_ids_are_refused_with_rows(files, capsys):
    pop = pd.read_csv(files["pop"], dtype=str)
    pop.loc[5, "id"] = pop.loc[2, "id"]
    pop.to_csv(files["pop"], index=False)
    rc = main(["simulate", str(files["pop"]), "--sizes", str(files["sizes_file"]), "--size-column", "n", *BASE,
               "--error-rate", "0.1", "--taint", "0.5"])
    assert rc == 2
    assert "rows 4, 7" in capsys.readouterr().err


def test_fixed_taint_option_builds_the_model(files):
    ns = cli_simulate.register(__import__("argparse").ArgumentParser().add_subparsers()).parse_args(
        [str(files["pop"]), "--sizes", "x", "--error-rate", "0.1", "--taint", "0.4"]
    )
    assert cli_simulate._model(ns, files["strata"]) == MisstatementModel(error_rate=0.1, taint=FixedTaint(0.4))
