"""The finite-sample bound inside the stratified coverage check (simulate_coverage(..., bounds=...)).

Outside references, named beside each check:

* auditmean.overstatement_bound, the public evaluation, run on each kept
  simulated sample one at a time: the per-replication upper bounds must be
  the same numbers to the tolerance of the bound's search (the simulation
  calls the same function on the same misstatements, book value minus
  audited value, for a whole batch at once; the search stops when every row
  of a block has converged, so a row may end a hair closer to the exact
  bound in a batch than alone: 1e-9 relative is far looser than that
  search's 1e-10 in the log capital, and far tighter than any figure shown).
* Validity by simulation on invented low-error populations whose true
  misstatement is known: the bound covers the truth in at least
  ``confidence - 3`` Monte Carlo standard errors of 2,000 samples
  (``sqrt(c (1 - c) / 2000)``, the binomial standard error of a
  proportion); its actual risk of incorrect acceptance at populations
  misstated by exactly tolerable is at most ``risk + 3`` standard errors.
  The normal limits' coverage is printed beside it (nothing asserted).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest

import auditmean as am
from auditmean import ParameterError, overstatement_bound, simulate_coverage
from auditmean.coverage import FixedTaint, MisstatementModel, UniformTaint

SAMPLES = 2_000


def _population(seed: int = 5, size: int = 6_000):
    """Invented book values in three strata by size; and the same with the 20 largest in a fourth."""
    book = np.round(np.random.default_rng(seed).lognormal(6.0, 1.1, size), 2)
    cuts = np.quantile(book, [0.5, 0.85])
    three = np.array(["low", "mid", "high"], dtype=object)[np.searchsorted(cuts, book, side="right")]
    four = three.copy()
    four[np.argsort(-book)[:20]] = "top"
    return book, three, four


BOOK, THREE, STRATA = _population()
TOTAL = float(BOOK.sum())
SAMPLED = {"low": 40, "mid": 40, "high": 60}
WITH_TOP = {**SAMPLED, "top": 20}  # the top stratum examined in full


def _strata_table(r, book=BOOK, strata=STRATA) -> pd.DataFrame:
    t = r.strata[["stratum", "count", "book_total"]].copy()
    t["largest_book_value"] = [float(book[strata == s].max()) for s in t["stratum"]]
    return t


def _floor(p: float, n: int = SAMPLES) -> float:
    return p - 3.0 * math.sqrt(p * (1.0 - p) / n)


# --------------------------------------------------------------------------- the evaluation's own numbers


@pytest.mark.parametrize("fixed", [True, False])
def test_each_simulated_bound_is_overstatement_bound_on_that_sample(fixed):
    model = MisstatementModel(0.05, UniformTaint(0.05, 1.0), understatement_share=0.2)
    r = simulate_coverage(BOOK, THREE, SAMPLED, model, estimators="difference", replications=200, seed=3,
                          keep_samples=10, fixed_population=fixed)
    assert r.bounds == ("stratified_betting",) and r.bound_upper.shape == (200, 1)
    table = _strata_table(r, strata=THREE)
    for rep, sample in r.kept_samples.groupby("replication"):
        public = overstatement_bound(sample[["stratum", "book_value", "audited_value"]], table, 0.95)
        assert public.upper == pytest.approx(r.bound_upper[rep, 0], rel=1e-9), rep


def test_strata_examined_in_full_add_their_exact_misstatement():
    model = MisstatementModel(0.05, FixedTaint(0.5), large_items=20, large_item_taint=1.0,
                              large_item_probability=0.3)
    r = simulate_coverage(BOOK, STRATA, WITH_TOP, model, estimators="difference", replications=50, seed=8,
                          keep_samples=6)
    table = _strata_table(r)
    for rep, sample in r.kept_samples.groupby("replication"):
        public = overstatement_bound(sample[["stratum", "book_value", "audited_value"]], table, 0.95)
        assert public.upper == pytest.approx(r.bound_upper[rep, 0], rel=1e-9)


def test_a_sample_without_overstatement_gets_the_designs_zero_error_bound():
    # core.bound_simulation skips the search for such samples: the bound is the one of the design with
    # nothing found, plus the exact misstatement of the strata examined in full (here none).
    model = MisstatementModel(0.0, FixedTaint(0.5))
    r = simulate_coverage(BOOK, THREE, SAMPLED, model, replications=20, seed=2, keep_samples=1)
    table = _strata_table(r, strata=THREE)
    public = overstatement_bound(r.kept_samples[["stratum", "book_value", "audited_value"]], table, 0.95)
    assert np.all(r.bound_upper[:, 0] == r.bound_upper[0, 0])
    assert public.upper == pytest.approx(r.bound_upper[0, 0], rel=1e-9)
    assert public.zero_error_upper == pytest.approx(public.upper, rel=1e-9)


def test_the_bound_changes_no_figure_of_the_estimators_and_no_replication_moves():
    model = MisstatementModel(0.03, UniformTaint(0.1, 0.9))
    kw = dict(replications=300, seed=21, tolerable=0.04 * TOTAL, expected=0.005 * TOTAL)
    without = simulate_coverage(BOOK, STRATA, WITH_TOP, model, bounds=(), **kw)
    with_bound = simulate_coverage(BOOK, STRATA, WITH_TOP, model, **kw)
    assert without.bounds == () and len(without.by_bound) == 0 and without.bound_upper is None
    for name in ("estimates", "lower_bound", "covers", "accepts"):
        assert np.array_equal(getattr(without, name), getattr(with_bound, name))
    pd.testing.assert_frame_equal(without.by_estimator, with_bound.by_estimator)
    longer = simulate_coverage(BOOK, STRATA, WITH_TOP, model, **{**kw, "replications": 700})
    assert np.array_equal(longer.bound_upper[:300], with_bound.bound_upper)


# --------------------------------------------------------------------------- validity


PATTERNS = {
    "a few 100% taints": MisstatementModel(0.005, FixedTaint(1.0)),
    "many small taints": MisstatementModel(0.3, UniformTaint(0.01, 0.1)),
    "one huge error in a large item": MisstatementModel(
        0.002, FixedTaint(0.5), large_items=21, large_item_taint=1.0, large_item_probability=0.05
    ),
    "understatements": MisstatementModel(0.05, UniformTaint(0.1, 0.8), understatement_share=0.5),
}


@pytest.mark.parametrize("pattern", list(PATTERNS))
def test_the_bound_covers_at_least_nominally(pattern, capsys):
    r = simulate_coverage(BOOK, STRATA, WITH_TOP, PATTERNS[pattern], replications=SAMPLES, seed=20240917)
    row = r.by_bound.iloc[0]
    normal = r.by_estimator.set_index("estimator")["one_sided_coverage"]
    with capsys.disabled():
        print(f"\n{pattern}: stratified betting bound {row['coverage']:.3f}; normal limits "
              + ", ".join(f"{m} {c:.3f}" for m, c in normal.items()))
    assert row["replications"] == SAMPLES
    assert row["coverage"] >= _floor(0.95)
    assert row["coverage"] == pytest.approx(r.bound_covers[:, 0].mean())


def test_risk_of_incorrect_acceptance_at_tolerable():
    # A near-census design (98% of each stratum): the bound accepts most samples of the population as
    # modelled (misstated by about 2,000, below tolerable), yet at populations misstated by exactly
    # tolerable it accepts no more often than the nominal risk allows.
    rng = np.random.default_rng(11)
    book = np.round(rng.uniform(50.0, 150.0, 400), 2)  # invented
    strata = np.where(book > 100, "B", "A")
    counts = pd.Series(strata).value_counts()
    sizes = {k: int(v * 0.98) for k, v in counts.items()}
    model = MisstatementModel(0.3, UniformTaint(0.05, 0.3))
    r = simulate_coverage(book, strata, sizes, model, estimators="difference", replications=SAMPLES, seed=3,
                          tolerable=0.08 * book.sum(), expected=0.0)
    row = r.by_bound.iloc[0]
    print(row[["acceptance_rate", "risk_incorrect_acceptance", "replications_at_tolerable"]])
    assert row["acceptance_rate"] > 0.5
    n = int(row["replications_at_tolerable"])
    assert n == SAMPLES and row["outside_assumption_at_tolerable"] == 0
    assert row["risk_incorrect_acceptance"] <= 0.05 + 3 * math.sqrt(0.05 * 0.95 / n)
    assert row["risk_incorrect_rejection"] == 0.0  # at expected 0 no population is misstated


# --------------------------------------------------------------------------- what the model must satisfy


def test_a_named_bound_is_refused_when_the_model_breaks_its_assumption():
    over = MisstatementModel(0.02, FixedTaint(1.5))
    with pytest.raises(ParameterError) as info:
        simulate_coverage(BOOK, THREE, SAMPLED, over, replications=10, seed=1, bounds="stratified_betting")
    assert info.value.parameter == "bounds" and "150%" in str(info.value)
    r = simulate_coverage(BOOK, THREE, SAMPLED, over, replications=10, seed=1)  # default: left out, said so
    assert r.bounds == () and any("was not simulated" in n for n in r.notes)
    # Taints above 100% only in the stratum examined in full: the bound still applies.
    top_only = MisstatementModel(0.0, FixedTaint(0.5), large_items=20, large_item_taint=1.5,
                                 large_item_probability=0.5)
    r = simulate_coverage(BOOK, STRATA, WITH_TOP, top_only, replications=10, seed=1, bounds=["stratified_betting"])
    assert r.bounds == ("stratified_betting",)


def test_credits_in_a_sampled_stratum_are_refused():
    book = BOOK.copy()
    book[np.flatnonzero(THREE == "low")[:3]] *= -1  # three credit balances in a sampled stratum
    with pytest.raises(ParameterError, match="below zero"):
        simulate_coverage(book, THREE, SAMPLED, MisstatementModel(0.01, FixedTaint(0.5)), replications=10,
                          seed=1, bounds=("stratified_betting",))


@pytest.mark.parametrize("value", ["nope", 3, ("stratified_betting", "stratified_betting")])
def test_bad_bounds_are_named(value):
    with pytest.raises(ParameterError) as info:
        simulate_coverage(BOOK, THREE, SAMPLED, MisstatementModel(0.01, FixedTaint(0.5)), replications=10,
                          seed=1, bounds=value)
    assert info.value.parameter == "bounds"


# --------------------------------------------------------------------------- the record and its readers


def test_record_shows_the_bound_beside_the_normal_limits():
    model = MisstatementModel(0.02, UniformTaint(0.1, 0.9))
    r = simulate_coverage(BOOK, STRATA, WITH_TOP, model, replications=200, seed=1, tolerable=0.04 * TOTAL,
                          expected=0.005 * TOTAL)
    text = r.summary()
    assert all(len(line) <= 100 for line in text.splitlines())
    assert "stratified betting bound" in text and "side by side" in text
    assert "side by side" in r._repr_html_()
    d = r.to_dict(include_replications=True)
    json.dumps(d, allow_nan=False)
    assert d["bounds"] == ["stratified_betting"] and d["by_bound"][0]["bound"] == "stratified_betting"
    assert len(d["per_replication"]["bounds"]["upper"]["stratified_betting"]) == 200
    for key in ("coverage", "coverage_mc_se", "mean_upper", "risk_incorrect_acceptance",
                "risk_incorrect_acceptance_mc_se", "replications_at_tolerable", "risk_incorrect_rejection",
                "risk_incorrect_rejection_mc_se"):
        assert key in d["by_bound"][0]
    assert r.bound_accepts.shape == (200, 1)


def test_the_plan_check_reads_the_bounds_risk():
    # auditmean.plan_check reads by_bound's first row (its contract with the coverage check).
    ledger = pd.DataFrame({"item_id": [f"L{i:05d}" for i in range(3000)],
                           "book_value": np.round(np.random.default_rng(2).lognormal(6.0, 1.2, 3000), 2)})
    strata = am.stratify(ledger, n_strata=3, top_items=10)
    plan = am.plan_sample(strata, tolerable=0.05 * ledger["book_value"].sum(), expected=0.0,
                          risk_incorrect_acceptance=0.05)
    from auditmean.plan_check import check_plan

    # A pattern whose populations reach tolerable with every taint at most 100% (30% of items, 20%).
    model = MisstatementModel(0.3, FixedTaint(0.2))
    check = check_plan(strata, plan, model, replications=200, seed=4)
    assert check.bound_risk is not None and 0.0 <= check.bound_risk <= 1.0
    labels = np.asarray(strata.labels, dtype=object)[strata.codes]
    r = simulate_coverage(strata.book_values, labels, plan.sizes, model, estimators=(plan.method,),
                          replications=200, seed=4, confidence=0.95, tolerable=plan.tolerable,
                          expected=plan.expected)
    assert check.bound_risk == r.by_bound.iloc[0]["risk_incorrect_acceptance"]
