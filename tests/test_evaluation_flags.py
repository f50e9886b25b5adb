"""Normal-approximation flags raised, and not raised, on strata of known skewness.

A two-point sample with a share p of ones has population-style skewness
g1 = (1 - 2p) / sqrt(p (1 - p)) (a standard result for the Bernoulli
distribution), and the adjusted sample skewness G1 = g1 sqrt(n (n - 1)) / (n - 2)
(Joanes and Gill 1998; scipy.stats.skew(bias=False)). The rules are
Cochran's n > 25 G1^2 (Cochran 1977, s. 2.15), n > 28 + 25 G1^2 (Sugden,
Smith and Jones 2000, constant from memory) and at least 30 items (rule of
thumb, common practice).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from auditmean.evaluation import estimate_total

NORMALITY = {"few-items", "skew-cochran", "skew-studentized", "skew-overall"}


def two_point(n: int, ones: int, N: int = 100_000, label: str = "s", scale: float = 1000.0):
    y = np.r_[np.ones(ones), np.zeros(n - ones)] * scale
    sample = pd.DataFrame({"stratum": label, "audited_value": y})
    strata = pd.DataFrame({"stratum": [label], "count": [N]})
    return sample, strata


def analytic_G1(n: int, ones: int) -> float:
    p = ones / n
    g1 = (1 - 2 * p) / math.sqrt(p * (1 - p))
    return g1 * math.sqrt(n * (n - 1)) / (n - 2)


def codes(r):
    return {f.code for f in r.flags}


@pytest.mark.parametrize(
    "n, ones, expected",
    [
        # p = 0.05: G1 = 4.19, 25 G1^2 = 439 > 100 -> both skewness rules fire
        (100, 5, {"skew-cochran", "skew-studentized", "skew-overall"}),
        # p = 0.5: G1 = 0 -> Cochran passes, 40 > 28 passes, 40 >= 30 items
        (40, 20, set()),
        # p = 0.3, n = 40: G1 = 0.907, 25 G1^2 = 20.6 < 40 but 28 + 20.6 = 48.6 > 40
        (40, 12, {"skew-studentized"}),
        # p = 0.3, n = 60: G1 = 0.896, passes all (60 > 28 + 20.0)
        (60, 18, set()),
        # p = 0.5, n = 20: only the rule of thumb and 28 + 0 fire
        (20, 10, {"few-items", "skew-studentized"}),
    ],
)
def test_flags_on_two_point_strata(n, ones, expected):
    sample, strata = two_point(n, ones)
    r = estimate_total(sample, strata, method="mpu")
    G1 = r.by_stratum["skewness"].iloc[0]
    assert G1 == pytest.approx(analytic_G1(n, ones), rel=1e-10)
    assert G1 == pytest.approx(stats.skew(sample["audited_value"], bias=False), rel=1e-10)  # scipy
    assert codes(r) & NORMALITY == expected


def test_difference_flags_use_the_skewness_of_differences():
    # book 1000 everywhere, 5 of 100 items audited at 0: d is two-point with p = 0.05,
    # skewness -G1 of the ones-and-zeros case; audited values have the same |G1|.
    n, ones = 100, 5
    book = np.full(n, 1000.0)
    audited = book.copy()
    audited[:ones] = 0.0
    sample = pd.DataFrame({"stratum": "s", "book_value": book, "audited_value": audited})
    strata = pd.DataFrame({"stratum": ["s"], "count": [100_000], "book_total": [1e8]})
    r = estimate_total(sample, strata, method="difference")
    assert r.by_stratum["skewness"].iloc[0] == pytest.approx(-analytic_G1(n, ones), rel=1e-10)
    assert {"skew-cochran", "skew-studentized"} <= codes(r)
    assert "few-differences" in codes(r)  # 5 differences, fewer than 20 (common practice)


def test_overall_skewness_from_third_moments_single_stratum():
    n, ones, N = 100, 5, 100_000
    sample, strata = two_point(n, ones, N=N)
    r = estimate_total(sample, strata, method="mpu")
    # third moment of a mean without replacement (Cochran 1977 s. 2.15, from memory):
    # skew = G1 / sqrt(n) * (N - n)(N - 2n) / ((N - 1)(N - 2)(1 - f)^1.5)
    f = n / N
    expected = analytic_G1(n, ones) / math.sqrt(n) * (N - n) * (N - 2 * n) / ((N - 1) * (N - 2) * (1 - f) ** 1.5)
    assert r.skewness == pytest.approx(expected, rel=1e-9)
    assert "skew-overall" in codes(r)  # 0.42 > 0.2


def test_small_skewed_stratum_with_little_weight_does_not_spoil_the_total():
    big, _ = two_point(400, 200, label="big")  # symmetric, heavy weight
    small, _ = two_point(40, 2, label="small", scale=1.0)  # skewed, tiny amounts
    sample = pd.concat([big, small], ignore_index=True)
    strata = pd.DataFrame({"stratum": ["big", "small"], "count": [100_000, 1_000]})
    r = estimate_total(sample, strata, method="mpu")
    assert {f.code for f in r.flags if f.stratum == "small"} >= {"skew-cochran"}
    assert abs(r.skewness) < 0.2 and "skew-overall" not in codes(r)


def test_stratum_examined_in_full_raises_nothing_even_if_skewed():
    sample, strata = two_point(10, 1, N=10)
    r = estimate_total(sample, strata, method="mpu")
    assert r.flags == ()


@pytest.mark.parametrize("seed", range(5))
def test_zero_difference_samples_are_always_flagged(seed):
    rng = np.random.default_rng(seed)
    rows, strata = [], []
    for h in range(3):
        n = int(rng.integers(2, 40))
        x = np.round(rng.lognormal(5, 1, n), 2)
        rows.append(pd.DataFrame({"stratum": f"S{h}", "book_value": x, "audited_value": x}))
        strata.append({"stratum": f"S{h}", "count": n + 50, "book_total": float(x.sum() * 2)})
    sample, strata = pd.concat(rows, ignore_index=True), pd.DataFrame(strata)
    for method in ("difference", "ratio", "combined_ratio", "regression"):
        r = estimate_total(sample, strata, method=method)
        got = [f.stratum for f in r.flags if f.code == "no-differences"]
        assert got == ["S0", "S1", "S2"], method
        assert "interval-unusable" in codes(r)
