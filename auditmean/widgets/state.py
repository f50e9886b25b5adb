"""The one state object that flows through the panels: :class:`EngagementState`.

Each panel reads what it needs from the state, calls the engine with plain
values, and puts what the engine returned back into the state. Panels never
talk to one another: they observe the state (:meth:`EngagementState.observe`)
and redraw when a value they show has changed.

The values form a chain. Setting one clears everything that was computed
from it, so a panel never shows a plan made for other strata or a
conclusion drawn from other audited values::

    population ─► strata ─► plan ─► engagement ─► selection ─► results ─► evaluation
         │                   ├─► plan_check      ▲
         │                   └─► coverage        │
         └─► monetary_plan ──────────────────────┘
                design ──────────────────────────┘

(``reading`` and ``profile`` travel with the population, ``strata_options``
with the strata, ``plan_options`` with the plan.) ``design`` is the design
chosen in the sample-size step: :data:`STRATIFIED` (``None`` means the same)
or :data:`MONETARY_UNIT`; the stratified design plans in ``plan``, the
monetary-unit design in ``monetary_plan``, and the engagement follows the
one it was saved with. Nothing here computes a number.
"""

from __future__ import annotations

import os
import threading
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from auditmean.population import profile as population_profile
from auditmean.workflow import (
    PopulationReading,
    design_of,
    engagement_plan,
    engagement_strata,
    open_engagement,
)

__all__ = ["EngagementState", "StateChange", "FIELDS", "CLEARS", "STRATIFIED", "MONETARY_UNIT", "DESIGN_NAMES"]

#: The two designs (the values of ``state.design``, as :func:`auditmean.workflow.design_of` names them).
STRATIFIED = "stratified"
MONETARY_UNIT = "monetary_unit"

#: The designs in plain words.
DESIGN_NAMES = {
    STRATIFIED: "items in strata, projected by estimation",
    MONETARY_UNIT: "monetary units, drawn with chance proportional to book value",
}

#: The values the state holds, in the order of the job.
FIELDS: tuple[str, ...] = (
    "population",
    "reading",
    "profile",
    "strata",
    "strata_options",
    "plan",
    "plan_options",
    "plan_check",
    "design",
    "monetary_plan",
    "engagement",
    "selection",
    "results",
    "evaluation",
    "coverage",
)

_AFTER_ENGAGEMENT = ("engagement", "selection", "results", "evaluation")
_AFTER_POPULATION = ("reading", "profile", "strata", "strata_options", "plan", "plan_options", "plan_check",
                     "monetary_plan") + _AFTER_ENGAGEMENT + ("coverage",)
_AFTER_STRATA = ("strata_options", "plan", "plan_options", "plan_check") + _AFTER_ENGAGEMENT + ("coverage",)

#: What setting a value clears (everything computed from it).
CLEARS: dict[str, tuple[str, ...]] = {
    "population": _AFTER_POPULATION,
    "reading": (),
    "profile": (),
    "strata": _AFTER_STRATA,
    "plan": ("plan_options", "plan_check") + _AFTER_ENGAGEMENT + ("coverage",),
    "strata_options": (),
    "plan_options": (),
    "plan_check": (),
    "design": _AFTER_ENGAGEMENT,
    "monetary_plan": _AFTER_ENGAGEMENT,
    "engagement": ("selection", "results", "evaluation"),
    "selection": ("results", "evaluation"),
    "results": ("evaluation",),
    "evaluation": (),
    "coverage": (),
}


@dataclass(frozen=True)
class StateChange:
    """What an observer is told: the names that changed (set or cleared) and the state."""

    names: frozenset[str]
    state: EngagementState


class EngagementState:
    """Population, strata, plan, engagement, selection, results, evaluation and coverage check.

    Parameters
    ----------
    demo_data:
        The folder of the invented demo files, when the panels should offer
        the demo's conveniences (a prefilled population, a clearly labelled
        button that fills in the demo's audited values). ``None`` otherwise.
    **values:
        Initial values for any of :data:`FIELDS` (for example
        ``EngagementState(strata=my_strata)`` to plan on strata made in a
        script).

    Attributes
    ----------
    population:
        :class:`auditmean.population.Population`, from :func:`~auditmean.population.load_population`.
    reading:
        :class:`auditmean.workflow.PopulationReading`: how the population
        file was read (needed to start an engagement folder).
    profile:
        :class:`auditmean.population.Profile` of the book values.
    strata:
        :class:`auditmean.strata.Strata`, or a strata table (DataFrame) for
        planning without items.
    strata_options:
        The keyword arguments of :func:`~auditmean.strata.stratify` that made
        the strata (None when the strata came from elsewhere).
    plan, plan_options:
        :class:`auditmean.plan.Plan` and the keyword arguments of
        :func:`~auditmean.plan.plan_sample` that made it.
    plan_check:
        :class:`auditmean.plan_check.PlanCheck`: the coverage check of the
        current stratified plan (does it reach the risk it states?).
    design:
        :data:`STRATIFIED` (or None, the same) or :data:`MONETARY_UNIT`.
    monetary_plan:
        :class:`auditmean.monetary_engagement.MonetaryUnitPlan` of the
        monetary-unit design.
    engagement:
        :class:`auditmean.engagement.Engagement`: the folder where every
        step is recorded.
    selection:
        The recorded selection (DataFrame, :meth:`Engagement.selection`).
    results:
        :class:`auditmean.results.Results`, as recorded in the folder.
    evaluation:
        :class:`auditmean.evaluation.Evaluation` of the current results
        (:class:`auditmean.monetary_engagement.MonetaryUnitEvaluation` for
        the monetary-unit design).
    coverage:
        :class:`auditmean.coverage.CoverageResult` of the current plan.
    """

    def __init__(self, *, demo_data: str | os.PathLike[str] | None = None, **values: Any) -> None:
        self._values: dict[str, Any] = dict.fromkeys(FIELDS)
        self._observers: list[tuple[Callable[[StateChange], None], frozenset[str] | None]] = []
        self._lock = threading.RLock()
        #: Held by panels while background work writes into the engagement folder (the plan's check being
        #: added to plan.json, a selection being drawn or extended), so that two such writes never interleave.
        self.writing = threading.RLock()
        self.demo_data: Path | None = None if demo_data is None else Path(demo_data)
        unknown = [k for k in values if k not in FIELDS]
        if unknown:
            raise TypeError(f"EngagementState has no value {unknown[0]!r}; it holds {', '.join(FIELDS)}")
        self._values.update(values)

    # ------------------------------------------------------------------ values

    def __getattr__(self, name: str) -> Any:
        values = self.__dict__.get("_values")
        if values is not None and name in values:
            return values[name]
        raise AttributeError(name)

    def __setattr__(self, name: str, value: Any) -> None:
        if name in FIELDS:
            raise AttributeError(f"set {name!r} with state.update({name}=...), so that the panels are told")
        super().__setattr__(name, value)

    @property
    def chosen_design(self) -> str:
        """The design in use: the saved engagement's, else the one chosen (:data:`STRATIFIED` when none)."""
        return self._values["design"] or STRATIFIED

    def get(self, name: str) -> Any:
        """The value of one of :data:`FIELDS` (None when not set)."""
        if name not in FIELDS:
            raise KeyError(name)
        return self._values[name]

    def update(self, **values: Any) -> frozenset[str]:
        """Set values, clear what was computed from them, and tell the observers once.

        A value given is never cleared by another given in the same call, so
        ``update(strata=s, plan=p)`` keeps both. Returns the names that
        changed (set or cleared).
        """
        unknown = [k for k in values if k not in FIELDS]
        if unknown:
            raise TypeError(f"EngagementState has no value {unknown[0]!r}; it holds {', '.join(FIELDS)}")
        with self._lock:
            changed: set[str] = set()
            cleared: set[str] = set()
            for name in values:
                cleared.update(CLEARS[name])
            cleared -= set(values)
            for name in cleared:
                if self._values[name] is not None:
                    self._values[name] = None
                    changed.add(name)
            for name, value in values.items():
                if self._values[name] is not value:
                    self._values[name] = value
                    changed.add(name)
            names = frozenset(changed)
            if names:
                self._notify(names)
            return names

    # ------------------------------------------------------------------ observers

    def observe(self, callback: Callable[[StateChange], None], names: Iterable[str] | None = None) -> None:
        """Call ``callback(change)`` after every update that changes one of ``names`` (all when None)."""
        wanted = None if names is None else frozenset(names)
        if wanted is not None:
            unknown = sorted(wanted - set(FIELDS))
            if unknown:
                raise KeyError(f"EngagementState has no value {unknown[0]!r}; it holds {', '.join(FIELDS)}")
        self._observers.append((callback, wanted))

    def unobserve(self, callback: Callable[[StateChange], None]) -> None:
        """Stop calling ``callback``."""
        self._observers = [(c, n) for c, n in self._observers if c is not callback]

    def _notify(self, names: frozenset[str]) -> None:
        change = StateChange(names=names, state=self)
        first_error: BaseException | None = None
        for callback, wanted in list(self._observers):
            if wanted is None or wanted & names:
                try:
                    callback(change)
                except Exception as exc:  # one failing observer must not stop the others
                    if first_error is None:
                        first_error = exc
        if first_error is not None:
            raise first_error

    # ------------------------------------------------------------------ resuming

    def resume(self, folder: str | os.PathLike[str]) -> None:
        """Open an engagement folder and load every recorded step into the state.

        The population is read again from the recorded file and must be the
        one the engagement was built on (:func:`auditmean.workflow.open_engagement`
        refuses another). The design is the one saved
        (:func:`auditmean.workflow.design_of`). For the stratified design the
        strata are recomputed and checked
        (:func:`~auditmean.workflow.engagement_strata`) and the plan and its
        saved coverage check are read; for the monetary-unit design its plan
        is read. The selection and results are read from the folder. A saved evaluation is not
        loaded as numbers: evaluate again to see it (the result is the same).
        """
        eng, population = open_engagement(folder)
        reading = PopulationReading.from_dict(eng.plan()["population_reading"])
        selection = eng.selection()
        results = eng.results() if selection is not None else None
        common = dict(population=population, reading=reading, profile=population_profile(population),
                      engagement=eng, selection=selection, results=results)
        if design_of(eng) == MONETARY_UNIT:
            from auditmean.monetary_engagement import monetary_unit_plan

            self.update(design=MONETARY_UNIT, monetary_plan=monetary_unit_plan(eng), **common)
            return
        strata = engagement_strata(eng, population)
        plan = engagement_plan(eng)
        check = eng.plan().get("plan_check")
        self.update(strata=strata, plan=plan, plan_options=None, design=STRATIFIED,
                    plan_check=_plan_check_from(check), **common)

    @classmethod
    def from_folder(cls, folder: str | os.PathLike[str], **kwargs: Any) -> EngagementState:
        """A new state holding the engagement in ``folder`` (see :meth:`resume`)."""
        state = cls(**kwargs)
        state.resume(folder)
        return state

    def __repr__(self) -> str:
        have = [k for k in FIELDS if self._values[k] is not None]
        return f"EngagementState({', '.join(have) or 'empty'})"


def _plan_check_from(record: Any) -> Any:
    """A PlanCheck rebuilt from its saved dict (``plan.json``'s ``plan_check``), or None."""
    if not isinstance(record, dict):
        return None
    from dataclasses import fields

    from auditmean.plan_check import PlanCheck

    names = [f.name for f in fields(PlanCheck)]
    if any(n not in record for n in names):
        return None
    return PlanCheck(**{n: record[n] for n in names})
