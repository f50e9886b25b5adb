"""Step 5, the selection: draw the planned sample with a recorded seed, re-perform it, and extend it.

The stratified design gives each item a key from the seed and its id, and
each stratum takes the items with the smallest keys. The monetary-unit
design draws monetary units from the seed and takes the items they fall
in; it can be extended to more draws without losing any item already
selected (:func:`auditmean.workflow.extend_monetary_unit_selection`).
"""

from __future__ import annotations

import html
from typing import Any

import ipywidgets as widgets

from auditmean._records import format_number, html_table
from auditmean.errors import InputError, Stopped
from auditmean.selection import propose_seed
from auditmean.widgets._base import Panel, Task, box
from auditmean.widgets.state import MONETARY_UNIT, EngagementState, StateChange
from auditmean.workflow import draw_selection, extend_monetary_unit_selection, verify_engagement

__all__ = ["SelectionPanel"]

_PREVIEW_ROWS = 12

_LEAD_STRATIFIED = (
    "Each item gets a key computed from the seed and its id alone; each stratum takes the items with the "
    "smallest keys. Anyone with the seed and the population file can re-perform the selection."
)
_LEAD_MONETARY = (
    "Each monetary unit is drawn from the seed alone: the items are laid out in id order, their book values "
    "added up in cents, and each draw picks a cent of that running total; the item holding it is selected. "
    "Items at or above the sampling interval are examined in full. Anyone with the seed and the population "
    "file can re-perform it."
)


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
    background (which follows the engagement's design: keys for every
    item, a few seconds for a million, or monetary units) and records the
    selection in the engagement folder; "Check" calls
    :func:`~auditmean.workflow.verify_engagement`. For a monetary-unit
    selection, "Extend" calls
    :func:`~auditmean.workflow.extend_monetary_unit_selection`.
    """

    title = "Selection"
    lead = ""  # the lead depends on the design: ``lead_html``

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
        self.lead_html = widgets.HTML("")
        self.plan_html = widgets.HTML("")
        self.selection_html = widgets.HTML("")
        self.selection_html.add_class("am-table")
        self.verify_html = widgets.HTML("")
        self.extend_size = widgets.BoundedIntText(value=0, min=0, max=10**12, description="Draws in all",
                                                  style={"description_width": "8em"},
                                                  layout=widgets.Layout(width="18em"))
        self.extend_button = widgets.Button(description="Extend the selection", icon="plus",
                                            layout=widgets.Layout(width="16em"))
        self.extend_button.add_class("am-extend")
        self.extend_html = widgets.HTML("")
        self._extend_box = widgets.VBox([
            widgets.HTML(
                "<b>Extend</b> <span class='am-small'>(more monetary units from the same seed: the draws made so "
                "far stay as they are, so every item already selected, and every value already entered, stays. "
                "Bounds that assume the number of draws was fixed before any result was seen say so in their "
                "assumptions, and the conclusion notes the extension.)</span>"),
            widgets.HBox([self.extend_size, self.extend_button]),
            self.extend_html,
        ], layout=widgets.Layout(display="none"))
        self.task = Task(self, stoppable=True)
        self.propose_button.on_click(self._handler(lambda _b: setattr(self.seed, "value", propose_seed())))
        self.draw_button.on_click(self._handler(lambda _b: self.draw()))
        self.verify_button.on_click(self._handler(lambda _b: self.verify()))
        self.extend_button.on_click(self._handler(lambda _b: self.extend()))
        self._observe_state(self._on_state, ("plan", "monetary_plan", "design", "engagement", "selection"))
        self.children = [
            self._head,
            self.lead_html,
            self.plan_html,
            widgets.HBox([self.seed, self.propose_button]),
            self.draw_button,
            self.task.box,
            self.message,
            self.selection_html,
            self.verify_button,
            self.verify_html,
            self._extend_box,
        ]
        self._show(self.state)

    @property
    def monetary(self) -> bool:
        """The engagement (or the design chosen) is the monetary-unit design."""
        return self.state.chosen_design == MONETARY_UNIT

    def _planned_words(self) -> tuple[int, str] | None:
        """(number to draw, its unit in words) of the current plan, or None."""
        if self.monetary:
            plan = self.state.monetary_plan
            return None if plan is None else (plan.sample_size, "monetary units")
        plan = self.state.plan
        return None if plan is None else (plan.total_size, "items")

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
                with state.writing:  # never while the plan's check is being added to the same folder
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

        planned = self._planned_words()
        n, unit = planned if planned is not None else (0, "items")
        what = f"Drawing {n:,} {unit} from {population.count:,} items"
        self.task.start(what, work, done, after=lambda: self._show(self.state))

    def extend(self) -> None:
        """Extend a monetary-unit selection to the number of draws typed in (in the background)."""
        self.clear_message()
        state = self.state
        eng, population, sel = state.engagement, state.population, state.selection
        if eng is None or population is None or sel is None or not self.monetary:
            raise InputError("draw a monetary-unit selection first", table="selection")
        size = int(self.extend_size.value)
        self.extend_button.disabled = True

        def work(report: Any) -> Any:
            try:
                with state.writing:
                    extended, _seed = extend_monetary_unit_selection(eng, population, size,
                                                                     proceed=lambda: report(0, 1))
            except Stopped:
                return None
            report(1, 1)
            return extended

        def done(extended: Any) -> None:
            if extended is None:
                self.show_note("Stopped: the selection was not extended.", "warning")
                return
            added = int(extended["added"].sum()) if "added" in extended.columns else 0
            state.update(selection=extended.drop(columns=["added"], errors="ignore"), results=eng.results())
            self.extend_html.value = box(html.escape(
                f"Extended to {size:,} monetary units: {added:,} items added, every item selected before kept "
                "with its audited value."), "note")

        self.task.start(f"Extending to {size:,} monetary units", work, done, after=lambda: self._show(self.state))

    def wait(self, timeout: float | None = None) -> None:
        """Wait for the drawing (or the extension) to finish."""
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
        if "selection" in change.names:
            self.verify_html.value = ""
        self._show(change.state)

    def _drawn_size(self) -> int | None:
        """Monetary units of the recorded monetary-unit selection (None when none)."""
        eng = self.state.engagement
        if eng is None or self.state.selection is None:
            return None
        rec = eng.selection_record() or {}
        n = rec.get("sample_size")
        return int(n) if n is not None else None

    def _show(self, state: EngagementState) -> None:
        monetary = self.monetary
        eng, sel = state.engagement, state.selection
        self.lead_html.value = f'<p class="am-lead">{html.escape(_LEAD_MONETARY if monetary else _LEAD_STRATIFIED)}</p>'
        ready = eng is not None and state.population is not None
        self.draw_button.disabled = (not ready) or sel is not None or self.task.running
        self.verify_button.disabled = sel is None
        self.seed.disabled = sel is not None
        self.propose_button.disabled = sel is not None
        planned = self._planned_words()
        if planned is None:
            self.plan_html.value = box("Plan the sample first (step Sample size).", "warning")
        elif eng is None:
            n, unit = planned
            self.plan_html.value = box(
                html.escape(f"The plan asks for {n:,} {unit}. Save it in an engagement folder "
                            "(step Sample size) to draw them."), "warning")
        elif monetary:
            plan = state.monetary_plan
            self.plan_html.value = box(html.escape(
                f"The plan saved in {eng.folder} draws {plan.sample_size:,} monetary units from the positive book "
                f"value of {format_number(plan.book_total)} (interval {format_number(plan.interval)}). Credits "
                f"({plan.credits_count:,} items) and zero balances ({plan.zeros_count:,} items) are kept apart "
                "and not drawn."), "note")
        else:
            plan = state.plan
            self.plan_html.value = box(html.escape(
                f"The plan saved in {eng.folder} asks for {plan.total_size:,} of {plan.population_count:,} items."
            ), "note")
        self._extend_box.layout.display = "" if (monetary and sel is not None) else "none"
        if sel is None:
            self.selection_html.value = ""
            self.verify_html.value = ""
            self.extend_html.value = ""
            return
        seed = eng.seed() if eng is not None else ""
        if self.seed.value != seed:
            self.seed.value = seed
        if monetary:
            self._show_monetary_selection(sel, seed, eng)
        else:
            self._show_stratified_selection(state, sel, seed, eng)

    def _show_stratified_selection(self, state: EngagementState, sel: Any, seed: str, eng: Any) -> None:
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

    def _show_monetary_selection(self, sel: Any, seed: str, eng: Any) -> None:
        n = self._drawn_size()
        in_full = int(sel["examined_in_full"].astype(bool).sum()) if "examined_in_full" in sel.columns else 0
        if self.extend_size.value <= (n or 0):
            self.extend_size.value = (n or 0) + max(1, (n or 0) // 4)
        self.extend_size.min = (n or 0) + 1
        self.extend_button.disabled = self.task.running
        head = (
            f'<div class="am-box am-note am-selection-done">{len(sel):,} items selected by '
            f"{'' if n is None else f'{n:,} '}monetary units with seed <code>{html.escape(seed)}</code> "
            f"({in_full:,} examined in full) and recorded in {html.escape(str(eng.folder))} "
            "(selection.json; a copy for people in selection.csv).</div>"
        )
        rows = [
            [r.item_id, format_number(r.book_value), "yes" if bool(r.examined_in_full) else "",
             f"{int(r.hits):,}", r.units]
            for r in sel.head(_PREVIEW_ROWS).itertuples(index=False)
        ]
        table = html_table(["item", "book value", "examined in full", "draws in it", "draw numbers"], rows,
                           caption=f"The first {min(len(sel), _PREVIEW_ROWS)} of {len(sel):,}, in id order")
        self.selection_html.value = head + table
