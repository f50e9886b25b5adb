"""The coverage pictures show the engine's numbers (arithmetic and scipy.stats.norm beside each check)."""

from __future__ import annotations

import numpy as np
import plotly.graph_objects as go
import pytest
from scipy import stats

from auditmean.coverage import MisstatementModel, UniformTaint, simulate_coverage
from auditmean.coverage_plots import coverage_bars, estimate_distribution
from auditmean.errors import ParameterError


@pytest.fixture(scope="module")
def result():
    rng = np.random.default_rng(4)
    book = np.round(rng.lognormal(6, 1, 2_000), 2) + 1
    strata = np.where(book > np.quantile(book, 0.9), "high", "low")
    model = MisstatementModel(error_rate=0.1, taint=UniformTaint(0.1, 0.5))
    return simulate_coverage(book, strata, {"high": 20, "low": 30}, model, replications=500, seed=3,
                             tolerable=0.04 * book.sum(), fixed_population=True)


def test_distribution_picture(result):
    fig = estimate_distribution(result, "difference", bins=40)
    assert isinstance(fig, go.Figure)
    bars, curve = fig.data
    j = result.column("difference")
    # the bars are a density: their areas add up to 1 (arithmetic)
    assert np.sum(np.asarray(bars.y) * np.asarray(bars.width)) == pytest.approx(1.0)
    assert "simulated samples" in bars.hovertext[0] and "estimated the audited total" in bars.hovertext[0]
    # the curve: normal, mean = true total, sd = average estimated standard error (scipy.stats.norm)
    sd = result.std_errors[:, j].mean()
    x0 = curve.x[200]
    assert curve.y[200] == pytest.approx(stats.norm.pdf(x0, loc=result.true_total, scale=sd), rel=1e-12)
    lines = [s.x0 for s in fig.layout.shapes]
    assert result.true_total in lines and result.book_total - result.tolerable in lines


def test_coverage_picture(result):
    fig = coverage_bars(result)
    two, one = fig.data
    np.testing.assert_allclose(two.y, result.by_estimator["coverage"])
    np.testing.assert_allclose(two.error_y.array, 2 * result.by_estimator["coverage_mc_se"])
    np.testing.assert_allclose(one.y, result.by_estimator["one_sided_coverage"])
    assert fig.layout.shapes[0].y0 == pytest.approx(0.95)
    k = int(round(result.by_estimator["coverage"].iloc[0] * 500))
    assert f"in {k:,} of 500 simulated samples" in two.hovertext[0]


def test_coverage_picture_with_second_opinion():
    book = np.arange(1.0, 401.0)
    model = MisstatementModel(error_rate=0.2, taint=UniformTaint(0.1, 0.5))
    r = simulate_coverage(book, ["s"] * 400, {"s": 30}, model, estimators="mpu", replications=4, seed=1,
                          second_opinion=True, second_opinion_replicates=200)
    fig = coverage_bars(r)
    assert [t.name for t in fig.data][-1] == "second opinion, two-sided"
    assert fig.data[-1].y[0] == pytest.approx(r.by_estimator["second_opinion_coverage"].iloc[0])


def test_pictures_refuse_other_inputs(result):
    with pytest.raises(ParameterError):
        coverage_bars({"coverage": 0.9})
    with pytest.raises(ParameterError):
        estimate_distribution(result, "pps")
    with pytest.raises(ParameterError):
        estimate_distribution(result, bins=1)
