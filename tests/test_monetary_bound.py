"""Evaluation of a monetary-unit sample: the bounds, the record and the checks at the boundary.

Outside sources, named beside each check: hand arithmetic written in the test
(Stringer's formula with factors from scipy.stats.chi2), scipy.stats.binomtest
(Clopper-Pearson), confseq 0.0.11 (the betting capital process, values
recorded, and live when confseq is installed), and a plain-Python
re-implementation of Waudby-Smith and Ramdas (2024) written from the paper.
"""

from __future__ import annotations

import bisect
import hashlib
import json
import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from auditmean import InputError, ParameterError
from auditmean.core import monetary as cm
from auditmean.monetary_bound import METHODS, MonetaryUnitBound, monetary_unit_bound

# ---------------------------------------------------------------------------
# a selection by the shared contract's rule (MUS_SPEC.md), written independently of the package


def spec_selection(items: pd.DataFrame, n: int, seed: str) -> pd.DataFrame:
    """The monetary-unit selection rule of the shared contract, with hashlib and Python integers only."""
    rows = sorted(
        ((str(i).strip(), float(b)) for i, b in zip(items["item_id"], items["book_value"])), key=lambda r: r[0]
    )
    rows = [(i, b, round(b * 100)) for i, b in rows if round(b * 100) > 0]
    ends, total = [], 0
    for _, _, c in rows:
        total += c
        ends.append(total)
    units: dict[int, list[int]] = {}
    for k in range(1, n + 1):
        u = int(hashlib.sha256(f"{seed}:unit:{k}".encode()).hexdigest()[:13], 16)
        p = u * total // 2**52
        units.setdefault(bisect.bisect_right(ends, p), []).append(k)
    out = []
    for j, (item, book, c) in enumerate(rows):
        full = c * n >= total
        ks = units.get(j, [])
        if ks or full:
            out.append({"item_id": item, "book_value": book, "hits": len(ks), "examined_in_full": full,
                        "units": " ".join(map(str, ks))})
    frame = pd.DataFrame(out)
    frame.attrs["book_total"] = total / 100
    return frame


# ---------------------------------------------------------------------------
# a small sample worked by hand

# Book total 1,000,000, n = 10 draws, interval 100,000. Item Z (150,000) is examined in full and
# absorbs draw 5; nine draws fall in the remainder, B_r = 1,000,000 - 150,000 = 850,000.
# Taints: B 0.5 (draw 1), C 0.2 (draw 2), D -0.1 (draw 4, an understatement), the rest 0.
WORKED = pd.DataFrame(
    {
        "item_id": ["A", "B", "C", "D", "E", "F", "G", "H", "Z"],
        "book_value": [20_000.0, 10_000.0, 5_000.0, 8_000.0, 30_000.0, 1_000.0, 2_500.0, 99_999.0, 150_000.0],
        "hits": [2, 1, 1, 1, 1, 1, 1, 1, 1],
        "examined_in_full": [False] * 8 + [True],
        "units": ["3 7", "1", "2", "4", "6", "8", "9", "10", "5"],
        "audited_value": [20_000.0, 5_000.0, 4_000.0, 8_800.0, 30_000.0, 1_000.0, 2_500.0, 99_999.0, 140_000.0],
    }
)
F0, F1, F2 = 2.995732, 4.743865, 6.295794  # scipy.stats.chi2.ppf(0.95, 2k + 2) / 2, k = 0, 1, 2


def test_worked_factors_are_the_chi_square_ones():
    # scipy.stats.chi2, to 6 decimals, for the factors the hand arithmetic below uses.
    for k, f in enumerate((F0, F1, F2)):
        assert stats.chi2.ppf(0.95, 2 * k + 2) / 2 == pytest.approx(f, abs=5e-7)


def test_stringer_hand_worked():
    r = monetary_unit_bound(WORKED, 1_000_000, 10, 0.95, "stringer")
    # Hand arithmetic:
    #   exact in full = 150,000 - 140,000 = 10,000; B_r = 850,000; n_r = 9
    #   U = [F0 + 0.5 (F1 - F0) + 0.2 (F2 - F1)] / 9
    #     = [2.995732 + 0.5 x 1.748133 + 0.2 x 1.551929] / 9 = 4.180185 / 9 = 0.464465
    #   upper = 10,000 + 850,000 x 0.464465 = 404,795.2
    assert r.exact_in_full == 10_000
    assert r.remainder_total == 850_000
    assert r.draws == 9 and r.sample_size == 10
    assert r.upper_mean_taint == pytest.approx((F0 + 0.5 * (F1 - F0) + 0.2 * (F2 - F1)) / 9, abs=1e-7)
    assert r.upper == pytest.approx(404_795.2, abs=0.1)
    #   projected = 10,000 + 850,000 x (0.5 + 0.2 - 0.1) / 9 = 10,000 + 56,666.67 = 66,666.67
    assert r.projected == pytest.approx(66_666.67, abs=0.01)
    #   understatement: U' = [F0 + 0.1 (F1 - F0)] / 9 = 3.170545 / 9 = 0.352283
    #   understatement_upper = -10,000 + 850,000 x 0.352283 = 289,440.4
    assert r.understatement_upper == pytest.approx(289_440.4, abs=0.1)
    assert r.lower_understatement == r.understatement_upper
    #   projected understatement: 850,000 x 0.1 / 9 = 9,444.44 (nothing understated among items in full)
    assert r.projected_understatement == pytest.approx(9_444.44, abs=0.01)
    assert r.errors == 2 and r.understatement_errors == 1
    assert r.items == 9 and r.items_in_full == 1
    assert r.guarantee.startswith("no general proof")


def test_stringer_binomial_basis_hand_worked():
    # Binomial factors: p(k) = Clopper-Pearson upper limit after k errors in 9 draws (scipy binomtest),
    # U = p(0) + 0.5 (p(1) - p(0)) + 0.2 (p(2) - p(1)) = 0.283129 + 0.5 x 0.146007 + 0.2 x 0.120506
    #   = 0.380233; upper = 10,000 + 850,000 x 0.380233 = 333,198.4
    p = [stats.binomtest(k, 9, alternative="less").proportion_ci(0.95, method="exact").high for k in range(3)]
    r = monetary_unit_bound(WORKED, 1_000_000, 10, 0.95, "stringer", basis="binomial")
    assert r.upper_mean_taint == pytest.approx(p[0] + 0.5 * (p[1] - p[0]) + 0.2 * (p[2] - p[1]), rel=1e-9)
    assert r.upper == pytest.approx(333_198.4, abs=0.1)
    assert r.basis == "binomial"


def test_count_hand_worked():
    # Two draws with an overstatement of nine: U = Clopper-Pearson upper limit (scipy binomtest) = 0.549642;
    # upper = 10,000 + 850,000 x 0.549642 = 477,195.4
    ci = stats.binomtest(2, 9, alternative="less").proportion_ci(0.95, method="exact")
    r = monetary_unit_bound(WORKED, 1_000_000, 10, 0.95, "count")
    assert r.upper_mean_taint == pytest.approx(ci.high, rel=1e-9)
    assert r.upper == pytest.approx(10_000 + 850_000 * ci.high, rel=1e-12)
    assert r.upper == pytest.approx(477_195.4, abs=0.1)
    assert r.guarantee == "finite-sample, under the stated assumptions"


def test_betting_takes_the_draws_in_draw_order_whatever_the_row_order():
    # Draw order from the units numbers: 1 (B, 0.5), 2 (C, 0.2), 3 (A), 4 (D, understatement -> 0),
    # 6 (E), 7 (A), 8, 9, 10; draw 5 fell in Z, examined in full.
    values = [0.5, 0.2, 0, 0, 0, 0, 0, 0, 0]
    expected = 10_000 + 850_000 * cm.betting_upper(np.array(values), 0.95)
    shuffled = WORKED.sample(frac=1.0, random_state=3)
    for frame in (WORKED, shuffled):
        r = monetary_unit_bound(frame, 1_000_000, 10, 0.95, "betting")
        assert r.upper == pytest.approx(expected, rel=1e-12)
    # The order matters to betting (a different order gives a different capital path).
    other = 10_000 + 850_000 * cm.betting_upper(np.array(values[::-1]), 0.95)
    assert other != pytest.approx(expected, rel=1e-9)


def test_count_or_betting_is_the_smaller_at_split_risk():
    # Union bound: count at 0.95 x 5% risk, betting at 0.05 x 5%; the smaller one.
    values = np.array([0.5, 0.2, 0, 0, 0, 0, 0, 0, 0])
    w = cm.DEFAULT_SHARE
    a = stats.binomtest(2, 9, alternative="less").proportion_ci(1 - w * 0.05, method="exact").high
    b = cm.betting_upper(values, 1 - (1 - w) * 0.05)
    r = monetary_unit_bound(WORKED, 1_000_000, 10, 0.95, "count_or_betting")
    # (the betting bound is found to a relative precision of 1e-5, on the conservative side)
    assert r.upper_mean_taint == pytest.approx(min(a, b), rel=2e-5)
    assert r.share == w
    r2 = monetary_unit_bound(WORKED, 1_000_000, 10, 0.95, "count_or_betting", share=0.5)
    a2 = stats.binomtest(2, 9, alternative="less").proportion_ci(1 - 0.5 * 0.05, method="exact").high
    assert r2.upper_mean_taint == pytest.approx(min(a2, cm.betting_upper(values, 1 - 0.5 * 0.05)), rel=2e-5)


def test_no_misstatement_found():
    # Hand arithmetic: Stringer with no error, B_r F(0) / n_r = 850,000 x 2.995732 / 9 = 282,930.8.
    clean = WORKED.assign(audited_value=WORKED["book_value"])
    r = monetary_unit_bound(clean, 1_000_000, 10, 0.95, "stringer")
    assert r.upper == pytest.approx(850_000 * F0 / 9, abs=0.1)
    assert r.projected == 0 and r.errors == 0 and len(r.by_item) == 0
    assert r.understatement_upper == pytest.approx(850_000 * F0 / 9, abs=0.1)


def test_by_item_lists_every_misstated_item():
    r = monetary_unit_bound(WORKED, 1_000_000, 10)
    got = r.by_item.set_index("item_id")
    assert sorted(got.index) == ["B", "C", "D", "Z"]
    assert got.loc["B", "taint"] == pytest.approx(0.5)  # (10,000 - 5,000) / 10,000
    assert got.loc["D", "taint"] == pytest.approx(-0.1)  # (8,000 - 8,800) / 8,000
    assert got.loc["Z", "misstatement"] == 10_000
    assert bool(got.loc["Z", "examined_in_full"])


def test_taint_repeated_for_each_hit():
    # Item A holds draws 3 and 7: a 40% taint there counts twice (hand arithmetic: mean taint
    # (0.5 + 0.2 - 0.1 + 0.4 + 0.4) / 9 = 1.4 / 9).
    s = WORKED.copy()
    s.loc[s.item_id == "A", "audited_value"] = 12_000.0
    r = monetary_unit_bound(s, 1_000_000, 10)
    assert r.mean_taint == pytest.approx(1.4 / 9)
    assert r.errors == 4
    # Stringer ranks 0.5, 0.4, 0.4, 0.2: U = [F0 + 0.5 dF1 + 0.4 dF2 + 0.4 dF3 + 0.2 dF4] / 9.
    F = stats.chi2.ppf(0.95, 2 * np.arange(5) + 2) / 2
    expected = (F[0] + 0.5 * (F[1] - F[0]) + 0.4 * (F[2] - F[1]) + 0.4 * (F[3] - F[2]) + 0.2 * (F[4] - F[3])) / 9
    assert r.upper_mean_taint == pytest.approx(expected, rel=1e-9)


def test_understatement_beyond_book_value_is_not_bounded():
    s = WORKED.copy()
    s.loc[s.item_id == "D", "audited_value"] = 20_000.0  # taint -1.5: outside the stated assumption
    r = monetary_unit_bound(s, 1_000_000, 10)
    assert math.isnan(r.understatement_upper)
    assert any("above 100%" in a for a in r.assumptions)
    assert math.isfinite(r.upper)


def test_every_method_has_assumptions_and_a_guarantee():
    for m in METHODS:
        r = monetary_unit_bound(WORKED, 1_000_000, 10, 0.9, m)
        assert r.method == m and r.confidence == 0.9
        assert any("audited values are not below zero" in a for a in r.assumptions)
        assert r.upper >= r.projected
        assert r.guarantee


# ---------------------------------------------------------------------------
# the betting capital against confseq and an independent re-implementation

# The sequence and bets of the confseq cross-check. Values recorded by running
# confseq 0.0.11 (PyPI; Howard, Waudby-Smith, Ramdas), confseq.betting.betting_mart(x, m, alpha=0.05,
# lambdas_fn_negative=<these bets>, theta=0, trunc_scale=cap, m_trunc=True, N=None), on numpy 1.26.4:
# the "negative" capital process prod(1 - lambda_i (x_i - m)) with lambda_i truncated at cap / (1 - m).
# confseq does not install from PyPI on Python 3.11 with numpy 2 (its build pins pybind11 2.6, which
# does not compile against Python 3.11; it needs Boost headers; it uses np.float_, removed in numpy 2),
# so it is not a test dependency; test_capital_matches_confseq_live runs where it is installed.
CONFSEQ_X = np.array([0.0, 0.0, 0.35, 0.0, 0.0, 1.0, 0.0, 0.12, 0.0, 0.0, 0.0, 0.6, 0.0, 0.0, 0.05, 0.0])
CONFSEQ_BETS = [1.22387341534, 1.548091024082, 1.816980803488, 2.042104644931, 2.196486929349,
                2.346228916664, 1.661591581371, 1.728309363546, 1.824276512491, 1.887135991501,
                1.949732095404, 2.011566366236, 1.956012354093, 2.003492263998, 2.050891717169,
                2.107964323179]
CONFSEQ_CAPITAL = {
    (0.2, 0.95): [1.2375, 1.53140625, 1.258624511719, 1.557547833252, 1.927465443649, 0.096373272182,
                  0.119261924326, 0.130591807137, 0.161607361332, 0.199989109648, 0.247486523189,
                  0.129930424674, 0.160788900535, 0.198976264412, 0.23441891151, 0.290093402994],
    (0.35, 0.5): [1.269230769231, 1.610946745562, 1.610946745562, 2.04466317706, 2.595149417037,
                  1.297574708519, 1.646921745427, 1.93830020808, 2.460150264102, 3.122498412129,
                  3.963171061548, 3.201022780481, 4.062836605995, 5.156677230687, 6.346679668537,
                  8.055401117759],
    (0.08, 0.95): [1.082608695652, 1.172041587902, 0.845271297362, 0.915098056709, 0.990693113568,
                   0.049534655678, 0.053626648974, 0.051411635212, 0.055658683338, 0.06025657457,
                   0.0652342916, 0.030206313284, 0.032701617425, 0.035403055386, 0.036499780472,
                   0.039514979728],
}


@pytest.mark.parametrize(("m", "cap"), list(CONFSEQ_CAPITAL))
def test_capital_matches_confseq_recorded(m, cap):
    # confseq 0.0.11 betting_mart, recorded (see CONFSEQ_CAPITAL).
    x = CONFSEQ_X[None, :]
    log_k = cm.betting_log_capital(x, np.array(CONFSEQ_BETS)[None, :], m, cap)[0]
    np.testing.assert_allclose(np.exp(log_k), CONFSEQ_CAPITAL[(m, cap)], rtol=1e-10)


def test_capital_matches_confseq_live():
    try:  # only where confseq installs and imports (see above; with numpy 2 its import fails)
        from confseq import betting
    except (ImportError, AttributeError) as exc:
        pytest.skip(f"confseq.betting cannot be imported here: {exc}")
    x = np.array([0.0, 0.3, 0.0, 0.0, 1.0, 0.0, 0.1, 0.0, 0.0, 0.25, 0.0, 0.0])
    bets = cm.betting_bets(x[None, :], 0.05, np.array([len(x)]))[0]
    for m, cap in ((0.15, 0.95), (0.4, 0.6), (0.05, 0.9)):
        theirs = betting.betting_mart(x, m, alpha=0.05, lambdas_fn_negative=lambda xx, mm: bets.copy(),
                                      theta=0.0, trunc_scale=cap, m_trunc=True, N=None)
        ours = np.exp(cm.betting_log_capital(x[None, :], bets[None, :], m, cap)[0])
        np.testing.assert_allclose(ours, theirs, rtol=1e-12)


def _wsr_plain(x: list[float], alpha: float, cap: float) -> tuple[list[float], float]:
    """Waudby-Smith and Ramdas (2024), written from the paper with Python floats and loops.

    Predictable plug-in (section 3, fixed-sample-size form, one-sided):
      mu_hat_t = (1/2 + sum_{i<=t} x_i) / (t + 1);  s2_t = (1/4 + sum_{i<=t} (x_i - mu_hat_i)^2) / (t + 1)
      lambda_t = min(sqrt(2 log(1/alpha) / (n s2_{t-1})), cap / (1 - m))
    Capital against the null mean m: K_t = prod (1 + lambda_i (m - x_i)); reject m when
    max_t K_t >= 1/alpha (Ville); the bound is the smallest rejected m, by plain bisection.
    """
    n = len(x)
    bets, total, dev = [], 0.0, 0.0
    s2_prev = 0.25
    for t, xi in enumerate(x, start=1):
        bets.append(math.sqrt(2 * math.log(1 / alpha) / (n * s2_prev)))
        total += xi
        mu_t = (0.5 + total) / (t + 1)
        dev += (xi - mu_t) ** 2
        s2_prev = (0.25 + dev) / (t + 1)

    def rejected(m: float) -> bool:
        k, best = 1.0, 1.0
        for lam, xi in zip(bets, x):
            k *= 1 + min(lam, cap / (1 - m)) * (m - xi)
            best = max(best, k)
        return best >= 1 / alpha

    lo, hi = 0.0, 1.0
    for _ in range(60):
        mid = (lo + hi) / 2
        if rejected(mid):
            hi = mid
        else:
            lo = mid
    return bets, hi


@pytest.mark.parametrize("seed", range(6))
def test_betting_matches_plain_python_reimplementation(seed):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(5, 120))
    x = np.where(rng.random(n) < rng.uniform(0.02, 0.5), rng.uniform(0, 1, n), 0.0)
    for conf, cap in ((0.95, cm.DEFAULT_CAP), (0.90, 0.7), (0.99, 0.5)):
        bets, upper = _wsr_plain(x.tolist(), 1 - conf, cap)
        np.testing.assert_allclose(cm.betting_bets(x[None, :], 1 - conf, np.array([n]))[0], bets, rtol=1e-12)
        got = cm.betting_upper(x, conf, cap=cap, rtol=1e-10)
        # (1e-12: the product of factors and the sum of their logarithms round differently at the edge)
        assert upper * (1 - 1e-12) <= got <= upper * (1 + 1e-9) + 1e-15
        # The default precision: never below the exact bound, at most 1e-5 of it above.
        assert upper * (1 - 1e-12) <= cm.betting_upper(x, conf, cap=cap) <= upper * (1 + 1e-5) + 1e-15


def test_betting_rejection_set_is_an_interval():
    # The capital rises with m for every draw (betting_log_capital's docstring); checked on a grid.
    rng = np.random.default_rng(5)
    x = np.where(rng.random((50, 80)) < 0.3, rng.uniform(0, 1, (50, 80)), 0.0)
    bets = cm.betting_bets(x, 0.05, np.full(50, 80))
    previous = None
    for m in np.linspace(0.001, 0.999, 300):
        log_k = cm.betting_log_capital(x, bets, m, cm.DEFAULT_CAP)
        if previous is not None:
            assert np.all(log_k >= previous - 1e-12)
        previous = log_k


def test_betting_bound_sits_at_the_rejection_edge():
    rng = np.random.default_rng(9)
    x = np.where(rng.random((200, 60)) < 0.2, rng.uniform(0, 0.6, (200, 60)), 0.0)
    u = cm.betting_upper(x, 0.95)
    bets = cm.betting_bets(x, 0.05, np.full(200, 60))
    top = cm.betting_log_capital(x, bets, u, cm.DEFAULT_CAP).max(axis=1)
    below = cm.betting_log_capital(x, bets, u * (1 - 1e-5), cm.DEFAULT_CAP).max(axis=1)
    assert np.all(top >= math.log(20) - 1e-12)
    assert np.all(below < math.log(20))


# ---------------------------------------------------------------------------
# batches


def test_batch_rows_equal_one_sample_at_a_time_with_padding_anywhere():
    rng = np.random.default_rng(11)
    rows = [np.where(rng.random(k) < 0.3, rng.uniform(0, 1, k), 0.0) for k in (0, 1, 7, 40, 55, 60)]
    width = 60
    batch = np.full((len(rows), width), np.nan)
    for i, r in enumerate(rows):
        batch[i, : len(r)] = r
    # The same draws with the padding spread between them (order kept): must give the same bounds.
    spread = np.full((len(rows), width + 10), np.nan)
    for i, r in enumerate(rows):
        slots = np.sort(rng.choice(width + 10, size=len(r), replace=False))
        spread[i, slots] = r
    # Bit for bit: a coverage simulation may compare a batch row with the same sample evaluated alone.
    for options in ({"method": m} for m in cm.METHODS):
        one = np.array([cm.mean_taint_upper(r, 0.95, **options) if len(r) else 1.0 for r in rows])
        np.testing.assert_array_equal(cm.mean_taint_upper(batch, 0.95, **options), one)
        np.testing.assert_array_equal(cm.mean_taint_upper(spread, 0.95, **options), one)
    one = np.array([cm.stringer_upper(r, 0.95, "binomial") if len(r) else 1.0 for r in rows])
    np.testing.assert_array_equal(cm.stringer_upper(batch, 0.95, "binomial"), one)
    assert cm.stringer_upper(np.full((1, 4), np.nan), 0.95)[0] == 1.0


def test_bounds_never_below_the_sample_mean_taint_when_all_are_equal():
    # With every draw at the same taint v the bounds lie between v and 1 (hand reasoning: the mean is v
    # if every unit carries v; nothing in the sample argues for less).
    for v in (0.0, 0.1, 0.6):
        x = np.full(50, v)
        for method in cm.METHODS:
            u = cm.mean_taint_upper(x, 0.95, method)
            assert v <= u <= 1.0


# ---------------------------------------------------------------------------
# bad input


def test_confidence_outside_zero_one():
    for c in (0, 1, 1.5, -0.1, "0.95", float("nan"), True):
        with pytest.raises(ParameterError) as info:
            monetary_unit_bound(WORKED, 1_000_000, 10, confidence=c)
        assert info.value.parameter == "confidence"


def test_unknown_method_and_basis():
    with pytest.raises(ParameterError) as info:
        monetary_unit_bound(WORKED, 1_000_000, 10, method="normal")
    assert info.value.parameter == "method"
    with pytest.raises(ParameterError) as info:
        monetary_unit_bound(WORKED, 1_000_000, 10, basis="normal")
    assert info.value.parameter == "basis"
    with pytest.raises(ParameterError) as info:
        monetary_unit_bound(WORKED, 1_000_000, 10, method="count_or_betting", share=1.0)
    assert info.value.parameter == "share"


def test_book_total_and_sample_size_parameters():
    with pytest.raises(ParameterError) as info:
        monetary_unit_bound(WORKED, 0, 10)
    assert info.value.parameter == "book_total"
    for n in (0, 2.5, "10"):
        with pytest.raises(ParameterError) as info:
            monetary_unit_bound(WORKED, 1_000_000, n)
        assert info.value.parameter == "sample_size"


def test_negative_audited_value_names_the_rows():
    s = WORKED.copy()
    s.loc[[2, 5], "audited_value"] = [-1.0, -300.0]
    with pytest.raises(InputError) as info:
        monetary_unit_bound(s, 1_000_000, 10)
    assert info.value.rows == (4, 7)  # spreadsheet rows: header is row 1
    assert info.value.column == "audited_value"
    assert "below zero" in str(info.value)


def test_missing_audited_value_and_missing_column():
    s = WORKED.copy()
    s.loc[3, "audited_value"] = np.nan
    with pytest.raises(InputError) as info:
        monetary_unit_bound(s, 1_000_000, 10)
    assert info.value.rows == (5,) and info.value.column == "audited_value"
    with pytest.raises(InputError) as info:
        monetary_unit_bound(WORKED.drop(columns="units"), 1_000_000, 10)
    assert info.value.column == "units"


def _fails(sample, book_total=1_000_000, n=10):
    with pytest.raises(InputError) as info:
        monetary_unit_bound(sample, book_total, n)
    assert "does not belong to the selection" in str(info.value)
    return info.value


def test_sample_not_of_the_selection_hits_do_not_add_up():
    err = _fails(WORKED, n=11)
    assert "hits add up to 10" in str(err)


def test_sample_not_of_the_selection_examined_in_full_wrong():
    s = WORKED.copy()
    s.loc[s.item_id == "H", "examined_in_full"] = True  # 99,999 is below the interval of 100,000
    err = _fails(s)
    assert err.rows == (9,) and err.column == "examined_in_full"
    # With another book total the interval changes and Z is no longer at or above it.
    err = _fails(WORKED, book_total=2_000_000)
    assert err.rows == (10,)


def test_sample_not_of_the_selection_units_and_hits_disagree():
    s = WORKED.copy()
    s.loc[0, "units"] = "3"
    err = _fails(s)
    assert err.rows == (2,) and "units differs from hits" in str(err)


def test_sample_not_of_the_selection_draw_twice_or_missing():
    s = WORKED.copy()
    s.loc[1, "units"] = "2"  # draw 2 now in B and C, draw 1 in none
    err = _fails(s)
    assert "exactly once" in str(err) and "missing (1)" in str(err) and "more than once (2)" in str(err)
    assert err.rows == (3, 4)
    s = WORKED.copy()
    s.loc[1, "units"] = "11"
    err = _fails(s)
    assert "outside 1..10" in str(err) and err.rows == (3,)


def test_sample_not_of_the_selection_row_without_a_draw():
    s = pd.concat([WORKED, pd.DataFrame([{"item_id": "Q", "book_value": 5.0, "hits": 0,
                                          "examined_in_full": False, "units": "", "audited_value": 5.0}])],
                  ignore_index=True)
    err = _fails(s)
    assert err.rows == (11,) and "no draw" in str(err)


def test_credits_in_the_sample_are_refused():
    s = WORKED.copy()
    s.loc[5, ["book_value", "audited_value"]] = [-10.0, -10.0]
    with pytest.raises(InputError) as info:
        monetary_unit_bound(s, 1_000_000, 10)
    assert info.value.column == "book_value" and info.value.rows == (7,)


def test_examined_in_full_read_back_from_text():
    # After a round trip through a CSV file the flags may come back as text.
    s = WORKED.astype({"examined_in_full": str})
    assert monetary_unit_bound(s, 1_000_000, 10).upper == monetary_unit_bound(WORKED, 1_000_000, 10).upper
    s.loc[0, "examined_in_full"] = "maybe"
    with pytest.raises(InputError) as info:
        monetary_unit_bound(s, 1_000_000, 10)
    assert info.value.rows == (2,) and info.value.column == "examined_in_full"


# ---------------------------------------------------------------------------
# the record


def test_record_is_frozen_and_serialisable():
    r = monetary_unit_bound(WORKED, 1_000_000, 10, method="count_or_betting")
    assert isinstance(r, MonetaryUnitBound)
    with pytest.raises(AttributeError):
        r.upper = 0  # type: ignore[misc]
    d = json.loads(json.dumps(r.to_dict()))
    assert d["kind"] == "monetary_unit_bound" and d["method"] == "count_or_betting"
    assert d["upper"] == pytest.approx(r.upper)
    assert len(d["by_item"]) == 4 and isinstance(d["assumptions"], list)
    text = r.summary()
    assert "upper bound of overstatement" in text and "Assumptions" in text


def test_html_is_escaped():
    s = WORKED.copy()
    s.loc[1, "item_id"] = "<script>alert(1)</script>"
    page = monetary_unit_bound(s, 1_000_000, 10)._repr_html_()
    assert "<script>" not in page and "&lt;script&gt;" in page


# ---------------------------------------------------------------------------
# end to end with the package's selection


def _population(n_items=1500, seed=4):
    rng = np.random.default_rng(seed)
    return pd.DataFrame({"item_id": [f"INV-{i:05d}" for i in range(n_items)],  # invented
                         "book_value": np.round(rng.lognormal(6.5, 1.4, n_items), 2)})


def test_package_selection_follows_the_contract_rule():
    from auditmean import select_monetary_units

    items = _population()
    for seed, n in (("alpha", 80), ("beta", 150)):
        ours = spec_selection(items, n, seed)
        theirs = select_monetary_units(items, n, seed)
        cols = ["item_id", "hits", "examined_in_full", "units"]
        pd.testing.assert_frame_equal(theirs[cols].reset_index(drop=True), ours[cols].reset_index(drop=True),
                                      check_dtype=False)


def test_end_to_end_with_the_package_selection():
    from auditmean import select_monetary_units

    items = _population()
    n = 120
    sel = select_monetary_units(items, n, "end-to-end")
    book_total = sel.attrs["monetary_units"]["book_total"]
    rng = np.random.default_rng(1)
    sample = sel.copy()
    wrong = rng.random(len(sample)) < 0.15
    sample["audited_value"] = np.round(sample["book_value"] * np.where(wrong, rng.uniform(0.4, 1.0, len(sample)), 1.0), 2)
    # Hand-rolled evaluation from the rule: taints per draw in draw order, then the core bounds.
    taint = (sample.book_value - sample.audited_value) / sample.book_value
    by_draw = {}
    for t, units, full in zip(taint, sample.units, sample.examined_in_full):
        if not full:
            for k in units.split():
                by_draw[int(k)] = t
    values = np.array([max(by_draw[k], 0.0) for k in sorted(by_draw)])
    full = sample.examined_in_full.to_numpy()
    exact = float((sample.book_value - sample.audited_value)[full].sum())
    remainder = round(book_total * 100 - round(sample.book_value[full].sum() * 100)) / 100
    assert remainder == pytest.approx(sel.attrs["monetary_units"]["remainder_total"])
    for method in METHODS:
        r = monetary_unit_bound(sample, book_total, n, 0.95, method)
        assert r.draws == len(values) == sel.attrs["monetary_units"]["draws_in_remainder"]
        assert r.upper == pytest.approx(exact + remainder * cm.mean_taint_upper(values, 0.95, method), rel=1e-9)
        assert r.upper >= r.projected
        # Row order of the sample does not matter.
        again = monetary_unit_bound(sample.iloc[::-1], book_total, n, 0.95, method)
        assert again.upper == r.upper


def test_end_to_end_items_examined_in_full():
    from auditmean import select_monetary_units

    items = _population()
    items.loc[[3, 700], "book_value"] = [400_000.0, 250_000.0]  # invented large balances
    sel = select_monetary_units(items, 60, "in-full")
    assert sel.examined_in_full.sum() >= 2
    sample = sel.assign(audited_value=sel.book_value)
    sample.loc[sample.item_id == "INV-00003", "audited_value"] = 390_000.0
    r = monetary_unit_bound(sample, sel.attrs["monetary_units"]["book_total"], 60, method="count")
    assert r.exact_in_full == pytest.approx(10_000.0)
    assert r.errors == 0
    # No error among the remainder draws: count gives B_r (1 - 0.05^(1/n_r)) (Clopper-Pearson closed form).
    n_r = r.draws
    assert r.upper == pytest.approx(10_000 + r.remainder_total * (1 - 0.05 ** (1 / n_r)), rel=1e-9)
