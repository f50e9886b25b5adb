"""Step 3, the sample size: the design, how many items to examine, and whether the plan reaches its risk.

Two designs are offered. Items in strata, projected by estimation (the
stratified design): the size of each stratum follows every change of an
input, and the coverage check (:func:`auditmean.plan_check.check_plan`)
simulates the plan on the population's own book values to measure the
risk of incorrect acceptance it really reaches. Monetary units drawn with
chance proportional to book value (the monetary-unit design): the number
of monetary units and the sampling interval follow every change
(:func:`auditmean.monetary_engagement.plan_monetary_units`), and its
bounds hold in finite samples under the assumptions they state.
"""

from __future__ import annotations

import html
import math
import os
from typing import Any

import ipywidgets as widgets

from auditmean._records import format_number, html_table
from auditmean.core.estimators import METHOD_NAMES
from auditmean.errors import InputError, RecordError
from auditmean.monetary_engagement import (
    BOUND_NAMES,
    DEFAULT_BOUND,
    MONETARY_UNIT_BOUNDS,
    plan_monetary_units,
)
from auditmean.plan import ESTIMATION_METHODS, MisstatementPattern, plan_sample
from auditmean.widgets import figures
from auditmean.widgets._base import Panel, Task, box, figure_widget, refresh_figure
from auditmean.widgets.state import (
    DESIGN_NAMES,
    MONETARY_UNIT,
    STRATIFIED,
    EngagementState,
    StateChange,
)
from auditmean.workflow import start_engagement, start_monetary_unit_engagement

__all__ = ["PlanPanel", "BOUND_CHOICES", "DESIGN_CHOICES", "TAINT_CHOICES"]

_ALLOCATIONS = (("Neyman (by spread)", "neyman"), ("proportional to items", "proportional"), ("equal", "equal"))
_SOURCES = (("the strata's book values", "book"), ("an assumed misstatement", "pattern"))

#: The designs, in our own plain words.
DESIGN_CHOICES = ((DESIGN_NAMES[STRATIFIED], STRATIFIED), (DESIGN_NAMES[MONETARY_UNIT], MONETARY_UNIT))

#: The bounds a monetary-unit evaluation can rely on, in plain words (every one is shown beside it).
BOUND_CHOICES = tuple(
    (words, name) for name, words in (
        ("betting", "betting bound on the draws' taints (holds in finite samples)"),
        ("count_or_betting", "the tighter of the error-count and betting bounds (both hold in finite "
                             "samples; suits errors expected few and total)"),
        ("count", "error count: every misstated draw taken as wholly misstated (holds in finite samples)"),
        ("stringer", "Stringer: taints ranked (conservative in simulations; no general proof)"),
    ) if name in MONETARY_UNIT_BOUNDS
)
_BASES = (("Poisson (gamma quantiles)", "poisson"), ("binomial (beta quantiles)", "binomial"))

#: How the misstated items of the coverage check are misstated.
TAINT_CHOICES = (("the same share of book value", "fixed"), ("a share between two values", "uniform"),
                 ("a share around a mean (beta)", "beta"))

_WHICH_DESIGN = (
    "Monetary units suit populations where few misstatements are expected, mostly overstatements: large "
    "items are examined more often (those at or above the sampling interval always), and its bounds hold "
    "without the normal approximation. Strata and estimation suit populations where many items are expected "
    "to be misstated, or where understatement matters as much as overstatement; the coverage check below "
    "measures whether such a plan reaches its stated risk on these book values."
)


class PlanPanel(Panel):
    """The design and its planning inputs; the plan, its table and its picture follow every change at once.

    Parameters
    ----------
    state:
        The shared state; the stratified design plans on ``state.strata``
        (a :class:`~auditmean.strata.Strata` record, or a strata table with
        ``stratum``, ``count``, ``std_dev`` and optionally ``book_total``,
        ``skewness``, ``kind``); the monetary-unit design on
        ``state.population``'s items.
    tolerable, expected, risk_incorrect_acceptance, risk_incorrect_rejection, method,
    std_dev_source, allocation, minimum:
        Prefill the inputs (the arguments of :func:`auditmean.plan.plan_sample`;
        ``std_dev_source`` is ``"book"`` or a
        :class:`~auditmean.plan.MisstatementPattern`; ``minimum`` is
        ``"checks"`` or a number of items).
    design:
        ``"stratified"`` or ``"monetary_unit"`` (used when the state has no design yet).
    bound, basis:
        Prefill the monetary-unit inputs: the bound the evaluation relies on
        (:data:`auditmean.monetary_engagement.MONETARY_UNIT_BOUNDS`) and the
        confidence factors of the size (``"poisson"`` or ``"binomial"``).
    check_replications, check_seed:
        Prefill the coverage check's number of simulated samples and seed.
    folder:
        Prefill the engagement folder in which "Save" starts the engagement.

    Each change calls :func:`~auditmean.plan.plan_sample` on the strata's
    statistics (never the items, so it takes milliseconds whatever the
    population's size) and changes the picture in place, or
    :func:`~auditmean.monetary_engagement.plan_monetary_units`. "Check the
    plan" runs :func:`~auditmean.plan_check.check_plan` in the background
    (progress and Stop), and so does saving a stratified plan not yet
    checked; the check is kept in the engagement's ``plan.json``. "Save"
    calls :func:`auditmean.workflow.start_engagement` or
    :func:`auditmean.workflow.start_monetary_unit_engagement`.
    """

    title = "Sample size"
    lead = (
        "How precise the projection must be (tolerable and expected misstatement) and which risks you "
        "accept decide how many items to examine. Choose the design first: it decides how the items are "
        "drawn and which limit the conclusion rests on."
    )

    def __init__(
        self,
        state: EngagementState | None = None,
        *,
        tolerable: float | None = None,
        expected: float = 0.0,
        risk_incorrect_acceptance: float = 0.10,
        risk_incorrect_rejection: float | None = None,
        method: str = "mpu",
        std_dev_source: str | MisstatementPattern = "book",
        allocation: str = "neyman",
        minimum: int | str = "checks",
        design: str = STRATIFIED,
        bound: str = DEFAULT_BOUND,
        basis: str = "poisson",
        check_replications: int = 2000,
        check_seed: int = 1,
        folder: str | os.PathLike[str] | None = None,
    ) -> None:
        super().__init__(state)
        def num() -> widgets.Layout:  # one Layout per widget: hiding one must not hide the others
            return widgets.Layout(width="28em")

        style = {"description_width": "15em"}
        self.design = widgets.ToggleButtons(options=DESIGN_CHOICES, value=self.state.design or design,
                                            description="Design", style={"button_width": "36em"})
        self.design.add_class("am-design")
        self.design_help = widgets.HTML(f'<div class="am-small" style="max-width:60em">{html.escape(_WHICH_DESIGN)}'
                                        "</div>")
        self.tolerable = widgets.FloatText(value=0.0 if tolerable is None else float(tolerable),
                                           description="Tolerable misstatement", layout=num(), style=style)
        self.expected = widgets.FloatText(value=float(expected), description="Expected misstatement",
                                          layout=num(), style=style)
        self.risk_acceptance = widgets.BoundedFloatText(value=risk_incorrect_acceptance, min=0.001, max=0.499,
                                                        step=0.01, description="Risk of incorrect acceptance",
                                                        layout=num(), style=style)
        self.use_rejection = widgets.Checkbox(value=risk_incorrect_rejection is not None,
                                              description="plan for a risk of incorrect rejection too", indent=False)
        self.risk_rejection = widgets.BoundedFloatText(
            value=0.20 if risk_incorrect_rejection is None else risk_incorrect_rejection, min=0.001, max=0.999,
            step=0.05, description="Risk of incorrect rejection", layout=num(), style=style)
        self.method = widgets.Dropdown(options=[(METHOD_NAMES[m], m) for m in ESTIMATION_METHODS], value=method,
                                       description="Estimation", layout=num(), style=style)
        pattern = std_dev_source if isinstance(std_dev_source, MisstatementPattern) else None
        self.source = widgets.ToggleButtons(options=_SOURCES, value="pattern" if pattern else "book",
                                            description="Spread from", style={"button_width": "14em"})
        self.error_rate = widgets.BoundedFloatText(value=pattern.error_rate if pattern else 0.05, min=0.0, max=1.0,
                                                   step=0.01, description="Share of items misstated",
                                                   layout=num(), style=style)
        self.typical_taint = widgets.FloatText(value=pattern.typical_taint if pattern else 0.2,
                                               description="Typical share of book value", layout=num(), style=style)
        self.allocation = widgets.Dropdown(options=_ALLOCATIONS, value=allocation, description="Allocation",
                                           layout=num(), style=style)
        self.minimum_from_checks = widgets.Checkbox(
            value=minimum == "checks", indent=False,
            description="each stratum at least the size its normal-approximation checks ask for")
        self.minimum = widgets.BoundedIntText(value=30 if minimum == "checks" else int(minimum), min=0,
                                              max=1_000_000, description="Fewest per stratum",
                                              layout=num(), style=style)
        # the monetary-unit design's own inputs
        self.bound = widgets.Dropdown(options=BOUND_CHOICES, value=bound, description="Conclude on",
                                      layout=widgets.Layout(width="64em"), style=style)
        self.basis = widgets.Dropdown(options=_BASES, value=basis, description="Confidence factors",
                                      layout=widgets.Layout(width="36em"), style=style)
        self.headline = widgets.HTML("")
        self.table_html = widgets.HTML("")
        self.table_html.add_class("am-table")
        self.figure = figure_widget()
        self.figure.add_class("am-allocation")
        self._picture = widgets.Box([self.figure], layout=widgets.Layout(display="none", width="100%",
                                                                           max_width="70em"))
        self.monetary_html = widgets.HTML("")
        self.monetary_html.add_class("am-table")
        self.folder = widgets.Text(value="" if folder is None else str(folder), description="Folder",
                                   placeholder="a new folder for this engagement", layout=widgets.Layout(width="36em"))
        self.save_button = widgets.Button(description="Save the plan and start the engagement", button_style="primary",
                                          icon="save", layout=widgets.Layout(width="24em"))
        self.save_button.add_class("am-save-plan")
        self.restart_button = widgets.Button(description="Plan again in a new folder", icon="undo",
                                             layout=widgets.Layout(width="18em", display="none"))
        self.saved_html = widgets.HTML("")
        self._build_check(check_replications, check_seed)

        self._stratified_inputs = (self.use_rejection, self.risk_rejection, self.method, self.source, self.error_rate,
                                   self.typical_taint, self.allocation, self.minimum_from_checks, self.minimum)
        self._monetary_inputs = (self.bound, self.basis)
        self._inputs = ((self.design, self.tolerable, self.expected, self.risk_acceptance)
                        + self._stratified_inputs + self._monetary_inputs)
        for w in self._inputs:
            w.observe(self._handler(self._on_input), names="value")
        self.save_button.on_click(self._handler(lambda _b: self.save()))
        self.restart_button.on_click(self._handler(lambda _b: self.restart()))
        self._observe_state(self._on_state, ("population", "strata", "plan", "plan_check", "design", "monetary_plan",
                                             "engagement", "reading"))
        self._save_box = widgets.VBox([
            widgets.HTML("<b>Save</b> <span class='am-small'>(the plan is recorded in the folder; "
                         "then the selection can be drawn)</span>"),
            widgets.HBox([self.folder, self.save_button]),
            self.restart_button,
            self.saved_html,
        ])
        self._stratified_box = widgets.VBox([
            widgets.HBox([widgets.VBox([self.use_rejection, self.risk_rejection]),
                          widgets.VBox([self.method, self.allocation, self.minimum_from_checks, self.minimum])]),
            self.source,
            widgets.HBox([self.error_rate, self.typical_taint]),
        ])
        self._monetary_box = widgets.VBox([self.bound, self.basis])
        self._stratified_out = widgets.VBox([self.headline, self._picture, self.table_html, self._check_box])
        self.children = [
            self._head,
            self.design,
            self.design_help,
            widgets.VBox([self.tolerable, self.expected, self.risk_acceptance]),
            self._stratified_box,
            self._monetary_box,
            self.message,
            self._stratified_out,
            self.monetary_html,
            self._save_box,
        ]
        if self.state.design is None and self.design.value != STRATIFIED:
            self.state.update(design=self.design.value)
        self._sync_inputs()
        if self.state.engagement is None and self._can_plan():
            self._guard(self.replan)
        else:
            self._show(self.state)

    # ------------------------------------------------------------------ the coverage check's widgets

    def _build_check(self, replications: int, seed: int) -> None:
        st = {"description_width": "15em"}
        def lay() -> widgets.Layout:  # one Layout per widget: hiding one must not hide the others
            return widgets.Layout(width="26em")

        self.check_error_rate = widgets.BoundedFloatText(value=0.02, min=0.0, max=1.0, step=0.01,
                                                         description="Share of items misstated", style=st, layout=lay())
        self.check_taint_kind = widgets.Dropdown(options=TAINT_CHOICES, value="uniform",
                                                 description="Each is misstated by", style=st,
                                                 layout=widgets.Layout(width="34em"))
        self.check_taint = widgets.FloatText(value=0.05, description="from", style=st, layout=lay())
        self.check_taint_high = widgets.FloatText(value=1.0, description="up to", style=st, layout=lay())
        self.check_understatement = widgets.BoundedFloatText(value=0.0, min=0.0, max=1.0, step=0.05,
                                                             description="Share understated", style=st, layout=lay())
        self.check_replications = widgets.BoundedIntText(value=int(replications), min=1, max=100_000,
                                                         description="Simulated samples", style=st, layout=lay())
        self.check_seed = widgets.BoundedIntText(value=int(seed), min=0, max=2**31 - 1, description="Seed",
                                                 style=st, layout=lay())
        self.check_default_html = widgets.HTML("")
        self.check_reset_button = widgets.Button(description="Back to the default pattern", icon="undo",
                                                 layout=widgets.Layout(width="18em"))
        self.check_button = widgets.Button(description="Check the plan against its stated risk", icon="play",
                                           button_style="primary", layout=widgets.Layout(width="24em"))
        self.check_button.add_class("am-check-plan")
        self.check_task = Task(self, stoppable=True)
        self.check_html = widgets.HTML("")
        self.check_html.add_class("am-table")
        self._model_inputs = (self.check_error_rate, self.check_taint_kind, self.check_taint, self.check_taint_high,
                              self.check_understatement)
        self._model_touched = False
        self._requested: dict[int, int] = {}  # id of a check -> the samples asked for (to say when it stopped early)
        for w in self._model_inputs:
            w.observe(self._handler(self._on_model_input), names="value")
        self.check_reset_button.on_click(self._handler(lambda _b: self._reset_model()))
        self.check_button.on_click(self._handler(lambda _b: self.run_check()))
        self._check_box = widgets.VBox([
            widgets.HTML(
                "<b>Does the plan reach its stated risk?</b> <span class='am-small'>The plan is simulated on "
                "these book values with items misstated as set here, the total misstatement set to exactly the "
                "tolerable misstatement; the share of samples whose limit would still accept the book value is "
                "the risk of incorrect acceptance the plan really runs.</span>"),
            widgets.HBox([widgets.VBox([self.check_error_rate, self.check_taint_kind, self.check_taint,
                                        self.check_taint_high, self.check_understatement]),
                          widgets.VBox([self.check_replications, self.check_seed, self.check_reset_button])]),
            self.check_default_html,
            self.check_button,
            self.check_task.box,
            self.check_html,
        ])
        self._check_box.add_class("am-plan-check")
        self._sync_check_inputs()

    def _sync_check_inputs(self) -> None:
        kind = self.check_taint_kind.value
        self.check_taint.description = {"fixed": "share of book value", "uniform": "from", "beta": "mean share"}[kind]
        self.check_taint_high.layout.display = "" if kind == "uniform" else "none"

    def check_model(self) -> Any:
        """The misstatement model the check's inputs describe (:class:`auditmean.coverage.MisstatementModel`)."""
        from auditmean.coverage import BetaTaint, FixedTaint, MisstatementModel, UniformTaint

        kind = self.check_taint_kind.value
        if kind == "fixed":
            taint: Any = FixedTaint(float(self.check_taint.value))
        elif kind == "uniform":
            taint = UniformTaint(float(self.check_taint.value), float(self.check_taint_high.value))
        else:
            taint = BetaTaint(float(self.check_taint.value))
        return MisstatementModel(error_rate=float(self.check_error_rate.value), taint=taint,
                                 understatement_share=float(self.check_understatement.value))

    def _show_model(self, model: Any) -> None:
        """Set the check's inputs to ``model`` (a MisstatementModel with one error rate)."""
        taint = model.taint
        self._quiet = True
        try:
            rate = model.error_rate
            if isinstance(rate, (int, float)):
                self.check_error_rate.value = float(rate)
            self.check_taint_kind.value = taint.kind if taint.kind in ("fixed", "uniform", "beta") else "fixed"
            if taint.kind == "fixed":
                self.check_taint.value = float(taint.value)
            elif taint.kind == "uniform":
                self.check_taint.value, self.check_taint_high.value = float(taint.low), float(taint.high)
            elif taint.kind == "beta":
                self.check_taint.value = float(taint.mean)
            self.check_understatement.value = float(model.understatement_share)
        finally:
            self._quiet = False
        self._sync_check_inputs()

    def _default_model(self) -> tuple[Any, bool]:
        from auditmean.plan_check import default_model

        return default_model(self.state.plan)

    def _on_model_input(self, change: dict[str, Any]) -> None:
        self._sync_check_inputs()
        if not self._quiet:
            self._model_touched = True
            self._show_default_words()

    def _reset_model(self) -> None:
        self._model_touched = False
        self._show_model(self._default_model()[0])
        self._show_default_words()

    def _show_default_words(self) -> None:
        from auditmean.plan_check import LOW_ERROR_DEFAULT_TEXT

        model, is_low_error = self._default_model()
        if is_low_error:
            words = f"the low-error default: {LOW_ERROR_DEFAULT_TEXT}"
        else:
            words = "the pattern the plan assumed: " + model.summary().removeprefix("Misstatement model: ")
        now = "These inputs are the default" if not self._model_touched else "You changed the pattern; the default is"
        self.check_default_html.value = (f'<div class="am-small am-check-default">{html.escape(now)}: '
                                         f"{html.escape(words)}.</div>")

    # ------------------------------------------------------------------ inputs

    def options(self) -> dict[str, Any]:
        """The arguments of :func:`~auditmean.plan.plan_sample` the inputs describe."""
        source: Any = "book"
        if self.source.value == "pattern":
            source = MisstatementPattern(float(self.error_rate.value), float(self.typical_taint.value))
        return {
            "tolerable": float(self.tolerable.value),
            "expected": float(self.expected.value),
            "risk_incorrect_acceptance": float(self.risk_acceptance.value),
            "risk_incorrect_rejection": float(self.risk_rejection.value) if self.use_rejection.value else None,
            "method": self.method.value,
            "std_dev_source": source,
            "allocation": self.allocation.value,
            "minimum": "checks" if self.minimum_from_checks.value else int(self.minimum.value),
        }

    def monetary_options(self) -> dict[str, Any]:
        """The arguments of :func:`~auditmean.monetary_engagement.plan_monetary_units` the inputs describe."""
        return {
            "tolerable": float(self.tolerable.value),
            "expected": float(self.expected.value),
            "risk_incorrect_acceptance": float(self.risk_acceptance.value),
            "bound": self.bound.value,
            "basis": self.basis.value,
        }

    @property
    def monetary(self) -> bool:
        """The monetary-unit design is chosen."""
        return self.design.value == MONETARY_UNIT

    def _can_plan(self) -> bool:
        return (self.state.population is not None) if self.monetary else (self.state.strata is not None)

    def _sync_inputs(self) -> None:
        monetary = self.monetary
        self._stratified_box.layout.display = "none" if monetary else ""
        self._monetary_box.layout.display = "" if monetary else "none"
        self._stratified_out.layout.display = "none" if monetary else ""
        self.monetary_html.layout.display = "" if monetary else "none"
        self.risk_rejection.layout.display = "" if self.use_rejection.value else "none"
        pattern = self.source.value == "pattern"
        self.error_rate.layout.display = "" if pattern else "none"
        self.typical_taint.layout.display = "" if pattern else "none"
        self.minimum.layout.display = "none" if self.minimum_from_checks.value else ""
        locked = self.state.engagement is not None
        for w in self._inputs:
            w.disabled = locked
        planned = self.state.monetary_plan if monetary else self.state.plan
        self.save_button.disabled = locked or planned is None
        self.save_button.description = ("Save the monetary-unit plan and start the engagement" if monetary
                                        else "Save the plan and start the engagement")
        self.save_button.layout.width = "32em" if monetary else "24em"
        self.folder.disabled = locked
        self.restart_button.layout.display = "" if locked else "none"
        self._save_box.layout.display = "" if (self.state.reading is not None or locked) else "none"
        ready = self.state.plan is not None and hasattr(self.state.strata, "codes")
        self.check_button.disabled = not ready or self.check_task.running

    def _on_input(self, change: dict[str, Any]) -> None:
        if self._quiet:
            return
        if change.get("owner") is self.design:
            self.state.update(design=self.design.value)  # the state's observers replan
            return
        self._sync_inputs()
        self.replan()

    # ------------------------------------------------------------------ actions

    def replan(self) -> None:
        """Plan with the inputs (in the design chosen) and put the plan into the state."""
        if self.state.engagement is not None:
            return
        if self.monetary:
            self._replan_monetary()
            return
        strata = self.state.strata
        if strata is None:
            self.show_note("Stratify the population first (step Strata).", "warning")
            return
        if not self.tolerable.value > 0:
            self.state.update(plan=None)
            self.show_note("Give the tolerable misstatement (an amount above 0) to see the sample size.", "warning")
            return
        options = self.options()
        try:
            plan = plan_sample(strata, **options)
        except Exception:
            self.state.update(plan=None)
            raise
        self.clear_message()
        self.state.update(plan=plan, plan_options=options)

    def _replan_monetary(self) -> None:
        population = self.state.population
        if population is None:
            self.state.update(monetary_plan=None)
            self.show_note("Read the population first (step Population).", "warning")
            return
        if not self.tolerable.value > 0:
            self.state.update(monetary_plan=None)
            self.show_note("Give the tolerable misstatement (an amount above 0) to see the sample size.", "warning")
            return
        try:
            plan = plan_monetary_units(population, **self.monetary_options())
        except Exception:
            self.state.update(monetary_plan=None)
            raise
        self.clear_message()
        self.state.update(monetary_plan=plan)

    def save(self) -> None:
        """Start the engagement in the folder typed in, with the plan of the design chosen.

        A stratified plan is saved with its coverage check when the check
        shown was made for it; otherwise the check starts as soon as the
        plan is saved (see :meth:`wait_check`) and is added to ``plan.json``
        when it ends.
        """
        self.clear_message()
        state = self.state
        if state.reading is None or state.population is None:
            raise InputError("an engagement needs the population read from a file (step Population)", table="plan")
        folder = self.folder.value.strip()
        if not folder:
            raise InputError("give a folder for the engagement (a new or empty one)", table="plan")
        if self.monetary:
            if state.monetary_plan is None:
                raise InputError("there is no monetary-unit plan to save yet", table="plan")
            eng, _population, mplan = start_monetary_unit_engagement(
                folder, state.reading, population=state.population, **self.monetary_options())
            state.update(design=MONETARY_UNIT, monetary_plan=mplan, engagement=eng)
            return
        if state.plan is None or state.strata is None:
            raise InputError("there is no plan to save yet", table="plan")
        options = dict(state.plan_options or self.options())
        strata_options = dict(state.strata_options or state.strata.parameters)
        shown, checked = state.plan, state.plan_check

        def same_check(_strata: Any, plan: Any) -> Any:
            """The check shown, when it was made for the very plan being saved."""
            if checked is None or self.check_task.running:
                return None
            same = (plan.sizes == shown.sizes and plan.method == shown.method and plan.tolerable == shown.tolerable
                    and plan.expected == shown.expected
                    and plan.risk_incorrect_acceptance == shown.risk_incorrect_acceptance)
            return checked if same else None

        kept: list[Any] = []

        def check(strata: Any, plan: Any) -> Any:
            kept.append(same_check(strata, plan))
            return kept[-1]

        eng, _population, strata, plan = start_engagement(
            folder, state.reading, stratify_options=strata_options,
            plan_options=options, population=state.population, check=check,
        )
        reused = kept[-1] if kept else None
        state.update(strata=strata, strata_options=strata_options, plan=plan, plan_options=options,
                     plan_check=reused, design=STRATIFIED, engagement=eng)
        if reused is None and hasattr(strata, "codes"):
            self.run_check()

    def run_check(self) -> bool:
        """Run the plan's coverage check in the background (see :meth:`wait_check`); Stop ends it early.

        Returns False when it could not start (another check is running).
        """
        from auditmean.plan_check import check_plan

        state = self.state
        strata, plan = state.strata, state.plan
        if plan is None or strata is None:
            raise InputError("plan the sample first (steps Strata and Sample size)", table="plan check")
        if not hasattr(strata, "codes"):
            raise InputError("the check needs every item's book value; these strata hold only their statistics",
                             table="plan check")
        model = self.check_model()
        default, _is_low_error = self._default_model()
        given = None if model == default else model  # the check then records the default as such
        replications, seed = int(self.check_replications.value), int(self.check_seed.value)
        self.check_button.disabled = True

        def work(report: Any) -> Any:
            # where the finite-sample bound cannot be simulated on this design (e.g. a sampled stratum of
            # credits) the check leaves it out and says why (PlanCheck.bound_note)
            return check_plan(strata, plan, given, replications=replications, seed=seed, progress=report)

        def done(result: Any) -> None:
            if state.plan is not plan:  # the plan changed while the check ran: its result is of no use
                return
            self._requested[id(result)] = replications
            state.update(plan_check=result)
            self._keep_check(result)

        return self.check_task.start(f"Checking the plan on {replications:,} simulated samples", work, done,
                                     after=lambda: self._show(self.state))

    def _keep_check(self, check: Any) -> None:
        """Add the check to the engagement's plan.json (when the plan is saved and nothing drawn yet)."""
        eng = self.state.engagement
        if eng is None:
            return
        record = dict(eng.plan())
        if record.get("design", STRATIFIED) != STRATIFIED:
            return
        record["plan_check"] = check.to_dict()
        try:
            with self.state.writing:  # never while a selection is being drawn into the same folder
                eng.save_plan(record, replace=True)
        except RecordError:
            self.show_note("The check is shown here but was not added to plan.json: the selection was drawn "
                           "while it ran, and the plan can no longer change.", "warning")

    def wait_check(self, timeout: float | None = None) -> None:
        """Wait for the coverage check to finish."""
        self.check_task.wait(timeout)

    def restart(self) -> None:
        """Leave the saved engagement as it is and plan again (the next save needs a new folder)."""
        self.state.update(engagement=None)
        self.folder.value = ""
        self.show_note("The saved engagement is unchanged on disk; save again into a new folder.")

    # ------------------------------------------------------------------ display

    def _show_inputs_of(self, plan: Any) -> None:
        self._quiet = True
        try:
            self.tolerable.value = plan.tolerable
            self.expected.value = plan.expected
            self.risk_acceptance.value = plan.risk_incorrect_acceptance
            self.use_rejection.value = plan.risk_incorrect_rejection is not None
            if plan.risk_incorrect_rejection is not None:
                self.risk_rejection.value = plan.risk_incorrect_rejection
            self.method.value = plan.method
            self.allocation.value = plan.allocation
            self.minimum_from_checks.value = plan.minimum == "checks"
            if plan.minimum != "checks":
                self.minimum.value = plan.minimum
            if plan.error_rate is not None:
                self.source.value = "pattern"
                self.error_rate.value = plan.error_rate
                self.typical_taint.value = plan.typical_taint
            elif plan.std_dev_source == "book":
                self.source.value = "book"
        finally:
            self._quiet = False

    def _show_monetary_inputs_of(self, plan: Any) -> None:
        self._quiet = True
        try:
            self.tolerable.value = plan.tolerable
            self.expected.value = plan.expected
            self.risk_acceptance.value = plan.risk_incorrect_acceptance
            self.bound.value = plan.bound
            self.basis.value = plan.basis
        finally:
            self._quiet = False

    def _on_state(self, change: StateChange) -> None:
        state = change.state
        if "design" in change.names:
            self._quiet = True
            try:
                self.design.value = state.chosen_design
            finally:
                self._quiet = False
        if "plan" in change.names and state.plan is not None and not self._model_touched:
            self._show_model(self._default_model()[0])
        if state.engagement is None:
            monetary = state.chosen_design == MONETARY_UNIT
            wants = (
                ("design" in change.names and self._can_plan())
                or (monetary and "population" in change.names and state.population is not None
                    and state.monetary_plan is None)
                or (not monetary and "strata" in change.names and state.strata is not None and state.plan is None)
            )
            if wants:
                self._sync_inputs()
                self.replan()
                return
        self._show(state)

    def _show(self, state: EngagementState) -> None:
        self._sync_inputs()
        self._show_default_words()
        eng = state.engagement
        if eng is not None:
            where = html.escape(f"Saved in {eng.folder}. The plan is fixed for this engagement; "
                                "next, draw the selection.")
            self.folder.value = str(eng.folder)
            self.saved_html.value = box(where, "note")
            if self.monetary and state.monetary_plan is not None:
                self._show_monetary_inputs_of(state.monetary_plan)
            elif not self.monetary and state.plan is not None:
                self._show_inputs_of(state.plan)
        else:
            self.saved_html.value = ""
        self._show_monetary(state)
        self._show_check(state)
        plan = state.plan
        if plan is None:
            self.headline.value = ""
            self.table_html.value = ""
            self._picture.layout.display = "none"
            return
        words = (
            f"Examine <b>{plan.total_size:,}</b> of {plan.population_count:,} items "
            f"for {html.escape(METHOD_NAMES[plan.method])}; planned allowance for sampling risk "
            f"{html.escape(_money(plan.planned_allowance))}."
        )
        self.headline.value = f'<div class="am-box am-note am-plan-size">{words}</div>'
        refresh_figure(self.figure, figures.allocation(plan))
        self._picture.layout.display = "flex"
        self.table_html.value = '<div class="am-plan">' + plan._html_body() + "</div>"

    def _show_monetary(self, state: EngagementState) -> None:
        self.monetary_html.value = monetary_plan_html(state.monetary_plan) if state.monetary_plan is not None else ""

    def _show_check(self, state: EngagementState) -> None:
        check = state.plan_check
        if state.plan is not None and not hasattr(state.strata, "codes"):
            self.check_html.value = box("The check needs every item's book value in memory; these strata hold "
                                        "only their statistics (a very large file, or a strata table).", "note")
            return
        if check is None:
            self.check_html.value = "" if not self.check_task.running else self.check_html.value
            return
        self.check_html.value = plan_check_html(check, self._requested.get(id(check)), check.bound_note)


def plan_check_html(check: Any, requested: int | None = None, no_bound: str | None = None) -> str:
    """The check's one line in a box (a warning when the plan misses its risk), then its table.

    ``requested``: the samples asked for (a note says when fewer were run);
    ``no_bound``: why the finite-sample bound was not simulated, if it was not.
    """
    kind = "warning" if check.misses else "note"
    parts = [f'<div class="am-box am-{kind} am-plan-check-line"><b>{html.escape(check.line)}</b></div>']
    if requested is not None and check.replications < int(requested):
        parts.append(box(html.escape(f"Stopped early: {check.replications:,} of {int(requested):,} simulated "
                                     "samples are reported."), "warning"))
    if no_bound:
        from auditmean.coverage import BOUND_LEFT_OUT

        why = no_bound.removeprefix(BOUND_LEFT_OUT + ": ")
        parts.append(box(html.escape(f"The finite-sample bound was not simulated: {why}"), "note"))
    rows = [
        ["misstatement pattern simulated", check.model + (" (the default)" if check.model_is_default else "")],
        ["simulated samples", f"{check.replications:,} (seed {check.seed})"],
        ["risk of incorrect acceptance, planned", _percent(check.planned_risk)],
        ["risk of incorrect acceptance, simulated with the normal limit",
         f"{_percent(check.simulated_risk)} (Monte Carlo standard error {_percent(check.simulated_risk_mc_se)})"],
    ]
    if check.bound_risk is not None:
        rows.append(["risk of incorrect acceptance, simulated with the finite-sample bound",
                     f"{_percent(check.bound_risk)} (Monte Carlo standard error {_percent(check.bound_risk_mc_se)})"])
    rows.append(["items the stratified plan examines", f"{check.total_size:,}"])
    rows.append(["positive book value (what monetary units are drawn from)", format_number(check.positive_book_total)])
    if check.monetary_unit_size is not None:
        rows += [
            ["monetary-unit design for the same inputs: monetary units", f"{check.monetary_unit_size:,}"],
            ["monetary-unit design: sampling interval", format_number(check.monetary_unit_interval)],
            ["monetary-unit design: upper limit if no misstatement is found",
             format_number(check.monetary_unit_zero_error_bound)],
        ]
    else:
        rows.append(["monetary-unit design for the same inputs", "cannot be formed for these inputs"])
    parts.append('<div class="am-plan-check-table">' + html_table(["", ""], rows) + "</div>")
    return "".join(parts)


def monetary_plan_html(plan: Any) -> str:
    """The monetary-unit plan: its size in a headline box, then every figure of it, and its notes."""
    head = (
        f'<div class="am-box am-note am-mu-size">Draw <b>{plan.sample_size:,}</b> monetary units from the positive '
        f"book value of {html.escape(format_number(plan.book_total))} ({plan.positive_items:,} items): one every "
        f"{html.escape(format_number(plan.interval))} on average. The {plan.in_full_count:,} items at or above "
        "that interval are examined in full.</div>"
    )
    rows = [
        ["tolerable misstatement", format_number(plan.tolerable)],
        ["expected misstatement", format_number(plan.expected)],
        ["risk of incorrect acceptance", f"{_percent(plan.risk_incorrect_acceptance)} (every bound at "
                                         f"{_percent(plan.confidence)} confidence)"],
        ["confidence factors", dict((v, k) for k, v in _BASES).get(plan.basis, plan.basis)],
        ["monetary units to draw", f"{plan.sample_size:,}"],
        ["sampling interval", format_number(plan.interval)],
        ["positive book value", f"{format_number(plan.book_total)} in {plan.positive_items:,} items"],
        ["examined in full (at or above the interval)",
         f"{plan.in_full_count:,} items, book value {format_number(plan.in_full_total)}"],
        ["credits, kept apart and not drawn", f"{plan.credits_count:,} items, book value "
                                              f"{format_number(plan.credits_total)}"],
        ["zero balances, kept apart and not drawn", f"{plan.zeros_count:,} items"],
        ["the conclusion rests on", BOUND_NAMES.get(plan.bound, plan.bound)],
        ["shown beside it", ", ".join(BOUND_NAMES.get(b, b) for b in plan.bounds_shown if b != plan.bound)],
    ]
    notes = "".join(f"<li>{html.escape(n)}</li>" for n in plan.notes)
    return (head + '<div class="am-mu-plan">' + html_table(["", ""], rows, caption="Monetary-unit plan") + "</div>"
            + (f'<ul class="am-small">{notes}</ul>' if notes else ""))


def _percent(p: Any) -> str:
    if p is None or not math.isfinite(float(p)):
        return "n/a"
    return f"{100 * float(p):.4g}%"


def _money(v: float) -> str:
    return format_number(v) if math.isfinite(v) else "n/a"
