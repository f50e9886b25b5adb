"""The coverage check of a monetary-unit sample: how often would each bound really hold here?

:func:`simulate_monetary_units` repeats a planned monetary-unit sample many
times on the population's own book values, misstated by a
:class:`~auditmean.coverage.MisstatementModel`, and computes on every
simulated sample every bound :func:`auditmean.monetary_unit_bound` offers
(Stringer, error count, betting, error count or betting) and, for
information, the normal limit of the mean taint. For each it reports how
often the upper bound was not below the true overstatement, its average,
the actual risk of incorrect acceptance at populations misstated by exactly
the tolerable misstatement, and the actual risk of incorrect rejection at
the expected misstatement, each with its Monte Carlo standard error. The
user sees side by side how often each limit holds.

The numbers are computed by :mod:`auditmean.core.monetary_simulation`
(design, draws, scaling and formulas there); the bounds by
:mod:`auditmean.core.monetary`. This module validates the inputs once and
wraps the answer in a :class:`MonetaryUnitCoverage`.
"""

from __future__ import annotations

import html
import math
import numbers
import textwrap
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np
import pandas as pd

from auditmean._records import (
    RecordMixin,
    format_number,
    html_table,
    json_safe,
    text_table,
)
from auditmean.core import misstatement as core_ms
from auditmean.core import monetary as core_mus
from auditmean.core import monetary_simulation as core_msim
from auditmean.core.choices import MAX_REPLICATIONS
from auditmean.coverage import (
    _ROUNDING_RTOL,
    MisstatementModel,
    _book_array,
    _check_run,
    _clause_lines,
    _how_and_done,
    _html_opening,
    _notes_lines,
    _overstatement_taint_sup,
    _pct_se,
    _percent,
    _rate,
    _risk_cells,
)
from auditmean.errors import InputError, ParameterError

__all__ = ["MonetaryUnitCoverage", "simulate_monetary_units", "LIMIT_NAMES", "GUARANTEES"]

#: Plain names of every limit simulated: the bounds, then the normal limit.
LIMIT_NAMES = {
    "stringer": "Stringer",
    "count": "error count",
    "betting": "betting",
    "count_or_betting": "error count or betting",
    "normal": "normal limit (mean taint)",
}
#: What each limit's confidence rests on, in a few words.
GUARANTEES = {
    "stringer": "no general proof",
    "count": "finite-sample",
    "betting": "finite-sample",
    "count_or_betting": "finite-sample",
    "normal": "information only",
}
_WIDTH = 100


# --------------------------------------------------------------------------- the record


@dataclass(frozen=True, eq=False)
class MonetaryUnitCoverage(RecordMixin):
    """What the coverage check of a monetary-unit sample found.

    Money is in the book values' currency; the misstatement is book value
    minus audited value (overstatement positive) of the items with a
    positive book value, the population the monetary units are drawn from.

    Attributes
    ----------
    model:
        The misstatement model (applied to the items with a positive book value).
    bounds:
        The bounds simulated (names of :func:`auditmean.monetary_unit_bound`).
    limits:
        ``bounds`` and then ``"normal"``: the columns of the per-replication arrays.
    confidence, tolerable, expected:
        One-sided confidence of every limit; tolerable and expected
        misstatement (``None`` when not given).
    sample_size, book_total, interval, remainder_total:
        Monetary units drawn ``n``, the positive book total ``B``, the
        sampling interval ``B / n`` and the book value of the items below it.
    items, positive_items, items_in_full, in_full_total:
        Items in the population; with a positive book value; at or above the
        interval (examined in full) and their book total.
    credits_count, credits_total, zeros_count:
        Credits and zero balances (whole cents), never drawn.
    replications_requested, replications, partial, seed, fixed_population:
        As in :class:`auditmean.CoverageResult`.
    expected_model_misstatement, true_misstatement:
        The misstatement the model expects of the positive items, and the
        average misstatement of the populations simulated.
    by_bound:
        One row per limit: ``bound``, ``name``, ``guarantee``,
        ``replications`` (samples whose limit could be formed),
        ``coverage`` (one-sided: the upper limit is not below the true
        overstatement) and ``coverage_mc_se``, ``mean_upper``, and with
        tolerable ``acceptance_rate``, ``risk_incorrect_acceptance``
        (populations scaled to exactly tolerable whose limit is not above
        it), ``replications_at_tolerable``, ``outside_assumption_at_tolerable``
        (scaled populations in which an item may be overstated by more than
        its book value; bounds only); with expected
        ``risk_incorrect_rejection``, ``replications_at_expected``,
        ``outside_assumption_at_expected``. Rates have ``_mc_se`` columns,
        ``sqrt(p (1 - p) / R)``.
    notes:
        What a reader must know to read the numbers.
    true_misstatements, exact_in_full, draws_in_remainder, errors:
        Per replication: the population's misstatement, the exact
        misstatement of the items examined in full, the draws that fell in
        the remainder and those with an overstatement.
    upper, covers, accepts:
        Per replication (rows) and limit (columns, as ``limits``).
    kept_samples:
        With ``keep_samples``: the selection of the first replications with
        their audited values (``replication``, ``item`` = 0-based position in
        the population, ``item_id``, ``book_value``, ``audited_value``,
        ``hits``, ``examined_in_full``, ``units``), each replication's rows a
        sample :func:`auditmean.monetary_unit_bound` accepts; else ``None``.
    """

    record_kind: ClassVar[str] = "monetary_unit_coverage_check"

    model: MisstatementModel
    bounds: tuple[str, ...]
    limits: tuple[str, ...]
    confidence: float
    tolerable: float | None
    expected: float | None
    sample_size: int
    book_total: float
    interval: float
    remainder_total: float
    items: int
    positive_items: int
    items_in_full: int
    in_full_total: float
    credits_count: int
    credits_total: float
    zeros_count: int
    replications_requested: int
    replications: int
    partial: bool
    seed: int
    fixed_population: bool
    expected_model_misstatement: float
    true_misstatement: float
    by_bound: pd.DataFrame = field(repr=False)
    notes: tuple[str, ...]
    true_misstatements: np.ndarray = field(repr=False)
    exact_in_full: np.ndarray = field(repr=False)
    draws_in_remainder: np.ndarray = field(repr=False)
    errors: np.ndarray = field(repr=False)
    upper: np.ndarray = field(repr=False)
    covers: np.ndarray = field(repr=False)
    accepts: np.ndarray | None = field(repr=False, default=None)
    kept_samples: pd.DataFrame | None = field(repr=False, default=None)

    def column(self, limit: str) -> int:
        """Column of ``limit`` (a bound's name or ``"normal"``) in the per-replication arrays."""
        if limit not in self.limits:
            raise ParameterError("limit", f"got {limit!r}; this check simulated {', '.join(self.limits)}")
        return self.limits.index(limit)

    # -- for people

    def _headline(self) -> str:
        how, done = _how_and_done(self)
        return (
            f"Coverage check of a monetary-unit sample: {done} simulated samples of {self.sample_size:,} draws "
            f"from {self.items:,} items ({how}); nominal {_percent(self.confidence)}"
            + (" - STOPPED EARLY, partial results" if self.partial else "")
        )

    def _context(self) -> list[str]:
        lines = [
            self.model.summary(),
            f"Positive book total {format_number(self.book_total)} in {self.positive_items:,} items; sampling "
            f"interval {format_number(self.interval)}; {self.items_in_full:,} items at or above it examined in full "
            f"({format_number(self.in_full_total)}); remainder {format_number(self.remainder_total)}",
            f"Misstatement the model expects {format_number(self.expected_model_misstatement)}; "
            + ("this population's misstatement " if self.fixed_population
               else "average misstatement of the populations ")
            + format_number(self.true_misstatement),
        ]
        if self.tolerable is not None:
            lines.append(
                f"Tolerable misstatement {format_number(self.tolerable)}"
                + (f", expected misstatement {format_number(self.expected)}" if self.expected is not None else "")
                + f"; nominal risk of incorrect acceptance {_percent(1 - self.confidence)}"
            )
        return lines

    def _rows(self) -> tuple[list[str], list[list[str]]]:
        has_tm = "risk_incorrect_acceptance" in self.by_bound
        has_em = "risk_incorrect_rejection" in self.by_bound
        header = ["upper limit", "guarantee", "holds", "average"]
        header += ["acceptance"] if has_tm else []
        header += ["rejection"] if has_em else []
        rows = []
        for r in self.by_bound.itertuples(index=False):
            row = [r.name, r.guarantee, _pct_se(r.coverage, r.coverage_mc_se), format_number(r.mean_upper, 0)]
            rows.append(row + _risk_cells(r, has_tm, has_em))
        return header, rows

    def _caption(self) -> str:
        text = (
            "Upper limit of overstatement, side by side: holds = share of samples in which it was not below "
            f"the true misstatement (nominal {_percent(self.confidence)}); average = its average"
        )
        if self.tolerable is not None:
            text += (
                "; acceptance = risk of incorrect acceptance, the share accepted among populations misstated by "
                f"exactly tolerable (nominal {_percent(1 - self.confidence)})"
            )
        if self.expected is not None:
            text += "; rejection = risk of incorrect rejection, the share rejected at the expected misstatement"
        return text + "; +/- one Monte Carlo standard error."

    def summary(self) -> str:
        """The check in plain text, every line within 100 columns."""
        def wrap(text: str, indent: str = "") -> list[str]:
            return textwrap.wrap(text, width=_WIDTH, initial_indent=indent, subsequent_indent=" " * len(indent) + "  ")

        out = wrap(self._headline()) + _clause_lines(self._context(), wrap)
        out += [""] + wrap(self._caption()) + [text_table(*self._rows())]
        out += _notes_lines(self.notes, wrap)
        return "\n".join(out)

    def _html_body(self) -> str:
        esc = html.escape
        parts = _html_opening(self)
        parts.append(html_table(*self._rows(), caption="Upper limit of overstatement, side by side"))
        parts.append(f"<p>{esc(self._caption())}</p>")
        if self.notes:
            parts.append("<ul>" + "".join(f"<li>{esc(n)}</li>" for n in self.notes) + "</ul>")
        return "".join(parts)

    def to_dict(self, include_replications: bool = False) -> dict[str, Any]:
        """JSON-ready record (kind ``"monetary_unit_coverage_check"``); per-replication arrays on request."""
        out = self._dict_of(
            name for name in (
                "bounds", "limits", "confidence", "tolerable", "expected", "sample_size", "book_total", "interval",
                "remainder_total", "items", "positive_items", "items_in_full", "in_full_total", "credits_count",
                "credits_total", "zeros_count", "replications_requested", "replications", "partial",
                "fixed_population", "expected_model_misstatement", "true_misstatement", "by_bound", "notes",
            )
        )
        out["design"] = "monetary_unit"
        out["model"] = self.model.to_dict()
        out["seed"] = str(self.seed)
        if include_replications:
            per: dict[str, Any] = {
                name: json_safe(getattr(self, name))
                for name in ("true_misstatements", "exact_in_full", "draws_in_remainder", "errors")
            }
            for name in ("upper", "covers", "accepts"):
                arr = getattr(self, name)
                if arr is not None:
                    per[name] = {lim: json_safe(arr[:, j]) for j, lim in enumerate(self.limits)}
            out["per_replication"] = per
        return out


# --------------------------------------------------------------------------- input checks


def _whole(name: str, value: object, low: int, high: int | None = None) -> int:
    ok = not isinstance(value, bool) and isinstance(value, numbers.Integral) and int(value) >= low
    if ok and high is not None:
        ok = int(value) <= high
    if not ok:
        span = f"from {low:,} to {high:,}" if high is not None else f"of at least {low:,}"
        raise ParameterError(name, f"got {value!r}; give a whole number {span}")
    return int(value)


def _bounds_choice(value: object) -> tuple[str, ...] | None:
    if value is None:
        return None
    items = [value] if isinstance(value, str) else list(value) if isinstance(value, Sequence) else None
    if items is None:
        raise ParameterError("bounds", f"got {value!r}; give bound names, () for none, or None for all")
    for b in items:
        if b not in core_mus.METHODS:
            raise ParameterError("bounds", f"got {b!r}; use one of {', '.join(map(repr, core_mus.METHODS))}")
    if len(set(items)) != len(items):
        raise ParameterError("bounds", "a bound is listed twice")
    return tuple(b for b in core_mus.METHODS if b in items)


# --------------------------------------------------------------------------- the entry point


def simulate_monetary_units(
    book_values: object,
    sample_size: int,
    model: MisstatementModel,
    *,
    confidence: float = 0.95,
    tolerable: float | None = None,
    expected: float | None = None,
    replications: int = 2000,
    seed: int | None = None,
    bounds: str | Sequence[str] | None = None,
    progress: Callable[[int, int], bool | None] | None = None,
    fixed_population: bool = False,
    keep_samples: int = 0,
) -> MonetaryUnitCoverage:
    """Simulate a monetary-unit sample on the population's own book values; every bound side by side.

    Parameters
    ----------
    book_values:
        One book value per item (numbers, or amounts as text). Items of
        zero or negative book value in whole cents (credits and zero
        balances) are never drawn: they are counted and kept apart, the
        model does not misstate them here, and the true misstatement the
        limits are compared with is that of the items with a positive book
        value (the population a monetary-unit sample covers).
    sample_size:
        Monetary units drawn, ``n``, from 1 to the positive book total in
        cents. Items with ``cents * n >= B`` are examined in full and their
        misstatement is added exactly; draws that fall in them are absorbed.
    model:
        A :class:`~auditmean.coverage.MisstatementModel` with one error rate
        (the design has no strata). Its audited values
        (:meth:`~auditmean.coverage.MisstatementModel.audited_values` of the
        positive book values) are the populations simulated.
    confidence:
        One-sided confidence of every limit, strictly between 0 and 1.
    tolerable, expected:
        Tolerable misstatement (above 0) and expected misstatement (0 or
        more, below tolerable): the actual risks of incorrect acceptance and
        rejection are measured at populations scaled to them, as in
        :func:`auditmean.simulate_coverage`.
    replications:
        Simulated samples, 1 to 100,000 (default 2,000).
    seed:
        A whole number; ``None`` draws a new one, recorded.
    bounds:
        The bounds to compute (names of :func:`auditmean.monetary_unit_bound`:
        ``"stringer"``, ``"count"``, ``"betting"``, ``"count_or_betting"``);
        ``None`` (default) for all of them. The normal limit of the mean
        taint is always computed, for information. The bounds assume that
        no item is overstated by more than its book value (taint at most
        100%); a model that can give a larger overstatement taint is refused
        when bounds are named, and with the default the bounds are left out
        (a note says so). Understatements are allowed.
    progress:
        ``progress(done, total)`` after each batch; returning ``False`` stops
        the run (the result is then marked partial).
    fixed_population:
        ``True``: one misstated population, sampled again and again (faster
        on large populations); ``False`` (default): a new one every replication.
    keep_samples:
        Keep the selection, with audited values, of the first
        ``keep_samples`` replications (at most 100).

    Returns
    -------
    MonetaryUnitCoverage

    Notes
    -----
    The draws follow the law of the selection rule of
    :func:`auditmean.select_monetary_units` (independent uniform monetary
    units of the positive book value, items at or above the interval in
    full) with ``numpy`` draws in place of the SHA-256 ones. Every bound is
    computed on every sample exactly as :func:`auditmean.monetary_unit_bound`
    computes it (the same functions on the same taints, ``(book - audited) /
    book``, in draw order). Formulas, scaling and streams:
    :mod:`auditmean.core.monetary_simulation`.

    Examples
    --------
    >>> import numpy as np
    >>> from auditmean.coverage import MisstatementModel, FixedTaint
    >>> book = np.random.default_rng(1).lognormal(6, 1, 5_000)
    >>> r = simulate_monetary_units(book, 100, MisstatementModel(0.01, FixedTaint(0.5)), replications=500, seed=3)
    >>> r.limits
    ('stringer', 'count', 'betting', 'count_or_betting', 'normal')
    """
    if not isinstance(model, MisstatementModel):
        raise ParameterError("model", f"got {type(model).__name__}; build a MisstatementModel")
    if isinstance(model.error_rate, Mapping):
        raise ParameterError(
            "model", "the monetary-unit design has no strata: give the model one error rate for the whole population"
        )
    R = _whole("replications", replications, 1, MAX_REPLICATIONS)
    conf, TM, EM, seed_value = _check_run(confidence, tolerable, expected, seed, fixed_population, progress)
    keep = min(_whole("keep_samples", keep_samples, 0, 100), R)
    requested = _bounds_choice(bounds)

    book = _book_array(book_values)
    cents = np.rint(book * 100.0).astype(np.int64)
    positive = np.flatnonzero(cents > 0)
    if positive.size == 0:
        raise InputError(
            "no item has a positive book value; a monetary-unit sample draws from positive book values",
            table="population", column="book_values",
        )
    total_cents = int(cents[positive].sum())
    n = _whole("sample_size", sample_size, 1)
    if n > total_cents:
        raise ParameterError("sample_size", f"{n:,} draws exceed the {total_cents:,} cents of positive book value")
    if model.large_items > positive.size:
        raise ParameterError(
            "model.large_items",
            f"got {model.large_items:,}; the population has only {positive.size:,} items with a positive book value",
        )

    rate = float(model.error_rate)
    ordinary_sup, large_sup = _overstatement_taint_sup(model)
    sup = max(ordinary_sup if rate > 0 and positive.size > model.large_items else 0.0,
              large_sup if model.large_items else 0.0)
    notes: list[str] = []
    if requested is None:
        chosen = core_mus.METHODS if sup <= 1.0 else ()
        if sup > 1.0:
            notes.append(
                f"The bounds were not simulated: the model can overstate an item by more than its book value (a "
                f"taint of up to {_percent(sup)}), and every bound assumes no taint above 100%. Only the normal "
                "limit is shown."
            )
    else:
        if requested and sup > 1.0:
            raise ParameterError(
                "bounds",
                f"the model can overstate an item by more than its book value (a taint of up to {_percent(sup)}); "
                "the monetary-unit bounds assume no item is overstated by more than its book value (taint at most "
                "100%, audited value at least zero). Model taints of at most 100%, or give bounds=() for the normal "
                "limit alone",
            )
        chosen = requested

    pos_book = book[positive]
    large = core_ms.largest_items(pos_book, model.large_items)
    if fixed_population:
        order = np.arange(positive.size)
        n_large = 0
    else:
        is_large = np.zeros(positive.size, dtype=bool)
        is_large[large] = True
        order = np.concatenate([np.flatnonzero(~is_large), large])
        n_large = int(large.size)
    design = core_msim.MonetaryDesign(
        book=pos_book[order], cents=cents[positive][order], items=positive[order], n_large=n_large,
        sample_size=n, rounding=_ROUNDING_RTOL * float(np.sum(np.abs(pos_book))),
    )
    if fixed_population:
        tau = model._draw_taints(np.random.default_rng(seed_value), pos_book, np.full(positive.size, rate))
        out = core_msim.run_monetary_simulation(
            design, R, seed_value, conf, TM, EM, methods=chosen, fixed_tau=tau, progress=progress, keep=keep
        )
    else:
        out = core_msim.run_monetary_simulation(
            design, R, seed_value, conf, TM, EM, methods=chosen, process=model._process(np.array([rate])),
            progress=progress, keep=keep,
        )
    expected_mis = core_ms.expected_misstatement(
        pos_book, np.full(positive.size, rate), model._mean_taint(), large, model.large_item_taint,
        model.large_item_probability,
    )
    return _result(out, design, model, chosen, conf, TM, EM, seed_value, fixed_population, expected_mis, book,
                   cents, sup, notes)


def _result(out, design, model, chosen, conf, TM, EM, seed, fixed, expected_mis, book, cents, sup,
            notes) -> MonetaryUnitCoverage:
    R = out.completed
    in_full = design.in_full
    rows = []
    outside: dict[str, int] = {}
    for name, usable, within in (
        ("tolerable", out.usable_at_tolerable, out.within_at_tolerable),
        ("expected", out.usable_at_expected, out.within_at_expected),
    ):
        if usable is not None:
            outside[name] = int(np.sum(usable & ~within))
    for j, lim in enumerate(out.limits):
        # The bounds' risks are measured on the scaled populations within their assumption.
        bound = lim != "normal"

        ok = np.isfinite(out.upper[:, j])
        lost = int(R - ok.sum())
        if lost:
            notes.append(
                f"{LIMIT_NAMES[lim]}: {lost:,} of {R:,} samples had fewer than two draws outside the items examined "
                "in full, so no limit could be formed; they are left out of its figures."
            )
        cov, cov_se, n_ok = _rate(out.covers[ok, j])
        row: dict[str, Any] = {
            "bound": lim, "name": LIMIT_NAMES[lim], "guarantee": GUARANTEES[lim], "replications": n_ok,
            "coverage": cov, "coverage_mc_se": cov_se,
            "mean_upper": float(out.upper[ok, j].mean()) if n_ok else math.nan,
        }
        if out.accepts is not None:
            acc, acc_se, _ = _rate(out.accepts[ok, j])
            use = ok & out.usable_at_tolerable & (out.within_at_tolerable if bound else True)
            ria, ria_se, n_tm = _rate(out.accepts_at_tolerable[use, j])
            row.update(acceptance_rate=acc, acceptance_rate_mc_se=acc_se, risk_incorrect_acceptance=ria,
                       risk_incorrect_acceptance_mc_se=ria_se, replications_at_tolerable=n_tm,
                       outside_assumption_at_tolerable=outside["tolerable"] if bound else math.nan)
        if out.accepts_at_expected is not None:
            use = ok & out.usable_at_expected & (out.within_at_expected if bound else True)
            rir, rir_se, n_em = _rate(~out.accepts_at_expected[use, j])
            row.update(risk_incorrect_rejection=rir, risk_incorrect_rejection_mc_se=rir_se,
                       replications_at_expected=n_em,
                       outside_assumption_at_expected=outside["expected"] if bound else math.nan)
        rows.append(row)

    if out.stopped_early:
        notes.insert(0, f"Stopped early after {R:,} of {out.requested:,} replications: the figures cover those only.")
    credits = cents < 0
    zeros = cents == 0
    B = design.total_cents / 100.0
    n = design.sample_size
    mean_absorbed = float(n - out.draws_in_remainder.mean()) if R else math.nan
    notes.append(
        f"Draws: {n:,} independent monetary units of the {format_number(B)} of positive book value, each unit "
        f"equally likely (the selection rule's law, drawn with numpy). The {int(in_full.sum()):,} items at or above "
        f"the interval of {format_number(B / n)} are examined in full and their misstatement is added exactly; "
        f"draws falling in them are absorbed ({mean_absorbed:,.1f} of {n:,} on average)."
    )
    if credits.any() or zeros.any():
        notes.append(
            f"Credits ({int(credits.sum()):,} items, {format_number(cents[credits].sum() / 100.0)}) and zero balances "
            f"({int(zeros.sum()):,} items) are never drawn: the model does not misstate them here and their "
            "misstatement is not part of the true misstatement the limits are compared with. They need their own "
            "audit procedures."
        )
    for name, target, usable, scale in (
        ("tolerable", TM, out.usable_at_tolerable, out.scale_at_tolerable),
        ("expected", EM, out.usable_at_expected, out.scale_at_expected),
    ):
        if target is None or usable is None:
            continue
        if target == 0:
            notes.append("At expected misstatement 0 the populations were taken without any misstatement.")
            continue
        bad = int((~usable).sum())
        if bad:
            notes.append(
                f"{bad:,} of {R:,} populations had no net overstatement, so they could not be scaled to the {name} "
                "misstatement and are left out of that risk."
            )
        good = scale[usable]
        if good.size:
            notes.append(
                f"At {name} misstatement every taint of "
                + ("the population was multiplied by " + f"{good[0]:.4g}" if fixed else
                   f"each population was multiplied by a factor making its misstatement exactly {format_number(target)} "
                   f"(median factor {float(np.median(good)):.4g})")
                + "."
            )
        if chosen and outside.get(name):
            k = outside[name]
            rest = int(np.sum(usable)) - k
            notes.append(
                f"At {name} misstatement {k:,} of {R:,} scaled populations had an item below the interval overstated "
                "by more than its book value (taints multiplied by the factor), outside the bounds' assumption; they "
                f"are left out of the bounds' risk at {name}"
                + (f", which rests on the other {rest:,}," if rest else "")
                + " and kept in the normal limit's."
                + (
                    f" Under this model no population misstated by exactly {name} stays within that assumption, so "
                    "the bounds' risk cannot be measured there; model more misstated items (a higher error rate) to "
                    "measure it. Within their assumption the bounds' guarantee keeps the risk of incorrect acceptance "
                    f"at most {_percent(1 - conf)} (Stringer's: no general proof)."
                    if name == "tolerable" and k == int(np.sum(usable)) else ""
                )
            )
    if chosen:
        notes.append(
            "Every bound was computed on every sample as auditmean.monetary_unit_bound computes it: the items "
            "examined in full exactly, the remainder's overstatement taints (understatements as zero) in draw order. "
            "They bound the overstatement; here they are compared with the net misstatement, book minus audited."
        )
        if "stringer" in chosen:
            notes.append(
                "Stringer's bound has no general proof of its confidence; the other bounds hold in finite samples "
                "under their stated assumptions. The normal limit is shown for information only."
            )

    kept = None
    if out.kept is not None:
        parts = []
        for rep, idx, hits, full, units, audited in out.kept:
            parts.append(pd.DataFrame({
                "replication": np.full(idx.size, rep, dtype=np.int64),
                "item": design.items[idx].astype(np.int64),
                "item_id": [str(i) for i in design.items[idx]],
                "book_value": design.book[idx],
                "audited_value": audited,
                "hits": hits,
                "examined_in_full": full,
                "units": [" ".join(str(int(u)) for u in us) for us in units],
            }))
        kept = pd.concat(parts, ignore_index=True) if parts else None

    def frozen(a):
        if a is None:
            return None
        a = np.array(a)
        a.setflags(write=False)
        return a

    full_cents = int(design.cents[in_full].sum())
    return MonetaryUnitCoverage(
        model=model,
        bounds=tuple(chosen),
        limits=tuple(out.limits),
        confidence=conf,
        tolerable=TM,
        expected=EM,
        sample_size=n,
        book_total=B,
        interval=B / n,
        remainder_total=design.remainder_total,
        items=int(book.shape[0]),
        positive_items=int(design.book.shape[0]),
        items_in_full=int(in_full.sum()),
        in_full_total=full_cents / 100.0,
        credits_count=int(credits.sum()),
        credits_total=float(cents[credits].sum()) / 100.0,
        zeros_count=int(zeros.sum()),
        replications_requested=out.requested,
        replications=R,
        partial=out.stopped_early,
        seed=seed,
        fixed_population=fixed,
        expected_model_misstatement=float(expected_mis),
        true_misstatement=float(out.misstatement.mean()) if R else math.nan,
        by_bound=pd.DataFrame(rows),
        notes=tuple(notes),
        true_misstatements=frozen(out.misstatement),
        exact_in_full=frozen(out.exact_in_full),
        draws_in_remainder=frozen(out.draws_in_remainder),
        errors=frozen(out.errors),
        upper=frozen(out.upper),
        covers=frozen(out.covers),
        accepts=frozen(out.accepts),
        kept_samples=kept,
    )
