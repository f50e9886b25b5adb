"""Step 7, the conclusion: project the misstatement, see which limit the verdict rests on, read the warnings.

For the stratified design every applicable method projects the misstatement
with normal limits; where warnings about the normal approximation fire for
the relied-on method, the verdict rests on the finite-sample bound and the
normal limits are shown for information only. For the monetary-unit design
every bound offered is shown, the relied-on one marked.
"""

from __future__ import annotations

import html
import math
from typing import Any

import ipywidgets as widgets

from auditmean._records import format_number, html_table
from auditmean.cautions import CAUTIONS
from auditmean.core.estimators import METHOD_NAMES
from auditmean.errors import InputError, Stopped
from auditmean.monetary_engagement import BOUND_NAMES, MONETARY_UNIT_BOUNDS
from auditmean.widgets import figures
from auditmean.widgets._base import FigureView, Panel, Task, box
from auditmean.widgets.state import MONETARY_UNIT, EngagementState, StateChange
from auditmean.workflow import evaluate_engagement

__all__ = ["EvaluationPanel", "cautions_html", "evaluation_html", "monetary_evaluation_html", "PLANNED"]

_MISSING = (
    ("refuse: every item needs a value", "error"),
    ("take them at their book value", "at_book_value"),
    ("take them as zero", "as_zero"),
)
_METHODS = ("mpu", "difference", "ratio")

#: The value of the relied-on field that means "as the plan says" (its label names the method).
PLANNED = "planned"

_BASIS_NORMAL = "normal limit"


def cautions_html() -> str:
    """The cautions (:data:`auditmean.cautions.CAUTIONS`) as an HTML box."""
    items = "".join(f"<li>{html.escape(c)}</li>" for c in CAUTIONS)
    return f'<div class="am-box am-cautions"><b>Before you rely on any number</b><ul>{items}</ul></div>'


def _money(v: float | None) -> str:
    return format_number(v) if v is not None and math.isfinite(v) else "n/a"


def _basis(c: Any) -> str:
    return getattr(c, "basis", _BASIS_NORMAL)


def _bound_html(bound: Any) -> str:
    """The finite-sample bound's own record, and its assumptions as a list (when not already in it)."""
    body = bound._html_body()
    assumptions = [a for a in getattr(bound, "assumptions", ()) or () if html.escape(str(a)) not in body]
    if assumptions:
        body += "<b>Assumptions</b><ul>" + "".join(f"<li>{html.escape(str(a))}</li>" for a in assumptions) + "</ul>"
    return f'<div class="am-table am-bound-record">{body}</div>'


def evaluation_html(ev: Any) -> str:
    """The conclusion and what it rests on, the table by method, the bound that holds, the warnings, the cautions."""
    c = ev.conclusion
    basis = _basis(c)
    relied = getattr(c, "relied_upper_limit", c.upper_limit)
    verdict_class = "am-verdict-" + c.verdict.replace(" ", "-")
    rests = f"The verdict rests on the {basis}" if basis != "no limit that holds" else "No limit that holds is available"
    if basis != "no limit that holds":
        rests += f": upper limit of misstatement {_money(relied)}"
    if basis != _BASIS_NORMAL:
        rests += "; the normal limits are shown for information only"
    parts = [
        f'<div class="am-box am-verdict {verdict_class}"><b>{html.escape(METHOD_NAMES[ev.primary])}: the sample '
        f"{html.escape(c.verdict)} the conclusion.</b><br>"
        f'<span class="am-basis">{html.escape(rests)}.</span><br>{html.escape(c.wording)}</div>'
    ]
    methods = list(ev.conclusions)
    header = [""] + [METHOD_NAMES[m] for m in methods]

    def normal(m: str, v: float) -> str:
        text = _money(v)
        return text + " (for information)" if _basis(ev.conclusions[m]) != _BASIS_NORMAL else text

    lines = [
        ("estimated audited total", lambda m: _money(ev.estimates[m].total)),
        ("projected misstatement", lambda m: _money(ev.conclusions[m].projected_misstatement)),
        ("upper misstatement limit (normal approximation)", lambda m: normal(m, ev.conclusions[m].upper_limit)),
        ("lower misstatement limit (normal approximation)", lambda m: normal(m, ev.conclusions[m].lower_limit)),
        ("achieved allowance for sampling risk", lambda m: _money(ev.conclusions[m].achieved_allowance)),
        ("adjusted allowance", lambda m: _money(ev.conclusions[m].adjusted_allowance)),
        ("second opinion: upper limit (for information)", lambda m: _money(ev.conclusions[m].second_opinion_upper)),
        ("second opinion: lower limit (for information)", lambda m: _money(ev.conclusions[m].second_opinion_lower)),
        ("warnings", lambda m: f"{len(ev.estimates[m].flags):,}"),
        ("the verdict rests on", lambda m: _basis(ev.conclusions[m])),
        ("upper limit relied on", lambda m: _money(getattr(ev.conclusions[m], "relied_upper_limit", math.nan))),
        ("the sample", lambda m: ev.conclusions[m].verdict),
    ]
    rows = [[label] + [f(m) for m in methods] for label, f in lines]
    parts.append('<div class="am-table am-evaluation-table">' + html_table(header, rows, caption=(
        f"Every method at a {ev.risk_incorrect_acceptance:.0%} risk of incorrect acceptance; tolerable "
        f"misstatement {_money(ev.tolerable)}")) + "</div>")
    bound = getattr(ev, "overstatement_bound", None)
    note = getattr(ev, "bound_note", "")
    relies_on_bound = any(_basis(x) != _BASIS_NORMAL for x in ev.conclusions.values())
    if bound is not None:
        title = ("<b>The finite-sample bound on overstatement</b> (it holds without the normal approximation, "
                 "under the assumptions it states)")
        if relies_on_bound:
            parts.append(f'<div class="am-box am-note am-finite-bound">{title}{_bound_html(bound)}</div>')
        else:
            parts.append('<details class="am-finite-bound"><summary>' + title + " — for information: no warning "
                         "fired, so the verdict rests on the normal limit</summary>" + _bound_html(bound) + "</details>")
    elif note and relies_on_bound:
        parts.append(box(html.escape(f"Finite-sample bound: {note}"), "warning"))
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


def monetary_evaluation_html(ev: Any) -> str:
    """A monetary-unit evaluation: the conclusion, every bound (the relied-on one marked), assumptions, cautions."""
    verdict_class = "am-verdict-" + ev.verdict.replace(" ", "-")
    name = BOUND_NAMES.get(ev.relied_on, ev.relied_on)
    parts = [
        f'<div class="am-box am-verdict {verdict_class}"><b>{html.escape(name)} bound: the sample '
        f"{html.escape(ev.verdict)} the conclusion.</b><br>"
        f'<span class="am-basis">{html.escape(f"The verdict rests on the {name} bound: upper bound on overstatement {_money(ev.upper)}.")}'
        f"</span><br>{html.escape(ev.wording)}</div>"
    ]
    t = ev.table()
    head = "".join(f"<th>{h}</th>" for h in ("bound", "projected misstatement", "upper bound on overstatement",
                                               "bound on understatement", "what it rests on"))
    body = []
    for r in t.itertuples(index=False):
        mark = ' class="am-relied"' if r.relied_on else ""
        label = html.escape(r.name) + (" <b>(relied on)</b>" if r.relied_on else "")
        under = _money(r.understatement_upper) if math.isfinite(r.understatement_upper) else "-"
        body.append(f"<tr{mark}><td>{label}</td><td>{html.escape(_money(r.projected))}</td>"
                    f"<td>{html.escape(_money(r.upper))}</td><td>{html.escape(under)}</td>"
                    f"<td>{html.escape(r.guarantee)}</td></tr>")
    caption = (f"Every bound at {100 * ev.confidence:.4g}% confidence ({100 * ev.risk_incorrect_acceptance:.4g}% risk "
               f"of incorrect acceptance); tolerable misstatement {_money(ev.tolerable)}")
    parts.append('<div class="am-table am-mu-bounds"><table class="auditmean-table"><caption>'
                 f"{html.escape(caption)}</caption><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody>"
                 "</table></div>")
    facts = [
        ["positive book value", _money(ev.book_total)],
        ["monetary units drawn", f"{ev.sample_size:,}" + (
            f" (extended from {', '.join(f'{n:,}' for n in ev.extended_from)})" if ev.extended_from else "")],
        ["sampling interval", _money(ev.interval)],
        ["items examined", f"{ev.items:,}, of which {ev.items_in_full:,} examined in full"],
        ["draws with an overstatement", f"{ev.errors:,}"],
        ["credits, not sampled", f"{ev.credits_count:,} items, book value {_money(ev.credits_total)}"],
        ["zero balances, not sampled", f"{ev.zeros_count:,} items"],
        ["selected items without an audited value", "none" if not ev.missing_items else
         f"{len(ev.missing_items):,}, taken {ev.missing_treatment.replace('_', ' ')}"],
    ]
    parts.append('<div class="am-table am-mu-facts">' + html_table(["", ""], facts) + "</div>")
    lists = [list(getattr(b, "assumptions", ()) or ()) for b in ev.bounds.values()]
    common = [a for a in (lists[0] if lists else []) if all(a in other for other in lists[1:])]
    if common:
        parts.append("<b>Assumptions every bound states</b><ul>"
                     + "".join(f"<li>{html.escape(str(a))}</li>" for a in common) + "</ul>")
    for m, b in ev.bounds.items():
        own = [a for a in getattr(b, "assumptions", ()) or () if a not in common]
        if own:
            mark = " (relied on)" if m == ev.relied_on else ""
            parts.append(f"<b>Assumptions of the {html.escape(BOUND_NAMES.get(m, m))} bound{mark}</b><ul>"
                         + "".join(f"<li>{html.escape(str(a))}</li>" for a in own) + "</ul>")
    for n in ev.notes:
        parts.append(box(html.escape(n), "warning"))
    parts.append(cautions_html())
    return '<div class="am-evaluation am-mu-evaluation">' + "".join(parts) + "</div>"


class EvaluationPanel(Panel):
    """Evaluate the recorded audited values against the plan's tolerable misstatement and risks.

    Parameters
    ----------
    state:
        The shared state; needs ``state.engagement`` with a recorded selection.
    bootstrap_replicates:
        Replicates of the second-opinion bootstrap (default 2,000; the
        stratified design only).

    "Evaluate" calls :func:`auditmean.workflow.evaluate_engagement` in the
    background, which saves the evaluation in the engagement folder. The
    bootstrap's seed is the selection seed, so the second opinion can be
    re-performed from the record. For the monetary-unit design the
    relied-on field chooses the bound the conclusion rests on.
    """

    title = "Conclusion"
    lead = (
        "The misstatement is projected and set against the tolerable misstatement. The verdict rests on a "
        "limit that holds: the normal limit where its checks pass, otherwise a bound that holds in finite "
        "samples under the assumptions it states, with the normal limit shown for information."
    )

    def __init__(self, state: EngagementState | None = None, *, bootstrap_replicates: int = 2000) -> None:
        super().__init__(state)
        wide = {"description_width": "16em"}
        self.missing = widgets.Dropdown(options=_MISSING, value="error", description="Items without a value",
                                        style=wide, layout=widgets.Layout(width="34em"))
        self.primary = widgets.Dropdown(options=[("as planned", PLANNED)], value=PLANNED,
                                        description="Relied-on method", style=wide,
                                        layout=widgets.Layout(width="44em"))
        self.primary.add_class("am-relied-on")
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
        self._choices_for: Any = ()
        self.evaluate_button.on_click(self._handler(lambda _b: self.evaluate()))
        self._observe_state(self._on_state, ("plan", "monetary_plan", "design", "engagement", "selection", "results",
                                             "evaluation"))
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

    @property
    def monetary(self) -> bool:
        """The engagement (or the design chosen) is the monetary-unit design."""
        return self.state.chosen_design == MONETARY_UNIT

    def options(self) -> dict[str, Any]:
        """The keyword arguments :meth:`evaluate` passes to :func:`~auditmean.workflow.evaluate_engagement`."""
        primary = None if self.primary.value == PLANNED else self.primary.value
        if self.monetary:
            return {"missing_treatment": self.missing.value, "primary": primary}
        return {
            "missing_treatment": self.missing.value,
            "primary": primary,
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
        if self.monetary:
            what = "Evaluating the monetary-unit sample with every bound"
        else:
            what = f"Evaluating (the second opinion draws {options['bootstrap_replicates']:,} bootstrap replicates)"
        self.task.start(
            what,
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

    def _sync_choices(self, state: EngagementState) -> None:
        """The relied-on field: its label says the method (or bound) the plan names, never blank."""
        ev = state.evaluation
        if self.monetary:
            plan = state.monetary_plan
            planned = getattr(plan, "bound", None)
            if ev is not None and getattr(ev, "relied_on", None) and self.primary.value == PLANNED:
                planned = ev.relied_on
            first = f"as planned: {BOUND_NAMES.get(planned, planned)} bound" if planned else "as planned"
            choices = ((first, PLANNED),) + tuple((f"{BOUND_NAMES[b]} bound", b) for b in MONETARY_UNIT_BOUNDS)
            description = "Bound relied on"
        else:
            planned = getattr(state.plan, "method", None)
            if ev is not None and getattr(ev, "primary", None) and self.primary.value == PLANNED:
                planned = ev.primary
            first = f"as planned: {METHOD_NAMES.get(planned, planned)}" if planned else "as planned"
            choices = ((first, PLANNED),) + tuple((METHOD_NAMES[m], m) for m in _METHODS)
            description = "Relied-on method"
        if choices != self._choices_for:
            value = self.primary.value if self.primary.value in dict((v, k) for k, v in choices) else PLANNED
            self._quiet = True
            try:
                self.primary.options = choices
                self.primary.value = value
            finally:
                self._quiet = False
            self._choices_for = choices
        self.primary.description = description
        self.replicates.layout.display = "none" if self.monetary else ""

    def _show(self, state: EngagementState) -> None:
        self._sync_choices(state)
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
        if hasattr(ev, "bounds"):  # a monetary-unit evaluation
            self.result_html.value = monetary_evaluation_html(ev)
            self.figure.show(figures.monetary_bounds(ev))
        else:
            self.result_html.value = evaluation_html(ev)
            self.figure.show(figures.estimate_limits(ev))
        self._picture.layout.display = "flex"
