"""Does the plan reach the risk it states? The coverage check run on the plan itself.

A stratified plan sizes its sample so that the *normal* limit meets the
risk of incorrect acceptance; where misstatements are rare and large, that
limit is too narrow and the real risk can be several times the planned one.
:func:`check_plan` runs the coverage check (:func:`auditmean.simulate_coverage`)
on the plan just proposed, on the population's own book values, under the
misstatement pattern the user assumed (or the stated low-error default
:data:`LOW_ERROR_DEFAULT`), and measures how often the plan's estimator
would accept a population misstated by exactly the tolerable misstatement.
Beside it, it gives the monetary-unit design for the same population: its
size (:func:`auditmean.monetary_unit_sample_size`) and the upper limit it
would give if no misstatement were found
(:func:`auditmean.core.monetary.zero_error_bound`).

The simulated risk is a Monte Carlo estimate; its standard error is
``sqrt(p (1 - p) / R)``. A plan *misses* its stated risk when the simulated
risk exceeds the planned one by more than two standard errors.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np

from auditmean._records import RecordMixin, format_number, property_text
from auditmean.errors import ParameterError

__all__ = ["PlanCheck", "check_plan", "LOW_ERROR_DEFAULT_TEXT", "default_model"]

#: How the default misstatement pattern is described wherever it is used.
LOW_ERROR_DEFAULT_TEXT = (
    "2% of items misstated, each overstated by a share of its book value drawn uniformly between "
    "5% and 100% (a low-error pattern: few items wrong, some badly)"
)


def default_model(plan: Any = None):
    """The misstatement model the check uses when none is given.

    The plan's own assumed pattern when it has one (every misstated item
    misstated by the typical taint), else the low-error default
    (:data:`LOW_ERROR_DEFAULT_TEXT`).
    """
    from auditmean.coverage import FixedTaint, MisstatementModel, UniformTaint

    rate = getattr(plan, "error_rate", None)
    taint = getattr(plan, "typical_taint", None)
    if rate is not None and taint is not None and 0 < rate <= 1 and 0 < abs(taint) <= 1:
        return MisstatementModel(error_rate=float(rate), taint=FixedTaint(abs(float(taint))),
                                 understatement_share=1.0 if taint < 0 else 0.0), False
    return MisstatementModel(error_rate=0.02, taint=UniformTaint(0.05, 1.0)), True


def _pct(p: float | None) -> str:
    if p is None or not math.isfinite(p):
        return "n/a"
    return f"{100 * p:.1f}%"


@dataclass(frozen=True)
class PlanCheck(RecordMixin):
    """What the coverage check found for a proposed plan.

    Attributes
    ----------
    method:
        The estimation method the plan is for.
    planned_risk:
        The risk of incorrect acceptance the plan states.
    simulated_risk, simulated_risk_mc_se:
        Share of simulated samples, drawn as planned from populations
        misstated by exactly the tolerable misstatement, whose normal upper
        limit of misstatement did not exceed tolerable (the actual risk of
        incorrect acceptance), and its Monte Carlo standard error.
    bound_risk, bound_risk_mc_se:
        The same for the finite-sample bound for stratified samples
        (:func:`auditmean.overstatement_bound`), when it was simulated, else
        ``None``.
    replications, seed:
        Samples simulated, and the seed that repeats the run.
    model, model_is_default:
        The misstatement pattern simulated, in words, and whether it is
        the low-error default rather than one the user gave.
    misses:
        The simulated risk exceeds the planned risk by more than two Monte
        Carlo standard errors.
    total_size:
        Items the plan examines (all strata).
    monetary_unit_size, monetary_unit_interval, monetary_unit_zero_error_bound:
        The monetary-unit design for the same tolerable and expected
        misstatement and risk: its sample size, its sampling interval, and
        the upper limit of overstatement it would give with no misstatement
        found (``None`` where it cannot be formed).
    positive_book_total:
        The book total of the positive items, from which monetary units
        are drawn (credits and zero balances are kept apart).
    line:
        The one plain sentence to show.
    """

    record_kind: ClassVar[str] = "plan_check"

    method: str
    planned_risk: float
    simulated_risk: float
    simulated_risk_mc_se: float
    bound_risk: float | None
    bound_risk_mc_se: float | None
    replications: int
    seed: int
    model: str
    model_is_default: bool
    misses: bool
    total_size: int
    monetary_unit_size: int | None
    monetary_unit_interval: float | None
    monetary_unit_zero_error_bound: float | None
    positive_book_total: float
    line: str
    #: why the finite-sample bound was not simulated ("" when it was, or was not asked for)
    bound_note: str = ""

    def _rows(self) -> list[tuple[str, str]]:
        rows = [
            ("misstatement pattern simulated", self.model + (" (default)" if self.model_is_default else "")),
            ("samples simulated", f"{self.replications:,} (seed {self.seed})"),
            ("risk of incorrect acceptance, planned", _pct(self.planned_risk)),
            ("  simulated, normal limit", f"{_pct(self.simulated_risk)} (+/- {_pct(self.simulated_risk_mc_se)})"),
        ]
        if self.bound_risk is not None:
            rows.append(("  simulated, finite-sample bound",
                         f"{_pct(self.bound_risk)} (+/- {_pct(self.bound_risk_mc_se)})"))
        rows.append(("items the stratified plan examines", f"{self.total_size:,}"))
        if self.monetary_unit_size is not None:
            rows += [
                ("monetary-unit design: draws", f"{self.monetary_unit_size:,}"),
                ("  sampling interval", format_number(self.monetary_unit_interval)),
                ("  upper limit if no misstatement is found", format_number(self.monetary_unit_zero_error_bound)),
            ]
        return rows

    def summary(self) -> str:
        return property_text("Does the plan reach its stated risk? (coverage check)", self._rows()) + "\n" + self.line

    def _html_body(self) -> str:
        rows = "".join(
            f"<tr><th>{html.escape(k)}</th><td>{html.escape(v)}</td></tr>" for k, v in self._rows()
        )
        return f"<p><strong>{html.escape(self.line)}</strong></p><table>{rows}</table>"


def _positive_total(strata: Any, plan: Any) -> float:
    values = getattr(strata, "book_values", None)
    if values is not None:
        from auditmean.core.moments import exact_group_sums

        v = np.asarray(values, dtype=float)
        return float(exact_group_sums((v > 0).astype(np.int64), 2, v)[1])
    t = plan.table["book_total"].to_numpy(dtype=float)
    return float(math.fsum(x for x in t if x > 0))


def monetary_unit_alternative(
    positive_total: float, tolerable: float, expected: float, risk_incorrect_acceptance: float
) -> tuple[int | None, float | None, float | None]:
    """Size, interval and zero-error upper limit of the monetary-unit design for these parameters.

    ``(None, None, None)`` where the design cannot be formed (no positive
    book value, or parameters the sizing refuses).
    """
    from auditmean.core.monetary import zero_error_bound
    from auditmean.monetary_bound import monetary_unit_sample_size

    if not positive_total > 0:
        return None, None, None
    try:
        n = monetary_unit_sample_size(positive_total, tolerable, expected,
                                      risk_incorrect_acceptance=risk_incorrect_acceptance)
    except ParameterError:
        return None, None, None
    bound = float(zero_error_bound(positive_total, n, 1.0 - risk_incorrect_acceptance))
    return int(n), positive_total / n, bound


def check_plan(
    strata: Any,
    plan: Any,
    model: Any = None,
    *,
    replications: int = 2000,
    seed: int | None = None,
    include_bound: bool = True,
    progress: Any = None,
) -> PlanCheck:
    """Run the coverage check on a proposed stratified plan and set the monetary-unit design beside it.

    Parameters
    ----------
    strata:
        The :class:`~auditmean.strata.Strata` the plan was made for (with
        its items' book values and stratum codes).
    plan:
        The :class:`~auditmean.plan.Plan`.
    model:
        A :class:`~auditmean.coverage.MisstatementModel`; default: the
        plan's own assumed pattern, else :data:`LOW_ERROR_DEFAULT_TEXT`
        (see :func:`default_model`).
    replications, seed:
        Samples to simulate (default 2,000: a risk near 5% is then known to
        about +/- 0.5 percentage point) and the seed (``None``: a new one,
        recorded).
    include_bound:
        Simulate the finite-sample bound for stratified samples too, where
        the coverage check offers it.

    Returns
    -------
    PlanCheck
    """
    from auditmean.coverage import simulate_coverage

    values = getattr(strata, "book_values", None)
    codes = getattr(strata, "codes", None)
    if values is None or codes is None:
        raise ParameterError(
            "strata",
            "the coverage check needs every item's book value in memory; this population was read "
            "from a large file without loading it",
        )
    if model is None:
        model, is_default = default_model(plan)
    else:
        is_default = False
    labels = np.asarray(strata.labels, dtype=object)[np.asarray(codes)]
    ria = float(plan.risk_incorrect_acceptance)
    options: dict[str, Any] = dict(
        estimators=(plan.method,), replications=replications, confidence=1.0 - ria,
        tolerable=plan.tolerable, expected=plan.expected, seed=seed, progress=progress,
    )
    # None: every finite-sample bound that applies to this design (the coverage check leaves out,
    # with a note, one that cannot be formed, e.g. where a stratum of credits is sampled)
    options["bounds"] = None if include_bound else ()
    result = simulate_coverage(values, labels, plan.sizes, model, **options)
    row = result.by_estimator.iloc[0]
    risk = float(row["risk_incorrect_acceptance"])
    se = float(row["risk_incorrect_acceptance_mc_se"])
    bound_risk = bound_se = None
    bounds = getattr(result, "by_bound", None)
    if bounds is not None and len(bounds):
        b = bounds.iloc[0]
        bound_risk = float(b["risk_incorrect_acceptance"])
        bound_se = float(b["risk_incorrect_acceptance_mc_se"])
    misses = bool(math.isfinite(risk) and risk > ria + 2.0 * max(se, 1e-12))
    positive = _positive_total(strata, plan)
    mu_n, mu_interval, mu_bound = monetary_unit_alternative(positive, plan.tolerable, plan.expected, ria)
    line = _line(plan, risk, misses, bound_risk, mu_n, mu_bound, result.replications)
    from auditmean.coverage import BOUND_LEFT_OUT

    bound_note = next((n for n in result.notes if n.startswith(BOUND_LEFT_OUT)), "")
    return PlanCheck(
        method=plan.method, planned_risk=ria, simulated_risk=risk, simulated_risk_mc_se=se,
        bound_risk=bound_risk, bound_risk_mc_se=bound_se, replications=int(result.replications),
        seed=int(result.seed), model=model.summary().removeprefix("Misstatement model: "),
        model_is_default=is_default, misses=misses, total_size=int(plan.total_size),
        monetary_unit_size=mu_n, monetary_unit_interval=mu_interval, monetary_unit_zero_error_bound=mu_bound,
        positive_book_total=positive, line=line, bound_note=bound_note,
    )


def _line(plan, risk, misses, bound_risk, mu_n, mu_bound, reps) -> str:
    from auditmean.core.estimators import METHOD_NAMES

    name = METHOD_NAMES.get(plan.method, plan.method)
    head = (
        f"Simulated on these book values, the normal limit of {name} accepted a population misstated by "
        f"exactly tolerable in {_pct(risk)} of {reps:,} samples, against the {_pct(plan.risk_incorrect_acceptance)} "
        "planned"
    )
    if not misses:
        return head + ": the plan reaches its stated risk under this pattern."
    out = head + ": this stratified plan misses its stated risk."
    if bound_risk is not None and math.isfinite(bound_risk):  # NaN: no scaled population within its assumption
        out += f" The finite-sample bound accepted in {_pct(bound_risk)}."
    if mu_n is not None:
        out += (
            f" A monetary-unit sample of {mu_n:,} draws would give an upper limit of {format_number(mu_bound)} "
            "if no misstatement were found."
        )
    return out
