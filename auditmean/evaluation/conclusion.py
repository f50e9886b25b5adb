r"""The audit conclusion: every applicable estimator against the tolerable misstatement.

For each method auditmean computes, at the planned risk of incorrect
acceptance (RIA):

* the projected misstatement ``PM`` (book total minus estimated audited
  total; positive is overstatement);
* the upper and lower misstatement limits ``PM +/- z_A SE`` with ``z_A`` the
  one-sided normal quantile for the RIA (the limits of a two-sided interval
  at confidence ``1 - 2 RIA``);
* the achieved allowance for sampling risk ``A' = z_R SE`` when a risk of
  incorrect rejection (RIR) is given (``z_R`` two-sided, as in planning), or
  ``A' = z_A SE`` when it is not;
* when ``A'`` exceeds the planned allowance ``A``, the adjusted allowance
  that keeps the planned RIA, ``A'' = TM - z_A SE``. With the classical plan
  ``A = TM z_R / (z_A + z_R)`` this is ``A' + TM (1 - A'/A)``, the form in the
  AICPA audit-sampling guide (quoted from memory); it follows from solving
  ``TM - A'' = z_A A' / z_R``.

The rule: the sample supports the conclusion that the book value is not
misstated by more than tolerable when the upper misstatement limit does not
exceed ``TM`` and the lower one is not below ``-TM`` (equivalently
``|PM| <= A''``). This is a statement about what the sample supports; the
conclusion itself is the auditor's.

A conclusion rests on a limit that holds. Where no warning about the normal
approximation is raised for the relied-on method, that is its normal upper
limit. Where warnings are raised (any flag of
:data:`auditmean.core.flags.FLAG_CODES` but ``ratio-undefined``, which only
says a stratum was estimated by differences), the normal limit is shown for
information and the verdict on overstatement rests on the finite-sample
bound for stratified samples (:func:`auditmean.overstatement_bound`), which
holds whatever the sample size under its stated assumption (no item
overstated by more than its book value) and needs each stratum's largest
book value (``largest_book_value`` in the strata table). When that bound is
above tolerable, the sample cannot support the conclusion with a limit that
holds, and the wording says what would (more items, or a monetary-unit
sample, with its size). When the bound cannot be formed (no
``largest_book_value``, or a sampled stratum of credits) the verdict is
"cannot be assessed", with the reason.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from scipy.special import ndtri  # the normal quantile (as scipy.stats.norm.ppf)

from auditmean._records import RecordMixin, format_number, html_table, text_table
from auditmean.cautions import CAUTIONS
from auditmean.core import estimators as est
from auditmean.core.flags import Flag
from auditmean.errors import MethodNotApplicable, ParameterError
from auditmean.evaluation.estimate import Estimate, estimate_total
from auditmean.evaluation.second_opinion import SecondOpinion, second_opinion

__all__ = ["MethodConclusion", "Evaluation", "evaluate", "VERDICTS"]

VERDICTS = ("supports", "does not support", "cannot be assessed")

#: Warnings that do not make the normal limit unreliable (a substitution of method, said in the flag).
_NOT_NORMALITY = frozenset({"ratio-undefined"})

#: What a conclusion rests on.
BASIS_NORMAL = "normal limit"
BASIS_BOUND = "finite-sample bound"
BASIS_NONE = "no limit that holds"


@dataclass(frozen=True)
class MethodConclusion(RecordMixin):
    """What one estimator's result says against the tolerable misstatement."""

    record_kind = "method_conclusion"

    method: str
    projected_misstatement: float
    upper_limit: float
    lower_limit: float
    achieved_allowance: float
    planned_allowance: float
    adjusted_allowance: float
    verdict: str
    wording: str
    second_opinion_upper: float
    second_opinion_lower: float
    second_opinion_verdict: str | None
    #: what the verdict rests on: "normal limit", "finite-sample bound" or "no limit that holds"
    basis: str = BASIS_NORMAL
    #: the upper limit of overstatement the verdict rests on (NaN when none holds)
    relied_upper_limit: float = math.nan
    #: what the normal limits alone would say (the classical rule), shown for information
    normal_verdict: str | None = None

    def summary(self) -> str:
        return self.wording


@dataclass(frozen=True)
class Evaluation(RecordMixin):
    """Every applicable estimator side by side, with flags, second opinions and conclusions.

    Attributes
    ----------
    estimates:
        Method -> :class:`~auditmean.evaluation.estimate.Estimate` (two-sided
        limits at confidence ``1 - 2 RIA``, so each limit is a one-sided bound
        at the RIA).
    second_opinions:
        Method -> :class:`~auditmean.evaluation.second_opinion.SecondOpinion`,
        for every method whose estimate raised a warning.
    conclusions:
        Method -> :class:`MethodConclusion`.
    primary:
        The method the user relies on (its conclusion heads the summary).
    not_applicable:
        Method -> the reason it could not be used on this sample.
    overstatement_bound:
        The finite-sample bound for stratified samples
        (:class:`~auditmean.evaluation.overstatement.OverstatementBound`) at
        the risk of incorrect acceptance, or ``None`` when it could not be
        formed (``bound_note`` says why).
    """

    record_kind = "evaluation"

    tolerable: float
    expected: float
    risk_incorrect_acceptance: float
    risk_incorrect_rejection: float | None
    planned_allowance: float
    primary: str
    estimates: dict[str, Estimate] = field(repr=False)
    second_opinions: dict[str, SecondOpinion] = field(repr=False)
    conclusions: dict[str, MethodConclusion] = field(repr=False)
    not_applicable: dict[str, str] = field(default_factory=dict)
    bootstrap_seed: int = 0
    cautions: tuple[str, ...] = CAUTIONS
    overstatement_bound: Any = field(default=None, repr=False)
    bound_note: str = ""

    @property
    def basis(self) -> str:
        """What the relied-on verdict rests on (see :data:`BASIS_NORMAL` and its neighbours)."""
        return self.conclusion.basis

    @property
    def conclusion(self) -> MethodConclusion:
        return self.conclusions[self.primary]

    @property
    def flags(self) -> tuple[Flag, ...]:
        return self.estimates[self.primary].flags

    def table(self) -> pd.DataFrame:
        """One row per method: the numbers behind the conclusion."""
        rows = []
        for m, c in self.conclusions.items():
            e = self.estimates[m]
            rows.append(
                {
                    "method": m,
                    "estimated_audited_total": e.total,
                    "std_error": e.std_error,
                    "projected_misstatement": c.projected_misstatement,
                    "upper_misstatement_limit": c.upper_limit,
                    "lower_misstatement_limit": c.lower_limit,
                    "achieved_allowance": c.achieved_allowance,
                    "adjusted_allowance": c.adjusted_allowance,
                    "second_opinion_upper_limit": c.second_opinion_upper,
                    "warnings": len(e.flags),
                    "verdict": c.verdict,
                    "basis": c.basis,
                    "relied_upper_limit": c.relied_upper_limit,
                }
            )
        return pd.DataFrame(rows)

    def _rows(self):
        labels = [
            ("estimated audited total", lambda m: self.estimates[m].total),
            ("projected misstatement", lambda m: self.conclusions[m].projected_misstatement),
            ("upper misstatement limit", lambda m: self.conclusions[m].upper_limit),
            ("lower misstatement limit", lambda m: self.conclusions[m].lower_limit),
            ("achieved allowance", lambda m: self.conclusions[m].achieved_allowance),
            ("adjusted allowance", lambda m: self.conclusions[m].adjusted_allowance),
            ("second-opinion upper limit", lambda m: self.conclusions[m].second_opinion_upper),
        ]
        methods = list(self.conclusions)
        rows = [[label] + [format_number(f(m)) for m in methods] for label, f in labels]
        rows.append(["warnings"] + [str(len(self.estimates[m].flags)) for m in methods])
        rows.append(["verdict rests on"] + [self.conclusions[m].basis for m in methods])
        rows.append(["upper limit relied on"] + [format_number(self.conclusions[m].relied_upper_limit) for m in methods])
        rows.append(["the sample"] + [self.conclusions[m].verdict for m in methods])
        return [""] + [est.METHOD_NAMES[m] for m in methods], rows

    def _headline(self) -> str:
        rir = "" if self.risk_incorrect_rejection is None else f", risk of incorrect rejection {self.risk_incorrect_rejection:.0%}"
        return (
            f"Evaluation against tolerable misstatement {format_number(self.tolerable)} "
            f"(expected {format_number(self.expected)}; risk of incorrect acceptance "
            f"{self.risk_incorrect_acceptance:.0%}{rir})"
        )

    def summary(self) -> str:
        header, rows = self._rows()
        lines = [self._headline(), "", text_table(header, rows), "",
                 f"Relied-on method: {est.METHOD_NAMES[self.primary]}; the verdict rests on its {self.basis}.",
                 self.conclusion.wording]
        if self.overstatement_bound is not None:
            lines += ["", self.overstatement_bound.summary()]
        elif self.bound_note:
            lines += ["", f"Finite-sample bound: {self.bound_note}"]
        for m, why in self.not_applicable.items():
            lines.append(f"{est.METHOD_NAMES[m]}: not applicable: {why}")
        if self.flags:
            lines += ["", f"Warnings for {est.METHOD_NAMES[self.primary]}:"]
            lines += [f"  [{f.code}] {f.message}" for f in self.flags]
        lines += [""] + [f"Caution: {c}" for c in self.cautions]
        return "\n".join(lines)

    def _html_body(self) -> str:
        header, rows = self._rows()
        parts = [f"<p><strong>{html.escape(self._headline())}</strong></p>", html_table(header, rows)]
        parts.append(f"<p>{html.escape(self.conclusion.wording)}</p>")
        if self.overstatement_bound is not None:
            parts.append(self.overstatement_bound._html_body())
        elif self.bound_note:
            parts.append(f"<p>Finite-sample bound: {html.escape(self.bound_note)}</p>")
        if self.flags:
            items = "".join(f"<li><code>{html.escape(f.code)}</code> {html.escape(f.message)}</li>" for f in self.flags)
            parts.append(f"<ul>{items}</ul>")
        parts.append("".join(f"<p><em>{html.escape(c)}</em></p>" for c in self.cautions))
        return "".join(parts)


def _verdict_words(method, pm, uml, lml, tm, ria, unusable) -> tuple[str, str]:
    name = est.METHOD_NAMES[method]
    risk = f"{ria:.0%}"
    if unusable:
        return (
            "cannot be assessed",
            f"By {name} no conclusion can be drawn: its interval has zero width although only part of the "
            f"population was examined, which reflects the absence of misstatement in the sample, not precision.",
        )
    if uml <= tm and lml >= -tm:
        return (
            "supports",
            f"At a {risk} risk of incorrect acceptance, the misstatement projected by {name} is "
            f"{format_number(pm)}, with limits from {format_number(lml)} to {format_number(uml)}, within the "
            f"tolerable misstatement of {format_number(tm)} either way. The sample supports the conclusion "
            f"that the book value is not misstated by more than tolerable.",
        )
    side = "overstated" if uml > tm else "understated"
    limit = uml if uml > tm else lml
    return (
        "does not support",
        f"At a {risk} risk of incorrect acceptance, the misstatement projected by {name} is "
        f"{format_number(pm)}, and its {'upper' if uml > tm else 'lower'} limit {format_number(limit)} lies beyond "
        f"the tolerable misstatement of {format_number(tm)}. The sample does not support the conclusion that "
        f"the book value is not {side} by more than tolerable; the usual responses are to examine more items, "
        f"investigate the nature of the misstatements found, or ask for an adjustment, as the firm's "
        f"methodology directs.",
    )


def _finite_bound(sample, strata, ria: float) -> tuple[Any, str]:
    """The finite-sample bound at the risk of incorrect acceptance, or None and why not."""
    if "largest_book_value" not in getattr(strata, "columns", ()):
        return None, (
            "not formed: the strata table has no largest_book_value column (each stratum's largest book "
            "value), which the bound needs"
        )
    if "book_value" not in getattr(sample, "columns", ()):
        return None, "not formed: the sample has no book values"
    from auditmean.errors import AuditMeanError
    from auditmean.evaluation.overstatement import overstatement_bound

    try:
        return overstatement_bound(sample, strata, confidence=1.0 - ria), ""
    except AuditMeanError as exc:
        return None, f"not formed: {exc}"


def _monetary_unit_words(strata, tm: float, em: float, ria: float) -> str:
    """What a monetary-unit sample for the same parameters would take, in a sentence (or "")."""
    if "book_total" not in getattr(strata, "columns", ()):
        return ""
    totals = pd.to_numeric(strata["book_total"], errors="coerce").to_numpy(dtype=float)
    positive = math.fsum(t for t in totals if math.isfinite(t) and t > 0)
    from auditmean.plan_check import monetary_unit_alternative

    n, _interval, z = monetary_unit_alternative(positive, tm, em, ria)
    if n is None:
        return ""
    return (
        f" A monetary-unit sample of about {n:,} draws from the positive book values would give an upper "
        f"limit of {format_number(z)} if it found no misstatement."
    )


def _bound_verdict(method, n_flags, bound, note, uml, lml, tm, em, ria, strata) -> tuple[str, str, str, float]:
    """Verdict and wording when the normal limit is not relied on: (verdict, words, basis, relied limit)."""
    name = est.METHOD_NAMES[method]
    risk = f"{ria:.0%}"
    head = (
        f"Warnings about the normal approximation were raised for {name} ({n_flags}), so its normal limits "
        f"({format_number(lml)} to {format_number(uml)}) are shown for information only and the verdict "
        "rests on a limit that holds."
    )
    if bound is None:
        return (
            "cannot be assessed",
            f"{head} The finite-sample bound could not be formed ({note.removeprefix('not formed: ')}), so no "
            "limit that holds is available and the sample cannot support a conclusion by itself."
            + _monetary_unit_words(strata, tm, em, ria),
            BASIS_NONE,
            math.nan,
        )
    upper = float(bound.upper)
    words = (
        f"{head} At a {risk} risk of incorrect acceptance, the finite-sample upper bound of overstatement is "
        f"{format_number(upper)}; it holds whatever the sample size, under the stated assumption that no item is "
        "overstated by more than its book value."
    )
    if upper <= tm and lml >= -tm:
        return (
            "supports",
            words + f" It is within the tolerable misstatement of {format_number(tm)}, and the sample supports "
            "the conclusion that the book value is not overstated by more than tolerable.",
            BASIS_BOUND,
            upper,
        )
    if upper > tm:
        why = (
            f" It exceeds the tolerable misstatement of {format_number(tm)}: the sample cannot support the "
            "conclusion with a limit that holds. A simple random sample of items can miss the few large "
            "misstated items, so such a bound stays wide unless many items are examined. What would support "
            "it: examining more items (most in the strata whose share of the bound is largest), or a "
            "monetary-unit sample." + _monetary_unit_words(strata, tm, em, ria)
        )
    else:
        why = (
            f" The normal lower limit {format_number(lml)} is below minus the tolerable misstatement, so the "
            "sample does not support the conclusion that the book value is not understated by more than "
            "tolerable."
        )
    return "does not support", words + why, BASIS_BOUND, upper


def evaluate(
    sample: pd.DataFrame,
    strata: pd.DataFrame,
    *,
    tolerable: float,
    expected: float = 0.0,
    risk_incorrect_acceptance: float = 0.10,
    risk_incorrect_rejection: float | None = None,
    planned_allowance: float | None = None,
    methods: list[str] | tuple[str, ...] | None = None,
    primary: str | None = None,
    distribution: str = "normal",
    bootstrap_replicates: int = 2000,
    seed: int | str = 0,
    ratio_variance: str = "sample_book_mean",
    single_item: str = "average",
    unsampled: str = "error",
    sample_file: str | None = None,
    strata_file: str | None = None,
) -> Evaluation:
    """Evaluate a sample against the tolerable misstatement with every applicable estimator.

    Parameters
    ----------
    sample, strata:
        As for :func:`~auditmean.evaluation.estimate.estimate_total`.
    tolerable, expected:
        Tolerable and expected misstatement (``tolerable > 0``).
    risk_incorrect_acceptance, risk_incorrect_rejection:
        The planned risks (each strictly between 0 and 0.5).
    planned_allowance:
        The planned allowance for sampling risk, from the plan. When not
        given it is recomputed from the tolerable and expected misstatement
        and the risks, as planning does:
        ``(TM - EM) z_R / (z_A + z_R)`` with a risk of incorrect rejection,
        else ``TM - EM``.
    methods:
        The methods to compute (default: every method the tables allow).
    primary:
        The method relied on (default: separate ratio estimation where book
        values are given, else mean-per-unit).
    bootstrap_replicates, seed:
        For the second-opinion bootstrap of every method that raised a
        warning; the seed is recorded.

    Returns
    -------
    Evaluation
    """
    for name, value in (("tolerable", tolerable), ("expected", expected)):
        if not isinstance(value, (int, float, np.integer, np.floating)) or not math.isfinite(float(value)):
            raise ParameterError(name, f"got {value!r}; give an amount")
    tm, em = float(tolerable), float(expected)
    if tm <= 0:
        raise ParameterError("tolerable", f"got {tolerable!r}; the tolerable misstatement must be positive")
    if em < 0 or em >= tm:
        raise ParameterError("expected", f"got {expected!r}; it must be at least 0 and below the tolerable misstatement {tm:,.2f}")
    for name, risk in (("risk_incorrect_acceptance", risk_incorrect_acceptance), ("risk_incorrect_rejection", risk_incorrect_rejection)):
        if risk is None and name == "risk_incorrect_rejection":
            continue
        if not isinstance(risk, (int, float, np.floating)) or not (0.0 < float(risk) < 0.5):
            raise ParameterError(name, f"got {risk!r}; a risk must lie strictly between 0 and 0.5 (e.g. 0.10)")
    ria = float(risk_incorrect_acceptance)
    rir = None if risk_incorrect_rejection is None else float(risk_incorrect_rejection)
    z_a = float(ndtri(1.0 - ria))
    z_r = None if rir is None else float(ndtri(1.0 - rir / 2.0))
    if planned_allowance is None:
        planned = (tm - em) * z_r / (z_a + z_r) if z_r is not None else tm - em
    else:
        planned = float(planned_allowance)
        if not (planned > 0):
            raise ParameterError("planned_allowance", f"got {planned_allowance!r}; it must be a positive amount")

    has_book = "book_value" in getattr(sample, "columns", ()) and "book_total" in getattr(strata, "columns", ())
    if methods is None:
        methods = [m for m in est.METHODS if has_book or m not in est.BOOK_VALUE_METHODS]
    for m in methods:
        if m not in est.METHODS:
            raise ParameterError("methods", f"unknown method {m!r}; use {', '.join(est.METHODS)}")
    if primary is None:
        primary = "ratio" if has_book and "ratio" in methods else methods[0]
    if primary not in methods:
        raise ParameterError("primary", f"got {primary!r}; it must be one of the methods evaluated: {', '.join(methods)}")

    bound, bound_note = _finite_bound(sample, strata, ria)
    estimates: dict[str, Estimate] = {}
    opinions: dict[str, SecondOpinion] = {}
    conclusions: dict[str, MethodConclusion] = {}
    skipped: dict[str, str] = {}
    common = dict(single_item=single_item, unsampled=unsampled, sample_file=sample_file, strata_file=strata_file)
    for m in methods:
        try:
            e = estimate_total(
                sample, strata, method=m, confidence=1.0 - 2.0 * ria, sides="two-sided",
                distribution=distribution, ratio_variance=ratio_variance, **common,
            )
        except MethodNotApplicable as exc:
            if m == primary:
                raise
            skipped[m] = exc.reason
            continue
        estimates[m] = e
        so = None
        if e.flags:
            so = second_opinion(
                sample, strata, m, confidence=1.0 - 2.0 * ria, sides="two-sided",
                replicates=bootstrap_replicates, seed=seed, **common,
            )
            opinions[m] = so
        pm = e.misstatement
        uml, lml = e.misstatement_upper, e.misstatement_lower
        achieved = (z_r if z_r is not None else z_a) * e.std_error
        adjusted = tm - z_a * e.std_error if achieved > planned else math.nan
        unusable = any(f.code == "interval-unusable" for f in e.flags)
        normality = [f for f in e.flags if f.code not in _NOT_NORMALITY]
        normal_verdict, normal_words = _verdict_words(m, pm, uml, lml, tm, ria, unusable)
        if normality:
            verdict, words, basis, relied = _bound_verdict(
                m, len(normality), bound, bound_note, uml, lml, tm, em, ria, strata
            )
        else:
            verdict, words, basis, relied = normal_verdict, normal_words, BASIS_NORMAL, uml
        so_upper = so.bootstrap_misstatement_upper if so is not None else math.nan
        so_lower = so.bootstrap_misstatement_lower if so is not None else math.nan
        so_verdict = None
        if so is not None:
            so_verdict = "supports" if (so_upper <= tm and so_lower >= -tm) else "does not support"
            if unusable:
                so_verdict = "cannot be assessed"
            words += (
                f" For information, the rescaling bootstrap puts the misstatement between "
                f"{format_number(so_lower)} and {format_number(so_upper)}; it resamples the same few differences, "
                "so it does not hold where the normal limit fails either."
            )
        words += " This supports, and does not replace, the auditor's professional judgement."
        conclusions[m] = MethodConclusion(
            method=m, projected_misstatement=pm, upper_limit=uml, lower_limit=lml,
            achieved_allowance=achieved, planned_allowance=planned, adjusted_allowance=adjusted,
            verdict=verdict, wording=words, second_opinion_upper=so_upper, second_opinion_lower=so_lower,
            second_opinion_verdict=so_verdict, basis=basis, relied_upper_limit=relied,
            normal_verdict=normal_verdict,
        )
    from auditmean.core.bootstrap import seed_to_int

    return Evaluation(
        tolerable=tm, expected=em, risk_incorrect_acceptance=ria, risk_incorrect_rejection=rir,
        planned_allowance=planned, primary=primary, estimates=estimates, second_opinions=opinions,
        conclusions=conclusions, not_applicable=skipped, bootstrap_seed=seed_to_int(seed),
        overstatement_bound=bound, bound_note=bound_note,
    )
