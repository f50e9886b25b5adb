"""Pictures of the job, as plain plotly figures: data in, ``go.Figure`` out, no widgets.

* :func:`book_value_bins` and :func:`book_value_distribution`: how the book
  values spread, on a log scale, with the stratum boundaries and the top
  stratum's cutoff;
* :func:`value_share`: the share of the items and of the book value in each
  stratum;
* :func:`allocation`: the planned sample size of each stratum;
* :func:`estimate_limits`: each method's projected misstatement with its
  limits (and the second opinion where one was given, and the finite-sample
  bound where the verdict rests on it) against the tolerable misstatement;
* :func:`monetary_bounds`: every bound of a monetary-unit evaluation, the
  relied-on one marked, against the tolerable misstatement.

The pictures format what the engine's records hold. Nothing here is a
statistic of the audit; the only arithmetic is the picture's own (the bins
of the histogram, and plotly's scaling of the share bars to 100 %). The
widgets show these figures in a ``FigureWidget`` and change them in place
(:func:`auditmean.widgets._base.refresh_figure`), so every builder returns
the same traces, in the same order, whatever the data.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
import plotly.graph_objects as go

from auditmean._records import format_number
from auditmean.core.estimators import METHOD_NAMES
from auditmean.core.flags import FLAG_CODES
from auditmean.errors import ParameterError
from auditmean.widgets.style import BRICK, INK, MUTED, OCHRE, PINE, SKY, STRATUM_COLOURS

__all__ = [
    "BookValueBins",
    "book_value_bins",
    "book_value_distribution",
    "value_share",
    "allocation",
    "estimate_limits",
    "monetary_bounds",
    "VERDICT_COLOURS",
]

#: Colour of each verdict of :func:`auditmean.evaluate`.
VERDICT_COLOURS = {"supports": PINE, "does not support": BRICK, "cannot be assessed": OCHRE}

_FONT = dict(family="system-ui, -apple-system, Segoe UI, sans-serif", color=INK)
_GRID = "#e3e7ea"


def _money(v: Any) -> str:
    return format_number(v)


def _esc(label: Any) -> str:
    """A label from the user's file, escaped: plotly renders a few HTML tags in its texts."""
    return html.escape(str(label), quote=True)


def _layout(fig: go.Figure, title: str, subtitle: str = "", **kwargs: Any) -> None:
    text = title if not subtitle else f"{title}<br><sup>{subtitle}</sup>"
    # Colours set directly rather than through a named template: copying a
    # template costs more than the rest of a redraw.
    fig.update_layout(
        title=dict(text=text, x=0.01, xanchor="left"),
        paper_bgcolor="white",
        plot_bgcolor="white",
        hoverlabel=dict(bgcolor="white", font=dict(color=INK)),
        xaxis=dict(gridcolor=_GRID, linecolor=MUTED, zerolinecolor=_GRID),
        yaxis=dict(gridcolor=_GRID, linecolor=MUTED, zerolinecolor=_GRID),
        font=_FONT,
        margin=dict(l=60, r=20, t=70, b=50),
        legend=dict(orientation="h", yanchor="top", y=-0.18, x=0),
        **kwargs,
    )


# --------------------------------------------------------------------------- book values


@dataclass(frozen=True)
class BookValueBins:
    """The bins of the book-value histogram: log-spaced edges over the positive values.

    Attributes
    ----------
    edges:
        ``bins + 1`` increasing edges, evenly spaced on a log scale from the
        smallest to the largest positive book value.
    counts:
        Positive items in each bin (the last bin includes its upper edge).
    credits, zeros:
        Items below zero and at zero, which a log scale cannot show.
    """

    edges: np.ndarray
    counts: np.ndarray
    credits: int
    zeros: int


def book_value_bins(book_values: Any, bins: int = 80) -> BookValueBins:
    """Count the positive book values in ``bins`` log-spaced bins (done once per population)."""
    if isinstance(bins, bool) or not isinstance(bins, int) or bins < 1:
        raise ParameterError("bins", f"got {bins!r}; give a whole number of bins, 1 or more")
    x = np.asarray(book_values, dtype=float)
    positive = x[x > 0]
    credits = int(np.count_nonzero(x < 0))
    zeros = int(np.count_nonzero(x == 0))
    if positive.size == 0:
        return BookValueBins(edges=np.array([1.0, 10.0]), counts=np.zeros(1, dtype=np.int64), credits=credits, zeros=zeros)
    lo, hi = float(positive.min()), float(positive.max())
    if hi <= lo:  # every positive value the same: one bin around it
        lo, hi = lo * 0.9, hi * 1.1
    edges = np.geomspace(lo, hi, bins + 1)
    counts, _ = np.histogram(positive, bins=edges)
    return BookValueBins(edges=edges, counts=counts.astype(np.int64), credits=credits, zeros=zeros)


def _vertical_lines(xs: list[float], top: float, texts: list[str]) -> dict[str, list[Any]]:
    x: list[Any] = []
    y: list[Any] = []
    hover: list[Any] = []
    for v, t in zip(xs, texts):
        x += [v, v, None]
        y += [0, top, None]
        hover += [t, t, None]
    return {"x": x, "y": y, "hovertext": hover}


def book_value_distribution(bins: BookValueBins, strata: Any = None) -> go.Figure:
    """The spread of the book values on a log scale, with stratum boundaries and the top cutoff.

    Parameters
    ----------
    bins:
        From :func:`book_value_bins`.
    strata:
        A :class:`~auditmean.strata.Strata` record, or None for the book
        values alone.

    Returns
    -------
    plotly.graph_objects.Figure
        Three traces, always in this order: the histogram, the stratum
        boundaries, the top stratum's cutoff (the last two empty without strata).
    """
    edges, counts = bins.edges, bins.counts
    lows, highs = edges[:-1], edges[1:]
    hover = [
        f"{int(c):,} items with a book value from {_money(lo)} to under {_money(hi)}"
        for c, lo, hi in zip(counts, lows, highs)
    ]
    fig = go.Figure()
    fig.add_trace(
        go.Scatter(
            x=list(edges),
            y=[int(c) for c in counts] + [int(counts[-1])],
            mode="lines",
            line=dict(shape="hv", color=SKY, width=1.5),
            fill="tozeroy",
            fillcolor="rgba(79,127,168,0.35)",
            name="items by book value",
            hovertext=hover + [hover[-1]],
            hoverinfo="text",
        )
    )
    top = float(max(int(counts.max()), 1)) * 1.08
    b_lines: dict[str, list[Any]] = {"x": [], "y": [], "hovertext": []}
    c_lines: dict[str, list[Any]] = {"x": [], "y": [], "hovertext": []}
    subtitle = []
    if strata is not None:
        positive = [(h, b) for h, b in enumerate(strata.boundaries) if b > 0]
        b_lines = _vertical_lines(
            [b for _, b in positive],
            top,
            [
                f"boundary between strata {h + 1} and {h + 2}: book values from {_money(b)} go to stratum {h + 2}"
                for h, b in positive
            ],
        )
        if strata.top_cutoff is not None:
            n_top = int(strata.table.loc[strata.table["kind"] == "top", "count"].sum())
            c_lines = _vertical_lines(
                [float(strata.top_cutoff)],
                top,
                [f"top stratum: the {n_top:,} items of {_money(strata.top_cutoff)} or more are examined in full"],
            )
    fig.add_trace(
        go.Scatter(
            **b_lines, mode="lines", line=dict(color=INK, width=1.5, dash="dot"),
            name="stratum boundaries", hoverinfo="text",
        )
    )
    fig.add_trace(
        go.Scatter(
            **c_lines, mode="lines", line=dict(color=BRICK, width=3),
            name="top stratum cutoff (examined in full)", hoverinfo="text",
        )
    )
    if bins.credits:
        subtitle.append(f"{bins.credits:,} credit items")
    if bins.zeros:
        subtitle.append(f"{bins.zeros:,} zero balances")
    note = (" and ".join(subtitle) + " are not shown on the log scale") if subtitle else "every item is shown"
    _layout(fig, "Book values (log scale)", note, height=360, hovermode="closest")
    fig.update_xaxes(type="log", title="book value")
    fig.update_yaxes(title="items", rangemode="tozero")
    return fig


def value_share(table: pd.DataFrame) -> go.Figure:
    """The share of the items and of the book value in each stratum (one stacked bar each).

    ``table`` has columns ``stratum``, ``count`` and ``book_total`` (for
    example :attr:`Strata.table` or :attr:`Plan.table`). A stratum with a
    negative book total (credits) is left out of the book-value bar, and the
    subtitle says so. One trace per stratum, in table order.
    """
    fig = go.Figure()
    left_out = []
    for h, r in enumerate(table.itertuples(index=False)):
        label = _esc(r.stratum)
        total = float(r.book_total)
        negative = total < 0
        if negative:
            left_out.append(f"{label} ({_money(total)})")
        fig.add_trace(
            go.Bar(
                y=["items", "book value"],
                x=[int(r.count), None if negative else total],
                orientation="h",
                name=f"stratum {label}",
                marker_color=STRATUM_COLOURS[h % len(STRATUM_COLOURS)],
                hovertext=[
                    f"stratum {label}: {int(r.count):,} items",
                    f"stratum {label}: book value {_money(total)}",
                ],
                hoverinfo="text",
            )
        )
    subtitle = "each bar is 100 %"
    if left_out:
        subtitle += "; left out of the book-value bar because negative: " + ", ".join(left_out)
    _layout(fig, "Share of the items and of the book value by stratum", subtitle,
            barmode="stack", barnorm="percent", height=260)
    fig.update_xaxes(title="share (%)", range=[0, 100])
    fig.update_yaxes(autorange="reversed")
    return fig


# --------------------------------------------------------------------------- the plan


def allocation(plan: Any) -> go.Figure:
    """The planned sample size of each stratum: sampled strata, and strata examined in full.

    ``plan`` is a :class:`~auditmean.plan.Plan`. Two bar traces, always:
    the sampled strata and the strata examined in full (each blank where
    the other applies). A stratum with a planning check has an ochre outline
    and the check in its hover text.
    """
    t = plan.table
    labels = [_esc(s) for s in t["stratum"]]
    checks: dict[str, list[str]] = {}
    for f in plan.checks:
        if f.stratum is not None:
            checks.setdefault(_esc(f.stratum), []).append(FLAG_CODES.get(f.code, f.code))
    hover, sampled, full, outline = [], [], [], []
    for s, r in zip(labels, t.itertuples(index=False)):
        n, N = int(r.size), int(r.count)
        words = f"stratum {s}: examine {n:,} of {N:,} items" + (" (all of them)" if r.take_all else "")
        words += f"<br>book value {_money(r.book_total)}"
        words += f"<br>standard deviation used for the sample size {_money(r.std_dev)}"
        if s in checks:
            words += "<br>check: " + "; ".join(checks[s])
        hover.append(words)
        sampled.append(None if r.take_all else n)
        full.append(n if r.take_all else None)
        outline.append(OCHRE if s in checks else "rgba(0,0,0,0)")
    fig = go.Figure()
    for name, ys, colour in (("sampled", sampled, PINE), ("examined in full", full, BRICK)):
        fig.add_trace(
            go.Bar(
                x=labels,
                y=ys,
                name=name,
                marker=dict(color=colour, line=dict(color=outline, width=3)),
                text=[None if v is None else f"{v:,}" for v in ys],
                textposition="outside",
                hovertext=hover,
                hoverinfo="text",
            )
        )
    subtitle = (
        f"standard error aimed at {_money(plan.target_std_error)}, reached with these sizes "
        f"{_money(plan.achieved_std_error)}; planned allowance for sampling risk {_money(plan.planned_allowance)}"
    )
    _layout(fig, f"Sample size: {plan.total_size:,} of {plan.population_count:,} items", subtitle,
            barmode="overlay", height=340)
    fig.update_xaxes(type="category", title="stratum")
    fig.update_yaxes(title="items to examine", rangemode="tozero")
    return fig


# --------------------------------------------------------------------------- the conclusion


def estimate_limits(evaluation: Any) -> go.Figure:
    """Each method's projected misstatement and limits, against the tolerable misstatement.

    ``evaluation`` is an :class:`~auditmean.evaluation.Evaluation`. Four
    traces, always: the normal-theory limits, the second-opinion limits
    (rescaling bootstrap; only for methods that raised a warning), the
    projected misstatement, and the upper limit the verdict rests on where
    it is not the normal limit (the finite-sample bound). Vertical lines
    mark no misstatement and the tolerable misstatement either way.
    """
    methods = list(evaluation.conclusions)
    names = [METHOD_NAMES[m] for m in methods]
    lim = {"x": [], "y": [], "hovertext": []}
    so = {"x": [], "y": [], "hovertext": []}
    px, py, ph, pc, ps = [], [], [], [], []
    bx, by, bh = [], [], []
    for i, m in enumerate(methods):
        c = evaluation.conclusions[m]
        name = names[i]
        basis = getattr(c, "basis", "normal limit")
        relied = getattr(c, "relied_upper_limit", math.nan)
        if basis != "normal limit" and relied is not None and math.isfinite(relied):
            bx.append(relied)
            by.append(i)
            bh.append(f"{name}: the verdict rests on the {basis}, upper limit {_money(relied)}; the normal "
                      "limits are shown for information")
        words = (
            f"{name}: projected misstatement {_money(c.projected_misstatement)}"
            f"<br>limits {_money(c.lower_limit)} to {_money(c.upper_limit)}"
            f"<br>the sample {c.verdict} the conclusion"
        )
        lim["x"] += [c.lower_limit, c.upper_limit, None]
        lim["y"] += [i, i, None]
        lim["hovertext"] += [words, words, None]
        if math.isfinite(c.second_opinion_upper) and math.isfinite(c.second_opinion_lower):
            w2 = (
                f"{name}, second opinion (rescaling bootstrap): limits {_money(c.second_opinion_lower)} to "
                f"{_money(c.second_opinion_upper)}"
            )
            so["x"] += [c.second_opinion_lower, c.second_opinion_upper, None]
            so["y"] += [i + 0.22, i + 0.22, None]
            so["hovertext"] += [w2, w2, None]
        px.append(c.projected_misstatement)
        py.append(i)
        ph.append(words)
        pc.append(VERDICT_COLOURS.get(c.verdict, INK))
        ps.append(15 if m == evaluation.primary else 10)
    fig = go.Figure()
    fig.add_trace(go.Scatter(**lim, mode="lines", line=dict(color=SKY, width=7), name="limits (normal approximation)",
                             hoverinfo="text"))
    fig.add_trace(go.Scatter(**so, mode="lines", line=dict(color=OCHRE, width=3), name="second opinion (rescaling bootstrap)",
                             hoverinfo="text"))
    fig.add_trace(
        go.Scatter(
            x=px, y=py, mode="markers", hovertext=ph, hoverinfo="text", name="projected misstatement",
            marker=dict(symbol="diamond", size=ps, color=pc, line=dict(color=INK, width=1)),
        )
    )
    fig.add_trace(
        go.Scatter(
            x=bx, y=by, mode="markers", hovertext=bh, hoverinfo="text", name="upper limit relied on (finite-sample bound)",
            marker=dict(symbol="line-ns-open", size=22, color=INK, line=dict(color=INK, width=3)),
        )
    )
    tm = evaluation.tolerable
    fig.add_vline(x=0, line=dict(color=MUTED, width=1))
    fig.add_vline(x=tm, line=dict(color=BRICK, width=2, dash="dash"),
                  annotation_text=f"tolerable overstatement {_money(tm)}", annotation_position="top left")
    fig.add_vline(x=-tm, line=dict(color=BRICK, width=2, dash="dash"),
                  annotation_text=f"tolerable understatement {_money(-tm)}", annotation_position="top right")
    primary = evaluation.estimates[evaluation.primary]
    ria = evaluation.risk_incorrect_acceptance
    subtitle = (
        f"book value {_money(primary.book_total)}; each limit at a {ria:.0%} risk of incorrect acceptance; "
        f"the larger marker is the relied-on method ({METHOD_NAMES[evaluation.primary]})"
    )
    _layout(fig, "Projected misstatement and its limits against the tolerable misstatement", subtitle,
            height=120 + 55 * max(len(methods), 1), hovermode="closest")
    fig.update_yaxes(tickvals=list(range(len(methods))), ticktext=names, autorange="reversed",
                     range=None, zeroline=False)
    fig.update_xaxes(title="misstatement: book value less audited value (overstatement to the right)",
                     zeroline=False)
    return fig


def monetary_bounds(evaluation: Any) -> go.Figure:
    """Every bound of a monetary-unit evaluation against the tolerable misstatement.

    ``evaluation`` is a :class:`~auditmean.monetary_engagement.MonetaryUnitEvaluation`.
    Two traces, always: each bound as a line from the projected misstatement
    to its upper bound on overstatement (the relied-on one thicker, in the
    colour of its verdict), and the upper bounds as markers. A dashed line
    marks the tolerable misstatement.
    """
    table = evaluation.table()
    names = [_esc(n) + ("  (relied on)" if r else "") for n, r in zip(table["name"], table["relied_on"])]
    lx, ly, lh = [], [], []
    mx, my, mh, mc, ms = [], [], [], [], []
    colour = VERDICT_COLOURS.get(evaluation.verdict, INK)
    for i, r in enumerate(table.itertuples(index=False)):
        words = (f"{_esc(r.name)}: projected {_money(r.projected)}, upper bound on overstatement {_money(r.upper)}"
                 f"<br>{_esc(r.guarantee)}")
        lx += [r.projected, r.upper, None]
        ly += [i, i, None]
        lh += [words, words, None]
        mx.append(r.upper)
        my.append(i)
        mh.append(words)
        mc.append(colour if r.relied_on else SKY)
        ms.append(16 if r.relied_on else 10)
    fig = go.Figure()
    fig.add_trace(go.Scatter(x=lx, y=ly, mode="lines", line=dict(color=SKY, width=6), hovertext=lh,
                             hoverinfo="text", name="from the projected misstatement to the upper bound"))
    fig.add_trace(go.Scatter(x=mx, y=my, mode="markers", hovertext=mh, hoverinfo="text", name="upper bound",
                             marker=dict(symbol="diamond", size=ms, color=mc, line=dict(color=INK, width=1))))
    tm = evaluation.tolerable
    fig.add_vline(x=0, line=dict(color=MUTED, width=1))
    fig.add_vline(x=tm, line=dict(color=BRICK, width=2, dash="dash"),
                  annotation_text=f"tolerable {_money(tm)}", annotation_position="top left")
    subtitle = (f"positive book value {_money(evaluation.book_total)}; {evaluation.sample_size:,} monetary units; "
                f"every bound at {100 * evaluation.confidence:.4g}% confidence; the larger marker is the bound relied on")
    _layout(fig, "Upper bounds on overstatement against the tolerable misstatement", subtitle,
            height=190 + 55 * max(len(names), 1), hovermode="closest")
    # room above the first bound for the tolerable line's label; the legend below the axis title
    fig.update_yaxes(tickvals=list(range(len(names))), ticktext=names, range=[len(names) - 0.5, -1.0],
                     zeroline=False)
    fig.update_xaxes(title="overstatement: book value less audited value", zeroline=False, rangemode="tozero")
    fig.update_layout(legend=dict(orientation="h", yanchor="top", y=-0.32, x=0), margin=dict(b=110))
    return fig
