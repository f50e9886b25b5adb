"""Second-opinion intervals against exact distributions and published properties.

References beside each check:
- Rao and Wu (1988, JASA 83, 231-241): with m_h = n_h - 1 the rescaled
  bootstrap variance of a linear statistic equals the usual unbiased
  variance estimator with the finite-population correction.
- For a sample of ones and zeros, the bootstrap replicate of the total is
  N [(1 - lambda) ybar + lambda K / m] with K ~ Binomial(m, k/n): its exact
  distribution comes from scipy.stats.binom.
- The exact sampling distribution of the number of ones in a sample from a
  two-point population is hypergeometric (scipy.stats.hypergeom).
- Johnson (1978, JASA 73, 536-544): with no skewness the interval is
  Student's t; the limits solve t1 = +/- t_{n-1}.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from auditmean.core.bootstrap import rescaling_bootstrap
from auditmean.core.johnson import johnson_limits
from auditmean.evaluation import estimate_total
from auditmean.evaluation.second_opinion import second_opinion


def _ones_sample(n, k, N):
    y = np.r_[np.ones(k), np.zeros(n - k)]
    return pd.DataFrame({"stratum": "s", "audited_value": y}), pd.DataFrame({"stratum": ["s"], "count": [N]})


def test_bootstrap_distribution_of_a_two_point_sample_is_the_binomial_one():
    n, k, N, B = 40, 6, 400, 40_000
    codes = np.zeros(n, dtype=np.intp)
    y = np.r_[np.ones(k), np.zeros(n - k)]
    boot = rescaling_bootstrap("mpu", codes, np.array([N]), y, None, None, replicates=B, seed=11)
    m, lam, ybar = n - 1, math.sqrt(1 - n / N), k / n
    support = np.arange(m + 1)
    values = N * ((1 - lam) * ybar + lam * support / m)
    exact_cdf = stats.binom.cdf(support, m, k / n)  # scipy's binomial
    emp_cdf = np.array([(boot.replicates <= v + 1e-9).mean() for v in values])
    tol = 4 * np.sqrt(exact_cdf * (1 - exact_cdf) / B) + 1e-12  # 4 Monte Carlo standard errors
    assert np.all(np.abs(emp_cdf - exact_cdf) <= tol)


def test_bootstrap_variance_matches_the_unbiased_estimator():
    rng = np.random.default_rng(5)
    rows, strata = [], []
    for h, (n, N) in enumerate([(30, 300), (50, 2000), (20, 40)]):
        y = rng.gamma(2.0, 100.0, n)
        rows.append(pd.DataFrame({"stratum": f"S{h}", "audited_value": y}))
        strata.append({"stratum": f"S{h}", "count": N})
    sample, strata = pd.concat(rows, ignore_index=True), pd.DataFrame(strata)
    r = estimate_total(sample, strata, method="mpu")
    so = second_opinion(sample, strata, "mpu", replicates=40_000, seed=3)
    # Rao and Wu 1988: E*(var*) = v(Y_hat); 40,000 replicates give about 1% relative error
    assert so.bootstrap_std_error**2 == pytest.approx(r.std_error**2, rel=0.04)


def test_bootstrap_close_to_normal_interval_on_a_normal_population():
    rng = np.random.default_rng(8)
    y = rng.normal(1000.0, 100.0, 300)
    sample = pd.DataFrame({"stratum": "s", "audited_value": y})
    strata = pd.DataFrame({"stratum": ["s"], "count": [30_000]})
    r = estimate_total(sample, strata, method="mpu", confidence=0.90)
    so = second_opinion(sample, strata, "mpu", confidence=0.90, replicates=20_000, seed=1)
    half = r.upper - r.total
    # the central limit theorem (common knowledge): with n = 300 normal values the two agree
    assert so.bootstrap_lower == pytest.approx(r.lower, abs=0.05 * half)
    assert so.bootstrap_upper == pytest.approx(r.upper, abs=0.05 * half)


def _exact_coverage(N, K, n, confidence, which):
    """Coverage of the mean-per-unit interval, exactly, over the hypergeometric law of k."""
    total = 0.0
    for k in range(0, min(K, n) + 1):
        p = stats.hypergeom.pmf(k, N, K, n)  # scipy: population N, K ones, sample n
        if p < 1e-12:
            continue
        sample, strata = _ones_sample(n, k, N)
        if which == "normal":
            r = estimate_total(sample, strata, method="mpu", confidence=confidence)
            lo, hi = r.lower, r.upper
        else:
            so = second_opinion(sample, strata, "mpu", confidence=confidence, replicates=2000, seed=k)
            lo, hi = so.bootstrap_lower, so.bootstrap_upper
        total += p * (lo <= K <= hi)
    return total


def test_exact_coverage_on_two_point_populations():
    # Balanced errors (30% of items): both intervals close to their nominal 90%.
    for which in ("normal", "bootstrap"):
        c = _exact_coverage(N=1000, K=300, n=60, confidence=0.90, which=which)
        assert abs(c - 0.90) < 0.04, (which, c)
    # Rare errors (4 of 1,000 items): with probability hypergeom.pmf(0) = 0.81 the sample
    # holds no error and both intervals collapse to zero width: coverage far below nominal.
    p0 = stats.hypergeom.pmf(0, 1000, 4, 50)
    assert p0 == pytest.approx(0.8146, abs=1e-3)
    for which in ("normal", "bootstrap"):
        c = _exact_coverage(N=1000, K=4, n=50, confidence=0.90, which=which)
        assert c <= 1 - p0 + 1e-9, (which, c)


def test_bootstrap_is_reproducible_from_its_seed_and_leaves_full_strata_fixed():
    rng = np.random.default_rng(2)
    y = rng.gamma(1.0, 50.0, 40)
    sample = pd.DataFrame({"stratum": ["s"] * 30 + ["top"] * 10, "audited_value": y})
    strata = pd.DataFrame({"stratum": ["s", "top"], "count": [500, 10]})
    a = second_opinion(sample, strata, "mpu", seed="engagement 2024 ✓")
    b = second_opinion(sample, strata, "mpu", seed="engagement 2024 ✓")
    c = second_opinion(sample, strata, "mpu", seed=1)
    assert (a.bootstrap_lower, a.bootstrap_upper) == (b.bootstrap_lower, b.bootstrap_upper)
    assert (a.bootstrap_lower, a.bootstrap_upper) != (c.bootstrap_lower, c.bootstrap_upper)
    codes = (sample["stratum"] == "top").to_numpy().astype(np.intp)
    boot = rescaling_bootstrap("mpu", codes, np.array([500, 10]), y, None, None, replicates=500, seed=a.seed)
    alone = rescaling_bootstrap("mpu", np.zeros(30, dtype=np.intp), np.array([500]), y[:30], None, None, replicates=500, seed=a.seed)
    # the full stratum adds its exact total to every replicate and draws no random numbers
    assert np.allclose(boot.replicates, alone.replicates + y[30:].sum(), rtol=1e-13)


@pytest.mark.parametrize("method", ["difference", "ratio", "combined_ratio", "regression"])
def test_bootstrap_runs_for_every_method_and_centres_on_the_estimate(method):
    rng = np.random.default_rng(4)
    x = rng.lognormal(6, 1, 80)
    y = x * np.where(rng.random(80) < 0.4, rng.uniform(0.6, 1.1, 80), 1.0)
    sample = pd.DataFrame({"stratum": np.repeat(["a", "b"], 40), "book_value": x, "audited_value": y})
    strata = pd.DataFrame({"stratum": ["a", "b"], "count": [800, 900], "book_total": [x[:40].mean() * 800, x[40:].mean() * 900]})
    r = estimate_total(sample, strata, method=method)
    so = second_opinion(sample, strata, method, replicates=4000, seed=9)
    assert so.bootstrap_lower < r.total < so.bootstrap_upper
    # the bootstrap SE estimates the same quantity as the linearised one (Rao and Wu 1988)
    assert so.bootstrap_std_error == pytest.approx(r.std_error, rel=0.2)


# ------------------------------------------------------------------ Johnson


def test_johnson_without_skewness_is_students_t():
    jl = johnson_limits(mean=10.0, se=2.0, s2=16.0, mu3=0.0, n=4, confidence=0.95)
    q = stats.t.ppf(0.975, 3)  # scipy
    assert jl.lower == pytest.approx(10.0 - q * 2.0, rel=1e-13)
    assert jl.upper == pytest.approx(10.0 + q * 2.0, rel=1e-13)


@pytest.mark.parametrize("mu3", [5.0, 40.0, -25.0])
def test_johnson_limits_solve_the_modified_statistic(mu3):
    mean, s2, n = 50.0, 30.0, 25
    se = math.sqrt(s2 / n)
    jl = johnson_limits(mean, se, s2, mu3, n, 0.90)
    q = stats.t.ppf(0.95, n - 1)

    def t1(mu):  # Johnson 1978, eq. for the modified statistic
        d = mean - mu
        return (d + mu3 / (6 * s2 * n) + mu3 * d * d / (3 * s2 * s2)) / se

    assert not jl.linearised
    assert t1(jl.lower) == pytest.approx(q, rel=1e-10)
    assert t1(jl.upper) == pytest.approx(-q, rel=1e-10)
    t_lo, t_hi = mean - q * se, mean + q * se
    if mu3 > 0:  # positive skew moves the interval up
        assert jl.lower > t_lo and jl.upper > t_hi
    else:
        assert jl.lower < t_lo and jl.upper < t_hi


def test_johnson_improves_upper_coverage_on_an_exponential_population():
    # Direction reported by Johnson (1978): for a right-skewed population the t upper
    # bound covers too rarely, the modified one more often. Exponential data from numpy.
    rng = np.random.default_rng(12)
    reps, n, conf = 4000, 15, 0.95
    data = rng.exponential(1.0, (reps, n))
    mean = data.mean(axis=1)
    s2 = data.var(axis=1, ddof=1)
    d = data - mean[:, None]
    k3 = n * (d**3).sum(axis=1) / ((n - 1) * (n - 2))
    q = stats.t.ppf(conf, n - 1)
    t_cover = np.mean(mean + q * np.sqrt(s2 / n) >= 1.0)
    j_cover = np.mean([
        johnson_limits(m, math.sqrt(v / n), v, k, n, conf, sides="upper").upper >= 1.0
        for m, v, k in zip(mean, s2, k3)
    ])
    assert t_cover < conf - 0.02  # the t bound under-covers (about 0.89 here)
    assert abs(j_cover - conf) < abs(t_cover - conf)


def test_second_opinion_gives_johnson_for_a_single_sampled_stratum():
    rng = np.random.default_rng(1)
    y = rng.lognormal(3, 1.2, 40)
    top = np.array([5000.0, 7000.0])
    sample = pd.DataFrame({"stratum": ["s"] * 40 + ["top"] * 2, "audited_value": np.r_[y, top]})
    strata = pd.DataFrame({"stratum": ["s", "top"], "count": [2000, 2]})
    so = second_opinion(sample, strata, "mpu", seed=0)
    s2 = y.var(ddof=1)
    k3 = 40 * ((y - y.mean()) ** 3).sum() / (39 * 38)
    se = math.sqrt(s2 * (1 - 40 / 2000) / 40)
    jl = johnson_limits(y.mean(), se, s2, k3, 40, 0.95)
    assert so.johnson_lower == pytest.approx(12000.0 + 2000 * jl.lower, rel=1e-12)
    assert so.johnson_upper == pytest.approx(12000.0 + 2000 * jl.upper, rel=1e-12)
