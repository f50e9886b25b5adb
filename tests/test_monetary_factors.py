"""Confidence factors and sample sizes of the monetary-unit design, against outside sources.

Sources named beside each check: scipy.stats (chi-square, gamma, beta and
binomial-test quantiles), printed tables of Poisson upper-limit factors
(quoted from memory), and hand arithmetic written in the test.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from auditmean import ParameterError
from auditmean.core import monetary as cm
from auditmean.monetary_bound import monetary_unit_sample_size

# Poisson upper-limit ("reliability") factors for 0..10 errors, as printed in audit-sampling guides
# and textbooks (e.g. the AICPA audit sampling guide's monetary-unit tables; Leslie, Teitlebaum and
# Anderson 1979). QUOTED FROM MEMORY. The tables round up to two decimals.
TABLE_95 = [3.00, 4.75, 6.30, 7.76, 9.16, 10.52, 11.85, 13.15, 14.44, 15.71, 16.97]
TABLE_90 = [2.31, 3.89, 5.33, 6.69, 8.00, 9.28, 10.54, 11.78, 13.00, 14.21, 15.41]


@pytest.mark.parametrize("confidence", [0.80, 0.90, 0.95, 0.975, 0.99])
def test_poisson_factor_is_half_the_chi_square_quantile(confidence):
    # scipy.stats.chi2: the upper limit F of a Poisson mean after k events solves
    # P(Poisson(F) <= k) = 1 - confidence, i.e. 2F = chi2.ppf(confidence, 2k + 2) (Garwood 1936).
    k = np.arange(0, 31)
    expected = stats.chi2.ppf(confidence, 2 * k + 2) / 2
    np.testing.assert_allclose(cm.poisson_factor(k, confidence), expected, rtol=1e-12)


@pytest.mark.parametrize("confidence", [0.90, 0.95])
def test_poisson_factor_solves_the_poisson_tail(confidence):
    # scipy.stats.poisson: at F(k) the chance of k or fewer events is exactly the risk.
    k = np.arange(0, 21)
    F = cm.poisson_factor(k, confidence)
    np.testing.assert_allclose(stats.poisson.cdf(k, F), 1 - confidence, rtol=1e-9)


@pytest.mark.parametrize(("confidence", "table"), [(0.95, TABLE_95), (0.90, TABLE_90)])
def test_poisson_factors_match_the_printed_table(confidence, table):
    # Published table (quoted from memory, see TABLE_95/TABLE_90): values rounded UP to 2 decimals.
    F = np.asarray(cm.poisson_factor(np.arange(11), confidence))
    assert np.all(F <= np.array(table) + 1e-12)
    np.testing.assert_array_equal(np.ceil(F * 100 - 1e-9) / 100, table)


def test_zero_error_factor_is_minus_log_risk():
    # Hand arithmetic: with no event, P(Poisson(F) = 0) = exp(-F) = risk, so F(0) = -ln(risk).
    assert cm.poisson_factor(0, 0.95) == pytest.approx(-math.log(0.05), rel=1e-12)
    assert cm.poisson_factor(0, 0.90) == pytest.approx(-math.log(0.10), rel=1e-12)


def test_non_whole_factor_is_the_gamma_quantile():
    # scipy.stats.gamma: the interpolated factor for 1.5 expected errors is the gamma(2.5) quantile,
    # and lies between the table values for 1 and 2 errors (4.75 and 6.30, table quoted from memory).
    f = cm.poisson_factor(1.5, 0.95)
    assert f == pytest.approx(stats.gamma.ppf(0.95, 2.5), rel=1e-12)
    assert 4.74 < f < 6.30


@pytest.mark.parametrize(("k", "n"), [(0, 10), (0, 100), (1, 60), (3, 93), (7, 200), (12, 50)])
def test_clopper_pearson_upper_matches_scipy_binomtest(k, n):
    # scipy.stats.binomtest(...).proportion_ci(method="exact") is the Clopper-Pearson interval;
    # alternative="less" gives the one-sided upper limit.
    ci = stats.binomtest(k, n, alternative="less").proportion_ci(confidence_level=0.95, method="exact")
    assert cm.clopper_pearson_upper(k, n, 0.95) == pytest.approx(ci.high, rel=1e-9)


def test_clopper_pearson_upper_zero_errors_closed_form():
    # Hand arithmetic: with no error in n draws, (1 - p)^n = risk gives p = 1 - risk^(1/n).
    for n in (1, 20, 60, 300):
        assert cm.clopper_pearson_upper(0, n, 0.95) == pytest.approx(1 - 0.05 ** (1 / n), rel=1e-12)
    # Every draw in error: nothing is excluded.
    assert cm.clopper_pearson_upper(5, 5, 0.95) == 1.0


def test_binomial_factor_below_poisson_factor():
    # The binomial factor n * p_upper tends to the Poisson factor from below as n grows
    # (binomial-to-Poisson limit); scipy.stats.beta for the binomial side.
    for k in (0, 1, 4):
        prev = 0.0
        for n in (20, 100, 1000, 100_000):
            b = cm.binomial_factor(k, n, 0.95)
            assert b == pytest.approx(n * stats.beta.ppf(0.95, k + 1, n - k), rel=1e-12)
            assert prev <= b < cm.poisson_factor(k, 0.95)
            prev = b
        assert cm.poisson_factor(k, 0.95) - prev < 1e-3


# ---------------------------------------------------------------------------
# sample sizes


def test_sample_size_with_no_expected_misstatement_hand_arithmetic():
    # Hand arithmetic (the textbook formula n = book value x reliability factor / tolerable):
    # 500,000 x 2.9957 / 25,000 = 59.91 -> 60 draws; interval 500,000 / 60 = 8,333.
    assert monetary_unit_sample_size(500_000, 25_000) == 60
    # 2,000,000 x 2.3026 / 50,000 = 92.1 -> 93 at a 10% risk.
    assert monetary_unit_sample_size(2_000_000, 50_000, risk_incorrect_acceptance=0.10) == 93
    # 1,000,000 x 4.6052 / 10,000 = 460.5 -> 461 at a 1% risk.
    assert monetary_unit_sample_size(1_000_000, 10_000, risk_incorrect_acceptance=0.01) == 461


def test_sample_size_binomial_with_no_expected_misstatement_closed_form():
    # Hand arithmetic: (1 - T)^n <= risk, n = ceil(ln(0.05) / ln(1 - 0.05)) = ceil(58.40) = 59.
    assert monetary_unit_sample_size(500_000, 25_000, basis="binomial") == math.ceil(math.log(0.05) / math.log(0.95))
    assert monetary_unit_sample_size(500_000, 25_000, basis="binomial") == 59


def test_sample_size_is_the_smallest_meeting_the_expansion_rule():
    # scipy.stats.gamma directly: n meets B F(n EM / B) / n <= TM and n - 1 does not.
    for B, tm, em, risk in [(500_000, 25_000, 5_000, 0.05), (7_131_213.81, 356_560, 71_312, 0.05),
                            (1_000_000, 40_000, 12_000, 0.10), (3_000_000, 90_000, 30_000, 0.01)]:
        n = monetary_unit_sample_size(B, tm, em, risk)

        def bound(m, B=B, em=em, risk=risk):
            return B * stats.gamma.ppf(1 - risk, m * em / B + 1) / m

        assert bound(n) <= tm < bound(n - 1)


def test_sample_size_binomial_is_the_smallest_meeting_the_rule():
    # scipy.stats.beta directly, k = n EM / B expected errors.
    B, tm, em = 500_000, 25_000, 5_000
    n = monetary_unit_sample_size(B, tm, em, basis="binomial")

    def bound(m):
        k = m * em / B
        return B * stats.beta.ppf(0.95, k + 1, m - k)

    assert bound(n) <= tm < bound(n - 1)


def test_sample_size_close_to_the_expansion_factor_approximation():
    # The printed approximation n = B x RF / (TM - EM x EF) with the expansion factor EF = 1.6 at a
    # 5% risk (AICPA audit sampling guide, QUOTED FROM MEMORY): 500,000 x 3.00 / (25,000 - 5,000 x 1.6)
    # = 88.2 -> 89. The gamma interpolation is the exact rule the approximation stands for; they
    # should agree within a few percent, the exact rule a little larger here.
    approx = math.ceil(500_000 * 3.00 / (25_000 - 5_000 * 1.6))
    n = monetary_unit_sample_size(500_000, 25_000, 5_000)
    assert approx == 89
    assert approx <= n <= approx * 1.06


def test_sample_size_grows_with_expected_and_shrinks_with_risk():
    # Hand reasoning: more expected misstatement needs more draws; a larger risk fewer.
    sizes = [monetary_unit_sample_size(1e6, 50_000, em) for em in (0, 5_000, 10_000, 20_000, 30_000)]
    assert sizes == sorted(sizes) and len(set(sizes)) == len(sizes)
    risks = [monetary_unit_sample_size(1e6, 50_000, 10_000, r) for r in (0.01, 0.05, 0.10, 0.25)]
    assert risks == sorted(risks, reverse=True)


@pytest.mark.parametrize(
    ("kwargs", "parameter"),
    [
        ({"book_total": 0, "tolerable": 1}, "book_total"),
        ({"book_total": -5, "tolerable": 1}, "book_total"),
        ({"book_total": float("nan"), "tolerable": 1}, "book_total"),
        ({"book_total": 100, "tolerable": 0}, "tolerable"),
        ({"book_total": 100, "tolerable": 10, "expected": 10}, "expected"),
        ({"book_total": 100, "tolerable": 10, "expected": 12}, "expected"),
        ({"book_total": 100, "tolerable": 10, "expected": -1}, "expected"),
        ({"book_total": 100, "tolerable": 10, "risk_incorrect_acceptance": 0}, "risk_incorrect_acceptance"),
        ({"book_total": 100, "tolerable": 10, "risk_incorrect_acceptance": 1.0}, "risk_incorrect_acceptance"),
        ({"book_total": 100, "tolerable": 10, "risk_incorrect_acceptance": "5%"}, "risk_incorrect_acceptance"),
        ({"book_total": 100, "tolerable": 10, "basis": "normal"}, "basis"),
    ],
)
def test_sample_size_parameter_errors(kwargs, parameter):
    with pytest.raises(ParameterError) as info:
        monetary_unit_sample_size(**kwargs)
    assert info.value.parameter == parameter


def test_zero_error_bound_is_the_basic_precision():
    # Hand arithmetic: Stringer with no error is B x F(0) / n = 1,000,000 x 2.9957 / 60 = 49,929.
    assert cm.zero_error_bound(1_000_000, 60, 0.95) == pytest.approx(1_000_000 * -math.log(0.05) / 60, rel=1e-9)
    # The error count with no error: B (1 - 0.05^(1/60)) (Clopper-Pearson closed form), a little less.
    z = cm.zero_error_bound(1_000_000, 60, 0.95, method="count")
    assert z == pytest.approx(1_000_000 * (1 - 0.05 ** (1 / 60)), rel=1e-9)
    assert z < cm.zero_error_bound(1_000_000, 60, 0.95)
