"""The monetary-unit design through the engagement chain and the command line.

plan -> select -> record -> evaluate -> verify -> status on an invented ledger
made here (lognormal book values, a few credits and zero balances, and
misstatements injected by the test, so the truth is known). Outside checks:

* the sample size against the published expansion-factor rule, computed here
  with scipy.stats.gamma (AICPA Audit Guide *Audit Sampling*, Poisson
  confidence factors with the expansion for expected misstatement; the rule
  as written in MUS_SPEC.md, the factors from scipy, not from a table);
* the selection re-performed with hashlib alone from the documented rule
  (README / auditmean.monetary_selection module notes);
* the Stringer bound worked by hand from the taints (Stringer 1963: taints
  ranked descending, incremental Poisson factors, from scipy.stats.gamma);
* the other bounds against auditmean.monetary_unit_bound called directly on
  the same sample (the chain must pass the engagement's numbers unchanged).
"""

from __future__ import annotations

import hashlib
import json
import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from auditmean.cli import main
from auditmean.engagement import Engagement
from auditmean.errors import InputError, ParameterError, RecordError
from auditmean.workflow import (
    PopulationReading,
    design_of,
    draw_selection,
    engagement_plan,
    evaluate_engagement,
    extend_monetary_unit_selection,
    open_engagement,
    start_monetary_unit_engagement,
    verify_engagement,
)

SEED = "mus-ledger ✓ 2024"
RISK = 0.05


def _ledger(seed: int = 11) -> tuple[pd.DataFrame, pd.Series]:
    """An invented ledger (rows shuffled) and the true audited value of every item."""
    rng = np.random.default_rng(seed)
    n = 1200
    book = np.round(rng.lognormal(7.0, 1.2, n), 2)
    book[:4] = [240000.00, 175000.50, 98000.25, 61000.00]  # large items, examined in full
    book[30:36] = -np.round(rng.lognormal(5.0, 1.0, 6), 2)  # credits
    book[40:45] = 0.0  # zero balances
    ids = np.array([f"AR-{i:05d}" for i in range(n)], dtype=object)
    audited = book.copy()
    positive = np.flatnonzero(book > 0)[4:]
    hit = rng.choice(positive, 60, replace=False)
    audited[hit[:4]] = 0.0  # 100% overstatements
    audited[hit[4:56]] = np.round(book[hit[4:56]] * 0.7, 2)  # 30% taints
    audited[hit[56:]] = np.round(book[hit[56:]] * 1.15, 2)  # understatements
    audited[1] = book[1] - 5000.0  # a large item overstated, found exactly
    order = rng.permutation(n)
    df = pd.DataFrame({"doc": ids[order], "amount": book[order]})
    truth = pd.Series(audited[order], index=ids[order])
    return df, truth


@pytest.fixture()
def ledger(tmp_path):
    df, truth = _ledger()
    path = tmp_path / "ledger.csv"
    df.to_csv(path, index=False)
    positive_total = float(np.round(df["amount"], 2)[df["amount"] > 0].sum())
    return path, df, truth, positive_total


def _start(tmp_path, ledger, name="eng", **kw):
    path, _df, _truth, total = ledger
    kw.setdefault("tolerable", round(0.06 * total, 2))
    kw.setdefault("expected", round(0.01 * total, 2))
    reading = PopulationReading(str(path), "doc", "amount")
    return start_monetary_unit_engagement(
        tmp_path / name, reading, risk_incorrect_acceptance=RISK, **kw
    )


def _results_file(tmp_path, eng, truth, name="found.csv"):
    sel = eng.selection()
    out = tmp_path / name
    pd.DataFrame({"id": sel["item_id"], "value": truth.loc[sel["item_id"]].to_numpy()}).to_csv(
        out, index=False
    )
    return out


def _by_hand_selection(df: pd.DataFrame, n: int, seed: str) -> pd.DataFrame:
    """The documented rule, written again here with hashlib and Python integers only."""
    cents = {i: round(v * 100) for i, v in zip(df["doc"], df["amount"])}
    ids = sorted(i for i, c in cents.items() if c > 0)  # code-point order
    ends, total = [], 0
    for i in ids:
        total += cents[i]
        ends.append(total)
    hits: dict[str, list[int]] = {}
    for k in range(1, n + 1):
        u = int(hashlib.sha256(f"{seed}:unit:{k}".encode()).hexdigest()[:13], 16)
        p = (u * total) // 2**52
        j = int(np.searchsorted(ends, p, side="right"))  # the item with C(i-1) <= p < C(i)
        hits.setdefault(ids[j], []).append(k)
    rows = []
    for j, i in enumerate(ids):
        full = cents[i] * n >= total
        if full or i in hits:
            units = hits.get(i, [])
            rows.append(
                {
                    "item_id": i,
                    "hits": len(units),
                    "examined_in_full": full,
                    "units": " ".join(map(str, units)),
                    "unit_from": ends[j] - cents[i],
                    "unit_to": ends[j],
                }
            )
    return pd.DataFrame(rows)


# ---------------------------------------------------------------------------
# plan


def test_plan_records_the_design_size_and_what_is_kept_apart(tmp_path, ledger):
    _path, df, _truth, _total = ledger
    eng, _pop, plan = _start(tmp_path, ledger)
    rec = json.loads((tmp_path / "eng" / "plan.json").read_text(encoding="utf-8"))
    assert (
        rec["design"] == "monetary_unit"
        and rec["monetary_unit_plan"]["kind"] == "monetary_unit_plan"
    )
    assert design_of(eng) == "monetary_unit"
    cents = np.rint(df["amount"].to_numpy() * 100).astype(np.int64)
    b = int(cents[cents > 0].sum())
    assert plan.book_total_cents == b and plan.book_total == b / 100
    # credits and zeros: counted from the ledger with pandas (6 credits, 5 zeros injected above)
    assert plan.credits_count == 6 and plan.zeros_count == 5
    assert plan.credits_total == pytest.approx(df.loc[df["amount"] < 0, "amount"].sum(), abs=1e-6)
    assert any("own audit procedures" in n for n in plan.notes)
    # sample size: the smallest n with B * F(n EM / B) / n <= TM, F(k) = gamma.ppf(1 - risk, k + 1)
    # (AICPA expansion-factor method; factors from scipy.stats.gamma, the Poisson upper limit)
    tm, em, book = plan.tolerable, plan.expected, b / 100

    def reaches(n):
        return book * stats.gamma.ppf(1 - RISK, n * em / book + 1) / n <= tm

    n = plan.sample_size
    assert reaches(n) and not reaches(n - 1)
    assert plan.interval == pytest.approx(book / n, rel=1e-15)
    assert plan.in_full_count == int(((cents > 0) & (cents * n >= b)).sum())
    assert plan.bound == "betting" and set(plan.bounds_shown) == {
        "stringer",
        "count",
        "betting",
        "count_or_betting",
    }
    # the stratified-only steps refuse it with words that say why
    with pytest.raises(RecordError, match="monetary-unit design"):
        engagement_plan(eng)


def test_plan_refuses_bad_options_before_creating_the_folder(tmp_path, ledger):
    with pytest.raises(ParameterError, match="bound"):
        _start(tmp_path, ledger, bound="normal")
    with pytest.raises(ParameterError):
        _start(tmp_path, ledger, expected=ledger[3])  # expected at or above tolerable
    assert not (tmp_path / "eng").exists()


# ---------------------------------------------------------------------------
# selection


def test_selection_follows_the_documented_rule_and_is_saved(tmp_path, ledger):
    _path, df, _truth, _total = ledger
    eng, pop, plan = _start(tmp_path, ledger)
    sel, seed = draw_selection(eng, pop, seed=SEED)
    assert seed == SEED
    hand = _by_hand_selection(df, plan.sample_size, SEED)
    got = sel[["item_id", "hits", "examined_in_full", "units", "unit_from", "unit_to"]].reset_index(
        drop=True
    )
    pd.testing.assert_frame_equal(got, hand, check_dtype=False)
    assert int(sel["hits"].sum()) == plan.sample_size
    assert set(sel["stratum"]) == {"in full", "by units"}
    assert (sel["stratum"] == "in full").sum() == plan.in_full_count
    rec = json.loads((tmp_path / "eng" / "selection.json").read_text(encoding="utf-8"))
    assert rec["kind"] == "monetary_unit_selection" and rec["seed"] == SEED
    assert rec["sample_size"] == plan.sample_size and rec["verified_against_population"] is True
    assert rec["credits"]["count"] == 6 and rec["zeros"]["count"] == 5
    assert set(rec["items"][0]) >= {"item_id", "book_value", "hits", "examined_in_full", "units"}
    copy = pd.read_csv(tmp_path / "eng" / "selection.csv", dtype=str, keep_default_na=False)
    assert list(copy.columns[:6]) == [
        "item_id",
        "stratum",
        "book_value",
        "hits",
        "examined_in_full",
        "units",
    ]
    assert copy["item_id"].tolist() == sel["item_id"].tolist()
    # credits and zero balances are never selected
    never = set(df.loc[df["amount"] <= 0, "doc"])
    assert not never & set(sel["item_id"])
    assert verify_engagement(eng, pop).match


def test_a_hand_edited_selection_is_refused(tmp_path, ledger):
    eng, pop, _plan = _start(tmp_path, ledger)
    draw_selection(eng, pop, seed=SEED)
    path = tmp_path / "eng" / "selection.json"
    original = path.read_text(encoding="utf-8")
    rec = json.loads(original)
    by_units = [
        i for i, e in enumerate(rec["items"]) if not e["examined_in_full"] and e["hits"] == 1
    ]
    a, b = by_units[:2]
    # swap the draws of two items: hits still add up to n and the units still partition 1..n,
    # but the draws recomputed from the seed fall elsewhere
    rec["items"][a]["units"], rec["items"][b]["units"] = (
        rec["items"][b]["units"],
        rec["items"][a]["units"],
    )
    path.write_text(json.dumps(rec), encoding="utf-8")
    with pytest.raises(RecordError, match="does not follow its own seed"):
        Engagement.open(tmp_path / "eng").selection()
    # one more hit on an item: the hits no longer add up to the sample size
    rec = json.loads(original)
    rec["items"][a]["hits"] += 1
    rec["items"][a]["units"] += f" {rec['sample_size'] + 1}"
    path.write_text(json.dumps(rec), encoding="utf-8")
    with pytest.raises(RecordError, match="selection.json"):
        Engagement.open(tmp_path / "eng").selection_record()
    # an item dropped from the record
    rec = json.loads(original)
    del rec["items"][b]
    path.write_text(json.dumps(rec), encoding="utf-8")
    with pytest.raises(RecordError, match="not listed|add up"):
        Engagement.open(tmp_path / "eng").selection_record()
    # the record restored, the people's copy edited
    path.write_text(original, encoding="utf-8")
    copy = tmp_path / "eng" / "selection.csv"
    text = copy.read_text(encoding="utf-8")
    copy.write_text(text.replace(",True,", ",False,", 1), encoding="utf-8")
    with pytest.raises(RecordError, match="selection.csv"):
        Engagement.open(tmp_path / "eng").selection()
    Engagement.open(tmp_path / "eng").rewrite_copies()
    assert copy.read_text(encoding="utf-8") == text


def test_results_for_items_not_selected_are_refused(tmp_path, ledger):
    _path, df, truth, _total = ledger
    eng, pop, _plan = _start(tmp_path, ledger)
    sel, _ = draw_selection(eng, pop, seed=SEED)
    outside = sorted(set(df.loc[df["amount"] > 0, "doc"]) - set(sel["item_id"]))[0]
    credit = df.loc[df["amount"] < 0, "doc"].iloc[0]
    with pytest.raises(InputError, match="not in the selection"):
        eng.record_result(outside, 10.0)
    with pytest.raises(InputError, match="not in the selection"):
        eng.record_result(credit, -5.0)
    bad = tmp_path / "bad.csv"
    pd.DataFrame({"id": [sel["item_id"].iloc[0], outside], "value": [1.0, 2.0]}).to_csv(
        bad, index=False
    )
    with pytest.raises(InputError, match=r"bad\.csv.*row 3"):
        eng.record_results_file(bad, id_column="id", value_column="value")
    assert len(eng.results().log) == 0  # nothing of that file was recorded
    assert truth is not None


def test_extension_keeps_every_item_and_every_result(tmp_path, ledger):
    _path, _df, truth, _total = ledger
    eng, pop, plan = _start(tmp_path, ledger)
    before, _ = draw_selection(eng, pop, seed=SEED)
    first = before["item_id"].iloc[0]
    eng.record_result(first, float(truth[first]), note="seen before the extension")
    n2 = plan.sample_size + 45
    after, seed = extend_monetary_unit_selection(eng, pop, n2)
    assert seed == SEED and int(after["hits"].sum()) == n2
    merged = before.merge(after, on="item_id", how="left", suffixes=("_0", "_1"))
    assert merged["hits_1"].notna().all()  # every item kept
    for u0, u1 in zip(merged["units_0"], merged["units_1"]):  # and every earlier draw in it
        assert [int(k) for k in u1.split() if int(k) <= plan.sample_size] == [
            int(k) for k in u0.split()
        ]
    assert after.loc[after["added"], "item_id"].isin(before["item_id"]).sum() == 0
    assert eng.results().value_of(first) == float(truth[first])
    rec = eng.selection_record()
    assert rec["sample_size"] == n2 and rec["history"][-1]["sample_size"] == plan.sample_size
    assert verify_engagement(eng, pop).match
    with pytest.raises(ParameterError, match="sample_size"):
        extend_monetary_unit_selection(eng, pop, n2)  # not larger
    # a different seed cannot replace it, nor can a stratified selection
    with pytest.raises(RecordError, match="another seed"):
        draw_selection(eng, pop, seed="another seed")
    with pytest.raises(RecordError, match="monetary-unit selection is saved"):
        eng.save_selection(after[["item_id", "stratum"]].assign(key="0" * 16, order=1), SEED, {"by units": 1})


def test_the_bound_names_are_those_of_the_bounds_module():
    # the chain keeps its own light copy of the names (no scipy import when the command line starts)
    from auditmean.monetary_bound import METHOD_NAMES, METHODS
    from auditmean.monetary_engagement import BOUND_NAMES, MONETARY_UNIT_BOUNDS

    assert MONETARY_UNIT_BOUNDS == METHODS and BOUND_NAMES == METHOD_NAMES


# ---------------------------------------------------------------------------
# the whole chain, by the Python functions


def _stringer_by_hand(sample: pd.DataFrame, book_total: float, n: int, confidence: float) -> float:
    """Stringer (1963): exact misstatement of the items in full plus B_r times the ranked-taint bound."""
    full = sample[sample["examined_in_full"]]
    rest = sample[~sample["examined_in_full"]]
    exact = float((full["book_value"] - full["audited_value"]).sum())
    b_r = book_total - float(full["book_value"].sum())
    taints = np.repeat(
        ((rest["book_value"] - rest["audited_value"]) / rest["book_value"]).to_numpy(),
        rest["hits"].to_numpy(),
    )
    n_r = int(rest["hits"].sum())
    pos = np.sort(taints[taints > 0])[::-1]
    f = stats.gamma.ppf(confidence, np.arange(len(pos) + 1) + 1)  # Poisson upper factors F(0..k)
    u = (f[0] + float(np.sum(pos * np.diff(f)))) / n_r
    return exact + b_r * u


def test_whole_chain_by_the_python_functions(tmp_path, ledger):
    from auditmean.monetary_bound import monetary_unit_bound

    _path, _df, truth, _total = ledger
    eng, pop, plan = _start(tmp_path, ledger)
    draw_selection(eng, pop, seed=SEED)
    with pytest.raises(InputError, match="no audited value"):
        evaluate_engagement(eng)
    eng.record_results_file(
        _results_file(tmp_path, eng, truth), id_column="id", value_column="value"
    )
    ev = evaluate_engagement(eng)
    assert ev.record_kind == "monetary_unit_evaluation"
    sel = eng.selection()
    sample = sel[["item_id", "book_value", "hits", "examined_in_full", "units"]].assign(
        audited_value=truth.loc[sel["item_id"]].to_numpy()
    )
    conf = 1 - RISK
    for m in ("stringer", "count", "betting", "count_or_betting"):
        direct = monetary_unit_bound(
            sample, plan.book_total, plan.sample_size, confidence=conf, method=m
        )
        assert ev.bounds[m].upper == pytest.approx(direct.upper, rel=1e-12)
        assert ev.bounds[m].projected == pytest.approx(direct.projected, rel=1e-12)
    # Stringer worked by hand from the taints (arithmetic above, factors from scipy)
    assert ev.bounds["stringer"].upper == pytest.approx(
        _stringer_by_hand(sample, plan.book_total, plan.sample_size, conf), rel=1e-9
    )
    # the conclusion rests on the plan's bound, compared with tolerable
    assert ev.relied_on == "betting" and ev.upper == ev.bounds["betting"].upper
    assert ev.verdict == ("supports" if ev.upper <= plan.tolerable else "does not support")
    assert "professional judgement" in ev.wording and "own procedures" in ev.wording
    assert ev.credits_count == 6 and ev.zeros_count == 5
    saved = eng.evaluations()
    assert len(saved) == 1 and saved[0]["evaluation"]["kind"] == "monetary_unit_evaluation"
    assert set(saved[0]["evaluation"]["bounds"]) == {
        "stringer",
        "count",
        "betting",
        "count_or_betting",
    }
    # another bound may be named for the conclusion
    ev2 = evaluate_engagement(eng, primary="stringer", save=False)
    assert ev2.relied_on == "stringer" and ev2.upper == ev.bounds["stringer"].upper
    with pytest.raises(ParameterError, match="distribution"):
        evaluate_engagement(eng, distribution="t")
    assert verify_engagement(eng, pop).match
    st = eng.status()
    assert st.steps["done"].all() and st.next_step.startswith("all steps done")


def test_a_tolerable_the_bound_exceeds_is_not_supported(tmp_path, ledger):
    _path, _df, truth, total = ledger
    eng, pop, plan = _start(tmp_path, ledger, tolerable=round(0.009 * total, 2), expected=0.0)
    draw_selection(eng, pop, seed=SEED)
    eng.record_results_file(
        _results_file(tmp_path, eng, truth), id_column="id", value_column="value"
    )
    ev = evaluate_engagement(eng)
    # the injected overstatement (about 1.1% of the positive book total) is above tolerable (0.9%)
    true_over = float(
        (_ledger()[0].set_index("doc")["amount"].clip(lower=0) - truth.clip(lower=0)).sum()
    )
    assert true_over > plan.tolerable
    assert ev.upper > plan.tolerable and ev.verdict == "does not support"
    assert "extend the sample" in ev.wording


# ---------------------------------------------------------------------------
# the whole chain, on the command line


def _lines_fit(text: str, *paths) -> None:
    """Every line within 100 columns, the user's own paths counted as a short word (they cannot be wrapped)."""
    for p in sorted(map(str, paths), key=len, reverse=True):
        text = text.replace(p, "PATH")
    too_long = [line for line in text.splitlines() if len(line) > 100]
    assert not too_long, too_long


def test_whole_chain_on_the_command_line(tmp_path, ledger, capsys):
    path, _df, truth, total = ledger
    d = tmp_path / "cli"
    tm, em = f"{0.06 * total:.2f}", f"{0.01 * total:.2f}"
    assert (
        main(
            [
                "plan",
                str(path),
                "--id-column",
                "doc",
                "--value-column",
                "amount",
                "--tolerable",
                tm,
                "--expected",
                em,
                "--risk-acceptance",
                str(RISK),
                "--design",
                "monetary-unit",
                "--engagement",
                str(d),
            ]
        )
        == 0
    )
    out = capsys.readouterr().out
    _lines_fit(out, d, path, tmp_path)
    assert "monetary units" in out and "credits, kept apart" in out and "6 items" in out
    assert out.strip().splitlines()[-1] == f"Next: auditmean select --engagement {d}"

    assert main(["select", "--engagement", str(d), "--seed", SEED]) == 0
    out = capsys.readouterr().out
    _lines_fit(out, d, path, tmp_path)
    assert "6 credits" in out and "5 zero balances" in out
    assert out.strip().splitlines()[-1].startswith(f"Next: auditmean record --engagement {d}")
    assert (
        main(["select", "--engagement", str(d), "--seed", SEED, "--json"]) == 0
    )  # same seed: same selection
    js = json.loads(capsys.readouterr().out)
    assert (
        js["design"] == "monetary_unit"
        and sum(r["hits"] for r in js["selection"]) == js["sample_size"]
    )

    eng, _pop = open_engagement(d)
    results = _results_file(tmp_path, eng, truth)
    assert main(["evaluate", "--engagement", str(d)]) == 2
    assert "no audited value" in capsys.readouterr().err
    assert (
        main(
            [
                "record",
                "--engagement",
                str(d),
                str(results),
                "--id-column",
                "id",
                "--value-column",
                "value",
            ]
        )
        == 0
    )
    out = capsys.readouterr().out
    _lines_fit(out, d, path, tmp_path)
    assert out.strip().splitlines()[-1] == f"Next command: auditmean evaluate --engagement {d}"

    assert main(["evaluate", "--engagement", str(d)]) == 0
    out = capsys.readouterr().out
    _lines_fit(out, d, path, tmp_path)
    for name in ("Stringer", "error count", "* betting", "error count or betting"):
        assert name in out
    assert "Assumptions" in out and "Conclusion (" in out and "professional judgement" in out
    assert out.strip().splitlines()[-1].startswith(f"Next: auditmean verify --engagement {d}")
    assert main(["evaluate", "--engagement", str(d), "--json", "--bound", "stringer"]) == 0
    js = json.loads(capsys.readouterr().out)
    assert js["kind"] == "monetary_unit_evaluation" and js["relied_on"] == "stringer"
    direct = evaluate_engagement(eng, primary="stringer", save=False)
    for m, b in js["bounds"].items():
        assert b["upper"] == pytest.approx(direct.bounds[m].upper, rel=1e-12)
    assert len(list((d / "evaluations").glob("*.json"))) == 2
    assert main(["evaluate", "--engagement", str(d), "--rely-on", "ratio"]) == 2
    assert "stratified evaluation" in capsys.readouterr().err

    assert main(["verify", "--engagement", str(d)]) == 0
    out = capsys.readouterr().out
    assert "matches" in out and out.strip().splitlines()[-1].startswith("Next: auditmean verify")
    assert main(["status", "--engagement", str(d)]) == 0
    out = capsys.readouterr().out
    _lines_fit(out, d, path, tmp_path)
    assert "monetary units" in out and out.strip().splitlines()[-1].startswith(
        "Next command: auditmean"
    )
    assert main(["status", "--engagement", str(d), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["design"] == "monetary_unit"

    # the workpaper covers the design (its content is checked in tests/test_workpaper_monetary.py)
    assert main(["report", "--engagement", str(d), "--xlsx", str(tmp_path / "w.xlsx")]) == 0
    assert "Workbook: " in capsys.readouterr().out
    # the coverage check covers the design: every bound's row, within 100 columns, kept as coverage.json
    # (its figures are checked in tests/test_monetary_coverage.py)
    args = ["simulate", "--engagement", str(d), "--error-rate", "0.05", "--taint", "0.3", "--replications", "50",
            "--seed", "4", "--no-progress"]
    assert main(args) == 0
    out = capsys.readouterr().out
    _lines_fit(out, d, path, tmp_path)
    for name in ("Stringer", "error count", "betting", "error count or betting", "normal limit (mean taint)"):
        assert name in out
    saved = json.loads((d / "coverage.json").read_text(encoding="utf-8"))
    assert saved["kind"] == "monetary_unit_coverage_check" and saved["replications"] == 50
    assert main([*args, "--estimator", "mpu"]) == 2  # an option of the stratified check is refused, not ignored
    assert "--estimator" in capsys.readouterr().err

    # extension on the command line keeps the items and asks for the new ones' results
    n = js["sample_size"]
    assert main(["select", "--engagement", str(d), "--extend-to", str(n + 30)]) == 0
    out = capsys.readouterr().out
    assert f"Extended from {n:,} to {n + 30:,}" in out
    assert main(["verify", "--engagement", str(d)]) == 0
    capsys.readouterr()


def test_command_line_refuses_options_of_the_other_design(tmp_path, ledger, capsys):
    path, _df, _truth, total = ledger
    d = tmp_path / "x"
    assert (
        main(
            [
                "plan",
                str(path),
                "--id-column",
                "doc",
                "--value-column",
                "amount",
                "--tolerable",
                f"{0.06 * total:.2f}",
                "--design",
                "monetary-unit",
                "--strata",
                "3",
                "--engagement",
                str(d),
            ]
        )
        == 2
    )
    assert "--strata" in capsys.readouterr().err and not d.exists()
    # a plan without --engagement is printed, nothing saved
    assert (
        main(
            [
                "plan",
                str(path),
                "--id-column",
                "doc",
                "--value-column",
                "amount",
                "--tolerable",
                f"{0.06 * total:.2f}",
                "--design",
                "monetary-unit",
                "--json",
            ]
        )
        == 0
    )
    js = json.loads(capsys.readouterr().out)
    assert js["plan"]["sample_size"] >= 1 and js["engagement"] is None
    # --extend-to and --bound on a stratified engagement are refused
    s = tmp_path / "strat"
    assert (
        main(
            [
                "plan",
                str(path),
                "--id-column",
                "doc",
                "--value-column",
                "amount",
                "--tolerable",
                f"{0.06 * total:.2f}",
                "--strata",
                "3",
                "--check-samples",
                "0",
                "--engagement",
                str(s),
            ]
        )
        == 0
    )
    capsys.readouterr()
    assert main(["select", "--engagement", str(s), "--extend-to", "500"]) == 2
    assert "monetary-unit design" in capsys.readouterr().err
    assert math.isfinite(total)
