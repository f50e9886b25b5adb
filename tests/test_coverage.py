"""The coverage check against outside references.

* The central limit theorem (common knowledge; for sampling without
  replacement, Hajek 1960, Publ. Math. Inst. Hungarian Acad. Sci. 5,
  361-374): with normal-looking values and large samples, a 95% interval
  covers about 95% of the time. Checked with a 4-standard-error Monte Carlo
  tolerance and a fixed seed, so the check cannot flake.
* Neter and Loebbecke (1975), *Behavior of Major Statistical Estimators in
  Sampling Accounting Populations*, AICPA: with rare, large misstatements
  the difference and ratio intervals cover far less often than stated (the
  direction is what they report; the size here comes from the arithmetic
  shown in the test).
* auditmean.evaluation.estimate_total and auditmean.evaluation.second_opinion
  on the same samples (one replication at a time, 1e-9 relative).
* scipy.stats.skew (bias=False) for the skewness flags.
* Arithmetic shown beside the checks.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from auditmean import estimate_total
from auditmean.core import simulation as core_sim
from auditmean.core.estimators import METHODS
from auditmean.coverage import (
    BetaTaint,
    CoverageResult,
    FixedTaint,
    MisstatementModel,
    UniformTaint,
    simulate_coverage,
)
from auditmean.errors import InputError, MethodNotApplicable, ParameterError
from auditmean.evaluation import second_opinion

REL = 1e-9


def _skewed_population(n=3_000, seed=1):
    rng = np.random.default_rng(seed)
    book = np.round(rng.lognormal(6.0, 1.0, n), 2) + 1.0
    cuts = np.quantile(book, [0.6, 0.9, 0.99])
    strata = np.array(["low", "mid", "high", "top"], dtype=object)[np.searchsorted(cuts, book)]
    counts = {s: int(np.sum(strata == s)) for s in ("low", "mid", "high", "top")}
    sizes = {"low": 20, "mid": 15, "high": 12, "top": counts["top"]}
    return book, strata, sizes


MODEL = MisstatementModel(error_rate=0.2, taint=UniformTaint(0.05, 0.6), understatement_share=0.2,
                          large_items=4, large_item_taint=0.9, large_item_probability=0.5)


# --------------------------------------------------------------------------- nominal coverage


def test_coverage_near_nominal_for_normal_values_and_large_samples():
    rng = np.random.default_rng(7)
    book = rng.normal(1_000.0, 100.0, 20_000)
    strata = np.where(np.arange(20_000) < 10_000, "A", "B")
    # Errors common and symmetric (half of them understatements): the differences are
    # a mixture with no skewness, and 300 items per stratum is plenty for the CLT.
    model = MisstatementModel(error_rate=0.5, taint=UniformTaint(0.0, 0.2), understatement_share=0.5)
    R = 4_000
    r = simulate_coverage(book, strata, {"A": 300, "B": 300}, model, replications=R, seed=2024,
                          fixed_population=True, tolerable=0.02 * book.sum())
    se = math.sqrt(0.95 * 0.05 / R)  # Monte Carlo standard error of a 95% coverage
    for row in r.by_estimator.itertuples():
        assert abs(row.coverage - 0.95) < 4 * se, row.estimator
        assert abs(row.one_sided_coverage - 0.95) < 4 * se, row.estimator
        # the bias of the estimators is negligible here: within 4 of its own MC s.e. plus the
        # ratio estimators' O(1/n) bias, bounded by 1% of the standard error
        assert abs(row.bias) < 4 * row.bias_mc_se + 0.01 * row.mean_std_error, row.estimator
        # risk of incorrect acceptance at a population misstated by exactly tolerable: nominal 5%
        assert abs(row.risk_incorrect_acceptance - 0.05) < 4 * math.sqrt(0.05 * 0.95 / R), row.estimator


def test_mean_per_unit_is_unbiased_on_a_skewed_population():
    # The stratified expansion estimator is design-unbiased (Cochran 1977, Theorem 5.1).
    book, strata, sizes = _skewed_population()
    r = simulate_coverage(book, strata, sizes, MODEL, estimators="mpu", replications=3_000, seed=5,
                          fixed_population=True)
    row = r.by_estimator.iloc[0]
    assert abs(row.bias) < 4 * row.bias_mc_se


# --------------------------------------------------------------------------- rare errors


def test_rare_large_errors_make_difference_and_ratio_intervals_cover_too_rarely():
    rng = np.random.default_rng(3)
    book = np.round(rng.lognormal(6.0, 0.8, 10_000), 2) + 1.0
    strata = np.full(10_000, "all")
    model = MisstatementModel(error_rate=0.01, taint=FixedTaint(0.9))
    R = 2_000
    r = simulate_coverage(book, strata, {"all": 60}, model, estimators=["difference", "ratio", "mpu"],
                          replications=R, seed=11)
    cov = r.by_estimator.set_index("estimator")["coverage"]
    se = r.by_estimator.set_index("estimator")["coverage_mc_se"]
    # With 1% of items misstated, a sample of 60 holds no misstatement with probability
    # 0.99**60 = 0.547 (each sampled item of a fresh population is misstated independently);
    # the interval then has zero width and misses the true total, so coverage is at most
    # about 1 - 0.547 = 0.453 (direction: Neter and Loebbecke 1975).
    p_none = 0.99**60
    for m in ("difference", "ratio"):
        assert cov[m] < 0.95 - 10 * se[m]
        assert cov[m] <= 1 - p_none + 4 * math.sqrt(p_none * (1 - p_none) / R)
    rates = r.flag_rates.set_index(["estimator", "flag"])["rate"]
    assert abs(rates["difference", "no-differences"] - p_none) < 4 * math.sqrt(p_none * (1 - p_none) / R)
    assert abs(rates["difference", "interval-unusable"] - p_none) < 4 * math.sqrt(p_none * (1 - p_none) / R)


# --------------------------------------------------------------------------- agreement with estimate_total


@pytest.mark.parametrize("fixed", [True, False])
@pytest.mark.parametrize("distribution", ["normal", "t"])
def test_each_replication_equals_estimate_total_on_its_sample(fixed, distribution):
    book, strata, sizes = _skewed_population()
    r = simulate_coverage(book, strata, sizes, MODEL, replications=5, seed=9, fixed_population=fixed,
                          keep_samples=5, distribution=distribution, confidence=0.9)
    strata_table = r.strata[["stratum", "count", "book_total"]]
    for i in range(5):
        sample = r.kept_samples[r.kept_samples["replication"] == i]
        assert len(sample) == sum(sizes.values())
        for j, m in enumerate(r.estimators):
            two = estimate_total(sample, strata_table, method=m, confidence=0.9, distribution=distribution)
            one = estimate_total(sample, strata_table, method=m, confidence=0.9, sides="lower",
                                 distribution=distribution)
            assert r.estimates[i, j] == pytest.approx(two.total, rel=REL)
            assert r.std_errors[i, j] == pytest.approx(two.std_error, rel=REL)
            assert r.lower[i, j] == pytest.approx(two.lower, rel=REL)
            assert r.upper[i, j] == pytest.approx(two.upper, rel=REL)
            assert r.lower_bound[i, j] == pytest.approx(one.lower, rel=REL)


def test_single_item_strata_and_population_book_mean_agree_with_estimate_total():
    book, strata, _ = _skewed_population()
    sizes = {"low": 25, "mid": 1, "high": 2, "top": 5}
    for single, ratio_variance in (("average", "population_book_mean"), ("zero", "sample_book_mean")):
        r = simulate_coverage(book, strata, sizes, MODEL, replications=3, seed=4, keep_samples=3,
                              single_item=single, ratio_variance=ratio_variance)
        table = r.strata[["stratum", "count", "book_total"]]
        for i in range(3):
            sample = r.kept_samples[r.kept_samples["replication"] == i]
            for j, m in enumerate(r.estimators):
                e = estimate_total(sample, table, method=m, single_item=single, ratio_variance=ratio_variance)
                assert r.estimates[i, j] == pytest.approx(e.total, rel=REL)
                assert r.std_errors[i, j] == pytest.approx(e.std_error, rel=REL)
        fired = r.flag_rates.set_index(["estimator", "flag"])["rate"]
        assert fired["mpu", "single-item"] == 1.0  # the stratum 'mid' has one planned item, always
        assert fired["regression", "variance-not-estimable"] == 1.0  # 'high': 2 items, regression needs 3
        assert fired["mpu", "few-items"] == 1.0  # every sampled stratum has fewer than 30


def test_zero_balances_and_equal_book_values_are_treated_as_estimate_total_treats_them():
    # A stratum of zero balances has no ratio (difference estimation there), a stratum of
    # equal book values no regression slope (fixed at 1): both flagged, as estimate_total does.
    book, strata, sizes = _skewed_population()
    book = np.concatenate([book, np.zeros(50), np.full(60, 250.0)])
    strata = np.concatenate([strata, np.full(50, "zeros", dtype=object), np.full(60, "equal", dtype=object)])
    sizes = {**sizes, "zeros": 5, "equal": 6}
    r = simulate_coverage(book, strata, sizes, MODEL, replications=4, seed=12, keep_samples=4)
    table = r.strata[["stratum", "count", "book_total"]]
    for i in range(4):
        sample = r.kept_samples[r.kept_samples["replication"] == i]
        for j, m in enumerate(r.estimators):
            e = estimate_total(sample, table, method=m)
            assert r.estimates[i, j] == pytest.approx(e.total, rel=REL)
            assert r.std_errors[i, j] == pytest.approx(e.std_error, rel=REL)
    fired = r.flag_rates_by_stratum.set_index(["estimator", "flag", "stratum"])["rate"]
    assert fired["ratio", "ratio-undefined", "zeros"] == 1.0
    assert fired["combined_ratio", "ratio-undefined", "zeros"] == 1.0
    assert fired["regression", "slope-undefined", "equal"] == 1.0


def test_second_opinion_equals_the_evaluation_second_opinion_on_each_sample():
    book, strata, sizes = _skewed_population()
    r = simulate_coverage(book, strata, sizes, MODEL, estimators=["mpu", "ratio"], replications=3, seed=2,
                          keep_samples=3, tolerable=0.05 * book.sum(), expected=0.01 * book.sum(),
                          second_opinion=True, second_opinion_replicates=200)
    table = r.strata[["stratum", "count", "book_total"]]
    for i in range(3):
        sample = r.kept_samples[r.kept_samples["replication"] == i]
        for j, m in enumerate(r.estimators):
            seed = int(r.second_opinion["seed"][i])
            two = second_opinion(sample, table, method=m, replicates=200, seed=seed)
            one = second_opinion(sample, table, method=m, replicates=200, seed=seed, sides="lower")
            assert r.second_opinion["lower"][i, j] == pytest.approx(two.bootstrap_lower, rel=REL)
            assert r.second_opinion["upper"][i, j] == pytest.approx(two.bootstrap_upper, rel=REL)
            assert r.second_opinion["lower_bound"][i, j] == pytest.approx(one.bootstrap_lower, rel=REL)
            accept = one.bootstrap_misstatement_upper <= 0.05 * book.sum()
            assert bool(r.second_opinion["accepts"][i, j]) == accept
    assert {"second_opinion_coverage", "second_opinion_risk_incorrect_acceptance",
            "second_opinion_risk_incorrect_rejection"} <= set(r.by_estimator.columns)
    assert "Second opinion" in r.summary()


# --------------------------------------------------------------------------- the true total


def test_fresh_populations_keep_sample_and_true_total_consistent():
    # One stratum of 10 items, 9 sampled: the true total minus the sampled audited values is
    # the audited value of the one item left out, book or book * (1 - 0.5) (arithmetic).
    book = np.arange(1.0, 11.0) * 100.0
    strata = ["s"] * 10
    model = MisstatementModel(error_rate=0.5, taint=FixedTaint(0.5))
    r = simulate_coverage(book, strata, {"s": 9}, model, estimators="mpu", replications=100, seed=6,
                          keep_samples=100)
    seen_both = set()
    for i in range(100):
        s = r.kept_samples[r.kept_samples["replication"] == i]
        left_out = int(np.setdiff1d(np.arange(10), s["item"].to_numpy())[0])
        rest = r.true_totals[i] - s["audited_value"].sum()
        b = book[left_out]
        assert rest == pytest.approx(b, rel=1e-12) or rest == pytest.approx(0.5 * b, rel=1e-12)
        seen_both.add(rest == pytest.approx(b, rel=1e-12))
        np.testing.assert_array_equal(s["book_value"].to_numpy(), book[s["item"].to_numpy()])
    assert seen_both == {True, False}


def test_census_design_covers_always_and_scales_exactly():
    # Every stratum examined in full: every estimate equals its population's true total, so
    # every interval covers, and at a population misstated by exactly tolerable the upper
    # limit of misstatement equals tolerable, which is accepted (arithmetic).
    book, strata, _ = _skewed_population(400)
    counts = pd.Series(strata).value_counts().to_dict()
    TM = 0.03 * book.sum()
    for fixed in (True, False):
        r = simulate_coverage(book, strata, counts, MODEL, replications=50, seed=3, tolerable=TM,
                              expected=0.01 * book.sum(), fixed_population=fixed)
        np.testing.assert_allclose(r.estimates, np.repeat(r.true_totals[:, None], 5, axis=1), rtol=1e-12)
        assert (r.by_estimator["coverage"] == 1.0).all()
        assert (r.by_estimator["one_sided_coverage"] == 1.0).all()
        assert (r.by_estimator["risk_incorrect_acceptance"] == 1.0).all()
        assert (r.by_estimator["risk_incorrect_rejection"] == 0.0).all()
        assert (r.std_errors == 0).all()


# --------------------------------------------------------------------------- flags


def test_skewness_flags_match_scipy_skew_on_the_samples():
    book, strata, sizes = _skewed_population()
    R = 40
    r = simulate_coverage(book, strata, sizes, MODEL, estimators=["mpu", "difference"], replications=R,
                          seed=8, keep_samples=R)
    got = r.flag_rates_by_stratum.set_index(["estimator", "flag", "stratum"])["replications_flagged"]
    for stratum, n in sizes.items():
        if n == int(r.strata.set_index("stratum").loc[stratum, "count"]):
            assert got["mpu", "skew-cochran", stratum] == 0  # examined in full: no flag
            continue
        cochran = {"mpu": 0, "difference": 0}
        sugden = {"mpu": 0, "difference": 0}
        for i in range(R):
            s = r.kept_samples[(r.kept_samples["replication"] == i) & (r.kept_samples["stratum"] == stratum)]
            for m, values in (("mpu", s["audited_value"]), ("difference", s["audited_value"] - s["book_value"])):
                v = values.to_numpy()
                if np.ptp(v) == 0:
                    continue  # values that do not vary: the skewness rules do not apply
                g1 = stats.skew(v, bias=False)
                cochran[m] += n <= 25 * g1**2  # Cochran 1977, section 2.15
                sugden[m] += n <= 28 + 25 * g1**2  # Sugden, Smith and Jones 2000 (constant from memory)
        for m in ("mpu", "difference"):
            assert got[m, "skew-cochran", stratum] == cochran[m]
            assert got[m, "skew-studentized", stratum] == sugden[m]


def test_flag_counts_equal_the_warnings_estimate_total_raises():
    # Rare misstatement, small and thin strata: most warnings occur in some replications.
    book, strata, _ = _skewed_population()
    sizes = {"low": 12, "mid": 2, "high": 1, "top": 3}
    model = MisstatementModel(error_rate=0.08, taint=BetaTaint(0.4, 3.0), understatement_share=0.3)
    R = 40
    r = simulate_coverage(book, strata, sizes, model, replications=R, seed=17, keep_samples=R)
    table = r.strata[["stratum", "count", "book_total"]]
    expected: dict[tuple, int] = {}
    for i in range(R):
        sample = r.kept_samples[r.kept_samples["replication"] == i]
        for m in r.estimators:
            for f in estimate_total(sample, table, method=m).flags:
                key = (m, f.code, f.stratum)
                expected[key] = expected.get(key, 0) + 1
    by_stratum = r.flag_rates_by_stratum.set_index(["estimator", "flag", "stratum"])["replications_flagged"]
    overall = r.flag_rates.set_index(["estimator", "flag"])["replications_flagged"]
    got: dict[tuple, int] = {}
    for (m, code, stratum), k in by_stratum.items():
        if k:
            got[(m, code, stratum)] = int(k)
    for (m, code), k in overall.items():
        if k and code in core_sim.ESTIMATE_FLAGS:
            got[(m, code, None)] = int(k)
    assert got == expected
    codes = {code for _, code, _ in expected}
    assert {"few-items", "single-item", "variance-not-estimable", "no-differences"} <= codes


def test_flag_thresholds_are_the_evaluation_thresholds():
    from auditmean.evaluation import flags as evaluation_flags

    assert core_sim.OVERALL_SKEWNESS_LIMIT == evaluation_flags.OVERALL_SKEWNESS_LIMIT
    assert core_sim.FEW_DIFFERENCES == evaluation_flags.FEW_DIFFERENCES


# --------------------------------------------------------------------------- reproducibility, early stop


def test_same_seed_same_results_other_seed_other_results():
    book, strata, sizes = _skewed_population()
    kw = dict(replications=600, tolerable=0.05 * book.sum(), expected=0.01 * book.sum())
    a = simulate_coverage(book, strata, sizes, MODEL, seed=77, **kw)
    b = simulate_coverage(book, strata, sizes, MODEL, seed=77, **kw)
    c = simulate_coverage(book, strata, sizes, MODEL, seed=78, **kw)
    for name in ("true_totals", "estimates", "std_errors", "lower", "upper", "lower_bound", "covers", "accepts"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name))
    pd.testing.assert_frame_equal(a.by_estimator, b.by_estimator)
    assert not np.array_equal(a.estimates, c.estimates)
    # a longer run starts with the same replications
    d = simulate_coverage(book, strata, sizes, MODEL, seed=77, **{**kw, "replications": 900})
    np.testing.assert_array_equal(d.estimates[:600], a.estimates)
    # no seed: a new one is drawn and recorded, and repeats the run
    e = simulate_coverage(book, strata, sizes, MODEL, replications=50)
    f = simulate_coverage(book, strata, sizes, MODEL, replications=50, seed=e.seed)
    np.testing.assert_array_equal(e.estimates, f.estimates)


def test_results_do_not_depend_on_the_batch_size(monkeypatch):
    book, strata, sizes = _skewed_population()
    a = simulate_coverage(book, strata, sizes, MODEL, replications=700, seed=13)
    monkeypatch.setattr(core_sim, "_BLOCK_BUDGET", 1)  # one chunk of 256 replications per batch
    b = simulate_coverage(book, strata, sizes, MODEL, replications=700, seed=13)
    np.testing.assert_array_equal(a.estimates, b.estimates)
    np.testing.assert_array_equal(a.covers, b.covers)
    pd.testing.assert_frame_equal(a.flag_rates, b.flag_rates)


def test_early_stop_keeps_the_replications_finished(monkeypatch):
    book, strata, sizes = _skewed_population()
    monkeypatch.setattr(core_sim, "_BLOCK_BUDGET", 1)  # batches of one chunk (256)
    calls = []

    def stop_after_two(done, total):
        calls.append((done, total))
        return len(calls) < 2

    r = simulate_coverage(book, strata, sizes, MODEL, replications=2_000, seed=21, progress=stop_after_two)
    assert calls == [(256, 2_000), (512, 2_000)]
    assert r.partial and r.replications == 512 and r.replications_requested == 2_000
    assert r.estimates.shape == (512, 5)
    assert int(r.by_estimator["replications"].iloc[0]) == 512
    assert "STOPPED EARLY" in r.summary() and any("Stopped early" in n for n in r.notes)
    full = simulate_coverage(book, strata, sizes, MODEL, replications=2_000, seed=21)
    np.testing.assert_array_equal(r.estimates, full.estimates[:512])
    # flag counts cover exactly the finished replications
    assert (r.flag_rates["replications_flagged"] <= 512).all()
    # a callback returning None never stops the run
    done = simulate_coverage(book, strata, sizes, MODEL, replications=300, seed=21, progress=lambda d, t: None)
    assert not done.partial and done.replications == 300


def test_early_stop_during_the_second_opinion(monkeypatch):
    book, strata, sizes = _skewed_population()
    calls = []

    def stop_at_16(done, total):
        calls.append(done)
        return done < 16

    r = simulate_coverage(book, strata, sizes, MODEL, estimators="mpu", replications=40, seed=3,
                          second_opinion=True, second_opinion_replicates=200, progress=stop_at_16)
    assert calls == [8, 16] and r.partial and r.replications == 16
    assert r.second_opinion["covers"].shape == (16, 1)


# --------------------------------------------------------------------------- records


def test_record_to_dict_summary_and_escaped_html():
    book, strata, sizes = _skewed_population()
    strata = np.where(strata == "top", "<b>top</b>", strata)
    sizes = {("<b>top</b>" if k == "top" else k): v for k, v in sizes.items()}
    r = simulate_coverage(book, strata, sizes, MODEL, replications=300, seed=1, tolerable=0.05 * book.sum(),
                          expected=0.0)
    assert isinstance(r, CoverageResult)
    d = r.to_dict()
    text = json.dumps(d, allow_nan=False)
    assert d["kind"] == "coverage_check" and d["replications"] == 300 and "per_replication" not in d
    assert MisstatementModel.from_dict(d["model"]) == MODEL
    full = r.to_dict(include_replications=True)
    json.dumps(full, allow_nan=False)
    assert len(full["per_replication"]["estimates"]["mpu"]) == 300
    assert len(text) < 60_000  # the record without replications stays small
    html_out = r._repr_html_()
    assert "<b>top</b>" not in html_out and "&lt;b&gt;top&lt;/b&gt;" in html_out
    assert "risk of incorrect acceptance" in r.summary()
    assert any("without any misstatement" in n for n in r.notes)  # expected = 0
    table = r.per_replication()
    assert len(table) == 300 * 5 and set(table["estimator"]) == set(METHODS)
    with pytest.raises(ValueError):
        r.estimates[0, 0] = 1.0  # read-only


def test_plan_record_gives_the_sizes():
    from auditmean.plan import plan_sample

    book, strata, _ = _skewed_population()
    frame = pd.DataFrame({"stratum": strata, "book": book})
    g = frame.groupby("stratum")["book"]
    table = pd.DataFrame({"stratum": g.size().index, "count": g.size().to_numpy(), "std_dev": g.std().to_numpy(),
                          "book_total": g.sum().to_numpy()})
    plan = plan_sample(table, tolerable=0.05 * book.sum())
    r = simulate_coverage(book, strata, plan, MODEL, estimators="mpu", replications=20, seed=1)
    assert r.strata.set_index("stratum")["size"].to_dict() == plan.sizes


# --------------------------------------------------------------------------- validation


@pytest.mark.parametrize(
    ("kwargs", "name"),
    [
        (dict(estimators=["mpu", "mpu"]), "estimators"),
        (dict(estimators="pps"), "estimators"),
        (dict(replications=0), "replications"),
        (dict(replications=100_001), "replications"),
        (dict(confidence=1.0), "confidence"),
        (dict(tolerable=-1.0), "tolerable"),
        (dict(expected=10.0), "expected"),
        (dict(tolerable=100.0, expected=100.0), "expected"),
        (dict(seed=-3), "seed"),
        (dict(fixed_population="yes"), "fixed_population"),
        (dict(progress=5), "progress"),
        (dict(distribution="cauchy"), "distribution"),
        (dict(keep_samples=101), "keep_samples"),
        (dict(second_opinion=True, second_opinion_replicates=50), "second_opinion_replicates"),
    ],
)
def test_parameters_are_checked_once_with_their_names(kwargs, name):
    book, strata, sizes = _skewed_population(300)
    with pytest.raises(ParameterError) as err:
        simulate_coverage(book, strata, sizes, MODEL, **kwargs)
    assert err.value.parameter == name


def test_inputs_are_checked_with_stratum_and_rows():
    book, strata, sizes = _skewed_population(300)
    with pytest.raises(InputError) as err:
        simulate_coverage(book, strata, {k: v for k, v in sizes.items() if k != "mid"}, MODEL)
    assert err.value.stratum == "mid"
    with pytest.raises(InputError) as err:
        simulate_coverage(book, strata, {**sizes, "mid": 10_000}, MODEL)
    assert err.value.stratum == "mid" and "holds only" in str(err.value)
    with pytest.raises(InputError) as err:
        simulate_coverage(book, strata, {**sizes, "mid": 0}, MODEL)
    assert err.value.stratum == "mid"
    with pytest.raises(InputError) as err:
        simulate_coverage(book, strata, {**sizes, "nowhere": 3}, MODEL)
    assert err.value.stratum == "nowhere"
    with pytest.raises(InputError) as err:
        simulate_coverage(book, strata, {**sizes, "low": 2.5}, MODEL)
    assert err.value.stratum == "low"
    bad = strata.copy()
    bad[[4, 7]] = ""
    with pytest.raises(InputError) as err:
        simulate_coverage(book, bad, sizes, MODEL)
    assert err.value.rows == (6, 9)
    values = book.astype(object)
    values[2] = "abc"
    with pytest.raises(InputError) as err:
        simulate_coverage(values, strata, sizes, MODEL)
    assert 4 in err.value.rows
    table = pd.DataFrame({"stratum": list(sizes) + ["low"], "size": list(sizes.values()) + [3]})
    with pytest.raises(InputError) as err:
        simulate_coverage(book, strata, table, MODEL)
    assert err.value.rows == (2, 6)
    with pytest.raises(ParameterError) as err:
        simulate_coverage(book, strata, [1, 2, 3], MODEL)
    assert err.value.parameter == "sizes"
    with pytest.raises(ParameterError) as err:
        simulate_coverage(book, strata[:-1], sizes, MODEL)
    assert err.value.parameter == "strata"


def test_methods_that_cannot_be_applied_are_refused():
    book, strata, _ = _skewed_population(300)
    sizes = {"low": 10, "mid": 1, "high": 3, "top": 3}
    with pytest.raises(MethodNotApplicable) as err:
        simulate_coverage(book, strata, sizes, MODEL, single_item="error")
    assert err.value.stratum == "mid"
    counts = pd.Series(strata).value_counts().to_dict()
    with pytest.raises(MethodNotApplicable, match="nothing to average"):
        simulate_coverage(book, strata, {**counts, "low": 2}, MODEL, estimators="regression")
    per = MisstatementModel(error_rate={"low": 0.1}, taint=BetaTaint(0.3))
    with pytest.raises(ParameterError, match="no rate for stratum"):
        simulate_coverage(book, strata, {"low": 10, "mid": 5, "high": 3, "top": 3}, per)
