"""Step 2, the strata: divide the items by book value, with the largest examined in full."""

from __future__ import annotations

import html
from typing import Any

import ipywidgets as widgets

from auditmean.strata import stratify
from auditmean.widgets import figures
from auditmean.widgets._base import FigureView, Panel, box
from auditmean.widgets.state import MONETARY_UNIT, EngagementState, StateChange

__all__ = ["StrataPanel", "STRATA_RULES"]

#: The boundary rules the panel offers, in plain words. (User boundaries and
#: the optimising search are left to scripts: see the DEVELOPERS notes.)
STRATA_RULES = (
    ("cumulative square-root rule", "cumulative_sqrt"),
    ("geometric boundaries", "geometric"),
    ("about equal book value per stratum", "equal_value"),
    ("as assigned in the population file", "preassigned"),
)

_TOP_RULES = (("no top stratum", "none"), ("items at or above an amount", "amount"), ("the largest items", "count"))

#: What the panel says when the monetary-unit design is chosen.
NOT_USED = (
    "The monetary-unit design (chosen in step 3, Sample size) does not use strata: each item's chance of "
    "selection follows its book value, items at or above the sampling interval are examined in full, and "
    "credits and zero balances are kept apart. Strata matter only to the stratified design."
)


class StrataPanel(Panel):
    """Choose how to stratify; the strata, their statistics and pictures follow at once.

    Parameters
    ----------
    state:
        The shared state; the panel stratifies ``state.population``.
    method, n_strata, top_cutoff, top_items, credits, zeros, n_classes:
        Prefill the inputs (the arguments of :func:`auditmean.strata.stratify`;
        ``method="preassigned"`` uses the population file's strata).

    Every change of an input calls :func:`~auditmean.strata.stratify` and
    puts the strata into the state. The inputs are locked once the plan is
    saved in an engagement folder, which records the strata.
    """

    title = "Strata"
    lead = (
        "Items of similar size are grouped so that each group's book values vary less than the whole. "
        "The largest items form a top stratum examined in full; credits and zero balances are kept apart."
    )

    def __init__(
        self,
        state: EngagementState | None = None,
        *,
        method: str = "cumulative_sqrt",
        n_strata: int = 5,
        top_cutoff: float | None = None,
        top_items: int | None = None,
        credits: str = "separate",
        zeros: str = "separate",
        n_classes: int = 100,
    ) -> None:
        super().__init__(state)
        self.method = widgets.Dropdown(options=STRATA_RULES, value=method, description="Rule",
                                       layout=widgets.Layout(width="30em"))
        self.n_strata = widgets.IntSlider(value=n_strata, min=1, max=12, description="Strata",
                                          continuous_update=False, layout=widgets.Layout(width="30em"))
        top_rule = "amount" if top_cutoff is not None else ("count" if top_items is not None else "none")
        self.top_rule = widgets.Dropdown(options=_TOP_RULES, value=top_rule, description="Top stratum",
                                         layout=widgets.Layout(width="30em"))
        self.top_cutoff = widgets.FloatText(value=0.0 if top_cutoff is None else float(top_cutoff),
                                            description="from", layout=widgets.Layout(width="16em"))
        self.top_items = widgets.IntText(value=10 if top_items is None else int(top_items),
                                         description="largest", layout=widgets.Layout(width="14em"))
        self.credits = widgets.ToggleButtons(options=[("own stratum", "separate"), ("with the rest", "include")],
                                             value=credits, description="Credits")
        self.zeros = widgets.ToggleButtons(options=[("own stratum", "separate"), ("with the rest", "include")],
                                           value=zeros, description="Zeros")
        self.n_classes = widgets.BoundedIntText(value=n_classes, min=2, max=100_000, description="Classes",
                                                tooltip="classes of the cumulative square-root rule",
                                                layout=widgets.Layout(width="14em"))
        self.design_html = widgets.HTML("")
        self.design_html.add_class("am-design-note")
        self.summary_html = widgets.HTML("")
        self.summary_html.add_class("am-table")
        self.distribution = FigureView()
        self.share = FigureView()
        self._pictures = widgets.VBox([self.distribution, self.share], layout=widgets.Layout(display="none"))
        self._bins: figures.BookValueBins | None = None
        self._bins_of: Any = None

        for w in (self.method, self.n_strata, self.top_rule, self.top_cutoff, self.top_items,
                  self.credits, self.zeros, self.n_classes):
            w.observe(self._handler(self._on_input), names="value")
        self._observe_state(self._on_state, ("population", "strata", "engagement", "design"))
        self._top_box = widgets.HBox([self.top_rule, self.top_cutoff, self.top_items])
        self.children = [
            self._head,
            self.design_html,
            widgets.HBox([self.method, self.n_classes]),
            self.n_strata,
            self._top_box,
            widgets.HBox([self.credits]),
            widgets.HBox([self.zeros]),
            self.message,
            self.summary_html,
            self._pictures,
        ]
        self._sync_inputs()
        if self.state.population is not None and self.state.strata is None:
            self._guard(self.apply)
        if self.state.strata is None or self.summary_html.value == "":
            self._show(self.state)

    # ------------------------------------------------------------------ inputs

    def options(self) -> dict[str, Any]:
        """The arguments of :func:`~auditmean.strata.stratify` the inputs describe."""
        method = self.method.value
        opts: dict[str, Any] = {"credits": self.credits.value, "zeros": self.zeros.value}
        if method == "preassigned":
            opts["use_preassigned"] = True
        else:
            opts["method"] = method
            opts["n_strata"] = int(self.n_strata.value)
            if method == "cumulative_sqrt":
                opts["n_classes"] = int(self.n_classes.value)
        if self.top_rule.value == "amount":
            opts["top_cutoff"] = float(self.top_cutoff.value)
        elif self.top_rule.value == "count":
            opts["top_items"] = int(self.top_items.value)
        return opts

    def _sync_inputs(self) -> None:
        method = self.method.value
        self.n_strata.layout.display = "none" if method == "preassigned" else ""
        self.n_classes.layout.display = "" if method == "cumulative_sqrt" else "none"
        self.top_cutoff.layout.display = "" if self.top_rule.value == "amount" else "none"
        self.top_items.layout.display = "" if self.top_rule.value == "count" else "none"
        locked = self.state.engagement is not None
        for w in (self.method, self.n_strata, self.top_rule, self.top_cutoff, self.top_items,
                  self.credits, self.zeros, self.n_classes):
            w.disabled = locked

    def _on_input(self, change: dict[str, Any]) -> None:
        if self._quiet:
            return
        self._sync_inputs()
        if self.state.population is not None:
            self.apply()

    # ------------------------------------------------------------------ actions

    def apply(self) -> None:
        """Stratify the population with the inputs and put the strata into the state."""
        self.clear_message()
        population = self.state.population
        if population is None:
            self.show_note("Read the population first (step Population).", "warning")
            return
        if self.state.engagement is not None:
            if self.state.chosen_design != MONETARY_UNIT:  # a monetary-unit engagement records no strata
                self.show_note("The strata are recorded in the engagement folder and can no longer change.",
                               "warning")
            return
        options = self.options()
        strata = stratify(population, **options)
        self.state.update(strata=strata, strata_options=options)

    # ------------------------------------------------------------------ display

    def _on_state(self, change: StateChange) -> None:
        self._sync_inputs()
        if "population" in change.names and change.state.population is not None and change.state.strata is None:
            self.apply()
            return
        self._show(change.state)

    def _show_inputs_of(self, strata: Any) -> None:
        """Set the inputs to the parameters of strata made elsewhere (a resumed engagement)."""
        p = getattr(strata, "parameters", None) or {}
        self._quiet = True
        try:
            if p.get("use_preassigned"):
                self.method.value = "preassigned"
            elif p.get("method") in dict((v, k) for k, v in STRATA_RULES):
                self.method.value = p["method"]
            if p.get("n_strata"):
                self.n_strata.value = int(p["n_strata"])
            if p.get("n_classes"):
                self.n_classes.value = int(p["n_classes"])
            if p.get("top_cutoff") is not None:
                self.top_rule.value, self.top_cutoff.value = "amount", float(p["top_cutoff"])
            elif p.get("top_items") is not None:
                self.top_rule.value, self.top_items.value = "count", int(p["top_items"])
            else:
                self.top_rule.value = "none"
            self.credits.value = p.get("credits", self.credits.value)
            self.zeros.value = p.get("zeros", self.zeros.value)
        finally:
            self._quiet = False
        self._sync_inputs()

    def _show(self, state: EngagementState) -> None:
        monetary = state.chosen_design == MONETARY_UNIT
        self.design_html.value = box(html.escape(NOT_USED), "warning") if monetary else ""
        strata = state.strata
        if strata is None or not hasattr(strata, "codes"):
            self.summary_html.value = ""
            self._pictures.layout.display = "none"
            return
        if state.engagement is not None:
            self._show_inputs_of(strata)
        self.summary_html.value = '<div class="am-strata">' + strata._html_body() + "</div>"
        if state.engagement is not None and not monetary:
            self.summary_html.value += box(
                html.escape(f"These strata are recorded in {state.engagement.folder} with the plan."), "note"
            )
        population = state.population
        if self._bins is None or self._bins_of is not population:
            self._bins = figures.book_value_bins(strata.book_values)
            self._bins_of = population
        self.distribution.show(figures.book_value_distribution(self._bins, strata))
        self.share.show(figures.value_share(strata.table))
        self._pictures.layout.display = "flex"
