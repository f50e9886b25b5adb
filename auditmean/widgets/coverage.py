"""Step 4, the coverage check: would the planned design's limits hold on this population?"""

from __future__ import annotations

import html
from pathlib import Path
from typing import Any

import ipywidgets as widgets
import numpy as np

from auditmean._atomic import write_json_atomic
from auditmean.core.estimators import METHOD_NAMES, METHODS
from auditmean.coverage import (
    BetaTaint,
    FixedTaint,
    MisstatementModel,
    UniformTaint,
    simulate_coverage,
)
from auditmean.coverage_plots import coverage_bars, estimate_distribution
from auditmean.errors import InputError
from auditmean.widgets._base import FigureView, Panel, Task, box
from auditmean.widgets.state import MONETARY_UNIT, EngagementState, StateChange
from auditmean.workpaper import COVERAGE_FILE

__all__ = ["CoveragePanel"]

#: What the panel says when the monetary-unit design is chosen.
NOT_USED = (
    "The monetary-unit design (chosen in step 3, Sample size) does not use this check: it simulates the "
    "stratified design's normal limits on the population's book values. A monetary-unit sample is concluded on "
    "bounds that hold in finite samples under the assumptions each states (see step 7, Conclusion)."
)

_TAINTS = (("the same share of book value", "fixed"), ("a share between two values", "uniform"),
           ("a share around a mean (beta)", "beta"))


class CoveragePanel(Panel):
    """Simulate the planned sample many times on the population's own book values.

    Parameters
    ----------
    state:
        The shared state; needs ``state.strata`` (a Strata record, which
        holds every item's book value and stratum) and ``state.plan``.
    replications, seed:
        Prefill the number of simulated samples and the seed (a fixed seed
        makes the check repeatable).

    "Run" calls :func:`auditmean.coverage.simulate_coverage` in the
    background with a progress bar; "Stop" ends it after the current batch
    and the replications done so far are reported (marked as partial).
    """

    title = "Coverage check"
    lead = (
        "Before any item is examined: how often would the limits of this design really contain the true "
        "audited total, if items were misstated as you assume? Nominal 95 % can be far less when "
        "misstatements are rare and large."
    )

    def __init__(self, state: EngagementState | None = None, *, replications: int = 1000, seed: int = 1) -> None:
        super().__init__(state)
        st = {"description_width": "15em"}
        def lay() -> widgets.Layout:  # one Layout per widget: hiding one must not hide the others
            return widgets.Layout(width="26em")

        self.error_rate = widgets.BoundedFloatText(value=0.05, min=0.0, max=1.0, step=0.01,
                                                   description="Share of items misstated", style=st, layout=lay())
        self.taint_kind = widgets.Dropdown(options=_TAINTS, value="fixed", description="Each is misstated by",
                                           style=st, layout=widgets.Layout(width="34em"))
        self.taint = widgets.FloatText(value=0.2, description="share of book value", style=st, layout=lay())
        self.taint_high = widgets.FloatText(value=0.6, description="up to", style=st, layout=lay())
        self.understatement = widgets.BoundedFloatText(value=0.0, min=0.0, max=1.0, step=0.05,
                                                       description="Share understated", style=st, layout=lay())
        self.estimators = widgets.SelectMultiple(options=[(METHOD_NAMES[m], m) for m in METHODS],
                                                 value=("mpu", "difference", "ratio"), description="Methods",
                                                 rows=5, style=st, layout=widgets.Layout(width="34em"))
        self.replications = widgets.BoundedIntText(value=int(replications), min=1, max=100_000,
                                                   description="Simulated samples", style=st, layout=lay())
        self.seed = widgets.BoundedIntText(value=int(seed), min=0, max=2**31 - 1, description="Seed", style=st,
                                           layout=lay())
        self.fixed = widgets.Checkbox(value=False, indent=False,
                                      description="one misstated population sampled again and again (faster)")
        self.run_button = widgets.Button(description="Run the coverage check", button_style="primary", icon="play",
                                         layout=widgets.Layout(width="18em"))
        self.run_button.add_class("am-run-coverage")
        self.keep_button = widgets.Button(description="Keep it in the engagement folder", icon="save",
                                          layout=widgets.Layout(width="20em", display="none"))
        self.task = Task(self, stoppable=True)
        self.result_html = widgets.HTML("")
        self.result_html.add_class("am-table")
        self.which = widgets.Dropdown(options=[], description="Picture of", layout=widgets.Layout(width="30em"))
        self.distribution = FigureView()
        self.bars = FigureView()
        self._pictures = widgets.VBox([self.bars, self.which, self.distribution], layout=widgets.Layout(display="none"))
        self.taint_kind.observe(self._handler(lambda _c: self._sync_inputs()), names="value")
        self.which.observe(self._handler(self._on_which), names="value")
        self.run_button.on_click(self._handler(lambda _b: self.run()))
        self.keep_button.on_click(self._handler(lambda _b: self.keep()))
        self._observe_state(self._on_state, ("strata", "plan", "coverage", "engagement", "design"))
        self.design_html = widgets.HTML("")
        self.design_html.add_class("am-design-note")
        self._inputs_box = widgets.HBox([
            widgets.VBox([self.error_rate, self.taint_kind, self.taint, self.taint_high, self.understatement]),
            widgets.VBox([self.estimators, self.replications, self.seed, self.fixed])])
        self.children = [
            self._head,
            self.design_html,
            self._inputs_box,
            widgets.HBox([self.run_button, self.keep_button]),
            self.task.box,
            self.message,
            self.result_html,
            self._pictures,
        ]
        self._sync_inputs()
        plan = self.state.plan
        if plan is not None and plan.error_rate is not None:
            self.error_rate.value, self.taint.value = plan.error_rate, plan.typical_taint
        self._show(self.state)

    def _sync_inputs(self) -> None:
        kind = self.taint_kind.value
        self.taint.description = {"fixed": "share of book value", "uniform": "from", "beta": "mean share"}[kind]
        self.taint_high.layout.display = "" if kind == "uniform" else "none"

    def model(self) -> MisstatementModel:
        """The misstatement model the inputs describe."""
        kind = self.taint_kind.value
        if kind == "fixed":
            taint: Any = FixedTaint(float(self.taint.value))
        elif kind == "uniform":
            taint = UniformTaint(float(self.taint.value), float(self.taint_high.value))
        else:
            taint = BetaTaint(float(self.taint.value))
        return MisstatementModel(error_rate=float(self.error_rate.value), taint=taint,
                                 understatement_share=float(self.understatement.value))

    def run(self) -> None:
        """Run the check in the background (see :meth:`wait`); Stop ends it early."""
        self.clear_message()
        if self.state.chosen_design == MONETARY_UNIT:
            raise InputError(NOT_USED, table="coverage check")
        strata, plan = self.state.strata, self.state.plan
        if strata is None or plan is None or not hasattr(strata, "codes"):
            raise InputError("plan the sample first (steps Strata and Sample size)", table="coverage check")
        if not self.estimators.value:
            raise InputError("choose at least one method to check", table="coverage check")
        model = self.model()
        labels = np.asarray(strata.labels, dtype=object)[strata.codes]
        args = dict(
            estimators=list(self.estimators.value), replications=int(self.replications.value),
            seed=int(self.seed.value), tolerable=plan.tolerable, expected=plan.expected,
            fixed_population=bool(self.fixed.value),
        )
        self.run_button.disabled = True
        state = self.state

        def work(report: Any) -> Any:
            return simulate_coverage(strata.book_values, labels, plan.sizes, model, progress=report, **args)

        def done(result: Any) -> None:
            if state.plan is plan:  # the plan did not change while the check ran
                state.update(coverage=result)

        self.task.start(f"Simulating {args['replications']:,} samples", work, done,
                        after=lambda: self._show(self.state))

    def wait(self, timeout: float | None = None) -> None:
        """Wait for the check to finish."""
        self.task.wait(timeout)

    def keep(self) -> Path:
        """Write the check into the engagement folder as ``coverage.json`` (the workpaper reports it)."""
        eng, result = self.state.engagement, self.state.coverage
        if eng is None or result is None:
            raise InputError("run the check after saving the plan in an engagement folder", table="coverage check")
        path = Path(eng.folder) / COVERAGE_FILE
        write_json_atomic(path, result.to_dict())
        self.show_note(f"Kept in {path}; the workpaper reports it.")
        return path

    # ------------------------------------------------------------------ display

    def _on_state(self, change: StateChange) -> None:
        plan = change.state.plan
        if "plan" in change.names and plan is not None and plan.error_rate is not None:
            self.error_rate.value = plan.error_rate  # start from the pattern the plan assumed
            self.taint_kind.value = "fixed"
            self.taint.value = plan.typical_taint
        self._show(change.state)

    def _on_which(self, change: dict[str, Any]) -> None:
        if not self._quiet:
            self._show_distribution()

    def _show(self, state: EngagementState) -> None:
        monetary = state.chosen_design == MONETARY_UNIT
        self.design_html.value = box(html.escape(NOT_USED), "warning") if monetary else ""
        self._inputs_box.layout.display = "none" if monetary else ""
        ready = (not monetary and state.plan is not None and state.strata is not None
                 and hasattr(state.strata, "codes"))
        self.run_button.disabled = not ready or self.task.running
        result = state.coverage
        self.keep_button.layout.display = "" if (result is not None and state.engagement is not None) else "none"
        if result is None or monetary:
            self.result_html.value = "" if (ready or monetary) else box(
                "Plan the sample first (steps Strata and Sample size).", "warning")
            self._pictures.layout.display = "none"
            return
        head = ""
        if result.partial:
            head = box(html.escape(f"Stopped early: {result.replications:,} of {result.replications_requested:,} "
                                   "simulated samples are reported."), "warning")
        self.result_html.value = head + '<div class="am-coverage">' + result._html_body() + "</div>"
        self.bars.show(coverage_bars(result))
        options = [(METHOD_NAMES[m], m) for m in result.estimators]
        self._quiet = True
        try:
            self.which.options = options
            self.which.value = result.estimators[0]
        finally:
            self._quiet = False
        self._show_distribution()
        self._pictures.layout.display = "flex"

    def _show_distribution(self) -> None:
        result = self.state.coverage
        if result is None or self.which.value is None:
            return
        self.distribution.show(estimate_distribution(result, self.which.value))
