"""The whole job in one window: every panel on one shared state, one step a tab.

Shown in Jupyter (``auditmean.widgets.App()``) or, by ``auditmean app``, as
a web page served by Voila from the notebook ``app.ipynb`` beside this file.
"""

from __future__ import annotations

import html
import os
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import ipywidgets as widgets

from auditmean._records import format_number
from auditmean._version import __version__
from auditmean.cli.app import APP_ENVIRONMENT
from auditmean.cli.demo import DEMO_SETTINGS, find_demo_data
from auditmean.errors import AuditMeanError
from auditmean.widgets._base import box
from auditmean.widgets._demo import DEMO_LEDGER
from auditmean.widgets.coverage import CoveragePanel
from auditmean.widgets.evaluation import EvaluationPanel, cautions_html
from auditmean.widgets.plan import PlanPanel
from auditmean.widgets.population import PopulationPanel
from auditmean.widgets.results import ResultsPanel
from auditmean.widgets.selection import SelectionPanel
from auditmean.widgets.state import DESIGN_NAMES, MONETARY_UNIT, EngagementState, StateChange
from auditmean.widgets.strata import StrataPanel
from auditmean.widgets.style import STYLE_SHEET
from auditmean.widgets.workpaper import WorkpaperPanel

__all__ = ["App", "STEP_TITLES", "ENVIRONMENT"]

#: The tabs, in the order of the job.
STEP_TITLES = (
    "1 Population",
    "2 Strata",
    "3 Sample size",
    "4 Coverage check",
    "5 Selection",
    "6 Audited values",
    "7 Conclusion",
    "8 Workpaper",
)

#: Environment variables ``auditmean app`` passes to the app notebook.
ENVIRONMENT = APP_ENVIRONMENT


class App(widgets.VBox):
    """Every step of the job as a tab, over one :class:`~auditmean.widgets.state.EngagementState`.

    Parameters
    ----------
    state:
        The shared state (a new one when None).
    demo_data:
        The folder of the invented demo files: the inputs are then prefilled
        with the demo's ledger and settings, and a clearly labelled button
        fills in the demo's audited values.
    engagement:
        An engagement folder to resume at once.

    Attributes
    ----------
    population, strata, plan, coverage, selection, results, evaluation, workpaper:
        The panels (:class:`PopulationPanel`, :class:`StrataPanel`, ...).
    tabs:
        The ``ipywidgets.Tab`` holding them.
    """

    def __init__(
        self,
        state: EngagementState | None = None,
        *,
        demo_data: str | os.PathLike[str] | None = None,
        engagement: str | os.PathLike[str] | None = None,
    ) -> None:
        if state is None:
            state = EngagementState(demo_data=demo_data)
        elif demo_data is not None:
            state.demo_data = Path(demo_data)
        self.state = state
        demo = state.demo_data is not None
        if demo:
            data = Path(state.demo_data)
            stamp = datetime.now(timezone.utc).strftime("%Y%m%d-%H%M%S")
            self.population = PopulationPanel(state, source=data / DEMO_LEDGER, id_column="invoice_no",
                                              value_column="book_value")
            self.strata = StrataPanel(state, **DEMO_SETTINGS["stratify"])
            self.plan = PlanPanel(state, **DEMO_SETTINGS["plan"], folder=f"auditmean-demo-{stamp}")
            self.selection = SelectionPanel(state, seed=DEMO_SETTINGS["seed"])
        else:
            self.population = PopulationPanel(state)
            self.strata = StrataPanel(state)
            self.plan = PlanPanel(state)
            self.selection = SelectionPanel(state)
        self.coverage = CoveragePanel(state)
        self.results = ResultsPanel(state)
        self.evaluation = EvaluationPanel(state)
        self.workpaper = WorkpaperPanel(state)
        self.panels = (self.population, self.strata, self.plan, self.coverage, self.selection, self.results,
                       self.evaluation, self.workpaper)
        self.tabs = widgets.Tab(children=list(self.panels), titles=STEP_TITLES)
        self.tabs.add_class("am-steps")
        demo_words = (
            " &nbsp;<span style='background:#b8741a;padding:0.1em 0.5em;border-radius:4px'>demo: invented data "
            "of a fictional distributor</span>" if demo else ""
        )
        self.header = widgets.HTML(
            STYLE_SHEET
            + f'<div class="am-header am-panel"><b>auditmean</b> &nbsp; audit sampling by strata or by monetary units '
            f"<span class='am-small' style='color:#cfd8de'>version {html.escape(__version__)}</span>{demo_words}</div>"
        )
        self.cautions = widgets.HTML(cautions_html())
        self.cautions.add_class("am-app-cautions")
        self.status = widgets.HTML("")
        self.status.add_class("am-status")
        super().__init__([self.header, self.cautions, self.status, self.tabs])
        self.add_class("am-app")
        state.observe(self._on_state)
        if engagement is not None:
            self.population.resume_folder.value = str(engagement)
            self.population._guard(self.population.resume)
        self._show_status()

    def _on_state(self, change: StateChange) -> None:
        s = self.state
        if change.names <= {"results", "evaluation"} and s.results is not None and s.selection is not None:
            # an audited value entered: the folder's status (which reads and checks every record)
            # only changes its advice once the last item has a value
            if len(s.results.current) < len(s.selection):
                return
        self._show_status()

    def _show_status(self) -> None:
        s = self.state
        parts = []
        if s.population is not None:
            parts.append(f"population {s.population.source}: {s.population.count:,} items, book value "
                         f"{format_number(s.population.total)}")
        monetary = s.chosen_design == MONETARY_UNIT
        planned = s.monetary_plan if monetary else s.plan
        if planned is not None:
            parts.append(f"design: {DESIGN_NAMES[s.chosen_design]}")
            parts.append(f"sample size {planned.sample_size:,} monetary units" if monetary
                         else f"sample size {planned.total_size:,}")
        nxt = "read the population (tab 1) or resume an engagement folder"
        if s.engagement is not None:
            parts.append(f"engagement folder {s.engagement.folder}")
            try:
                nxt = s.engagement.status().next_step
            except AuditMeanError as exc:
                nxt = f"the engagement folder has a problem: {exc}"
        elif planned is not None:
            nxt = "save the plan in an engagement folder (tab 3), then draw the selection (tab 5)"
        elif s.population is not None:
            nxt = ("give the planning inputs (tab 3)" if monetary
                   else "choose the strata (tab 2) and the planning inputs (tab 3)")
        words = "; ".join(parts)
        self.status.value = (
            f'<div class="am-small">{html.escape(words)}</div>' + box(f"<b>Next:</b> {html.escape(nxt)}", "note")
        )

    @classmethod
    def from_environment(cls, environ: Any = None) -> App:
        """The app as ``auditmean app`` asks for it through :data:`ENVIRONMENT` (used by ``app.ipynb``)."""
        env = os.environ if environ is None else environ
        cwd = env.get(ENVIRONMENT["cwd"])
        if cwd:
            os.chdir(cwd)  # relative paths typed in the app are the user's, not the package's
        demo_data = None
        if env.get(ENVIRONMENT["demo"]) == "1":
            demo_data = find_demo_data(env.get(ENVIRONMENT["data"]) or None)
        return cls(demo_data=demo_data, engagement=env.get(ENVIRONMENT["engagement"]) or None)
