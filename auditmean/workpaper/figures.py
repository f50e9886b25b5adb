"""The pictures of a workpaper, as plotly figures built from plain data.

Each function takes numbers and labels (or a record's ``to_dict()``) and
returns a new :class:`plotly.graph_objects.Figure`; none reads a file or
keeps state, so the widgets can draw the same pictures:

* :func:`book_value_distribution`: how the book values spread, on a log
  scale, with the stratum boundaries and the top cutoff;
* :func:`stratum_shares`: each stratum's share of the items and of the book value;
* :func:`allocation_bars`: the items of each stratum and the sample planned;
* :func:`estimate_limits`: every estimate of the audited total with its
  limits, against the book value and the tolerable misstatement
  (:func:`evaluation_estimates` takes them from an evaluation record);
* :func:`coverage_by_estimator`, :func:`coverage_risks`: a coverage check's
  rates (from ``CoverageResult.to_dict()["by_estimator"]``);
* :func:`monetary_bounds`: every upper bound of overstatement of a
  monetary-unit evaluation against the tolerable misstatement, the
  relied-on one marked (:func:`monetary_bound_rows` takes them from the
  evaluation record).

Nothing is recomputed but the bins and shares a picture needs. Text from
the user's files (stratum labels) is HTML-escaped before it reaches a
figure, because plotly renders a few HTML tags in its labels.
"""

from __future__ import annotations

import html
import math
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import plotly.graph_objects as go

from auditmean.core.estimators import METHOD_NAMES
from auditmean.errors import ParameterError

__all__ = [
    "book_value_distribution",
    "stratum_shares",
    "allocation_bars",
    "estimate_limits",
    "evaluation_estimates",
    "coverage_by_estimator",
    "coverage_risks",
    "monetary_bound_rows",
    "monetary_bounds",
]

_MAIN = "#2F5D8A"
_LIGHT = "#9DB8D3"
_ACCENT = "#C2572B"
_OK = "#3C8D5A"
_GREY = "#555555"
_LAYOUT = dict(template="plotly_white", height=430, margin=dict(l=70, r=30, t=70, b=70))


def _esc(label: Any) -> str:
    return html.escape(str(label), quote=True)


def _money(v: float) -> str:
    return f"{v:,.2f}"


def _finite(v: Any) -> bool:
    try:
        return v is not None and math.isfinite(float(v))
    except (TypeError, ValueError):
        return False


def _tick_text(power: int) -> str:
    return f"{10.0 ** power:,.0f}" if power >= 0 else f"{10.0 ** power:g}"


def book_value_distribution(
    book_values: Sequence[float] | np.ndarray,
    boundaries: Sequence[float] = (),
    top_cutoff: float | None = None,
    bins: int = 60,
    top_label: str = "top stratum from",
) -> go.Figure:
    """Histogram of the positive book values on a log scale, with the stratum boundaries.

    Parameters
    ----------
    book_values:
        Every item's book value.
    boundaries:
        The interior boundaries between the rule's strata.
    top_cutoff:
        The smallest book value of the top stratum, or None.
    bins:
        Number of bars (equal widths in log10 of the book value).
    top_label:
        The words before the amount on the ``top_cutoff`` line (for a
        monetary-unit sample, the sampling interval).

    Notes
    -----
    A log scale cannot show credits and zeros; their counts are given in
    the title. Each bar's hover text gives its range and count.
    """
    if isinstance(bins, bool) or not isinstance(bins, int) or bins < 2:
        raise ParameterError("bins", f"got {bins!r}; give a whole number of bars, 2 or more")
    x = np.asarray(book_values, dtype=float)
    pos = x[np.isfinite(x) & (x > 0)]
    credits = int(np.count_nonzero(x < 0))
    zeros = int(np.count_nonzero(x == 0))
    fig = go.Figure()
    if pos.size:
        lx = np.log10(pos)
        lo, hi = float(lx.min()), float(lx.max())
        if hi == lo:
            lo, hi = lo - 0.5, hi + 0.5
        counts, edges = np.histogram(lx, bins=bins, range=(lo, hi))
        hover = [
            f"{c:,} items with book values from {_money(10 ** a)} to {_money(10 ** b)}"
            for c, a, b in zip(counts, edges[:-1], edges[1:])
        ]
        fig.add_trace(
            go.Bar(
                x=0.5 * (edges[:-1] + edges[1:]), y=counts, width=np.diff(edges), marker_color=_LIGHT,
                marker_line=dict(color=_MAIN, width=0.5), name="items", hovertext=hover, hoverinfo="text",
            )
        )
        powers = list(range(math.floor(lo), math.ceil(hi) + 1))
        fig.update_xaxes(tickvals=powers, ticktext=[_tick_text(p) for p in powers], range=[lo - 0.05, hi + 0.05])
    for b in (float(v) for v in boundaries):
        if b > 0:
            fig.add_vline(
                x=math.log10(b), line=dict(color=_MAIN, width=1.5, dash="dot"),
                annotation_text=_money(b), annotation_position="top",
                annotation_textangle=-90, annotation_font_size=10,
            )
    if top_cutoff is not None and _finite(top_cutoff) and float(top_cutoff) > 0:
        fig.add_vline(
            x=math.log10(float(top_cutoff)), line=dict(color=_ACCENT, width=2),
            annotation_text=f"{_esc(top_label)} {_money(float(top_cutoff))}", annotation_position="top left",
            annotation_font_size=10,
        )
    apart = []
    if credits:
        apart.append(f"{credits:,} credit items")
    if zeros:
        apart.append(f"{zeros:,} zero items")
    sub = (" and ".join(apart) + " are not shown on a log scale") if apart else "every item is shown"
    fig.update_layout(
        title=f"Book values of {pos.size:,} positive items (log scale)<br><sup>{sub}</sup>",
        xaxis_title="book value (log scale)", yaxis_title="items", bargap=0, showlegend=False, **_LAYOUT,
    )
    return fig


def stratum_shares(strata: Sequence[Any], counts: Sequence[int], book_totals: Sequence[float]) -> go.Figure:
    """Each stratum's share of the items and of the book value.

    Shares of the book value are of the sum of the absolute book totals, so
    a credit stratum shows how much value it carries (its sign is in the
    hover text).
    """
    labels = [_esc(s) for s in strata]
    n = np.asarray(counts, dtype=float)
    b = np.asarray(book_totals, dtype=float)
    if not (len(labels) == n.size == b.size):
        raise ParameterError("strata", "give one count and one book total per stratum")
    n_share = n / n.sum() if n.sum() > 0 else np.zeros_like(n)
    absb = np.abs(b)
    b_share = absb / absb.sum() if absb.sum() > 0 else np.zeros_like(b)
    fig = go.Figure()
    fig.add_trace(
        go.Bar(
            x=labels, y=n_share, name="share of items", marker_color=_LIGHT,
            hovertext=[f"stratum {s}: {int(c):,} items, {p:.1%} of all" for s, c, p in zip(labels, n, n_share)],
            hoverinfo="text",
        )
    )
    fig.add_trace(
        go.Bar(
            x=labels, y=b_share, name="share of book value", marker_color=_MAIN,
            hovertext=[f"stratum {s}: book total {_money(t)}, {p:.1%} of the value" for s, t, p in zip(labels, b, b_share)],
            hoverinfo="text",
        )
    )
    fig.update_layout(
        title="Where the items are, and where the value is",
        barmode="group", yaxis=dict(title="share", tickformat=".0%"), xaxis=dict(title="stratum", type="category"),
        legend=dict(orientation="h", yanchor="top", y=-0.18), **_LAYOUT,
    )
    return fig


def allocation_bars(
    strata: Sequence[Any],
    counts: Sequence[int],
    sizes: Sequence[int],
    examined_in_full: Sequence[bool] | None = None,
) -> go.Figure:
    """The items of each stratum and the sample planned (log scale of items, as counts differ widely)."""
    labels = [_esc(s) for s in strata]
    n = np.asarray(counts, dtype=np.int64)
    k = np.asarray(sizes, dtype=np.int64)
    if not (len(labels) == n.size == k.size):
        raise ParameterError("strata", "give one count and one sample size per stratum")
    full = np.asarray(examined_in_full if examined_in_full is not None else (k == n), dtype=bool)
    fig = go.Figure()
    fig.add_trace(
        go.Bar(x=labels, y=n, name="items in the stratum", marker_color=_LIGHT,
               hovertext=[f"stratum {s}: {c:,} items" for s, c in zip(labels, n)], hoverinfo="text")
    )
    fig.add_trace(
        go.Bar(
            x=labels, y=k, name="sample planned", marker_color=[_ACCENT if f else _MAIN for f in full],
            text=[f"{s:,}" + (" (all)" if f else "") for s, f in zip(k, full)], textposition="outside",
            hovertext=[
                f"stratum {s}: {sz:,} of {c:,} items" + (", examined in full" if f else "")
                for s, sz, c, f in zip(labels, k, n, full)
            ],
            hoverinfo="text",
        )
    )
    fig.update_layout(
        title=f"The sample: {int(k.sum()):,} of {int(n.sum()):,} items",
        barmode="group", yaxis=dict(title="items (log scale)", type="log", dtick=1), xaxis=dict(title="stratum", type="category"),
        legend=dict(orientation="h", yanchor="top", y=-0.18), **_LAYOUT,
    )
    return fig


def evaluation_estimates(evaluation: Mapping[str, Any]) -> list[dict[str, Any]]:
    """The rows :func:`estimate_limits` takes, from ``Evaluation.to_dict()``."""
    rows = []
    for m, c in evaluation["conclusions"].items():
        e = evaluation["estimates"][m]
        so = (evaluation.get("second_opinions") or {}).get(m) or {}
        rows.append(
            {
                "method": m,
                "total": e["total"],
                "lower": e["lower"],
                "upper": e["upper"],
                "misstatement": c["projected_misstatement"],
                "verdict": c["verdict"],
                "second_lower": so.get("bootstrap_lower"),
                "second_upper": so.get("bootstrap_upper"),
            }
        )
    return rows


def estimate_limits(
    estimates: Sequence[Mapping[str, Any]],
    book_total: float,
    tolerable: float,
    primary: str | None = None,
    confidence: float | None = None,
    finite_bound: float | None = None,
) -> go.Figure:
    """Every estimate of the audited total with its limits, against book value and tolerable misstatement.

    Parameters
    ----------
    estimates:
        One mapping per method with ``method``, ``total``, ``lower``,
        ``upper`` and optionally ``second_lower``/``second_upper`` (the
        second-opinion limits), ``misstatement`` and ``verdict``; see
        :func:`evaluation_estimates`.
    book_total, tolerable:
        The book value and the tolerable misstatement: the band
        ``book_total -/+ tolerable`` is where both limits must lie for the
        sample to support the book value.
    primary:
        The relied-on method, marked.
    confidence:
        The confidence of the two-sided limits, for the legend.
    finite_bound:
        The finite-sample upper bound of overstatement, if formed: drawn as
        the audited total it guarantees at least, ``book_total -
        finite_bound``.
    """
    if not _finite(book_total) or not _finite(tolerable):
        raise ParameterError("book_total", "the book total and the tolerable misstatement must be amounts")
    names = [METHOD_NAMES.get(r["method"], str(r["method"])) + ("  (relied on)" if r["method"] == primary else "") for r in estimates]
    tot = np.array([float(r["total"]) for r in estimates])
    lo = np.array([float(r["lower"]) for r in estimates])
    hi = np.array([float(r["upper"]) for r in estimates])
    book, tm = float(book_total), float(tolerable)
    fig = go.Figure()
    fig.add_vrect(x0=book - tm, x1=book + tm, fillcolor=_OK, opacity=0.08, line_width=0)
    fig.add_vline(x=book, line=dict(color=_GREY, width=2), annotation_text="book value", annotation_position="top")
    for x in (book - tm, book + tm):
        fig.add_vline(x=x, line=dict(color=_OK, width=1.5, dash="dash"))
    if _finite(finite_bound):
        fig.add_vline(
            x=book - float(finite_bound), line=dict(color=_ACCENT, width=2, dash="dot"),
            annotation_text=f"finite-sample bound: audited total at least {_money(book - float(finite_bound))}",
            annotation_position="bottom left", annotation_font_size=10,
        )
    label = "estimate and limits" + (f" ({confidence:.0%} two-sided)" if confidence is not None else "")
    hover = []
    for r, n in zip(estimates, names):
        text = (
            f"{n}: audited total {_money(float(r['total']))}, limits {_money(float(r['lower']))} to "
            f"{_money(float(r['upper']))}"
        )
        if _finite(r.get("misstatement")):
            text += f"; projected misstatement {_money(float(r['misstatement']))}"
        if r.get("verdict"):
            text += f"; the sample {r['verdict']} the book value"
        hover.append(text)
    fig.add_trace(
        go.Scatter(
            x=tot, y=names, mode="markers", name=label, marker=dict(color=_MAIN, size=11),
            error_x=dict(type="data", symmetric=False, array=hi - tot, arrayminus=tot - lo, color=_MAIN, thickness=2, width=8),
            hovertext=hover, hoverinfo="text",
        )
    )
    so = [(i, r) for i, r in enumerate(estimates) if _finite(r.get("second_lower")) and _finite(r.get("second_upper"))]
    if so:
        mid = np.array([0.5 * (float(r["second_lower"]) + float(r["second_upper"])) for _, r in so])
        slo = np.array([float(r["second_lower"]) for _, r in so])
        shi = np.array([float(r["second_upper"]) for _, r in so])
        fig.add_trace(
            go.Scatter(
                x=mid, y=[names[i] for i, _ in so], mode="markers", name="second opinion (bootstrap) limits",
                marker=dict(color=_ACCENT, size=1, opacity=0),
                error_x=dict(type="data", symmetric=False, array=shi - mid, arrayminus=mid - slo, color=_ACCENT,
                             thickness=1.5, width=5),
                hovertext=[f"{names[i]}: second-opinion limits {_money(a)} to {_money(b)}" for (i, _), a, b in zip(so, slo, shi)],
                hoverinfo="text",
            )
        )
    fig.update_layout(
        title=(
            "Audited total by method: estimate and limits<br><sup>shaded: book value "
            f"{_money(book)} plus or minus the tolerable misstatement {_money(tm)}</sup>"
        ),
        xaxis=dict(title="audited total", tickformat=",.0f"), yaxis=dict(autorange="reversed", type="category"),
        legend=dict(orientation="h", yanchor="top", y=-0.2), **{**_LAYOUT, "margin": dict(l=250, r=30, t=70, b=90)},
    )
    return fig


def _rows(by_estimator: Sequence[Mapping[str, Any]], col: str) -> np.ndarray:
    return np.array([float(r[col]) if _finite(r.get(col)) else np.nan for r in by_estimator])


def _share_bars(fig: go.Figure, names: list[str], by_estimator: Sequence[Mapping[str, Any]], series, hover: str) -> None:
    """One bar trace per (label, column, colour) present, with +/- 2 Monte Carlo standard errors."""
    for label, col, colour in series:
        if not by_estimator or col not in by_estimator[0]:
            continue
        p = _rows(by_estimator, col)
        se = _rows(by_estimator, col + "_mc_se")
        fig.add_trace(
            go.Bar(
                x=names, y=p, name=label, marker_color=colour,
                error_y=dict(type="data", array=2 * np.nan_to_num(se), visible=True),
                hovertext=[hover.format(name=n, label=label, value=v, margin=2 * m) for n, v, m in zip(names, p, se)],
                hoverinfo="text",
            )
        )


def coverage_by_estimator(by_estimator: Sequence[Mapping[str, Any]], confidence: float) -> go.Figure:
    """Share of simulated samples whose limits held, per estimator, with two Monte Carlo standard errors.

    ``by_estimator`` is ``CoverageResult.to_dict()["by_estimator"]``; the
    dashed line is the nominal confidence.
    """
    names = [METHOD_NAMES.get(r.get("estimator"), str(r.get("estimator"))) for r in by_estimator]
    fig = go.Figure()
    series = [("two-sided interval", "coverage", _MAIN), ("one-sided lower bound", "one_sided_coverage", _LIGHT)]
    if by_estimator and "second_opinion_coverage" in by_estimator[0]:
        series.append(("second opinion, two-sided", "second_opinion_coverage", _ACCENT))
    _share_bars(fig, names, by_estimator, series, "{name}: {label} held in {value:.1%} of simulated samples (± {margin:.1%})")
    fig.add_hline(y=float(confidence), line=dict(color=_GREY, dash="dash"),
                  annotation_text=f"nominal {float(confidence):.0%}", annotation_position="top right")
    fig.update_layout(
        title="How often the limits held in the simulated samples",
        barmode="group", yaxis=dict(title="share of samples", tickformat=".0%", range=[0, 1.02]),
        legend=dict(orientation="h", yanchor="top", y=-0.18), **_LAYOUT,
    )
    return fig


def coverage_risks(by_estimator: Sequence[Mapping[str, Any]], nominal_acceptance: float | None = None) -> go.Figure:
    """The simulated risks of incorrect acceptance (at tolerable) and rejection (at expected), per estimator."""
    names = [METHOD_NAMES.get(r.get("estimator"), str(r.get("estimator"))) for r in by_estimator]
    fig = go.Figure()
    series = (
        ("risk of incorrect acceptance (misstated by tolerable)", "risk_incorrect_acceptance", _ACCENT),
        ("risk of incorrect rejection (misstated as expected)", "risk_incorrect_rejection", _MAIN),
    )
    _share_bars(fig, names, by_estimator, series, "{name}: {label} {value:.1%} (± {margin:.1%})")
    if nominal_acceptance is not None and _finite(nominal_acceptance):
        fig.add_hline(y=float(nominal_acceptance), line=dict(color=_GREY, dash="dash"),
                      annotation_text=f"nominal {float(nominal_acceptance):.0%}", annotation_position="top right")
    fig.update_layout(
        title="Risks measured in the simulated samples",
        barmode="group", yaxis=dict(title="share of samples", tickformat=".0%", rangemode="tozero"),
        legend=dict(orientation="h", yanchor="top", y=-0.18), **_LAYOUT,
    )
    return fig


def monetary_bound_rows(evaluation: Mapping[str, Any]) -> list[dict[str, Any]]:
    """The rows :func:`monetary_bounds` takes, from ``MonetaryUnitEvaluation.to_dict()``."""
    rows = []
    for m, b in (evaluation.get("bounds") or {}).items():
        rows.append(
            {
                "method": m,
                "name": str(b.get("name") or m),
                "upper": b.get("upper"),
                "projected": b.get("projected"),
                "relied_on": m == evaluation.get("relied_on"),
            }
        )
    return rows


def monetary_bounds(rows: Sequence[Mapping[str, Any]], tolerable: float, names: Mapping[str, str] | None = None) -> go.Figure:
    """Every upper bound of overstatement of a monetary-unit sample, against the tolerable misstatement.

    Parameters
    ----------
    rows:
        One mapping per bound with ``method``, ``upper``, optionally
        ``projected`` and ``relied_on`` (see :func:`monetary_bound_rows`).
    tolerable:
        The tolerable misstatement (the dashed line).
    names:
        Plain names of the methods (default: the method names).
    """
    if not _finite(tolerable):
        raise ParameterError("tolerable", "the tolerable misstatement must be an amount")
    names = names or {}
    labels = [
        _esc(names.get(r["method"], str(r["method"]))) + ("  (relied on)" if r.get("relied_on") else "") for r in rows
    ]
    upper = [float(r["upper"]) if _finite(r.get("upper")) else None for r in rows]
    colours = [_ACCENT if r.get("relied_on") else _MAIN for r in rows]
    fig = go.Figure()
    fig.add_trace(
        go.Bar(
            x=upper, y=labels, orientation="h", marker_color=colours, name="upper bound of overstatement",
            hovertext=[f"{n}: upper bound {_money(u)}" if u is not None else f"{n}: no bound" for n, u in zip(labels, upper)],
            hoverinfo="text",
        )
    )
    projected = [(lab, float(r["projected"])) for lab, r in zip(labels, rows) if _finite(r.get("projected"))]
    if projected:
        fig.add_trace(
            go.Scatter(
                x=[v for _, v in projected], y=[lab for lab, _ in projected], mode="markers",
                marker=dict(color=_GREY, size=10, symbol="diamond"), name="projected misstatement",
                hovertext=[f"{lab}: projected misstatement {_money(v)}" for lab, v in projected], hoverinfo="text",
            )
        )
    fig.add_vline(x=float(tolerable), line=dict(color=_OK, width=2, dash="dash"),
                  annotation_text=f"tolerable {_money(float(tolerable))}", annotation_position="top")
    fig.update_layout(
        title="Upper bounds of overstatement, each at the planned confidence",
        xaxis=dict(title="overstatement", tickformat=",.0f", rangemode="tozero"),
        yaxis=dict(autorange="reversed", type="category"),
        legend=dict(orientation="h", yanchor="top", y=-0.2), **{**_LAYOUT, "margin": dict(l=220, r=30, t=70, b=90)},
    )
    return fig
