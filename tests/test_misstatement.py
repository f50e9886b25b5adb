"""The misstatement model against outside references.

* error counts against the binomial distribution (scipy.stats.binom);
* positions of misstated items against the uniform distribution
  (scipy.stats.chisquare);
* beta taints against scipy.stats.beta (mean and Kolmogorov-Smirnov);
* understatement shares against the binomial test (scipy.stats.binomtest);
* arithmetic shown beside the checks.

Every draw uses a fixed seed, so no check can flake; the p-value floors
(1e-6) and 4-standard-error bounds leave room for any fixed seed.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from auditmean.core import misstatement as cm
from auditmean.coverage import (
    BetaTaint,
    FixedTaint,
    MisstatementModel,
    ObservedTaints,
    UniformTaint,
)
from auditmean.errors import InputError, ParameterError

P_FLOOR = 1e-6


def _book(n=2_000, seed=0):
    return np.round(np.random.default_rng(seed).lognormal(5.0, 1.0, n), 2) + 1.0


# --------------------------------------------------------------------------- error counts


def test_population_error_counts_are_binomial():
    book = _book()
    model = MisstatementModel(error_rate=0.05, taint=FixedTaint(0.5))
    counts = np.array([np.count_nonzero(model.audited_values(book, seed=s) != book) for s in range(300)])
    n, p = book.size, 0.05
    # Binomial(2000, 0.05): mean n p = 100, variance n p (1 - p) = 95 (scipy.stats.binom).
    ref = stats.binom(n, p)
    assert ref.mean() == pytest.approx(100.0) and ref.var() == pytest.approx(95.0)
    assert abs(counts.mean() - ref.mean()) < 4 * math.sqrt(ref.var() / counts.size)
    # Sample variance of K draws has standard error about var * sqrt(2 / (K - 1)) (normal theory).
    assert abs(counts.var(ddof=1) - ref.var()) < 4 * ref.var() * math.sqrt(2 / (counts.size - 1))
    # and no count lies outside the binomial's 1e-6 tails
    assert counts.min() >= ref.ppf(P_FLOOR) and counts.max() <= ref.isf(P_FLOOR)


def test_fresh_error_positions_are_bernoulli_per_item():
    rng = np.random.default_rng(11)
    count, rate, batch = 400, 0.08, 3_000
    rows, pos = cm.error_positions(rng, count, rate, batch)
    per_population = np.bincount(rows, minlength=batch)
    ref = stats.binom(count, rate)  # each of 400 items misstated with probability 0.08
    assert abs(per_population.mean() - ref.mean()) < 4 * math.sqrt(ref.var() / batch)
    assert abs(per_population.var(ddof=1) - ref.var()) < 4 * ref.var() * math.sqrt(2 / (batch - 1))
    # every position equally likely: chi-square goodness of fit (scipy.stats.chisquare)
    hits = np.bincount(pos, minlength=count)
    assert stats.chisquare(hits).pvalue > P_FLOOR
    # positions are distinct within a population and sorted population by population
    key = rows.astype(np.int64) * count + pos
    assert np.all(np.diff(key) > 0)


def test_fresh_error_positions_when_more_gaps_are_needed():
    # A first block of 2 gaps is far too few: every population takes the extension path.
    rng = np.random.default_rng(12)
    rows, pos = cm.error_positions(rng, 300, 0.1, 2_000, width=2)
    per_population = np.bincount(rows, minlength=2_000)
    ref = stats.binom(300, 0.1)
    assert abs(per_population.mean() - ref.mean()) < 4 * math.sqrt(ref.var() / 2_000)
    assert stats.chisquare(np.bincount(pos, minlength=300)).pvalue > P_FLOOR
    assert np.all(np.diff(rows.astype(np.int64) * 300 + pos) > 0)


def test_error_positions_edge_rates():
    rng = np.random.default_rng(1)
    rows, pos = cm.error_positions(rng, 5, 1.0, 3)  # every item misstated
    assert rows.tolist() == [0] * 5 + [1] * 5 + [2] * 5 and pos.tolist() == list(range(5)) * 3
    rows, pos = cm.error_positions(rng, 5, 0.0, 3)
    assert rows.size == 0 and pos.size == 0


def test_per_stratum_rates_apply_to_their_strata():
    book = _book(4_000)
    strata = np.where(np.arange(4_000) < 1_000, "a", " b ")  # labels are stripped: " b " is "b"
    model = MisstatementModel(error_rate={"a": 0.0, "b": 0.2}, taint=FixedTaint(0.3))
    audited = model.audited_values(book, strata, seed=3)
    assert np.all(audited[:1_000] == book[:1_000])
    k = np.count_nonzero(audited[1_000:] != book[1_000:])
    ref = stats.binom(3_000, 0.2)
    assert ref.ppf(P_FLOOR) <= k <= ref.isf(P_FLOOR)


# --------------------------------------------------------------------------- taints


def test_fixed_taint_gives_audited_equal_book_times_one_minus_taint():
    book = _book()
    audited = MisstatementModel(error_rate=0.3, taint=FixedTaint(0.25)).audited_values(book, seed=5)
    hit = audited != book
    # audited = book * (1 - 0.25) on misstated items (arithmetic), to rounding
    np.testing.assert_allclose(audited[hit], 0.75 * book[hit], rtol=1e-15)
    assert hit.any()


def test_uniform_taints_stay_within_bounds_with_understatements():
    rng = np.random.default_rng(2)
    tau = cm.draw_taints(rng, "uniform", np.array([0.1, 0.6]), 0.25, 50_000)
    size = np.abs(tau)
    assert size.min() >= 0.1 and size.max() < 0.6
    # uniform on [0.1, 0.6): KS test against scipy.stats.uniform(loc=0.1, scale=0.5)
    assert stats.kstest(size, stats.uniform(loc=0.1, scale=0.5).cdf).pvalue > P_FLOOR
    # understatement share 25%: binomial test of the number of negative taints
    negative = int(np.sum(tau < 0))
    assert stats.binomtest(negative, tau.size, 0.25).pvalue > P_FLOOR


def test_beta_taints_match_scipy_beta():
    rng = np.random.default_rng(3)
    mean, kappa = 0.3, 5.0
    tau = cm.draw_taints(rng, "beta", np.array([mean, kappa]), 0.0, 100_000)
    ref = stats.beta(mean * kappa, (1 - mean) * kappa)  # shapes a = mu kappa, b = (1 - mu) kappa
    assert ref.mean() == pytest.approx(0.3)
    assert ref.var() == pytest.approx(0.3 * 0.7 / 6.0)  # mu (1 - mu) / (1 + kappa)
    assert abs(tau.mean() - ref.mean()) < 4 * ref.std() / math.sqrt(tau.size)
    assert stats.kstest(tau, ref.cdf).pvalue > P_FLOOR
    assert tau.min() > 0 and tau.max() < 1


def test_observed_taints_resampled_with_their_signs():
    rng = np.random.default_rng(4)
    values = np.array([0.05, 0.2, 1.0, -0.1])
    tau = cm.draw_taints(rng, "observed", values, 0.0, 40_000)
    assert set(np.unique(tau)) == set(values)
    freq = np.array([np.sum(tau == v) for v in values])
    assert stats.chisquare(freq).pvalue > P_FLOOR  # each listed taint equally likely
    assert cm.mean_taint("observed", values, 0.0) == pytest.approx(1.15 / 4)  # mean of the list


def test_mean_taint_arithmetic():
    assert cm.mean_taint("fixed", np.array([0.4]), 0.25) == pytest.approx(0.4 * (1 - 2 * 0.25))
    assert cm.mean_taint("uniform", np.array([0.1, 0.5]), 0.0) == pytest.approx(0.3)
    assert cm.mean_taint("beta", np.array([0.2, 3.0]), 0.5) == pytest.approx(0.0)


# --------------------------------------------------------------------------- large errors


def test_largest_items_by_absolute_value_ties_in_population_order():
    book = np.array([5.0, -9.0, 9.0, 1.0, 9.0])
    assert cm.largest_items(book, 3).tolist() == [1, 2, 4]
    assert cm.largest_items(book, 0).size == 0


def test_large_items_follow_only_their_own_rule():
    book = np.arange(1.0, 101.0)
    # Every ordinary item misstated by 10%; the 5 largest (96..100) misstated by 100% with probability 1.
    m = MisstatementModel(error_rate=1.0, taint=FixedTaint(0.1), large_items=5,
                          large_item_taint=1.0, large_item_probability=1.0)
    audited = m.audited_values(book, seed=0)
    np.testing.assert_allclose(audited[95:], 0.0)
    np.testing.assert_allclose(audited[:95], 0.9 * book[:95], rtol=1e-15)
    # With probability 0 the large items are left clean, whatever the ordinary rate.
    m0 = MisstatementModel(error_rate=1.0, taint=FixedTaint(0.1), large_items=5, large_item_probability=0.0)
    assert np.all(m0.audited_values(book, seed=0)[95:] == book[95:])


def test_large_item_probability_is_binomial():
    book = _book(500)
    m = MisstatementModel(error_rate=0.0, taint=FixedTaint(0.1), large_items=20,
                          large_item_taint=0.5, large_item_probability=0.3)
    top = cm.largest_items(book, 20)
    hits = sum(int(np.sum(m.audited_values(book, seed=s)[top] != book[top])) for s in range(200))
    assert stats.binomtest(hits, 20 * 200, 0.3).pvalue > P_FLOOR


# --------------------------------------------------------------------------- expected misstatement


def test_expected_misstatement_arithmetic_and_monte_carlo():
    book = _book(1_000)
    m = MisstatementModel(error_rate=0.1, taint=UniformTaint(0.2, 0.4), large_items=3,
                          large_item_taint=1.0, large_item_probability=0.5)
    top = cm.largest_items(book, 3)
    ordinary = np.setdiff1d(np.arange(1_000), top)
    # E = 0.1 * 0.3 * sum(ordinary book) + 0.5 * 1.0 * sum(largest 3)   (linearity of expectation)
    expected = 0.1 * 0.3 * book[ordinary].sum() + 0.5 * book[top].sum()
    assert m.expected_misstatement(book) == pytest.approx(expected, rel=1e-12)
    draws = np.array([np.sum(book - m.audited_values(book, seed=s)) for s in range(400)])
    assert abs(draws.mean() - expected) < 4 * draws.std(ddof=1) / math.sqrt(draws.size)


# --------------------------------------------------------------------------- validation and records


@pytest.mark.parametrize(
    ("kwargs", "name"),
    [
        (dict(error_rate=1.5, taint=FixedTaint(0.5)), "error_rate"),
        (dict(error_rate=-0.1, taint=FixedTaint(0.5)), "error_rate"),
        (dict(error_rate={"a": 0.1, " a": 0.2}, taint=FixedTaint(0.5)), "error_rate"),
        (dict(error_rate=0.1, taint=0.5), "taint"),
        (dict(error_rate=0.1, taint=FixedTaint(0.5), understatement_share=2), "understatement_share"),
        (dict(error_rate=0.1, taint=ObservedTaints((0.1, -0.2)), understatement_share=0.1), "understatement_share"),
        (dict(error_rate=0.1, taint=FixedTaint(0.5), large_items=-1), "large_items"),
        (dict(error_rate=0.1, taint=FixedTaint(0.5), large_items=2, large_item_taint=0.0), "large_item_taint"),
    ],
)
def test_model_refuses_bad_parameters(kwargs, name):
    with pytest.raises(ParameterError) as err:
        MisstatementModel(**kwargs)
    assert err.value.parameter == name


@pytest.mark.parametrize(
    ("make", "name"),
    [
        (lambda: FixedTaint(0.0), "taint.value"),
        (lambda: UniformTaint(0.5, 0.5), "taint.high"),
        (lambda: UniformTaint(-0.1, 0.5), "taint.low"),
        (lambda: BetaTaint(1.0), "taint.mean"),
        (lambda: BetaTaint(0.3, 0.0), "taint.concentration"),
        (lambda: ObservedTaints(()), "taint.values"),
        (lambda: ObservedTaints((0.1, 0.0)), "taint.values"),
    ],
)
def test_taints_refuse_bad_parameters(make, name):
    with pytest.raises(ParameterError) as err:
        make()
    assert err.value.parameter == name


def test_per_stratum_rates_must_cover_every_stratum():
    book = _book(10)
    strata = ["a"] * 5 + ["b"] * 5
    m = MisstatementModel(error_rate={"a": 0.1}, taint=FixedTaint(0.5))
    with pytest.raises(ParameterError, match="no rate for stratum 'b'"):
        m.audited_values(book, strata, seed=1)
    with pytest.raises(ParameterError, match="give each item's stratum"):
        m.audited_values(book, seed=1)
    m2 = MisstatementModel(error_rate={"a": 0.1, "b": 0.1, "c": 0.1}, taint=FixedTaint(0.5))
    with pytest.raises(ParameterError, match="'c' is not in the population"):
        m2.audited_values(book, strata, seed=1)
    with pytest.raises(InputError) as err:
        m.audited_values(book, ["a"] * 9 + [" "], seed=1)
    assert err.value.rows == (11,)  # 0-based item 9 is spreadsheet row 11


def test_model_round_trips_through_dict_and_describes_itself():
    for taint in (FixedTaint(0.4), UniformTaint(0.1, 0.3), BetaTaint(0.2, 8.0), ObservedTaints((0.5, -0.25))):
        u = 0.0 if isinstance(taint, ObservedTaints) else 0.1
        m = MisstatementModel(error_rate={"1": 0.02, "2": 0.05}, taint=taint, understatement_share=u,
                              large_items=3, large_item_taint=0.8, large_item_probability=0.25)
        assert MisstatementModel.from_dict(m.to_dict()) == m
        text = m.summary()
        assert "the 3 largest items" in text and "25%" in text
    assert "2.5% of items misstated" in MisstatementModel(error_rate=0.025, taint=FixedTaint(1.0)).summary()
