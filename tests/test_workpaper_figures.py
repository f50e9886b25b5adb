"""The workpaper's pictures: pure functions of their data, user labels escaped.

Each check compares the figure's data with numpy on the same input or with
arithmetic shown beside it.
"""

from __future__ import annotations

import html
import math

import numpy as np
import pytest

from auditmean.errors import ParameterError
from auditmean.workpaper import figures as figs

from .workpaper_helpers import HOSTILE_LABELS


def _all_strings(obj):
    if isinstance(obj, str):
        yield obj
    elif isinstance(obj, dict):
        for v in obj.values():
            yield from _all_strings(v)
    elif isinstance(obj, (list, tuple)):
        for v in obj:
            yield from _all_strings(v)


def test_distribution_counts_every_positive_item():
    rng = np.random.default_rng(2)
    x = np.concatenate([rng.lognormal(6, 1.5, 2000), [-5.0, -7.5, 0.0]])
    fig = figs.book_value_distribution(x, boundaries=[300.0, 2_000.0], top_cutoff=20_000.0, bins=40)
    bars = fig.data[0]
    assert int(np.sum(bars.y)) == 2000  # numpy: the 2,000 positive values
    assert len(bars.y) == 40
    assert "2 credit items and 1 zero items" in fig.layout.title.text
    lines = sorted(s.x0 for s in fig.layout.shapes)
    assert lines == pytest.approx([math.log10(300.0), math.log10(2_000.0), math.log10(20_000.0)])
    with pytest.raises(ParameterError, match="bins"):
        figs.book_value_distribution(x, bins=1)


def test_hostile_labels_are_escaped_in_every_figure():
    counts, totals, sizes = [10, 20, 30, 5], [100.0, -50.0, 400.0, 1000.0], [3, 4, 5, 5]
    for fig in (
        figs.stratum_shares(HOSTILE_LABELS, counts, totals),
        figs.allocation_bars(HOSTILE_LABELS, counts, sizes),
    ):
        assert list(fig.data[0].x) == [html.escape(s) for s in HOSTILE_LABELS]
        assert not any("<" in s for s in _all_strings(fig.to_plotly_json()["data"]))


def test_shares_and_allocation_numbers():
    fig = figs.stratum_shares(["a", "b", "credits"], [10, 30, 60], [100.0, 300.0, -100.0])
    assert list(fig.data[0].y) == pytest.approx([0.1, 0.3, 0.6])  # 10/100, 30/100, 60/100
    assert list(fig.data[1].y) == pytest.approx([0.2, 0.6, 0.2])  # |book| / 500
    fig = figs.allocation_bars(["a", "b"], [100, 7], [30, 7])
    assert list(fig.data[1].y) == [30, 7] and list(fig.data[1].text) == ["30", "7 (all)"]


def test_estimate_limits_draws_each_interval():
    rows = [
        {"method": "mpu", "total": 900.0, "lower": 700.0, "upper": 1_100.0},
        {"method": "ratio", "total": 980.0, "lower": 960.0, "upper": 990.0, "second_lower": 950.0, "second_upper": 995.0},
    ]
    fig = figs.estimate_limits(rows, book_total=1_000.0, tolerable=50.0, primary="ratio")
    main = fig.data[0]
    assert list(main.error_x.array) == [200.0, 10.0]  # upper - total
    assert list(main.error_x.arrayminus) == [200.0, 20.0]  # total - lower
    assert main.y[1].endswith("(relied on)")
    second = fig.data[1]
    assert list(second.x) == [972.5]  # (950 + 995) / 2
    band = [s for s in fig.layout.shapes if s.type == "rect"][0]
    assert (band.x0, band.x1) == (950.0, 1_050.0)  # book -/+ tolerable
    with pytest.raises(ParameterError):
        figs.estimate_limits(rows, book_total=float("nan"), tolerable=50.0)


def test_coverage_figures_show_the_rates():
    rows = [
        {"estimator": "mpu", "coverage": 0.93, "coverage_mc_se": 0.01, "one_sided_coverage": 0.95,
         "one_sided_coverage_mc_se": 0.008, "risk_incorrect_acceptance": 0.07, "risk_incorrect_acceptance_mc_se": 0.01},
        {"estimator": "ratio", "coverage": 0.81, "coverage_mc_se": 0.02, "one_sided_coverage": 0.85,
         "one_sided_coverage_mc_se": 0.015, "risk_incorrect_acceptance": 0.2, "risk_incorrect_acceptance_mc_se": 0.02},
    ]
    fig = figs.coverage_by_estimator(rows, 0.95)
    assert list(fig.data[0].y) == [0.93, 0.81]
    assert list(fig.data[0].error_y.array) == pytest.approx([0.02, 0.04])  # two Monte Carlo standard errors
    risks = figs.coverage_risks(rows, 0.05)
    assert list(risks.data[0].y) == [0.07, 0.2] and len(risks.data) == 1


def test_estimate_limits_marks_the_finite_sample_bound():
    rows = [{"method": "ratio", "total": 980.0, "lower": 960.0, "upper": 990.0}]
    fig = figs.estimate_limits(rows, book_total=1_000.0, tolerable=50.0, finite_bound=70.0)
    lines = sorted(s.x0 for s in fig.layout.shapes if s.type == "line")
    assert 930.0 in lines  # 1,000 - 70: the audited total the bound guarantees at least
    assert any("finite-sample bound" in a.text for a in fig.layout.annotations)
    plain = figs.estimate_limits(rows, book_total=1_000.0, tolerable=50.0)
    assert len(plain.layout.shapes) == len(fig.layout.shapes) - 1


def test_monetary_bounds_figure():
    ev = {
        "relied_on": "count_or_betting",
        "bounds": {
            "stringer": {"upper": 1_200.0, "projected": 300.0},
            "count_or_betting": {"upper": 1_100.0, "projected": 300.0},
        },
    }
    rows = figs.monetary_bound_rows(ev)
    names = {"stringer": "Stringer", "count_or_betting": HOSTILE_LABELS[2]}
    fig = figs.monetary_bounds(rows, 1_000.0, names=names)
    bars = fig.data[0]
    assert list(bars.x) == [1_200.0, 1_100.0]  # the record's upper bounds, in order
    assert list(bars.y) == ["Stringer", html.escape(HOSTILE_LABELS[2]) + "  (relied on)"]
    assert list(fig.data[1].x) == [300.0, 300.0]  # projected
    assert [s.x0 for s in fig.layout.shapes] == [1_000.0]  # tolerable
    assert not any("<" in s for s in _all_strings(fig.to_plotly_json()["data"]))
    with pytest.raises(ParameterError, match="tolerable"):
        figs.monetary_bounds(rows, float("nan"))
