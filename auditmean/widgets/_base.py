"""What every panel shares: the message box, error handling, and long work in the background.

A panel is an ``ipywidgets.VBox`` holding its own widgets. Every handler it
runs goes through :meth:`Panel._guard`, so a problem appears as a readable
message in the panel (the text of auditmean's error, which says where and
what), never as a traceback. Long work runs in a thread through
:class:`Task`, which shows progress and, where the engine can stop early,
a Stop button.
"""

from __future__ import annotations

import html
import json
import threading
import time
from collections.abc import Callable
from typing import Any

import ipywidgets as widgets
import plotly.graph_objects as go

from auditmean.errors import AuditMeanError
from auditmean.widgets.state import EngagementState, StateChange
from auditmean.widgets.style import STYLE_SHEET

__all__ = ["Panel", "Task", "FigureView", "box", "figure_widget", "refresh_figure"]


def box(text_html: str, kind: str = "note") -> str:
    """An HTML message box (``kind``: note, warning, error); ``text_html`` must already be escaped."""
    return f'<div class="am-box am-{kind}">{text_html}</div>'


def figure_widget(fig: go.Figure | None = None) -> go.FigureWidget:
    """A plotly FigureWidget showing ``fig`` (an empty one when None).

    Each FigureWidget sends its own copy of plotly.js (about 5 MB) to the
    browser, so the panels use one only where a picture must follow typing
    (the sample size); the other pictures are :class:`FigureView`.
    """
    fw = go.FigureWidget(fig if fig is not None else go.Figure())
    return fw


class FigureView(widgets.Output):
    """A picture shown as plotly's own output type, drawn by the notebook's plotly renderer.

    Lighter than a FigureWidget (plotly.js is loaded once for the page), and
    redrawn whole by :meth:`show`. ``figure`` is the figure last shown.
    """

    def __init__(self, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.figure: go.Figure | None = None

    def show(self, fig: go.Figure) -> None:
        self.figure = fig
        spec = json.loads(fig.to_json())
        spec["config"] = {"displaylogo": False, "responsive": True}
        title = (fig.layout.title.text or "figure").split("<br>")[0]
        self.outputs = (
            {
                "output_type": "display_data",
                "data": {"application/vnd.plotly.v1+json": spec, "text/plain": f"<picture: {title}>"},
                "metadata": {},
            },
        )

    def clear(self) -> None:
        self.figure = None
        self.outputs = ()


def _same_shape(fw: go.FigureWidget, fig: go.Figure) -> bool:
    return len(fw.data) == len(fig.data) and all(a.type == b.type for a, b in zip(fw.data, fig.data))


def refresh_figure(fw: go.FigureWidget, fig: go.Figure) -> None:
    """Show ``fig`` in ``fw``, changing the traces in place when the figure has the same traces.

    In place means one ``batch_update``: the browser receives only the
    properties that changed and redraws once, instead of a new figure.
    """
    new = fig.to_plotly_json()
    layout = new["layout"]
    with fw.batch_update():
        if _same_shape(fw, fig):
            layout.pop("template", None)  # set with the first figure; the same for every redraw
            for trace, props in zip(fw.data, new["data"]):
                props = {k: v for k, v in props.items() if k not in ("type", "uid")}
                trace.update(props, overwrite=True)
        else:
            fw.data = ()
            fw.add_traces(list(fig.data))
        fw.layout.update({k: v for k, v in layout.items() if k not in ("shapes", "annotations")}, overwrite=True)
        fw.layout.shapes = layout.get("shapes", ())
        fw.layout.annotations = layout.get("annotations", ())


class Panel(widgets.VBox):
    """Base of the panels: a title, a lead sentence, a message box, and the shared state.

    Attributes
    ----------
    state:
        The :class:`~auditmean.widgets.state.EngagementState` the panel works on.
    message:
        The panel's message box (an ``ipywidgets.HTML``).
    last_error:
        The last exception a handler met (for developers; the user sees its message).
    """

    title = ""
    lead = ""

    def __init__(self, state: EngagementState | None = None, **kwargs: Any) -> None:
        self.state = state if state is not None else EngagementState()
        self.message = widgets.HTML("")
        self.message.add_class("am-message")
        self.last_error: BaseException | None = None
        self._quiet = False  # True while the panel sets its own inputs (their observers then do nothing)
        self._head = widgets.HTML(
            STYLE_SHEET
            + (f'<div class="am-title">{html.escape(self.title)}</div>' if self.title else "")
            + (f'<p class="am-lead">{html.escape(self.lead)}</p>' if self.lead else "")
        )
        super().__init__(**kwargs)
        self.add_class("am-panel")

    # ------------------------------------------------------------------ messages

    def show_error(self, exc: BaseException) -> None:
        """Show ``exc`` as a readable message in the panel (never a traceback)."""
        self.last_error = exc
        if isinstance(exc, AuditMeanError):
            text = html.escape(str(exc))
        else:
            text = (
                f"Something unexpected went wrong ({html.escape(type(exc).__name__)}: {html.escape(str(exc))}). "
                "Nothing was changed by this step; this is a fault in auditmean, please report it with "
                "what you did just before."
            )
        self.message.value = box(f"<b>This step could not be done.</b> {text}", "error")

    def show_note(self, text: str, kind: str = "note") -> None:
        """Show a plain-text note (escaped here) in the panel's message box."""
        self.message.value = box(html.escape(text), kind)

    def clear_message(self) -> None:
        self.message.value = ""

    def _guard(self, fn: Callable[..., Any], *args: Any, **kwargs: Any) -> Any:
        """Run ``fn``; any problem becomes a message in the panel. Returns fn's result or None."""
        try:
            return fn(*args, **kwargs)
        except Exception as exc:  # every failure is shown, none escapes as a traceback
            self.show_error(exc)
            return None

    def _handler(self, fn: Callable[..., Any]) -> Callable[..., None]:
        """Wrap a widget callback (``on_click``, ``observe``) so that failures become messages."""

        def run(*args: Any) -> None:
            self._guard(fn, *args)

        return run

    def _observe_state(self, fn: Callable[[StateChange], None], names: tuple[str, ...]) -> None:
        self.state.observe(self._handler(fn), names)


class Task:
    """One piece of long work, run in a thread, with a progress bar, a label and a Stop button.

    ``work(report)`` does the job; it may call ``report(done, total)`` to
    move the bar, and ``report`` returns False once Stop was pressed (the
    engine's own ``progress`` callbacks have that form). ``done(result)`` is
    called with what ``work`` returned; a failure is shown in the panel.

    Parameters
    ----------
    panel:
        The panel whose message box shows failures.
    stoppable:
        Whether to show a Stop button (only for work that checks ``report``).
    """

    def __init__(self, panel: Panel, *, stoppable: bool = False) -> None:
        self.panel = panel
        self.stoppable = stoppable
        self.bar = widgets.IntProgress(value=0, min=0, max=1, layout=widgets.Layout(width="18em"))
        self.label = widgets.HTML("")
        self.stop_button = widgets.Button(description="Stop", button_style="danger", icon="stop",
                                          layout=widgets.Layout(width="7em", display="none"))
        self.stop_button.add_class("am-stop")
        self.stop_button.on_click(lambda _b: self.stop())
        self.box = widgets.HBox([self.bar, self.stop_button, self.label],
                                layout=widgets.Layout(display="none", align_items="center"))
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None
        self._started = 0.0
        self._what = ""
        self._busy = False

    @property
    def running(self) -> bool:
        """Work is going on (False again before ``after`` runs)."""
        return self._busy

    @property
    def stopped(self) -> bool:
        """Stop was pressed during the last run."""
        return self._stop.is_set()

    def stop(self) -> None:
        """Ask the running work to stop after its current step."""
        if self.running:
            self._stop.set()
            self.label.value = html.escape(f"{self._what}: stopping after the current step...")

    def report(self, done: int, total: int) -> bool:
        """Progress callback for the engine; returns False once Stop was pressed."""
        total = max(int(total), 1)
        self.bar.max = total
        self.bar.value = min(int(done), total)
        elapsed = time.monotonic() - self._started
        self.label.value = html.escape(f"{self._what}: {int(done):,} of {total:,} done ({elapsed:,.1f} s)")
        return not self._stop.is_set()

    def start(
        self,
        what: str,
        work: Callable[[Callable[[int, int], bool]], Any],
        done: Callable[[Any], None],
        after: Callable[[], None] | None = None,
    ) -> bool:
        """Start ``work`` in a thread (refused, returning False, while another run is going).

        ``after()`` runs last, whether the work succeeded or not (to enable buttons again).
        """
        if self.running:
            self.panel.show_note("The previous run is still going; wait for it or press Stop.", "warning")
            return False
        self._stop.clear()
        self._busy = True
        self._what = what
        self._started = time.monotonic()
        self.bar.value, self.bar.max = 0, 1
        self.bar.bar_style = "info"
        self.label.value = html.escape(f"{what}...")
        self.stop_button.layout.display = "" if self.stoppable else "none"
        self.box.layout.display = "flex"

        def run() -> None:
            try:
                result = work(self.report)
                done(result)
                self.bar.value = self.bar.max
                self.bar.bar_style = "success"
                took = time.monotonic() - self._started
                word = "stopped early" if self._stop.is_set() else "done"
                self.label.value = html.escape(f"{what}: {word} in {took:,.1f} s")
            except Exception as exc:  # shown in the panel, never a traceback
                self.bar.bar_style = "danger"
                self.label.value = html.escape(f"{what}: not done")
                self.panel.show_error(exc)
            finally:
                self.stop_button.layout.display = "none"
                self._busy = False
                if after is not None:
                    self.panel._guard(after)

        self._thread = threading.Thread(target=run, name=f"auditmean: {what}", daemon=True)
        self._thread.start()
        return True

    def wait(self, timeout: float | None = None) -> None:
        """Block until the current run has finished (for scripts, notebooks and tests)."""
        if self._thread is not None:
            self._thread.join(timeout)
