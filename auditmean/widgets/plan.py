"""Step 3, the sample size: how many items to examine in each stratum, redrawn as you type."""

from __future__ import annotations

import html
import math
import os
from typing import Any

import ipywidgets as widgets

from auditmean._records import format_number
from auditmean.core.estimators import METHOD_NAMES
from auditmean.errors import InputError
from auditmean.plan import ESTIMATION_METHODS, MisstatementPattern, plan_sample
from auditmean.widgets import figures
from auditmean.widgets._base import Panel, box, figure_widget, refresh_figure
from auditmean.widgets.state import EngagementState, StateChange
from auditmean.workflow import start_engagement

__all__ = ["PlanPanel"]

_ALLOCATIONS = (("Neyman (by spread)", "neyman"), ("proportional to items", "proportional"), ("equal", "equal"))
_SOURCES = (("the strata's book values", "book"), ("an assumed misstatement", "pattern"))


class PlanPanel(Panel):
    """Planning inputs; the plan, its table and its picture follow every change at once.

    Parameters
    ----------
    state:
        The shared state; the panel plans on ``state.strata`` (a
        :class:`~auditmean.strata.Strata` record, or a strata table with
        ``stratum``, ``count``, ``std_dev`` and optionally ``book_total``,
        ``skewness``, ``kind``).
    tolerable, expected, risk_incorrect_acceptance, risk_incorrect_rejection, method,
    std_dev_source, allocation, minimum:
        Prefill the inputs (the arguments of :func:`auditmean.plan.plan_sample`;
        ``std_dev_source`` is ``"book"`` or a
        :class:`~auditmean.plan.MisstatementPattern`).
    folder:
        Prefill the engagement folder in which "Save the plan" starts the engagement.

    Each change calls :func:`~auditmean.plan.plan_sample` on the strata's
    statistics (never the items, so it takes milliseconds whatever the
    population's size) and changes the picture in place. "Save the plan"
    calls :func:`auditmean.workflow.start_engagement`.
    """

    title = "Sample size"
    lead = (
        "How precise the projection must be (tolerable and expected misstatement) and which risks you "
        "accept decide how many items to examine; the allocation shares them among the strata."
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
        minimum: int = 2,
        folder: str | os.PathLike[str] | None = None,
    ) -> None:
        super().__init__(state)
        num = widgets.Layout(width="28em")
        style = {"description_width": "15em"}
        self.tolerable = widgets.FloatText(value=0.0 if tolerable is None else float(tolerable),
                                           description="Tolerable misstatement", layout=num, style=style)
        self.expected = widgets.FloatText(value=float(expected), description="Expected misstatement",
                                          layout=num, style=style)
        self.risk_acceptance = widgets.BoundedFloatText(value=risk_incorrect_acceptance, min=0.001, max=0.499,
                                                        step=0.01, description="Risk of incorrect acceptance",
                                                        layout=num, style=style)
        self.use_rejection = widgets.Checkbox(value=risk_incorrect_rejection is not None,
                                              description="plan for a risk of incorrect rejection too", indent=False)
        self.risk_rejection = widgets.BoundedFloatText(
            value=0.20 if risk_incorrect_rejection is None else risk_incorrect_rejection, min=0.001, max=0.999,
            step=0.05, description="Risk of incorrect rejection", layout=num, style=style)
        self.method = widgets.Dropdown(options=[(METHOD_NAMES[m], m) for m in ESTIMATION_METHODS], value=method,
                                       description="Estimation", layout=num, style=style)
        pattern = std_dev_source if isinstance(std_dev_source, MisstatementPattern) else None
        self.source = widgets.ToggleButtons(options=_SOURCES, value="pattern" if pattern else "book",
                                            description="Spread from", style={"button_width": "14em"})
        self.error_rate = widgets.BoundedFloatText(value=pattern.error_rate if pattern else 0.05, min=0.0, max=1.0,
                                                   step=0.01, description="Share of items misstated",
                                                   layout=num, style=style)
        self.typical_taint = widgets.FloatText(value=pattern.typical_taint if pattern else 0.2,
                                               description="Typical share of book value", layout=num, style=style)
        self.allocation = widgets.Dropdown(options=_ALLOCATIONS, value=allocation, description="Allocation",
                                           layout=num, style=style)
        self.minimum = widgets.BoundedIntText(value=minimum, min=0, max=1_000_000, description="Fewest per stratum",
                                              layout=num, style=style)
        self.headline = widgets.HTML("")
        self.table_html = widgets.HTML("")
        self.table_html.add_class("am-table")
        self.figure = figure_widget()
        self.figure.add_class("am-allocation")
        self._picture = widgets.Box([self.figure], layout=widgets.Layout(display="none", width="100%",
                                                                           max_width="70em"))
        self.folder = widgets.Text(value="" if folder is None else str(folder), description="Folder",
                                   placeholder="a new folder for this engagement", layout=widgets.Layout(width="36em"))
        self.save_button = widgets.Button(description="Save the plan and start the engagement", button_style="primary",
                                          icon="save", layout=widgets.Layout(width="24em"))
        self.save_button.add_class("am-save-plan")
        self.restart_button = widgets.Button(description="Plan again in a new folder", icon="undo",
                                             layout=widgets.Layout(width="18em", display="none"))
        self.saved_html = widgets.HTML("")
        self._inputs = (self.tolerable, self.expected, self.risk_acceptance, self.use_rejection, self.risk_rejection,
                        self.method, self.source, self.error_rate, self.typical_taint, self.allocation, self.minimum)
        for w in self._inputs:
            w.observe(self._handler(self._on_input), names="value")
        self.save_button.on_click(self._handler(lambda _b: self.save()))
        self.restart_button.on_click(self._handler(lambda _b: self.restart()))
        self._observe_state(self._on_state, ("strata", "plan", "engagement", "reading"))
        self._save_box = widgets.VBox([
            widgets.HTML("<b>Save</b> <span class='am-small'>(the plan and the strata are recorded in the folder; "
                         "then the selection can be drawn)</span>"),
            widgets.HBox([self.folder, self.save_button]),
            self.restart_button,
            self.saved_html,
        ])
        self.children = [
            self._head,
            widgets.HBox([widgets.VBox([self.tolerable, self.expected, self.risk_acceptance,
                                        self.use_rejection, self.risk_rejection]),
                          widgets.VBox([self.method, self.allocation, self.minimum])]),
            self.source,
            widgets.HBox([self.error_rate, self.typical_taint]),
            self.message,
            self.headline,
            self._picture,
            self.table_html,
            self._save_box,
        ]
        self._sync_inputs()
        if self.state.strata is not None and self.state.plan is None:
            self._guard(self.replan)
        else:
            self._show(self.state)

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
            "minimum": int(self.minimum.value),
        }

    def _sync_inputs(self) -> None:
        self.risk_rejection.layout.display = "" if self.use_rejection.value else "none"
        pattern = self.source.value == "pattern"
        self.error_rate.layout.display = "" if pattern else "none"
        self.typical_taint.layout.display = "" if pattern else "none"
        locked = self.state.engagement is not None
        for w in self._inputs:
            w.disabled = locked
        self.save_button.disabled = locked or self.state.plan is None
        self.folder.disabled = locked
        self.restart_button.layout.display = "" if locked else "none"
        self._save_box.layout.display = "" if (self.state.reading is not None or locked) else "none"

    def _on_input(self, change: dict[str, Any]) -> None:
        if self._quiet:
            return
        self._sync_inputs()
        self.replan()

    # ------------------------------------------------------------------ actions

    def replan(self) -> None:
        """Plan on the strata with the inputs and put the plan into the state."""
        strata = self.state.strata
        if strata is None:
            self.show_note("Stratify the population first (step Strata).", "warning")
            return
        if self.state.engagement is not None:
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

    def save(self) -> None:
        """Start the engagement in the folder typed in: the plan, the strata and how the file was read."""
        self.clear_message()
        state = self.state
        if state.plan is None or state.strata is None:
            raise InputError("there is no plan to save yet", table="plan")
        if state.reading is None or state.population is None:
            raise InputError("an engagement needs the population read from a file (step Population)", table="plan")
        folder = self.folder.value.strip()
        if not folder:
            raise InputError("give a folder for the engagement (a new or empty one)", table="plan")
        options = dict(state.plan_options or self.options())
        strata_options = dict(state.strata_options or state.strata.parameters)
        eng, _population, strata, plan = start_engagement(
            folder, state.reading, stratify_options=strata_options,
            plan_options=options, population=state.population,
        )
        state.update(strata=strata, strata_options=strata_options, plan=plan, plan_options=options, engagement=eng)

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
            self.minimum.value = plan.minimum
            if plan.error_rate is not None:
                self.source.value = "pattern"
                self.error_rate.value = plan.error_rate
                self.typical_taint.value = plan.typical_taint
            elif plan.std_dev_source == "book":
                self.source.value = "book"
        finally:
            self._quiet = False

    def _on_state(self, change: StateChange) -> None:
        state = change.state
        if "strata" in change.names and state.strata is not None and state.plan is None and state.engagement is None:
            self._sync_inputs()
            self.replan()
            return
        self._show(state)

    def _show(self, state: EngagementState) -> None:
        self._sync_inputs()
        plan = state.plan
        if state.engagement is not None and plan is not None:
            self._show_inputs_of(plan)
            self.folder.value = str(state.engagement.folder)
            self.saved_html.value = box(
                html.escape(f"Saved in {state.engagement.folder}. The plan is fixed for this engagement; "
                            "next, draw the selection."), "note")
        else:
            self.saved_html.value = ""
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


def _money(v: float) -> str:
    return format_number(v) if math.isfinite(v) else "n/a"
