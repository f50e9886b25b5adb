"""Tests of auditmean.core.sizing: sample sizes, the precision target and allocation.

Every expected number is recomputed in the test from the published formula
(with scipy's normal quantiles) or worked by hand beside the check.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import norm

from auditmean.core import sizing as sz

# ---------------------------------------------------------------------------
# quantiles, unstratified size, allowance
# ---------------------------------------------------------------------------


def test_quantiles_match_normal_tables():
    # Standard normal table: one-sided 5% -> 1.645, 10% -> 1.282; two-sided 5% -> 1.960.
    assert sz.z_acceptance(0.05) == pytest.approx(1.645, abs=5e-4)
    assert sz.z_acceptance(0.10) == pytest.approx(1.282, abs=5e-4)
    assert sz.z_rejection(0.05) == pytest.approx(1.960, abs=5e-4)
    assert sz.z_rejection(None) == 0.0


def test_sample_size_without_risk_of_incorrect_rejection():
    # n0 = (z_A S N / (TM - EM))^2 (Roberts 1978; AICPA audit sampling guide, from memory),
    # n = n0 / (1 + n0 / N) rounded up (Cochran 1977, section 4.4).
    # z_A = 1.6448536 for RIA 0.05; n0 = (1.6448536 * 50 * 2000 / 10000)^2 = 16.448536^2 = 270.554;
    # n = 270.554 / (1 + 270.554 / 2000) = 238.32 -> 239.
    res = sz.sample_size(50.0, 2000, 10000.0, 0.0, 0.05, None)
    z_a = norm.ppf(0.95)
    n0 = (z_a * 50.0 * 2000 / 10000.0) ** 2
    assert res.size_before_correction == pytest.approx(n0, rel=1e-12)
    assert res.size == math.ceil(n0 / (1 + n0 / 2000)) == 239
    # Allowance with RIA alone is the whole of TM - EM; the target SE is (TM - EM) / z_A.
    assert res.planned_allowance == pytest.approx(10000.0)
    assert res.target_std_error == pytest.approx(10000.0 / z_a)


def test_sample_size_with_both_risks_and_expected_misstatement():
    # n0 = ((z_A + z_R) S N / (TM - EM))^2 with z_A one-sided (RIA 0.10 -> 1.28155) and z_R
    # two-sided (RIR 0.20 -> 1.28155). S=120, N=8000, TM=60000, EM=12000:
    # n0 = (2.5631 * 120 * 8000 / 48000)^2 = 51.262^2 = 2627.8; n = 2627.8 / 1.32847 = 1978.0 -> 1979.
    res = sz.sample_size(120.0, 8000, 60000.0, 12000.0, 0.10, 0.20)
    z_a, z_r = norm.ppf(0.90), norm.ppf(0.90)
    n0 = ((z_a + z_r) * 120.0 * 8000 / 48000.0) ** 2
    assert res.size == math.ceil(n0 / (1 + n0 / 8000))
    assert 1970 < res.size < 1990  # the hand arithmetic above
    # Planned allowance A = (TM - EM) z_R / (z_A + z_R): equal quantiles split 48000 in half.
    assert res.planned_allowance == pytest.approx(24000.0)


def test_planned_allowance_split():
    # A = (TM - EM) z_R / (z_A + z_R); RIA 0.05 (1.6449), RIR 0.10 two-sided (1.6449): half of TM - EM.
    z_a, z_r = sz.z_acceptance(0.05), sz.z_rejection(0.10)
    assert sz.planned_allowance(100.0, 20.0, z_a, z_r) == pytest.approx(40.0)
    # RIA 0.10 (1.2816), RIR 0.05 two-sided (1.9600): A = 80 * 1.96 / 3.2416 = 48.37.
    z_a, z_r = norm.ppf(0.90), norm.ppf(0.975)
    assert sz.planned_allowance(100.0, 20.0, z_a, z_r) == pytest.approx(80 * z_r / (z_a + z_r))
    assert sz.planned_allowance(100.0, 20.0, z_a, z_r) == pytest.approx(48.37, abs=0.01)


def test_rounding_ignores_float_noise():
    # Choose S so that n0 = 125 exactly in real arithmetic with N = 500: n = 125 / 1.25 = 100.
    z_a = norm.ppf(0.90)
    s = math.sqrt(125.0) * 1000.0 / (z_a * 500)
    assert sz.sample_size(s, 500, 1000.0, 0.0, 0.10, None).size == 100
    assert sz.ceil_size(100.00000000001) == 100
    assert sz.ceil_size(100.001) == 101
    assert sz.ceil_size(0.0) == 0


def test_sample_size_never_above_population():
    # Tolerable misstatement tiny against the spread: n0 huge, n -> N (never above).
    assert sz.sample_size(1000.0, 40, 1.0, 0.0, 0.05, 0.05).size == 40


# ---------------------------------------------------------------------------
# stratified size for a precision target
# ---------------------------------------------------------------------------


def test_neyman_size_is_cochran_5_25():
    # n = (sum N_h S_h)^2 / (V + sum N_h S_h^2) (Cochran 1977, section 5.9).
    # N = 100, 200, 300; S = 10, 20, 5; V = 50^2 * 100 = 250000:
    # sum N S = 1000 + 4000 + 1500 = 6500; sum N S^2 = 10000 + 80000 + 7500 = 97500;
    # n = 6500^2 / (250000 + 97500) = 42250000 / 347500 = 121.58.
    N = np.array([100, 200, 300])
    S = np.array([10.0, 20.0, 5.0])
    assert sz.neyman_size(N, S, 250000.0) == pytest.approx(42250000 / 347500)
    # No share exceeds its count: 121.58 * (1000, 4000, 1500) / 6500 = 18.7, 74.8, 28.1.


def test_neyman_size_examines_overflowing_stratum_in_full():
    # Cochran 1977, section 5.8: stratum 1 (N=20, S=1000) would get more than its 20 items, so
    # it is examined in full and the formula is applied to stratum 2 alone:
    # n2 = (1000 * 10)^2 / (V + 1000 * 10^2) with V = 1e6: 1e8 / 1.1e6 = 90.909; n = 20 + 90.909.
    N = np.array([20, 1000])
    S = np.array([1000.0, 10.0])
    V = 1e6
    t = 20 * 1000 + 1000 * 10
    first_pass = t**2 / (V + 20 * 1000**2 + 1000 * 100) * (20 * 1000) / t
    assert first_pass > 20  # the share that forces the stratum to be examined in full
    assert sz.neyman_size(N, S, V) == pytest.approx(20 + 1e8 / 1.1e6)


def test_one_stratum_plan_equals_unstratified_formula():
    # With one stratum, Neyman weights and no minimum the stratified route gives
    # ceil(n0 / (1 + n0 / N)) with n0 = N^2 S^2 / V and V = ((TM - EM) / (z_A + z_R))^2.
    for s, n_items, tm, ria, rir in [(50.0, 2000, 10000.0, 0.05, None), (120.0, 8000, 60000.0, 0.1, 0.2), (3.0, 90, 40.0, 0.05, 0.1)]:
        unstrat = sz.sample_size(s, n_items, tm, 0.0, ria, rir)
        v = unstrat.target_std_error**2
        strat = sz.sizes_for_precision(np.array([n_items]), np.array([s]), v, "neyman", 0, np.array([False]))
        assert int(strat.sizes[0]) == unstrat.size


def test_variance_of_total():
    # V = sum N_h (N_h - n_h) S_h^2 / n_h (Cochran 1977, section 5.3):
    # 100 * 90 * 4 / 10 + 50 * 0 * 9 / 50 = 3600.
    assert sz.variance_of_total(np.array([100, 50]), np.array([2.0, 3.0]), np.array([10, 50])) == pytest.approx(3600)
    assert sz.variance_of_total(np.array([100]), np.array([2.0]), np.array([0])) == math.inf
    assert sz.variance_of_total(np.array([100]), np.array([0.0]), np.array([0])) == 0.0


def test_sizes_for_precision_take_all_and_minimum():
    N = np.array([500, 300, 12])
    S = np.array([40.0, 90.0, 5000.0])
    take_all = np.array([False, False, True])
    V = 300.0**2 * 1000
    res = sz.sizes_for_precision(N, S, V, "neyman", 5, take_all)
    assert res.sizes[2] == 12  # the top stratum is examined in full
    assert res.variance <= V
    # Removing one item anywhere breaks the target, so the total is the smallest for this rule:
    smaller = sz.allocate(int(res.sizes[:2].sum()) - 1, N[:2], S[:2], "neyman", 5)
    assert sz.variance_of_total(N[:2], S[:2], smaller) > V


@settings(max_examples=60, deadline=None)
@given(
    counts=st.lists(st.integers(1, 400), min_size=1, max_size=6),
    data=st.data(),
    rule=st.sampled_from(["neyman", "proportional", "equal"]),
    minimum=st.integers(0, 5),
)
def test_sizes_for_precision_meet_target_with_fewest_items(counts, data, rule, minimum):
    N = np.array(counts)
    S = np.array(data.draw(st.lists(st.floats(0, 1e3), min_size=len(counts), max_size=len(counts))))
    # A target between "examine everything" and "examine very little".
    full_var = sz.variance_of_total(N, S, np.minimum(np.maximum(minimum, 1), N))
    if not (full_var > 0):
        return
    V = full_var * data.draw(st.floats(0.01, 0.9))
    res = sz.sizes_for_precision(N, S, V, rule, minimum, np.zeros(N.size, dtype=bool))
    assert res.variance <= V * (1 + 1e-9)
    assert np.all(res.sizes <= N)
    assert np.all(res.sizes >= np.minimum(minimum, N))
    # The continuous clipped allocation meets the target exactly (unless the bounds alone do).
    v_cont = sz.variance_of_total(N, S, res.continuous)
    assert v_cont <= V * (1 + 1e-9)
    lo = np.minimum(np.where(S * S > 0, max(minimum, 1), minimum), N)  # spread needs an item
    if res.continuous.sum() > lo.sum() + 1e-9:
        assert v_cont == pytest.approx(V, rel=1e-8)
    # The whole total is the first from ceil(continuous total) up whose allocation meets the target.
    total = int(res.sizes.sum())
    first = max(sz.ceil_size(float(res.continuous.sum())), int(lo.sum()))
    assert total >= first
    w = sz.allocation_weights(rule, N, S)
    for t in range(first, total):
        assert sz.variance_of_total(N, S, sz._allocate_within(t, N, w, lo)) > V


# ---------------------------------------------------------------------------
# allocation
# ---------------------------------------------------------------------------


def test_largest_remainder_by_hand():
    # Proportional, N = 35, 33, 32, total 10: shares 3.5, 3.3, 3.2 -> floors 3, 3, 3, one item left,
    # it goes to the largest remainder (0.5): 4, 3, 3.
    assert sz.allocate(10, np.array([35, 33, 32]), np.zeros(3), "proportional", 0).tolist() == [4, 3, 3]
    # Equal shares of 10 among 3: 3.33 each, the tie goes to the stratum listed first: 4, 3, 3.
    assert sz.allocate(10, np.array([50, 50, 50]), np.zeros(3), "equal", 0).tolist() == [4, 3, 3]


def test_neyman_surplus_goes_to_the_others():
    # N = 10, 1000; S = 1000, 1: Neyman shares of 50 are 50 * 10000/11000 = 45.5 and 4.5.
    # The first is capped at its 10 items (Cochran 1977, section 5.8); the other gets the rest, 40.
    assert sz.allocate(50, np.array([10, 1000]), np.array([1000.0, 1.0]), "neyman", 0).tolist() == [10, 40]


def test_zero_spread_strata_get_the_minimum():
    # Neyman weight N_h S_h = 0 for the second stratum: it keeps the minimum 3, the rest goes to the first.
    assert sz.allocate(20, np.array([100, 100]), np.array([5.0, 0.0]), "neyman", 3).tolist() == [17, 3]
    # Once every stratum with weight is examined in full, the rest is shared by count (our rule):
    # 10 + 12 items; 12 left for two zero-spread strata of 30 and 10 items -> 9 and 3.
    out = sz.allocate(22, np.array([10, 30, 10]), np.array([5.0, 0.0, 0.0]), "neyman", 0)
    assert out.tolist() == [10, 9, 3]


@settings(max_examples=80, deadline=None)
@given(
    counts=st.lists(st.integers(0, 500), min_size=1, max_size=8),
    data=st.data(),
    rule=st.sampled_from(["neyman", "proportional", "equal"]),
    minimum=st.integers(0, 10),
)
def test_allocation_invariants(counts, data, rule, minimum):
    N = np.array(counts)
    S = np.array(data.draw(st.lists(st.floats(0, 1e4), min_size=len(counts), max_size=len(counts))))
    lo = np.minimum(minimum, N)
    total = data.draw(st.integers(int(lo.sum()), int(N.sum())))
    n = sz.allocate(total, N, S, rule, minimum)
    assert n.dtype == np.int64
    assert int(n.sum()) == total  # sizes add up exactly
    assert np.all(n >= lo) and np.all(n <= N)  # bounds
    # Continuous shares: n_h = lambda w_h for strata strictly inside their bounds (proportionality).
    w = sz.allocation_weights(rule, N, S)
    x = sz.continuous_allocation(float(total), w, lo.astype(float), N.astype(float), N)
    assert x.sum() == pytest.approx(total, abs=1e-6)
    inside = (x > lo + 1e-9) & (x < N - 1e-9) & (w > 0)
    if inside.sum() >= 2:
        ratios = x[inside] / w[inside]
        assert np.allclose(ratios, ratios[0], rtol=1e-9)
    # Whole sizes stay within one item of the continuous shares (largest remainders).
    assert np.all(np.abs(n - x) < 1 + 1e-9)
