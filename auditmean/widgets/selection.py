"""Step 5, the selection: draw the planned sample with a recorded seed, and re-perform it."""

from __future__ import annotations

import html
from typing import Any

import ipywidgets as widgets

from auditmean._records import format_number, html_table
from auditmean.errors import InputError, Stopped
from auditmean.selection import propose_seed
from auditmean.widgets._base import Panel, Task, box
from auditmean.widgets.state import EngagementState, StateChange
from auditmean.workflow import draw_selection, verify_engagement

__all__ = ["SelectionPanel"]

_PREVIEW_ROWS = 12


class SelectionPanel(Panel):
    """Draw the selection of the saved plan and record it; re-perform it from the seed.

    Parameters
    ----------
    state:
        The shared state; needs ``state.engagement`` (a saved plan) and
        ``state.population``.
    seed:
        Prefill the seed (default: a proposed one, :func:`auditmean.selection.propose_seed`).

    "Draw" calls :func:`auditmean.workflow.draw_selection` in the
    background (a key is computed for every item, a few seconds for a
    million) and records the selection in the engagement folder; "Check"
    calls :func:`~auditmean.workflow.verify_engagement`.
    """

    title = "Selection"
    lead = (
        "Each item gets a key computed from the seed and its id alone; each stratum takes the items with the "
        "smallest keys. Anyone with the seed and the population file can re-perform the selection."
    )

    def __init__(self, state: EngagementState | None = None, *, seed: str | None = None) -> None:
        super().__init__(state)
        self.seed = widgets.Text(value=propose_seed() if seed is None else seed, description="Seed",
                                 continuous_update=True, layout=widgets.Layout(width="30em"))
        self.propose_button = widgets.Button(description="Propose another", icon="refresh",
                                             layout=widgets.Layout(width="12em"))
        self.draw_button = widgets.Button(description="Draw the selection and record it", button_style="primary",
                                          icon="random", layout=widgets.Layout(width="22em"))
        self.draw_button.add_class("am-draw")
        self.verify_button = widgets.Button(description="Check: re-perform from the seed", icon="check",
                                            layout=widgets.Layout(width="22em"))
        self.plan_html = widgets.HTML("")
        self.selection_html = widgets.HTML("")
        self.selection_html.add_class("am-table")
        self.verify_html = widgets.HTML("")
        self.task = Task(self, stoppable=True)
        self.propose_button.on_click(self._handler(lambda _b: setattr(self.seed, "value", propose_seed())))
        self.draw_button.on_click(self._handler(lambda _b: self.draw()))
        self.verify_button.on_click(self._handler(lambda _b: self.verify()))
        self._observe_state(self._on_state, ("plan", "engagement", "selection"))
        self.children = [
            self._head,
            self.plan_html,
            widgets.HBox([self.seed, self.propose_button]),
            self.draw_button,
            self.task.box,
            self.message,
            self.selection_html,
            self.verify_button,
            self.verify_html,
        ]
        self._show(self.state)

    def draw(self) -> None:
        """Draw and record the selection in the background (see :meth:`wait`)."""
        self.clear_message()
        state = self.state
        eng, population = state.engagement, state.population
        if eng is None or population is None:
            raise InputError("save the plan in an engagement folder first (step Sample size)", table="selection")
        if state.selection is not None:
            self.show_note("The selection is already recorded in this engagement; it cannot be drawn again.", "warning")
            return
        seed = self.seed.value
        self.draw_button.disabled = True

        def work(report: Any) -> Any:
            try:
                selection, used = draw_selection(eng, population, seed=seed, proceed=lambda: report(0, 1))
            except Stopped:
                return None
            report(1, 1)
            return selection, used

        def done(result: Any) -> None:
            if result is None:
                self.show_note("Stopped: no selection was recorded; draw again when ready.", "warning")
                return
            selection, _used = result
            state.update(selection=selection, results=eng.results())

        what = f"Drawing {state.plan.total_size:,} items from {population.count:,}"
        self.task.start(what, work, done, after=lambda: self._show(self.state))

    def wait(self, timeout: float | None = None) -> None:
        """Wait for the drawing to finish."""
        self.task.wait(timeout)

    def verify(self) -> None:
        """Re-perform the selection from the population file and the recorded seed, and compare."""
        self.clear_message()
        state = self.state
        if state.engagement is None or state.population is None or state.selection is None:
            raise InputError("there is no recorded selection to check yet", table="selection")
        result = verify_engagement(state.engagement, state.population)
        kind = "note" if result.match else "error"
        self.verify_html.value = box(html.escape(result.summary()).replace("\n", "<br>"), kind)

    # ------------------------------------------------------------------ display

    def _on_state(self, change: StateChange) -> None:
        self._show(change.state)

    def _show(self, state: EngagementState) -> None:
        plan, eng, sel = state.plan, state.engagement, state.selection
        ready = eng is not None and state.population is not None
        self.draw_button.disabled = (not ready) or sel is not None or self.task.running
        self.verify_button.disabled = sel is None
        self.seed.disabled = sel is not None
        self.propose_button.disabled = sel is not None
        if plan is None:
            self.plan_html.value = box("Plan the sample first (step Sample size).", "warning")
        elif eng is None:
            self.plan_html.value = box(
                html.escape(f"The plan asks for {plan.total_size:,} items. Save it in an engagement folder "
                            "(step Sample size) to draw them."), "warning")
        else:
            self.plan_html.value = box(html.escape(
                f"The plan saved in {eng.folder} asks for {plan.total_size:,} of {plan.population_count:,} items."
            ), "note")
        if sel is None:
            self.selection_html.value = ""
            self.verify_html.value = ""
            return
        seed = eng.seed() if eng is not None else ""
        if self.seed.value != seed:
            self.seed.value = seed
        book = {}
        if state.population is not None:
            items = state.population.items
            wanted = items["item_id"].isin(set(sel["item_id"].head(_PREVIEW_ROWS)))
            book = dict(zip(items.loc[wanted, "item_id"], items.loc[wanted, "book_value"]))
        rows = [
            [r.item_id, r.stratum, int(r.order), r.key, format_number(book.get(r.item_id))]
            for r in sel.head(_PREVIEW_ROWS).itertuples(index=False)
        ]
        head = (
            f'<div class="am-box am-note am-selection-done">{len(sel):,} items selected with seed '
            f"<code>{html.escape(seed)}</code> and recorded in {html.escape(str(eng.folder))} "
            "(selection.json; a copy for people in selection.csv).</div>"
        )
        table = html_table(["item", "stratum", "order in stratum", "key", "book value"], rows,
                           caption=f"The first {min(len(sel), _PREVIEW_ROWS)} of {len(sel):,}")
        self.selection_html.value = head + table
