"""The monetary-unit design through an engagement folder: plan, select, extend, evaluate, verify.

The functions here are what :mod:`auditmean.workflow` calls when an
engagement's ``plan.json`` records ``"design": "monetary_unit"``. Nothing is
computed here that another module already computes: the sample size comes
from :func:`auditmean.monetary_unit_sample_size`, the selection from
:func:`auditmean.select_monetary_units` (with credits and zero balances kept
apart), the bounds from :func:`auditmean.monetary_unit_bound`; this module
joins them, keeps each result in the folder and words the conclusion.

What ``plan.json`` holds for this design (schema version 1)::

    {"schema_version": 1, "kind": "engagement_plan", "design": "monetary_unit",
     "population_reading": {how to read the population file again},
     "population_engine": {"engine": "pandas", "reason": ...},
     "monetary_unit_plan": MonetaryUnitPlan.to_dict()}

The selection is saved as a ``"monetary_unit_selection"`` record
(:meth:`auditmean.engagement.Engagement.save_monetary_unit_selection`), an
evaluation as a ``"monetary_unit_evaluation"`` record inside the usual
saved-evaluation file.
"""

from __future__ import annotations

import math
import textwrap
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, ClassVar

import numpy as np
import pandas as pd

from auditmean._records import RecordMixin, format_number, property_text, text_table
from auditmean.engagement import MONETARY_UNIT_SELECTION_KIND, Engagement
from auditmean.errors import InputError, ParameterError, RecordError, Stopped
from auditmean.population import Population

__all__ = [
    "MONETARY_UNIT_BOUNDS",
    "BOUND_NAMES",
    "DEFAULT_BOUND",
    "MonetaryUnitPlan",
    "MonetaryUnitEvaluation",
    "plan_monetary_units",
    "monetary_unit_plan",
    "draw_monetary_units",
    "extend_monetary_unit_selection",
    "verify_monetary_unit_selection",
    "evaluate_monetary_units",
]

#: Every bound offered for a monetary-unit sample, by the names
#: :func:`auditmean.monetary_unit_bound` takes (``method=``).
MONETARY_UNIT_BOUNDS = ("stringer", "count", "betting", "count_or_betting")

#: Plain names of the bounds, as printed.
BOUND_NAMES = {
    "stringer": "Stringer",
    "count": "error count",
    "betting": "betting",
    "count_or_betting": "error count or betting",
}

#: The bound an evaluation relies on unless the plan or the caller names another. Betting holds in
#: finite samples under stated assumptions and, measured against Stringer on the same samples
#: (tests/benchmarks/bench_monetary.py), is the most even: about 10% narrower where many draws carry
#: small taints, 5-16% wider where misstatements are rare and whole. "count_or_betting" is the one to
#: choose, before any result is seen, where errors are expected to be few and total (it is then
#: within 2% of Stringer) but up to about 45% wider with partial taints; Stringer itself has no
#: general proof (its confidence is measured).
DEFAULT_BOUND = "betting"

_BASES = ("poisson", "binomial")
_WIDTH = 100


def _percent(p: float) -> str:
    """0.05 -> "5%", 0.025 -> "2.5%"."""
    return f"{p * 100:.4g}%"


def _wrap(text: str, indent: str = "") -> str:
    """``text`` wrapped at 100 columns, the first line after ``indent``, the others aligned under it."""
    return textwrap.fill(
        text, width=_WIDTH, initial_indent=indent, subsequent_indent=" " * len(indent)
    )


def _check_bound(name: str, value: object) -> str:
    if value not in MONETARY_UNIT_BOUNDS:
        raise ParameterError(
            name, f"must be one of {', '.join(map(repr, MONETARY_UNIT_BOUNDS))}, got {value!r}"
        )
    return str(value)


def _cents(values: np.ndarray) -> np.ndarray:
    """Book values in whole cents, ``round(book_value * 100)`` (the selection's rule)."""
    return np.rint(np.asarray(values, dtype=np.float64) * 100.0).astype(np.int64)


def _items_of(population: Any) -> pd.DataFrame:
    """``item_id`` and ``book_value`` of every item, as the monetary-unit selection needs them."""
    items = getattr(population, "items", None)
    if isinstance(population, pd.DataFrame):
        items = population
    if not isinstance(items, pd.DataFrame):
        raise ParameterError(
            "population",
            "the monetary-unit design needs every item's book value in memory (the cumulative book value "
            "runs through all items); read the population with engine='pandas'",
        )
    missing = [c for c in ("item_id", "book_value") if c not in items.columns]
    if missing:
        raise InputError(
            f"missing columns {', '.join(map(repr, missing))}",
            table="population",
            column=missing[0],
        )
    return items[["item_id", "book_value"]]


# ---------------------------------------------------------------------------
# the plan


@dataclass(frozen=True)
class MonetaryUnitPlan(RecordMixin):
    """A monetary-unit sample plan: size, interval, and what the sample does not reach.

    Attributes
    ----------
    tolerable, expected:
        Tolerable and expected misstatement.
    risk_incorrect_acceptance, confidence:
        The risk planned for, and ``1 - risk`` (the confidence of every bound).
    basis:
        ``"poisson"`` or ``"binomial"``: the confidence factors of the size.
    sample_size:
        Monetary units to draw (:func:`auditmean.monetary_unit_sample_size`).
    book_total, book_total_cents:
        Total book value of the items with a positive book value (the
        population the monetary units are drawn from), and the same in cents.
    interval:
        Sampling interval ``book_total / sample_size``.
    positive_items:
        Items with a positive book value.
    in_full_count, in_full_total:
        Items whose book value is at or above the interval (examined in full
        whatever the draws) and their book total; fixed by the size alone.
    credits_count, credits_total, zeros_count:
        Items with a negative book value (and their total) and items with a
        zero book value (to the cent): never selected, kept apart, counted.
    bound:
        The bound the evaluation will rely on (one of :data:`MONETARY_UNIT_BOUNDS`).
    bounds_shown:
        Every bound the evaluation computes and shows beside it.
    factor_sample_size:
        The size the confidence factors give
        (:func:`auditmean.monetary_unit_sample_size`). ``sample_size`` is
        larger only when the relied-on bound, with no misstatement found,
        would still lie above tolerable at that size (then it is the
        smallest size at which it does not; the notes say so).
    zero_error_upper:
        ``{method: upper bound}`` each bound would give if no misstatement
        were found (:func:`auditmean.core.monetary.zero_error_bound`: every
        draw treated as a draw of the whole positive book total).
    notes:
        Plain sentences the plan must carry (credits and zeros, choices made).
    """

    record_kind: ClassVar[str] = "monetary_unit_plan"

    tolerable: float
    expected: float
    risk_incorrect_acceptance: float
    confidence: float
    basis: str
    sample_size: int
    book_total: float
    book_total_cents: int
    interval: float
    positive_items: int
    in_full_count: int
    in_full_total: float
    credits_count: int
    credits_total: float
    zeros_count: int
    bound: str
    bounds_shown: tuple[str, ...] = MONETARY_UNIT_BOUNDS
    factor_sample_size: int = 0
    zero_error_upper: dict[str, float] = field(default_factory=dict)
    notes: tuple[str, ...] = field(default=())

    @classmethod
    def from_dict(cls, d: Mapping[str, Any], *, source: str = "plan") -> MonetaryUnitPlan:
        """Rebuild the plan from :meth:`to_dict` output; a missing or wrong field raises RecordError."""
        if not isinstance(d, Mapping) or d.get("kind") != cls.record_kind:
            raise RecordError(
                source, "the monetary-unit plan is missing or not of kind 'monetary_unit_plan'"
            )
        try:
            return cls(
                tolerable=float(d["tolerable"]),
                expected=float(d["expected"]),
                risk_incorrect_acceptance=float(d["risk_incorrect_acceptance"]),
                confidence=float(d["confidence"]),
                basis=str(d["basis"]),
                sample_size=_whole(d["sample_size"]),
                book_total=float(d["book_total"]),
                book_total_cents=_whole(d["book_total_cents"]),
                interval=float(d["interval"]),
                positive_items=_whole(d["positive_items"]),
                in_full_count=_whole(d["in_full_count"]),
                in_full_total=float(d["in_full_total"]),
                credits_count=_whole(d["credits_count"]),
                credits_total=float(d["credits_total"]),
                zeros_count=_whole(d["zeros_count"]),
                bound=_check_bound("bound", d["bound"]),
                bounds_shown=tuple(_check_bound("bounds_shown", b) for b in d["bounds_shown"]),
                factor_sample_size=_whole(d["factor_sample_size"]),
                zero_error_upper={str(k): float(v) for k, v in dict(d["zero_error_upper"]).items()},
                notes=tuple(str(n) for n in d.get("notes") or ()),
            )
        except (KeyError, TypeError, ValueError, ParameterError) as exc:
            raise RecordError(source, f"the monetary-unit plan cannot be read ({exc})") from None

    def summary(self) -> str:
        risk = _percent(self.risk_incorrect_acceptance)
        rows = [
            ("tolerable misstatement", format_number(self.tolerable)),
            ("expected misstatement", format_number(self.expected)),
            (
                "risk of incorrect acceptance",
                f"{risk} (every bound at {_percent(self.confidence)} confidence)",
            ),
            (
                "confidence factors",
                "Poisson (gamma quantiles)"
                if self.basis == "poisson"
                else "binomial (beta quantiles)",
            ),
            (
                "positive book total",
                f"{format_number(self.book_total)} in {self.positive_items:,} items",
            ),
            ("sample size", f"{self.sample_size:,} monetary units"),
            ("sampling interval", format_number(self.interval)),
            (
                "examined in full",
                f"{self.in_full_count:,} items at or above the interval, total "
                f"{format_number(self.in_full_total)}",
            ),
            (
                "credits, kept apart",
                f"{self.credits_count:,} items, total {format_number(self.credits_total)}",
            ),
            ("zero balances, kept apart", f"{self.zeros_count:,} items"),
            ("bound relied on", BOUND_NAMES[self.bound]),
            (
                "shown beside it",
                ", ".join(BOUND_NAMES[b] for b in self.bounds_shown if b != self.bound),
            ),
        ]
        if self.bound in self.zero_error_upper:
            zero = f"upper bound {format_number(self.zero_error_upper[self.bound])} by the relied-on bound"
            if self.bound != "stringer" and "stringer" in self.zero_error_upper:
                zero += f" (Stringer {format_number(self.zero_error_upper['stringer'])})"
            rows.append(("if no misstatement is found", zero))
        out = property_text(
            "Monetary-unit sample plan (selection with probability proportional to book value)",
            rows,
        )
        return out + "".join("\n" + _wrap(n) for n in self.notes)


def _whole(v: Any) -> int:
    if isinstance(v, bool) or not isinstance(v, (int, np.integer)):
        raise ValueError(f"expected a whole number, got {v!r}")
    return int(v)


def _number(name: str, value: object, *, positive: bool = False) -> float:
    if (
        isinstance(value, bool)
        or not isinstance(value, (int, float, np.integer, np.floating))
        or not math.isfinite(value)
    ):
        raise ParameterError(name, f"must be a finite number, got {value!r}")
    if positive and value <= 0:
        raise ParameterError(name, f"must be greater than 0, got {value!r}")
    if value < 0:
        raise ParameterError(name, f"must not be negative, got {value!r}")
    return float(value)


def plan_monetary_units(
    items: pd.DataFrame | Any,
    *,
    tolerable: float,
    expected: float = 0.0,
    risk_incorrect_acceptance: float = 0.05,
    bound: str = DEFAULT_BOUND,
    basis: str = "poisson",
) -> MonetaryUnitPlan:
    """Plan a monetary-unit sample of the items with a positive book value.

    Parameters
    ----------
    items:
        A DataFrame with ``item_id`` and ``book_value`` (or a population
        record holding one in ``items``).
    tolerable, expected:
        Tolerable and expected misstatement (``0 <= expected < tolerable``).
    risk_incorrect_acceptance:
        Risk of incorrect acceptance, strictly between 0 and 1; every bound
        is computed at confidence ``1 - risk``.
    bound:
        The bound the evaluation will rely on (:data:`MONETARY_UNIT_BOUNDS`);
        default the tighter of the error-count and the betting bound, both
        of which hold in finite samples under the assumptions they state.
    basis:
        Confidence factors of the size: ``"poisson"`` or ``"binomial"``.

    Returns
    -------
    MonetaryUnitPlan

    Notes
    -----
    The size is :func:`auditmean.monetary_unit_sample_size` applied to the
    positive book total: the smallest ``n`` with
    ``B * F(n * EM / B) / n <= TM``, ``F`` the Poisson (gamma-quantile)
    confidence factor at the risk (AICPA Audit Guide *Audit Sampling*,
    the expansion-factor method; see that function for the source).
    Credits and zero balances cannot be reached by monetary units of
    positive book value; they are counted here and need their own procedures.
    """
    from auditmean.monetary_bound import monetary_unit_sample_size

    tm = _number("tolerable", tolerable, positive=True)
    em = _number("expected", expected)
    if em >= tm:
        raise ParameterError(
            "expected",
            f"must be below the tolerable misstatement ({format_number(tm)}), got {format_number(em)}",
        )
    if (
        isinstance(risk_incorrect_acceptance, bool)
        or not isinstance(risk_incorrect_acceptance, (int, float))
        or not (0 < risk_incorrect_acceptance < 1)
    ):
        raise ParameterError(
            "risk_incorrect_acceptance",
            f"must be strictly between 0 and 1, got {risk_incorrect_acceptance!r}",
        )
    bound = _check_bound("bound", bound)
    if basis not in _BASES:
        raise ParameterError("basis", f"must be 'poisson' or 'binomial', got {basis!r}")
    df = _items_of(items)
    cents = _cents(df["book_value"].to_numpy(dtype=np.float64))
    pos = cents > 0
    total_cents = int(cents[pos].sum())
    if total_cents <= 0:
        raise InputError(
            "no item has a positive book value; a monetary-unit sample draws from positive book values",
            table="population",
            column="book_value",
        )
    book = total_cents / 100
    conf = 1.0 - float(risk_incorrect_acceptance)
    n_factors = int(
        monetary_unit_sample_size(book, tm, em, float(risk_incorrect_acceptance), basis=basis)
    )
    n = _size_for_bound(book, tm, conf, bound, n_factors)
    if n > total_cents:
        raise ParameterError(
            "tolerable",
            f"asks for {n:,} monetary units, more than the {total_cents:,} cents of positive book value",
        )
    in_full = pos & (cents * n >= total_cents)
    credits = cents < 0
    notes = [
        "Credits and zero balances are never selected by monetary units of positive book value, so this "
        "sample says nothing about them: they need their own audit procedures.",
    ]
    if n > n_factors:
        notes.append(
            f"The confidence factors give {n_factors:,} monetary units; with no misstatement found the "
            f"{BOUND_NAMES[bound]} bound would still lie above tolerable at that size, so the plan takes "
            f"{n:,}, the smallest size at which it does not."
        )
    if bound == "stringer":
        notes.append(
            "The plan relies on the Stringer bound: it has no general proof of its confidence; it is "
            "conservative in published simulations and in auditmean's own coverage tests."
        )
    return MonetaryUnitPlan(
        tolerable=tm,
        expected=em,
        risk_incorrect_acceptance=float(risk_incorrect_acceptance),
        confidence=1.0 - float(risk_incorrect_acceptance),
        basis=basis,
        sample_size=n,
        book_total=total_cents / 100,
        book_total_cents=total_cents,
        interval=total_cents / n / 100,
        positive_items=int(pos.sum()),
        in_full_count=int(in_full.sum()),
        in_full_total=int(cents[in_full].sum()) / 100,
        credits_count=int(credits.sum()),
        credits_total=int(cents[credits].sum()) / 100,
        zeros_count=int((cents == 0).sum()),
        bound=bound,
        bounds_shown=MONETARY_UNIT_BOUNDS,
        factor_sample_size=n_factors,
        zero_error_upper={m: _zero_error(book, n, conf, m) for m in MONETARY_UNIT_BOUNDS},
        notes=tuple(notes),
    )


def _zero_error(book: float, n: int, confidence: float, method: str) -> float:
    from auditmean.core.monetary import zero_error_bound

    return float(zero_error_bound(book, n, confidence, method))


def _size_for_bound(book: float, tolerable: float, confidence: float, bound: str, n: int) -> int:
    """``n``, or the smallest larger size at which ``bound`` with no misstatement found is within tolerable.

    The zero-error bound falls as the size grows, so a doubling search and a
    bisection find it; the result is checked directly.
    """
    if _zero_error(book, n, confidence, bound) <= tolerable:
        return n
    lo, hi = n, 2 * n
    while _zero_error(book, hi, confidence, bound) > tolerable:
        lo, hi = hi, 2 * hi
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if _zero_error(book, mid, confidence, bound) <= tolerable:
            hi = mid
        else:
            lo = mid
    return hi


def monetary_unit_plan(eng: Engagement) -> MonetaryUnitPlan:
    """The saved monetary-unit plan of an engagement (RecordError when it has another design)."""
    path = str(Path(eng.folder) / "plan.json")
    rec = eng.plan()
    if rec is None:
        raise RecordError(
            path, "no plan has been saved yet; plan the sample first (auditmean plan)"
        )
    if rec.get("design") != "monetary_unit":
        raise RecordError(path, "this engagement does not follow the monetary-unit design")
    return MonetaryUnitPlan.from_dict(rec.get("monetary_unit_plan"), source=path)


# ---------------------------------------------------------------------------
# selection


def _proceed(proceed: Callable[[], bool] | None, what: str) -> None:
    if proceed is not None and proceed() is False:
        raise Stopped(what)


def _monetary_record(eng: Engagement) -> dict[str, Any]:
    rec = eng.selection_record()
    path = str(Path(eng.folder) / "selection.json")
    if rec is None:
        raise RecordError(path, "no selection has been saved yet; draw it first (auditmean select)")
    if rec.get("kind") != MONETARY_UNIT_SELECTION_KIND:
        raise RecordError(path, "the saved selection is not a monetary-unit selection")
    return rec


def draw_monetary_units(
    eng: Engagement,
    population: Any,
    seed: str | None = None,
    *,
    proceed: Callable[[], bool] | None = None,
) -> tuple[pd.DataFrame, str]:
    """Draw the planned monetary units with ``seed`` (a proposed one when not given) and save them.

    Credits and zero balances are left out and counted
    (``select_monetary_units(..., nonpositive="apart")``). The selection is
    re-performed from the population before it is saved. Returns the saved
    selection (:meth:`Engagement.selection`) and the seed.
    """
    from auditmean.monetary_selection import select_monetary_units
    from auditmean.selection import propose_seed

    plan = monetary_unit_plan(eng)
    items = _items_of(population)
    _proceed(proceed, "the selection")
    seed = propose_seed() if seed is None else seed
    # a Population's checks at loading are trusted by the selection (its ids are already checked)
    source = population if isinstance(population, Population) else items
    selection = select_monetary_units(source, plan.sample_size, seed, nonpositive="apart")
    _check_total(eng, selection, plan.book_total_cents)
    _proceed(proceed, "the selection")
    eng.save_monetary_unit_selection(selection, seed, plan.sample_size, items=items)
    return eng.selection(), seed


def _check_total(eng: Engagement, selection: pd.DataFrame, cents: int) -> None:
    got = (selection.attrs.get("monetary_units") or {}).get("book_total_cents")
    if got != cents:
        raise RecordError(
            str(Path(eng.folder) / "plan.json"),
            f"the plan's positive book total ({cents:,} cents) differs from the one the selection found "
            f"({got!r}); the population or auditmean's selection has changed since the plan",
        )


def extend_monetary_unit_selection(
    eng: Engagement,
    population: Any,
    sample_size: int,
    *,
    proceed: Callable[[], bool] | None = None,
) -> tuple[pd.DataFrame, str]:
    """Extend the saved monetary-unit selection to ``sample_size`` draws (same seed) and save it.

    Draws ``1..n`` stay what they were, so every item already selected stays
    selected and results already entered stay valid
    (:func:`auditmean.extend_monetary_units`). The extended sample is again
    a monetary-unit sample of the larger size; but the Stringer and the
    error-count bounds assume the size was fixed before any result was seen,
    which an extension decided on the results found is not: the evaluation
    says so. Returns the extended selection with an ``added`` column (bool)
    and the seed.
    """
    from auditmean.monetary_selection import extend_monetary_units

    rec = _monetary_record(eng)
    old_n = int(rec["sample_size"])
    if (
        isinstance(sample_size, bool)
        or not isinstance(sample_size, (int, np.integer))
        or sample_size <= old_n
    ):
        raise ParameterError(
            "sample_size",
            f"must be a whole number larger than the {old_n:,} monetary units already drawn, got {sample_size!r}",
        )
    items = _items_of(population)
    saved = eng.selection()
    _proceed(proceed, "the extension")
    previous = saved[
        ["item_id", "book_value", "hits", "examined_in_full", "units", "unit_from", "unit_to"]
    ].copy()
    previous.attrs["monetary_units"] = {
        "book_total_cents": int(rec["book_total_cents"]),
        "sample_size": old_n,
        "seed": rec["seed"],
    }
    extended = extend_monetary_units(items, previous, int(sample_size), rec["seed"])
    _check_total(eng, extended, int(rec["book_total_cents"]))
    _proceed(proceed, "the extension")
    eng.save_monetary_unit_selection(extended, rec["seed"], int(sample_size), items=items)
    out = eng.selection()
    old_ids = set(saved["item_id"])
    out["added"] = ~out["item_id"].isin(old_ids)
    return out, rec["seed"]


def verify_monetary_unit_selection(eng: Engagement, population: Any):
    """Re-perform the saved monetary-unit selection from the population and the recorded seed."""
    from auditmean.monetary_selection import verify_monetary_units

    rec = _monetary_record(eng)
    sel = eng.selection()
    recorded = sel[
        ["item_id", "book_value", "hits", "examined_in_full", "units", "unit_from", "unit_to"]
    ].copy()
    recorded.attrs["monetary_units"] = {
        "book_total_cents": int(rec["book_total_cents"]),
        "sample_size": int(rec["sample_size"]),
        "seed": rec["seed"],
    }
    return verify_monetary_units(_items_of(population), recorded, rec["seed"])


# ---------------------------------------------------------------------------
# evaluation


@dataclass(frozen=True)
class MonetaryUnitEvaluation(RecordMixin):
    """A monetary-unit sample evaluated with every bound offered, and the conclusion on one of them.

    Attributes
    ----------
    tolerable, expected, risk_incorrect_acceptance, confidence:
        From the plan; every bound is at ``confidence = 1 - risk``.
    relied_on:
        The bound the conclusion rests on (one of :data:`MONETARY_UNIT_BOUNDS`).
    bounds:
        ``{method: MonetaryUnitBound}`` for every bound offered
        (:func:`auditmean.monetary_unit_bound`).
    projected, upper:
        Projected misstatement and the relied-on upper bound on overstatement.
    exact_in_full:
        Net misstatement (book minus audited) of the items examined in full.
    understatement_upper:
        The relied-on method's separate bound on understatement, or NaN where
        the method defines none.
    verdict:
        ``"supports"`` or ``"does not support"``.
    wording:
        The conclusion in plain words, deferring to professional judgement.
    sample_size, book_total, interval:
        Monetary units drawn, positive book total, sampling interval.
    items, items_in_full, errors:
        Items examined, of which examined in full; draws with an overstatement.
    credits_count, credits_total, zeros_count:
        The items kept apart (not covered by the sample).
    missing_treatment, missing_items:
        How selected items without an audited value were treated, and which.
    extended_from:
        Sample sizes the selection had before it was extended (empty if never).
    notes:
        Plain sentences the conclusion must carry.
    """

    record_kind: ClassVar[str] = "monetary_unit_evaluation"

    tolerable: float
    expected: float
    risk_incorrect_acceptance: float
    confidence: float
    relied_on: str
    bounds: dict[str, Any]
    projected: float
    upper: float
    understatement_upper: float
    exact_in_full: float
    verdict: str
    wording: str
    sample_size: int
    book_total: float
    interval: float
    items: int
    items_in_full: int
    errors: int
    credits_count: int
    credits_total: float
    zeros_count: int
    missing_treatment: str
    missing_items: tuple[str, ...]
    extended_from: tuple[int, ...]
    notes: tuple[str, ...]

    def table(self) -> pd.DataFrame:
        """One row per bound: ``method``, ``name``, ``projected``, ``upper``, ``understatement_upper``,
        ``relied_on``, ``guarantee``."""
        rows = []
        for m, b in self.bounds.items():
            rows.append(
                {
                    "method": m,
                    "name": BOUND_NAMES.get(m, m),
                    "projected": float(b.projected),
                    "upper": float(b.upper),
                    "understatement_upper": _understatement(b),
                    "relied_on": m == self.relied_on,
                    "guarantee": str(getattr(b, "guarantee", "")),
                }
            )
        return pd.DataFrame(rows)

    def summary(self) -> str:
        risk = _percent(self.risk_incorrect_acceptance)
        head = property_text(
            "Evaluation of a monetary-unit sample",
            [
                ("positive book total", format_number(self.book_total)),
                (
                    "sample size",
                    f"{self.sample_size:,} monetary units; interval {format_number(self.interval)}"
                    + (
                        f" (extended from {', '.join(f'{n:,}' for n in self.extended_from)})"
                        if self.extended_from
                        else ""
                    ),
                ),
                (
                    "items examined",
                    f"{self.items:,}, of which {self.items_in_full:,} examined in full",
                ),
                ("misstatement of items in full", format_number(self.exact_in_full)),
                ("draws with an overstatement", f"{self.errors:,}"),
                ("tolerable misstatement", format_number(self.tolerable)),
                (
                    "risk of incorrect acceptance",
                    f"{risk} (confidence {_percent(self.confidence)})",
                ),
                (
                    "not yet audited",
                    "none"
                    if not self.missing_items
                    else f"{len(self.missing_items):,} items, taken {self.missing_treatment.replace('_', ' ')}",
                ),
            ],
        )
        t = self.table()
        rows = [
            [
                ("* " if r.relied_on else "  ") + r.name,
                format_number(r.projected),
                format_number(r.upper),
                format_number(r.understatement_upper)
                if math.isfinite(r.understatement_upper)
                else "-",
            ]
            for r in t.itertuples()
        ]
        table = text_table(["bound", "projected", "upper bound", "understatement bound"], rows)
        out = [
            head,
            "",
            table,
            "  (* the bound the conclusion relies on)",
            "",
            "How far each bound holds:",
        ]
        for m, b in self.bounds.items():
            mark = " (relied on)" if m == self.relied_on else ""
            share = getattr(b, "share", math.nan)
            split = (
                (
                    f" (the smaller of the error count at {share:.4g} of the risk and the betting bound at "
                    "the rest)"
                )
                if m == "count_or_betting" and math.isfinite(share)
                else ""
            )
            out.append(
                _wrap(f"{BOUND_NAMES.get(m, m)}{mark}: {getattr(b, 'guarantee', '')}{split}", "  ")
            )
        common = _common_assumptions(self.bounds)
        out.append("Assumptions stated by every bound:")
        out += [_wrap(a, "  - ") for a in common]
        for m, b in self.bounds.items():
            own = [a for a in getattr(b, "assumptions", ()) if a not in common]
            if own:
                mark = " (relied on)" if m == self.relied_on else ""
                out.append(f"Assumptions of the {BOUND_NAMES.get(m, m)} bound{mark}:")
                out += [_wrap(a, "  - ") for a in own]
        out += ["", _wrap(f"Conclusion ({self.verdict}): {self.wording}")]
        out += [_wrap(n) for n in self.notes]
        return "\n".join(out)


def _understatement(b: Any) -> float:
    for name in ("understatement_upper", "lower_understatement"):
        v = getattr(b, name, None)
        if v is not None:
            try:
                return float(v)
            except (TypeError, ValueError):
                return math.nan
    return math.nan


def _common_assumptions(bounds: Mapping[str, Any]) -> list[str]:
    lists = [list(getattr(b, "assumptions", ())) for b in bounds.values()]
    if not lists:
        return []
    return [a for a in lists[0] if all(a in other for other in lists[1:])]


def _verdict(
    name: str, projected: float, upper: float, under: float, tm: float, risk: float, book: float
) -> tuple[str, str]:
    """The conclusion in the wording style of :func:`auditmean.evaluation.conclusion._verdict_words`."""
    lead = (
        f"At a {_percent(risk)} risk of incorrect acceptance, the misstatement projected from the "
        f"monetary-unit sample is {format_number(projected)}, and the upper bound on overstatement by the "
        f"{name} bound is {format_number(upper)}"
    )
    if math.isfinite(under):
        lead += f" (on understatement, {format_number(under)})"
        no_under = ""
    else:
        no_under = (
            " No bound on understatement is formed (an item's audited value is more than twice its book "
            "value), so the sample says nothing about understatement."
        )
    if upper <= tm and not (math.isfinite(under) and under > tm):
        within = "both within" if math.isfinite(under) else "within"
        return (
            "supports",
            f"{lead}, {within} the tolerable misstatement of {format_number(tm)}. The sample supports the "
            f"conclusion that the positive book value of {format_number(book)} is not "
            f"{'misstated' if math.isfinite(under) else 'overstated'} by more than tolerable.{no_under}",
        )
    side = "overstated" if upper > tm else "understated"
    return (
        "does not support",
        f"{lead}. The bound on {side[:-2] + 'ement'} lies beyond the tolerable misstatement of {format_number(tm)}, "
        f"so the sample does not support the conclusion that the positive book value is not {side} by more "
        f"than tolerable; the usual responses are to examine more items (extend the sample), investigate "
        f"the nature of the misstatements found, or ask for an adjustment, as the firm's methodology "
        f"directs.{no_under}",
    )


def evaluate_monetary_units(
    eng: Engagement,
    *,
    missing_treatment: str = "error",
    bound: str | None = None,
    save: bool = True,
    proceed: Callable[[], bool] | None = None,
) -> MonetaryUnitEvaluation:
    """Evaluate the recorded results of a monetary-unit engagement with every bound, and save it.

    Parameters
    ----------
    eng:
        An engagement of the monetary-unit design, opened with its population.
    missing_treatment:
        Selected items without an audited value: ``"error"`` (refuse; default),
        ``"at_book_value"`` or ``"as_zero"`` (see :data:`auditmean.results.MISSING_TREATMENTS`).
    bound:
        The bound to conclude on; default the plan's.
    save:
        Save the evaluation in ``evaluations/`` (default True).
    proceed:
        Asked before the evaluation and before it is saved; returning False
        ends the work with :class:`~auditmean.errors.Stopped`, nothing saved.

    Returns
    -------
    MonetaryUnitEvaluation
        Every bound at ``1 - risk`` confidence
        (:func:`auditmean.monetary_unit_bound` with the selection's positive
        book total and sample size), the relied-on one compared with the
        tolerable misstatement.
    """
    from auditmean.monetary_bound import monetary_unit_bound

    plan = monetary_unit_plan(eng)
    relied = plan.bound if bound is None else _check_bound("bound", bound)
    rec = _monetary_record(eng)
    frame = eng.sample_frame(missing_treatment=missing_treatment)
    _proceed(proceed, "the evaluation")
    sel = eng.selection()
    sample = sel[["item_id", "book_value", "hits", "examined_in_full", "units"]].merge(
        frame.frame[["item_id", "audited_value"]], on="item_id", how="left", validate="one_to_one"
    )
    n = int(rec["sample_size"])
    book = int(rec["book_total_cents"]) / 100
    bounds = {
        m: monetary_unit_bound(sample, book, n, confidence=plan.confidence, method=m)
        for m in plan.bounds_shown
    }
    if relied not in bounds:
        bounds[relied] = monetary_unit_bound(
            sample, book, n, confidence=plan.confidence, method=relied
        )
    chosen = bounds[relied]
    under = _understatement(chosen)
    verdict, words = _verdict(
        BOUND_NAMES[relied],
        float(chosen.projected),
        float(chosen.upper),
        under,
        plan.tolerable,
        plan.risk_incorrect_acceptance,
        book,
    )
    credits_count = rec["credits"].get("count")
    credits_total = rec["credits"].get("total")
    zeros = rec["zeros"].get("count")
    credits_count = plan.credits_count if credits_count is None else int(credits_count)
    credits_total = plan.credits_total if credits_total is None else float(credits_total)
    zeros = plan.zeros_count if zeros is None else int(zeros)
    words += (
        f" Credits ({credits_count:,} items, total {format_number(credits_total)}) and zero balances "
        f"({zeros:,} items) were not sampled and are not covered by this conclusion; they need their own "
        f"procedures. This supports, and does not replace, the auditor's professional judgement."
    )
    extended = tuple(
        sorted(
            {int(h["sample_size"]) for h in rec.get("history") or () if int(h["sample_size"]) < n}
        )
    )
    notes = []
    if extended:
        notes.append(
            f"The selection was extended after it was first drawn (from {extended[0]:,} to {n:,} monetary "
            "units). The Stringer and error-count bounds assume the sample size was fixed before any result "
            "was seen; if the extension was decided on the results found, rely on them with care."
        )
    if len(frame.missing):
        notes.append(
            f"{len(frame.missing):,} selected items had no audited value and were taken "
            f"{frame.missing_treatment.replace('_', ' ')}."
        )
    ev = MonetaryUnitEvaluation(
        tolerable=plan.tolerable,
        expected=plan.expected,
        risk_incorrect_acceptance=plan.risk_incorrect_acceptance,
        confidence=plan.confidence,
        relied_on=relied,
        bounds=bounds,
        projected=float(chosen.projected),
        upper=float(chosen.upper),
        understatement_upper=under,
        exact_in_full=float(chosen.exact_in_full),
        verdict=verdict,
        wording=words,
        sample_size=n,
        book_total=book,
        interval=book / n,
        items=int(len(sel)),
        items_in_full=int(sel["examined_in_full"].sum()),
        errors=int(getattr(chosen, "errors", 0)),
        credits_count=credits_count,
        credits_total=credits_total,
        zeros_count=zeros,
        missing_treatment=frame.missing_treatment,
        missing_items=tuple(str(i) for i in frame.missing["item_id"]),
        extended_from=extended,
        notes=tuple(notes),
    )
    _proceed(proceed, "the evaluation")
    if save:
        eng.save_evaluation(ev.to_dict())
    return ev
