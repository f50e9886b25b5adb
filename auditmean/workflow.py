"""The job as one chain over an engagement folder: plan, select, record, evaluate, verify.

Each function here joins two or more steps and writes what it produced into
the engagement folder (:mod:`auditmean.engagement`), so the command line,
the widgets and the demo run the same chain and a user can stop after any
step and resume later. Nothing is computed here: the numbers come from
:mod:`auditmean.strata`, :mod:`auditmean.plan`, :mod:`auditmean.selection`
and :mod:`auditmean.evaluation`.

What ``plan.json`` holds (schema version 1)::

    {"schema_version": 1, "kind": "engagement_plan",
     "population_reading": {how to read the population file again},
     "strata": Strata.to_dict(), "plan": Plan.to_dict()}

The strata are recomputed from the population with the recorded
``stratify`` arguments whenever the assignment of items is needed (it is
deterministic), and checked against the recorded strata table.

A plan may also record ``"design": "monetary_unit"`` (a plan without
``design`` is of the stratified design); it then holds
``"monetary_unit_plan"`` instead of ``strata`` and ``plan`` (see
:mod:`auditmean.monetary_engagement`), and :func:`draw_selection`,
:func:`verify_engagement` and :func:`evaluate_engagement` follow that
design, and :func:`simulate_engagement` runs that design's coverage check.
Steps that exist only for the stratified design (:func:`engagement_plan`,
:func:`engagement_strata`) refuse such an engagement with a message that
says so.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from auditmean._records import SCHEMA_VERSION
from auditmean.engagement import Engagement
from auditmean.errors import RecordError, Stopped
from auditmean.evaluation.conclusion import Evaluation, evaluate
from auditmean.plan import Plan, plan_sample
from auditmean.population import Population
from auditmean.scan import (
    choose_engine,
    open_population,
    select_planned,
    stratify_population,
    verify_planned,
)
from auditmean.selection import VerificationResult, propose_seed
from auditmean.strata import Strata

if TYPE_CHECKING:
    from auditmean.monetary_engagement import MonetaryUnitEvaluation

__all__ = [
    "PopulationReading",
    "start_engagement",
    "open_engagement",
    "engagement_plan",
    "engagement_strata",
    "draw_selection",
    "evaluate_engagement",
    "verify_engagement",
    "strata_table",
    "simulate_engagement",
    "COVERAGE_FILE",
    "DESIGNS",
    "design_of",
    "require_stratified",
    "start_monetary_unit_engagement",
    "extend_monetary_unit_selection",
]

#: The designs an engagement can follow (``plan.json``: ``"design"``; absent means stratified).
DESIGNS = ("stratified", "monetary_unit")

#: Where the coverage check of an engagement is kept (CoverageResult.to_dict()).
COVERAGE_FILE = "coverage.json"


@dataclass(frozen=True)
class PopulationReading:
    """How to read a population file: the arguments of :func:`auditmean.scan.open_population`.

    ``engine="auto"`` reads a small file in memory and a large one with
    DuckDB (:func:`auditmean.scan.choose_engine` says which and why).
    """

    source: str
    id_column: str
    value_column: str
    stratum_column: str | None = None
    decimal: str = "."
    sep: str | None = None
    sheet: str | int | None = None
    engine: str = "auto"

    def load(self) -> Population:
        return open_population(
            self.source,
            id_column=self.id_column,
            value_column=self.value_column,
            stratum_column=self.stratum_column,
            decimal=self.decimal,
            sep=self.sep,
            sheet=self.sheet,
            engine=self.engine,
        )

    def to_dict(self) -> dict[str, Any]:
        return {
            "source": str(self.source),
            "id_column": self.id_column,
            "value_column": self.value_column,
            "stratum_column": self.stratum_column,
            "decimal": self.decimal,
            "sep": self.sep,
            "sheet": self.sheet,
            "engine": self.engine,
        }

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> PopulationReading:
        return cls(**{k: d.get(k) for k in ("source", "id_column", "value_column", "stratum_column", "sep", "sheet")},
                   decimal=d.get("decimal") or ".", engine=d.get("engine") or "auto")


def start_engagement(
    folder: str | os.PathLike[str],
    reading: PopulationReading,
    *,
    stratify_options: dict[str, Any],
    plan_options: dict[str, Any],
    population: Population | None = None,
    check: Any = None,
) -> tuple[Engagement, Population, Strata, Plan]:
    """Read the population, stratify it, plan the sample, and save all of it in a new engagement.

    ``check`` (optional) is the plan's coverage check
    (:func:`auditmean.plan_check.check_plan`), or a callable
    ``check(strata, plan)`` that returns it; it is saved in ``plan.json``
    under ``"plan_check"``, so the workpaper shows the risk the plan really
    reaches beside the one it states.
    """
    population = population if population is not None else reading.load()
    strata = stratify_population(population, **stratify_options)
    plan = plan_sample(strata, **plan_options)
    if callable(check):
        check = check(strata, plan)
    record = {
        "schema_version": SCHEMA_VERSION,
        "kind": "engagement_plan",
        "population_reading": reading.to_dict(),
        "population_engine": {"engine": getattr(population, "engine", "pandas"), "reason": getattr(
            population, "reason", None) or choose_engine(population.source).reason},
        "strata": strata.to_dict(),
        "plan": plan.to_dict(),
    }
    if check is not None:
        record["plan_check"] = check.to_dict()
    eng = Engagement.create(folder, population)
    eng.save_plan(record)
    return eng, population, strata, plan


def start_monetary_unit_engagement(
    folder: str | os.PathLike[str],
    reading: PopulationReading,
    *,
    tolerable: float,
    expected: float = 0.0,
    risk_incorrect_acceptance: float = 0.05,
    bound: str | None = None,
    basis: str = "poisson",
    population: Population | None = None,
):
    """Read the population, plan a monetary-unit sample, and save it in a new engagement.

    The arguments after ``reading`` are those of
    :func:`auditmean.monetary_engagement.plan_monetary_units`; ``bound`` is
    the bound the evaluation will rely on (default
    :data:`auditmean.monetary_engagement.DEFAULT_BOUND`; every bound is
    shown beside it).
    The plan is computed before the folder is created, so bad input leaves
    no folder behind. The population is read in memory (the cumulative
    book value runs through every item), so ``reading.engine`` ``"auto"``
    is recorded as ``"pandas"``.

    Returns ``(engagement, population, MonetaryUnitPlan)``.
    """
    from dataclasses import replace

    from auditmean.errors import ParameterError
    from auditmean.monetary_engagement import DEFAULT_BOUND, plan_monetary_units

    if reading.engine == "duckdb":
        raise ParameterError(
            "engine", "the monetary-unit design reads every item in memory; use engine 'pandas' or 'auto'"
        )
    reading = replace(reading, engine="pandas")
    population = population if population is not None else reading.load()
    plan = plan_monetary_units(
        population,
        tolerable=tolerable,
        expected=expected,
        risk_incorrect_acceptance=risk_incorrect_acceptance,
        bound=DEFAULT_BOUND if bound is None else bound,
        basis=basis,
    )
    eng = Engagement.create(folder, population)
    eng.save_plan(
        {
            "schema_version": SCHEMA_VERSION,
            "kind": "engagement_plan",
            "design": "monetary_unit",
            "population_reading": reading.to_dict(),
            "population_engine": {"engine": "pandas", "reason": "the monetary-unit design reads every item in memory"},
            "monetary_unit_plan": plan.to_dict(),
        }
    )
    return eng, population, plan


def _record(eng: Engagement) -> dict[str, Any]:
    rec = eng.plan()
    path = str(Path(eng.folder) / "plan.json")
    if rec is None:
        raise RecordError(path, "no plan has been saved yet; plan the sample first (auditmean plan)")
    design = rec.get("design", "stratified")
    if design not in DESIGNS:
        raise RecordError(path, f"records the design {design!r}, which this auditmean does not know "
                                f"({', '.join(map(repr, DESIGNS))})")
    needed = ("plan", "strata") if design == "stratified" else ("monetary_unit_plan",)
    if rec.get("kind") != "engagement_plan" or any(k not in rec for k in needed) or "population_reading" not in rec:
        raise RecordError(path, "not a plan written by auditmean's engagement chain (kind 'engagement_plan')")
    return rec


def design_of(eng: Engagement) -> str:
    """The engagement's design: ``"stratified"`` or ``"monetary_unit"`` (from ``plan.json``)."""
    return _record(eng).get("design", "stratified")


def require_stratified(eng: Engagement, step: str) -> dict[str, Any]:
    """The plan record, or a clear RecordError when the engagement follows the monetary-unit design.

    ``step`` names, in the user's words, what exists only for the stratified
    design (e.g. ``"this step (it needs strata)"``).
    """
    rec = _record(eng)
    if rec.get("design", "stratified") != "stratified":
        raise RecordError(
            str(Path(eng.folder) / "plan.json"),
            f"this engagement follows the monetary-unit design; {step} belongs to the stratified design "
            "(the monetary-unit plan is read with auditmean.monetary_engagement.monetary_unit_plan)",
        )
    return rec


def open_engagement(folder: str | os.PathLike[str], population: Population | None = None) -> tuple[Engagement, Population]:
    """Open an engagement and its population (read again from the recorded file when not given).

    The population's content fingerprint must equal the recorded one
    (:meth:`Engagement.open` refuses it otherwise).
    """
    if population is None:
        bare = Engagement.open(folder)
        rec = _record(bare)
        reading = PopulationReading.from_dict(rec["population_reading"])
        if not Path(reading.source).exists():
            raise RecordError(
                reading.source,
                "the population file recorded for this engagement is not there any more; "
                "give its current location (--population)",
            )
        population = reading.load()
    return Engagement.open(folder, population), population


def engagement_plan(eng: Engagement) -> Plan:
    """The saved plan of a stratified engagement (RecordError for the monetary-unit design)."""
    rec = require_stratified(eng, "this step (it reads a stratified plan)")
    return Plan.from_dict(rec["plan"], source=str(Path(eng.folder) / "plan.json"))


def engagement_strata(eng: Engagement, population: Population) -> Strata:
    """The strata, recomputed from the population with the recorded arguments and checked."""
    rec = require_stratified(eng, "this step (it needs strata)")
    params = dict(rec["strata"].get("parameters") or {})
    strata = stratify_population(population, **params)
    recorded = pd.DataFrame(rec["strata"]["table"])
    same = (
        list(strata.table["stratum"].astype(str)) == [str(s) for s in recorded["stratum"]]
        and np.array_equal(strata.table["count"].to_numpy(), recorded["count"].to_numpy())
        and np.allclose(strata.table["book_total"].to_numpy(float), recorded["book_total"].to_numpy(float), rtol=0, atol=0.005)
    )
    if not same:
        raise RecordError(
            str(Path(eng.folder) / "plan.json"),
            "the strata recomputed from the population differ from the recorded ones; "
            "the population or auditmean's stratification has changed since the plan",
        )
    return strata


def strata_table(plan: Plan, strata_record: dict[str, Any] | None = None) -> pd.DataFrame:
    """The strata table estimation takes (``stratum``, ``count``, ``book_total``) from a plan.

    With the recorded strata (``plan.json``'s ``"strata"``), each stratum's
    largest book value is added as ``largest_book_value``, which the
    finite-sample bound needs (:func:`auditmean.overstatement_bound`).
    """
    t = plan.table
    out = pd.DataFrame({"stratum": t["stratum"].astype(str), "count": t["count"], "book_total": t["book_total"]})
    rows = (strata_record or {}).get("table") or []
    largest = {str(r.get("stratum")): r.get("max_book") for r in rows if isinstance(r, dict)}
    if largest and all(largest.get(s) is not None or c == 0 for s, c in zip(out["stratum"], out["count"])):
        out["largest_book_value"] = [
            float(largest[s]) if largest.get(s) is not None else 0.0 for s in out["stratum"]
        ]
    return out


def _check_proceed(proceed: Callable[[], bool] | None, what: str) -> None:
    if proceed is not None and proceed() is False:
        raise Stopped(what)


def draw_selection(
    eng: Engagement,
    population: Population,
    seed: str | None = None,
    *,
    proceed: Callable[[], bool] | None = None,
) -> tuple[pd.DataFrame, str]:
    """Select the planned sample with ``seed`` (a proposed one when not given) and save it.

    For the monetary-unit design the planned monetary units are drawn
    (:func:`auditmean.monetary_engagement.draw_monetary_units`: credits and
    zero balances kept apart) and saved as a ``"monetary_unit_selection"``.

    ``proceed()`` (optional) is asked between the steps and just before
    saving; when it returns False the work ends with
    :class:`~auditmean.errors.Stopped` and nothing is saved.
    """
    if design_of(eng) == "monetary_unit":
        from auditmean.monetary_engagement import draw_monetary_units

        return draw_monetary_units(eng, population, seed, proceed=proceed)
    plan = engagement_plan(eng)
    strata = engagement_strata(eng, population)
    _check_proceed(proceed, "the selection")
    seed = propose_seed() if seed is None else seed
    selection, frame = select_planned(strata, plan.sizes, seed)
    _check_proceed(proceed, "the selection")
    eng.save_selection(selection, seed, plan.sizes, frame=frame)
    return eng.selection(), seed


def extend_monetary_unit_selection(
    eng: Engagement,
    population: Population,
    sample_size: int,
    *,
    proceed: Callable[[], bool] | None = None,
) -> tuple[pd.DataFrame, str]:
    """Extend a monetary-unit selection to ``sample_size`` draws, keeping every item already selected.

    See :func:`auditmean.monetary_engagement.extend_monetary_unit_selection`.
    """
    from auditmean.monetary_engagement import extend_monetary_unit_selection as extend

    if design_of(eng) != "monetary_unit":
        raise RecordError(str(Path(eng.folder) / "plan.json"), "this engagement does not follow the monetary-unit design")
    return extend(eng, population, sample_size, proceed=proceed)


def verify_engagement(eng: Engagement, population: Population) -> VerificationResult:
    """Recompute the selection from the population and the recorded seed, and compare.

    A monetary-unit selection is re-performed with
    :func:`auditmean.verify_monetary_units`.
    """
    if design_of(eng) == "monetary_unit":
        from auditmean.monetary_engagement import verify_monetary_unit_selection

        return verify_monetary_unit_selection(eng, population)
    strata = engagement_strata(eng, population)
    recorded = eng.selection()
    if recorded is None:
        raise RecordError(str(eng.folder), "no selection has been saved yet")
    return verify_planned(strata, eng.sizes(), eng.seed(), recorded)


def evaluate_engagement(
    eng: Engagement,
    *,
    missing_treatment: str = "error",
    primary: str | None = None,
    seed: int | str | None = None,
    save: bool = True,
    proceed: Callable[[], bool] | None = None,
    **options: Any,
) -> Evaluation | MonetaryUnitEvaluation:
    """Evaluate the recorded results with the plan's tolerable misstatement and risks.

    ``proceed()`` (optional) is asked before the evaluation and before it is
    saved; when it returns False the work ends with
    :class:`~auditmean.errors.Stopped` and nothing is saved.

    ``missing_treatment`` says what to do with selected items that have no
    audited value yet (see :func:`auditmean.results.sample_frame`); the
    saved record says which was used. The bootstrap seed defaults to the
    selection seed, so the second opinion can be re-performed from the
    record.

    For the monetary-unit design the sample is evaluated with every bound
    offered and the conclusion rests on the plan's bound (``primary`` may
    name another); it returns a
    :class:`~auditmean.monetary_engagement.MonetaryUnitEvaluation` and takes
    no other options.
    """
    if design_of(eng) == "monetary_unit":
        from auditmean.errors import ParameterError
        from auditmean.monetary_engagement import evaluate_monetary_units

        if seed is not None or options:
            names = sorted(options) + (["seed"] if seed is not None else [])
            raise ParameterError(
                names[0], f"options {', '.join(names)} belong to the stratified evaluation; a monetary-unit "
                "evaluation takes missing_treatment, primary (the bound relied on), save and proceed",
            )
        return evaluate_monetary_units(eng, missing_treatment=missing_treatment, bound=primary, save=save,
                                       proceed=proceed)
    plan = engagement_plan(eng)
    frame = eng.sample_frame(missing_treatment=missing_treatment)
    _check_proceed(proceed, "the evaluation")
    sample = frame.frame[["stratum", "item_id", "book_value", "audited_value"]].copy()
    sample["stratum"] = sample["stratum"].astype(str)
    if primary is None:
        primary = plan.method if plan.method in ("mpu", "difference", "ratio") else None
    ev = evaluate(
        sample,
        strata_table(plan, _record(eng).get("strata")),
        tolerable=plan.tolerable,
        expected=plan.expected,
        risk_incorrect_acceptance=plan.risk_incorrect_acceptance,
        risk_incorrect_rejection=plan.risk_incorrect_rejection,
        planned_allowance=plan.planned_allowance if math.isfinite(plan.planned_allowance) else None,
        primary=primary,
        seed=eng.seed() if seed is None else seed,
        **options,
    )
    _check_proceed(proceed, "the evaluation")
    if save:
        d = ev.to_dict()
        d["missing_treatment"] = frame.missing_treatment
        d["missing_items"] = [str(i) for i in frame.missing["item_id"]] if len(frame.missing) else []
        eng.save_evaluation(d)
    return ev



def simulate_engagement(eng: Engagement, population: Population, model: Any, *, save: bool = True, **options: Any):
    """Run the coverage check of the engagement's plan on its own population and keep the result.

    The design is the plan's (strata recomputed from the population, the
    plan's sizes, tolerable and expected misstatement unless ``options``
    say otherwise); ``model`` is a :class:`auditmean.coverage.MisstatementModel`.
    The result is written atomically to ``coverage.json`` in the folder
    (replacing an earlier check; the log keeps a line for each run).

    For the monetary-unit design the check is
    :func:`auditmean.simulate_monetary_units` on the population's book
    values with the plan's sample size (and, unless ``options`` say
    otherwise, its tolerable and expected misstatement and confidence); it
    returns a :class:`~auditmean.monetary_coverage.MonetaryUnitCoverage`,
    saved with the kind ``"monetary_unit_coverage_check"``.
    """
    from auditmean._atomic import json_text, write_text_atomic
    from auditmean._records import json_safe

    if design_of(eng) == "monetary_unit":
        result = _simulate_monetary_engagement(eng, population, model, options)
    else:
        from auditmean.coverage import simulate_coverage

        plan = engagement_plan(eng)
        strata = engagement_strata(eng, population)
        options.setdefault("tolerable", plan.tolerable)
        options.setdefault("expected", plan.expected)
        labels = np.asarray(strata.labels, dtype=object)[strata.codes]
        result = simulate_coverage(strata.book_values, labels, plan.sizes, model, **options)
    if save:
        data = json_safe(result.to_dict())
        write_text_atomic(Path(eng.folder) / COVERAGE_FILE, json_text(data))
        eng._log("coverage check saved", file=COVERAGE_FILE, replications=int(result.replications), partial=bool(result.partial))
    return result


def _simulate_monetary_engagement(eng: Engagement, population: Population, model: Any, options: dict[str, Any]):
    """The coverage check of a monetary-unit engagement (see :func:`simulate_engagement`)."""
    from auditmean.monetary_coverage import simulate_monetary_units
    from auditmean.monetary_engagement import _items_of, monetary_unit_plan

    plan = monetary_unit_plan(eng)
    book = _items_of(population)["book_value"].to_numpy(dtype=np.float64)
    cents = np.rint(book * 100.0).astype(np.int64)
    if int(cents[cents > 0].sum()) != plan.book_total_cents:
        raise RecordError(
            str(Path(eng.folder) / "plan.json"),
            "the population's positive book total differs from the one the monetary-unit plan was made for",
        )
    options.setdefault("tolerable", plan.tolerable)
    options.setdefault("expected", plan.expected)
    options.setdefault("confidence", plan.confidence)
    return simulate_monetary_units(book, plan.sample_size, model, **options)
