"""The estimation engine against outside references.

1. Published results of R's survey package for the `api` stratified sample
   (T. Lumley, survey 4.1-1; table in tests/data/README.md).
2. samplics 0.6.1 (PyPI), a general-purpose survey library, on the same
   data, to 8 or more significant digits. samplics' ``fpc`` argument is the
   factor 1 - n_h/N_h, not N_h (in that form the samplics checks below agree with
   the published R standard errors that the first tests check); weights are
   given as N_h/n_h exactly rather than the file's rounded ``pw``.
3. statsmodels OLS (PyPI) for the separate regression estimator: the
   stratum total is N_h times the fitted line at the population book mean,
   and the residual variance is OLS's ``mse_resid`` (divisor n_h - 2).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from auditmean.evaluation import estimate_total

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    from samplics.estimation import TaylorEstimator
    from samplics.utils.types import PopParam

SIG8 = 1e-8  # relative tolerance: agreement to at least 8 significant digits


def _samplics(param, apistrat, y, x=None, domain=None):
    n = apistrat.groupby("stype").size()
    N = apistrat.groupby("stype")["fpc"].first()
    weight = apistrat["stype"].map(N / n).astype(float)
    fpc = {h: 1 - n[h] / N[h] for h in n.index}
    est = TaylorEstimator(param)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        est.estimate(y=y, x=x, samp_weight=weight, stratum=apistrat["stype"], fpc=fpc, domain=domain)
    return est


@pytest.fixture()
def enroll_sample(api_sample):
    return api_sample.assign(audited_value=api_sample["enroll"])


# ---------------------------------------------------------------- R survey package, published


def test_mpu_total_of_enroll_matches_r_survey(enroll_sample, api_strata):
    r = estimate_total(enroll_sample, api_strata, method="mpu")
    # R survey: svytotal(~enroll, dstrata) = 3,687,178, SE 114,642 (printed to 7 and 6 digits)
    assert r.total == pytest.approx(3_687_178, abs=0.5)
    assert r.std_error == pytest.approx(114_642, abs=0.5)


def test_mpu_mean_of_api00_matches_r_survey(api_sample, api_strata):
    r = estimate_total(api_sample, api_strata, method="mpu")
    N = api_strata["count"].sum()  # 6,194 schools
    # R survey: svymean(~api00, dstrata) = 662.29, SE 9.4089
    assert r.total / N == pytest.approx(662.29, abs=0.005)
    assert r.std_error / N == pytest.approx(9.4089, abs=0.00005)


def test_combined_ratio_matches_r_survey(api_sample, api_strata):
    r = estimate_total(api_sample, api_strata, method="combined_ratio")
    X = api_strata["book_total"].sum()
    # R survey: svyratio(~api00, ~api99, dstrata) = 1.052261, SE 0.003643922.
    # With the sample-book-mean variance form, SE(total) / X is exactly the
    # ratio's SE as R computes it (estimated api99 total in the denominator).
    assert r.by_stratum["coefficient"].iloc[0] == pytest.approx(1.052261, abs=5e-7)
    assert r.std_error / X == pytest.approx(0.003643922, abs=5e-10)


# ---------------------------------------------------------------- samplics


def test_mpu_total_matches_samplics(apistrat, enroll_sample, api_strata):
    ref = _samplics(PopParam.total, apistrat, apistrat["enroll"])
    r = estimate_total(enroll_sample, api_strata, method="mpu")
    assert r.total == pytest.approx(ref.point_est, rel=SIG8)
    assert r.std_error == pytest.approx(ref.stderror, rel=SIG8)


def test_difference_matches_samplics_total_of_differences(apistrat, api_sample, api_strata):
    d = apistrat["api00"] - apistrat["api99"]
    ref = _samplics(PopParam.total, apistrat, d)
    r = estimate_total(api_sample, api_strata, method="difference")
    X = api_strata["book_total"].sum()
    # difference estimator: X + (estimated total of d), same standard error
    assert r.total == pytest.approx(X + ref.point_est, rel=SIG8)
    assert r.std_error == pytest.approx(ref.stderror, rel=SIG8)


def test_combined_ratio_matches_samplics(apistrat, api_sample, api_strata):
    ref = _samplics(PopParam.ratio, apistrat, apistrat["api00"], x=apistrat["api99"])
    X = api_strata["book_total"].sum()
    r = estimate_total(api_sample, api_strata, method="combined_ratio")
    assert r.total == pytest.approx(ref.point_est * X, rel=SIG8)
    assert r.std_error == pytest.approx(ref.stderror * X, rel=SIG8)


def test_combined_ratio_population_form_is_sample_form_rescaled(apistrat, api_sample, api_strata):
    ref = _samplics(PopParam.ratio, apistrat, apistrat["api00"], x=apistrat["api99"])
    X = api_strata["book_total"].sum()
    n = apistrat.groupby("stype").size()
    N = apistrat.groupby("stype")["fpc"].first()
    x_hat = float((apistrat.groupby("stype")["api99"].mean() * N).sum())
    r = estimate_total(api_sample, api_strata, method="combined_ratio", ratio_variance="population_book_mean")
    # Cochran 1977 s. 6.9: v1 = v2 * (xbar / Xbar)^2, i.e. SE1 = SE2 * X_hat / X
    assert n.sum() == 200
    assert r.std_error == pytest.approx(ref.stderror * X * x_hat / X, rel=SIG8)


def test_separate_ratio_matches_samplics_per_stratum(apistrat, api_sample, api_strata):
    ref = _samplics(PopParam.ratio, apistrat, apistrat["api00"], x=apistrat["api99"], domain=apistrat["stype"])
    r = estimate_total(api_sample, api_strata, method="ratio")
    X_h = api_strata.set_index("stratum")["book_total"]
    expected_total = sum(ref.point_est[h] * X_h[h] for h in X_h.index)
    expected_var = sum((ref.stderror[h] * X_h[h]) ** 2 for h in X_h.index)
    assert r.total == pytest.approx(expected_total, rel=SIG8)
    assert r.std_error == pytest.approx(np.sqrt(expected_var), rel=SIG8)
    by = r.by_stratum.set_index("stratum")
    for h in X_h.index:
        assert by.loc[h, "coefficient"] == pytest.approx(ref.point_est[h], rel=SIG8)


# ---------------------------------------------------------------- statsmodels


def test_regression_matches_statsmodels_ols(api_sample, api_strata):
    r = estimate_total(api_sample, api_strata, method="regression")
    total = 0.0
    variance = 0.0
    for _, row in api_strata.iterrows():
        s = api_sample[api_sample["stratum"] == row["stratum"]]
        fit = sm.OLS(s["audited_value"].to_numpy(), sm.add_constant(s["book_value"].to_numpy())).fit()
        N, n = row["count"], len(s)
        xbar_pop = row["book_total"] / N
        total += N * (fit.params[0] + fit.params[1] * xbar_pop)
        variance += N**2 * (1 - n / N) / n * fit.mse_resid  # Cochran 1977 eq. 7.27
    assert r.total == pytest.approx(total, rel=SIG8)
    assert r.std_error == pytest.approx(np.sqrt(variance), rel=SIG8)


def test_t_limits_use_satterthwaite_df(enroll_sample, api_strata, apistrat):
    from scipy import stats

    r = estimate_total(enroll_sample, api_strata, method="mpu", distribution="t")
    # Satterthwaite df recomputed from Cochran 1977 eq. 5.16 with pandas' variances
    g = apistrat.groupby("stype")
    n, N, s2 = g.size(), g["fpc"].first(), g["enroll"].var(ddof=1)
    v = N * (N - n) * s2 / n
    df = v.sum() ** 2 / (v**2 / (n - 1)).sum()
    assert r.df == pytest.approx(df, rel=1e-10)
    q = stats.t.ppf(0.975, df)  # scipy's t quantile
    assert r.upper - r.total == pytest.approx(q * r.std_error, rel=1e-12)
    assert isinstance(r.by_stratum, pd.DataFrame)
