"""Widgets for Jupyter and the browser app: one panel per step of the job, and the app that joins them.

Each panel works on its own in a notebook, over the engine and the
engagement folder, and all of them share one
:class:`~auditmean.widgets.state.EngagementState`::

    from auditmean.widgets import App, EngagementState, PopulationPanel, StrataPanel, PlanPanel

    App()                                   # every step, one tab each

    state = EngagementState()               # or panels one by one, on one state
    PopulationPanel(state, source="ledger.csv", id_column="invoice_no", value_column="amount")
    StrataPanel(state, n_strata=4, top_cutoff=250_000)
    PlanPanel(state, tolerable=760_000, expected=150_000, risk_incorrect_acceptance=0.05)
    # or the monetary-unit design: PlanPanel(state, design="monetary_unit", tolerable=760_000, ...)

A panel holds widgets, calls the engine with plain values and shows what it
returns; it computes no number itself. The sample-size panel offers two
designs (items in strata, or monetary units) and checks a stratified plan
against its stated risk; the panels after it follow the design saved. Every problem appears as a readable
message in the panel. ``auditmean app`` serves :class:`App` in the browser.
"""

from auditmean.widgets.app import App
from auditmean.widgets.coverage import CoveragePanel
from auditmean.widgets.evaluation import EvaluationPanel
from auditmean.widgets.plan import PlanPanel
from auditmean.widgets.population import PopulationPanel
from auditmean.widgets.results import ResultsPanel
from auditmean.widgets.selection import SelectionPanel
from auditmean.widgets.state import EngagementState, StateChange
from auditmean.widgets.strata import StrataPanel
from auditmean.widgets.workpaper import WorkpaperPanel

__all__ = [
    "App",
    "EngagementState",
    "StateChange",
    "PopulationPanel",
    "StrataPanel",
    "PlanPanel",
    "CoveragePanel",
    "SelectionPanel",
    "ResultsPanel",
    "EvaluationPanel",
    "WorkpaperPanel",
]
