"""Step 7, the conclusion: project the misstatement by every method, read the warnings and second opinions."""

from __future__ import annotations

import html
import math
from typing import Any

import ipywidgets as widgets

from auditmean._records import format_number, html_table
from auditmean.cautions import CAUTIONS
from auditmean.core.estimators import METHOD_NAMES
from auditmean.errors import InputError, Stopped
from auditmean.widgets import figures
from auditmean.widgets._base import FigureView, Panel, Task, box
from auditmean.widgets.state import EngagementState, StateChange
from auditmean.workflow import evaluate_engagement

__all__ = ["EvaluationPanel", "cautions_html"]

_MISSING = (
    ("refuse: every item needs a value", "error"),
    ("take them at their book value", "at_book_value"),
    ("take them as zero", "as_zero"),
)
_PRIMARY = (("as planned", None),) + tuple((METHOD_NAMES[m], m) for m in ("mpu", "difference", "ratio"))


def cautions_html() -> str:
    """The cautions (:data:`auditmean.cautions.CAUTIONS`) as an HTML box."""
    items = "".join(f"<li>{html.escape(c)}</li>" for c in CAUTIONS)
    return f'<div class="am-box am-cautions"><b>Before you rely on any number</b><ul>{items}</ul></div>'


def _money(v: float) -> str:
    return format_number(v) if v is not None and math.isfinite(v) else "n/a"


def evaluation_html(ev: Any) -> str:
    """The conclusion, the table by method, the warnings with rule, source and advice, and the cautions."""
    c = ev.conclusion
    verdict_class = "am-verdict-" + c.verdict.replace(" ", "-")
    parts = [
        f'<div class="am-box am-verdict {verdict_class}"><b>{html.escape(METHOD_NAMES[ev.primary])}: the sample '
        f"{html.escape(c.verdict)} the conclusion.</b><br>{html.escape(c.wording)}</div>"
    ]
    methods = list(ev.conclusions)
    header = [""] + [METHOD_NAMES[m] for m in methods]
    lines = [
        ("estimated audited total", lambda m: _money(ev.estimates[m].total)),
        ("projected misstatement", lambda m: _money(ev.conclusions[m].projected_misstatement)),
        ("upper misstatement limit", lambda m: _money(ev.conclusions[m].upper_limit)),
        ("lower misstatement limit", lambda m: _money(ev.conclusions[m].lower_limit)),
        ("achieved allowance for sampling risk", lambda m: _money(ev.conclusions[m].achieved_allowance)),
        ("adjusted allowance", lambda m: _money(ev.conclusions[m].adjusted_allowance)),
        ("second opinion: upper limit", lambda m: _money(ev.conclusions[m].second_opinion_upper)),
        ("second opinion: lower limit", lambda m: _money(ev.conclusions[m].second_opinion_lower)),
        ("warnings", lambda m: f"{len(ev.estimates[m].flags):,}"),
        ("the sample", lambda m: ev.conclusions[m].verdict),
    ]
    rows = [[label] + [f(m) for m in methods] for label, f in lines]
    parts.append('<div class="am-table am-evaluation-table">' + html_table(header, rows, caption=(
        f"Every method at a {ev.risk_incorrect_acceptance:.0%} risk of incorrect acceptance; tolerable "
        f"misstatement {_money(ev.tolerable)}")) + "</div>")
    for m, why in ev.not_applicable.items():
        parts.append(box(html.escape(f"{METHOD_NAMES[m]} could not be used: {why}"), "note"))
    flags = ev.flags
    if flags:
        items = "".join(
            f'<details class="am-flag"><summary><code>{html.escape(f.code)}</code> {html.escape(f.message)}</summary>'
            f'<div class="am-small">Rule: {html.escape(f.rule)}. Source: {html.escape(f.source)}.<br>'
            f"What would help: {html.escape(f.advice)}</div></details>"
            for f in flags
        )
        parts.append(box(f"<b>{len(flags)} warnings for {html.escape(METHOD_NAMES[ev.primary])}</b> "
                         "(open each for its rule, source and advice)" + items, "warning"))
    for so in ev.second_opinions.values():
        parts.append('<div class="am-table">' + so._html_body() + "</div>")
    parts.append(cautions_html())
    return '<div class="am-evaluation">' + "".join(parts) + "</div>"


class EvaluationPanel(Panel):
    """Evaluate the recorded audited values against the plan's tolerable misstatement and risks.

    Parameters
    ----------
    state:
        The shared state; needs ``state.engagement`` with a recorded selection.
    bootstrap_replicates:
        Replicates of the second-opinion bootstrap (default 2,000).

    "Evaluate" calls :func:`auditmean.workflow.evaluate_engagement` in the
    background, which saves the evaluation in the engagement folder. The
    bootstrap's seed is the selection seed, so the second opinion can be
    re-performed from the record.
    """

    title = "Conclusion"
    lead = (
        "Every applicable method projects the misstatement with limits at the planned risk of incorrect "
        "acceptance. Where the normal approximation is in doubt, a warning says why and a second opinion "
        "that does not lean on it is given."
    )

    def __init__(self, state: EngagementState | None = None, *, bootstrap_replicates: int = 2000) -> None:
        super().__init__(state)
        wide = {"description_width": "16em"}
        self.missing = widgets.Dropdown(options=_MISSING, value="error", description="Items without a value",
                                        style=wide, layout=widgets.Layout(width="34em"))
        self.primary = widgets.Dropdown(options=_PRIMARY, value=None, description="Relied-on method", style=wide,
                                        layout=widgets.Layout(width="34em"))
        self.replicates = widgets.BoundedIntText(value=int(bootstrap_replicates), min=200, max=100_000,
                                                 description="Bootstrap replicates", style=wide,
                                                 layout=widgets.Layout(width="24em"))
        self.evaluate_button = widgets.Button(description="Evaluate", button_style="primary", icon="balance-scale",
                                              layout=widgets.Layout(width="14em"))
        self.evaluate_button.add_class("am-evaluate")
        self.task = Task(self, stoppable=True)
        self.status_html = widgets.HTML("")
        self.result_html = widgets.HTML("")
        self.figure = FigureView()
        self.figure.add_class("am-estimate-picture")
        self._picture = widgets.Box([self.figure], layout=widgets.Layout(display="none"))
        self.evaluate_button.on_click(self._handler(lambda _b: self.evaluate()))
        self._observe_state(self._on_state, ("engagement", "selection", "results", "evaluation"))
        self.children = [
            self._head,
            self.missing,
            self.primary,
            self.replicates,
            self.evaluate_button,
            self.task.box,
            self.status_html,
            self.message,
            self._picture,
            self.result_html,
        ]
        self._show(self.state)

    def options(self) -> dict[str, Any]:
        """The keyword arguments :meth:`evaluate` passes to :func:`~auditmean.workflow.evaluate_engagement`."""
        return {
            "missing_treatment": self.missing.value,
            "primary": self.primary.value,
            "bootstrap_replicates": int(self.replicates.value),
        }

    @staticmethod
    def _evaluate_or_stop(eng: Any, options: dict, report: Any) -> Any:
        """The evaluation, or None when Stop was pressed before it was saved (nothing saved then)."""
        try:
            return evaluate_engagement(eng, proceed=lambda: report(0, 1), **options)
        except Stopped:
            return None

    def evaluate(self) -> None:
        """Evaluate and save in the background (see :meth:`wait`); the result goes into the state."""
        self.clear_message()
        state = self.state
        eng = state.engagement
        if eng is None or state.selection is None:
            raise InputError("draw and record the selection, then enter the audited values", table="evaluation")
        options = self.options()
        self.evaluate_button.disabled = True
        replicates = options["bootstrap_replicates"]
        self.task.start(
            f"Evaluating (the second opinion draws {replicates:,} bootstrap replicates)",
            lambda report: self._evaluate_or_stop(eng, options, report),
            lambda ev: state.update(evaluation=ev) if ev is not None
            else self.show_note("Stopped: no evaluation was saved; evaluate again when ready.", "warning"),
            after=lambda: self._show(self.state),
        )

    def wait(self, timeout: float | None = None) -> None:
        """Wait for the evaluation to finish."""
        self.task.wait(timeout)

    # ------------------------------------------------------------------ display

    def _on_state(self, change: StateChange) -> None:
        self._show(change.state)

    def _show(self, state: EngagementState) -> None:
        eng, ev = state.engagement, state.evaluation
        self.evaluate_button.disabled = eng is None or state.selection is None or self.task.running
        if eng is None or state.selection is None:
            self.status_html.value = box("Draw and record the selection, then enter the audited values.", "warning")
        else:
            saved = eng.evaluations()
            words = f"{len(saved)} evaluation{'s' if len(saved) != 1 else ''} saved in {eng.folder}"
            if saved:
                words += f", the latest at {saved[-1]['saved_at'][:19].replace('T', ' ')} UTC"
            if ev is None and saved:
                words += ". The audited values may have changed since: evaluate again to see the conclusion"
            self.status_html.value = f'<div class="am-small">{html.escape(words)}.</div>'
        if ev is None:
            self.result_html.value = ""
            self._picture.layout.display = "none"
            return
        self.result_html.value = evaluation_html(ev)
        self.figure.show(figures.estimate_limits(ev))
        self._picture.layout.display = "flex"
