"""Pictures of a coverage check (plotly figures; no widgets).

* :func:`estimate_distribution`: how the simulated estimates of the audited
  total spread, against the normal curve the interval assumes, with the
  true total and the point where the misstatement reaches tolerable marked.
* :func:`coverage_bars`: the share of simulated samples whose limits held,
  per estimator, with Monte Carlo error bars and the nominal level.

Both format numbers a :class:`~auditmean.coverage.CoverageResult` holds;
nothing is recomputed except the curve and the bins of the picture.
"""

from __future__ import annotations

import math

import numpy as np
import plotly.graph_objects as go

from auditmean.core.estimators import METHOD_NAMES
from auditmean.coverage import CoverageResult
from auditmean.errors import ParameterError

__all__ = ["estimate_distribution", "coverage_bars"]


def _normal_density(x: np.ndarray, mean: float, sd: float) -> np.ndarray:
    """The normal density exp(-z**2 / 2) / (sd * sqrt(2 pi)), z = (x - mean) / sd, written out
    (the values of ``scipy.stats.norm.pdf`` without importing ``scipy.stats``)."""
    z = (np.asarray(x, dtype=float) - mean) / sd
    return np.exp(-0.5 * z * z) / (sd * math.sqrt(2.0 * math.pi))

_BAR = "#4C78A8"
_CURVE = "#E45756"
_TRUTH = "#222222"
_LIMIT = "#F58518"
_SECOND = "#72B7B2"


def _money(v: float) -> str:
    return f"{v:,.0f}"


def estimate_distribution(result: CoverageResult, estimator: str | None = None, bins: int = 60) -> go.Figure:
    """Histogram of the simulated estimates of the audited total against the assumed normal curve.

    Parameters
    ----------
    result:
        A coverage check.
    estimator:
        Which estimator (default: the first simulated).
    bins:
        Number of bars.

    Notes
    -----
    The curve is the normal distribution the interval relies on: centred
    on the true audited total (with a new population for every replication,
    on the average true total) with standard deviation equal to the
    *average estimated standard error* of the replications. When the bars
    are wider or lopsided against it, the stated confidence is not met. The
    empirical standard deviation of the estimation errors is given in the
    title for comparison.
    """
    if not isinstance(result, CoverageResult):
        raise ParameterError("result", f"got {type(result).__name__}; give the result of simulate_coverage")
    method = result.estimators[0] if estimator is None else estimator
    j = result.column(method)
    if isinstance(bins, bool) or not isinstance(bins, int) or bins < 2:
        raise ParameterError("bins", f"got {bins!r}; give a whole number of bars, 2 or more")
    est = result.estimates[:, j]
    est = est[np.isfinite(est)]
    row = result.by_estimator.iloc[j]
    name = METHOD_NAMES[method]
    truth = result.true_total
    sd = float(row["mean_std_error"])
    R = est.size

    fig = go.Figure()
    if R:
        counts, edges = np.histogram(est, bins=bins)
        width = np.diff(edges)
        density = counts / (R * np.where(width > 0, width, 1.0))
        hover = [
            f"{c:,} of {R:,} simulated samples ({c / R:.1%}) estimated the audited total "
            f"between {_money(lo)} and {_money(hi)}"
            for c, lo, hi in zip(counts, edges[:-1], edges[1:])
        ]
        fig.add_trace(
            go.Bar(
                x=0.5 * (edges[:-1] + edges[1:]),
                y=density,
                width=width,
                marker_color=_BAR,
                opacity=0.75,
                name=f"simulated estimates ({name})",
                hovertext=hover,
                hoverinfo="text",
            )
        )
        if sd > 0 and math.isfinite(sd):
            lo = min(edges[0], truth - 4 * sd)
            hi = max(edges[-1], truth + 4 * sd)
            grid = np.linspace(lo, hi, 400)
            fig.add_trace(
                go.Scatter(
                    x=grid,
                    y=_normal_density(grid, truth, sd),
                    mode="lines",
                    line=dict(color=_CURVE, width=2),
                    name="normal curve the interval assumes (true total, average standard error)",
                    hovertemplate="audited total %{x:,.0f}<extra>assumed normal curve</extra>",
                )
            )
    truth_words = "true audited total" if result.fixed_population else "average true audited total"
    fig.add_vline(
        x=truth, line=dict(color=_TRUTH, width=2),
        annotation_text=f"{truth_words} {_money(truth)}", annotation_position="top left",
    )
    if result.tolerable is not None:
        limit = result.book_total - result.tolerable
        fig.add_vline(
            x=limit, line=dict(color=_LIMIT, width=2, dash="dash"),
            annotation_text=f"book total less tolerable misstatement {_money(limit)}",
            annotation_position="bottom right",
        )
    err_sd = float(row["error_sd"])
    fig.update_layout(
        title=(
            f"{name}: {R:,} simulated estimates of the audited total<br>"
            f"<sup>average estimated standard error {_money(sd)}; actual spread of the estimates around the "
            f"truth {_money(err_sd)}</sup>"
        ),
        xaxis_title="estimated audited total",
        yaxis_title="density",
        bargap=0,
        legend=dict(orientation="h", yanchor="top", y=-0.2),
        template="plotly_white",
    )
    return fig


def coverage_bars(result: CoverageResult) -> go.Figure:
    """Share of simulated samples whose limits contained the true total, per estimator.

    Bars for the two-sided interval and the one-sided lower bound (and the
    second opinion's, when it was measured), each with an error bar of two
    Monte Carlo standard errors, ``2 sqrt(p (1 - p) / R)``; the dashed line
    is the nominal confidence level.
    """
    if not isinstance(result, CoverageResult):
        raise ParameterError("result", f"got {type(result).__name__}; give the result of simulate_coverage")
    b = result.by_estimator
    names = [METHOD_NAMES[m] for m in b["estimator"]]
    conf = result.confidence
    series = [
        ("two-sided interval", "coverage", "coverage_mc_se", _BAR, "the two-sided interval contained"),
        ("one-sided lower bound", "one_sided_coverage", "one_sided_coverage_mc_se", "#9ECAE9",
         "the lower bound was not above"),
    ]
    if "second_opinion_coverage" in b:
        series.append(("second opinion, two-sided", "second_opinion_coverage", "second_opinion_coverage_mc_se",
                       _SECOND, "the second-opinion interval contained"))
    fig = go.Figure()
    for label, col, se_col, colour, words in series:
        p = b[col].to_numpy(dtype=float)
        se = b[se_col].to_numpy(dtype=float)
        n = b["replications"].to_numpy()
        hover = [
            f"{nm}: {words} the true audited total in {round(pi * ni):,} of {ni:,} simulated samples "
            f"({pi:.1%}, Monte Carlo error ± {2 * si:.1%} at two standard errors); nominal {conf:.0%}"
            for nm, pi, si, ni in zip(names, p, se, n)
        ]
        fig.add_trace(
            go.Bar(
                x=names,
                y=p,
                name=label,
                marker_color=colour,
                error_y=dict(type="data", array=2 * se, visible=True),
                hovertext=hover,
                hoverinfo="text",
            )
        )
    fig.add_hline(
        y=conf, line=dict(color=_TRUTH, dash="dash"),
        annotation_text=f"nominal {conf:.0%}", annotation_position="top right",
    )
    lows = [float(np.nanmin(b[s[1]])) for s in series if np.isfinite(b[s[1]]).any()]
    bottom = max(0.0, min([*lows, conf]) - 0.1)
    fig.update_layout(
        title=f"How often the limits held: {result.replications:,} simulated samples",
        yaxis=dict(title="share of samples covering the true total", tickformat=".0%", range=[bottom, 1.0]),
        barmode="group",
        template="plotly_white",
        legend=dict(orientation="h", yanchor="top", y=-0.15),
    )
    return fig
