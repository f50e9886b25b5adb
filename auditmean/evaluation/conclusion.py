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
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import stats

from auditmean._records import RecordMixin, format_number, html_table, text_table
from auditmean.cautions import CAUTIONS
from auditmean.core import estimators as est
from auditmean.core.flags import Flag
from auditmean.errors import MethodNotApplicable, ParameterError
from auditmean.evaluation.estimate import Estimate, estimate_total
from auditmean.evaluation.second_opinion import SecondOpinion, second_opinion

__all__ = ["MethodConclusion", "Evaluation", "evaluate", "VERDICTS"]

VERDICTS = ("supports", "does not support", "cannot be assessed")


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
        lines = [self._headline(), "", text_table(header, rows), "", f"Relied-on method: {est.METHOD_NAMES[self.primary]}.", self.conclusion.wording]
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
    z_a = float(stats.norm.ppf(1.0 - ria))
    z_r = None if rir is None else float(stats.norm.ppf(1.0 - rir / 2.0))
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
        verdict, words = _verdict_words(m, pm, uml, lml, tm, ria, unusable)
        so_upper = so.bootstrap_misstatement_upper if so is not None else math.nan
        so_lower = so.bootstrap_misstatement_lower if so is not None else math.nan
        so_verdict = None
        if so is not None:
            so_verdict = "supports" if (so_upper <= tm and so_lower >= -tm) else "does not support"
            if unusable:
                so_verdict = "cannot be assessed"
            words += (
                f" Warnings were raised about this estimate ({len(e.flags)}); the rescaling bootstrap puts the "
                f"misstatement between {format_number(so_lower)} and {format_number(so_upper)}, which "
                f"{'also supports' if so_verdict == 'supports' and verdict == 'supports' else 'supports' if so_verdict == 'supports' else 'does not support'} "
                f"the same conclusion."
            )
        words += " This supports, and does not replace, the auditor's professional judgement."
        conclusions[m] = MethodConclusion(
            method=m, projected_misstatement=pm, upper_limit=uml, lower_limit=lml,
            achieved_allowance=achieved, planned_allowance=planned, adjusted_allowance=adjusted,
            verdict=verdict, wording=words, second_opinion_upper=so_upper, second_opinion_lower=so_lower,
            second_opinion_verdict=so_verdict,
        )
    from auditmean.core.bootstrap import seed_to_int

    return Evaluation(
        tolerable=tm, expected=em, risk_incorrect_acceptance=ria, risk_incorrect_rejection=rir,
        planned_allowance=planned, primary=primary, estimates=estimates, second_opinions=opinions,
        conclusions=conclusions, not_applicable=skipped, bootstrap_seed=seed_to_int(seed),
    )
