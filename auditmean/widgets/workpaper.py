"""Step 8, the workpaper: the record of the work as an Excel workbook and one HTML file."""

from __future__ import annotations

import base64
import html
from pathlib import Path
from typing import Any

import ipywidgets as widgets

from auditmean.errors import InputError
from auditmean.widgets._base import Panel, Task, box
from auditmean.widgets.state import EngagementState, StateChange
from auditmean.workpaper import DEFAULT_NAMES, collect_workpaper, write_html_report, write_workbook

__all__ = ["WorkpaperPanel"]

_MIME = {
    "xlsx": "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet",
    "html": "text/html",
}


def _download_link(path: Path, kind: str) -> str:
    data = base64.b64encode(path.read_bytes()).decode("ascii")
    name = html.escape(path.name, quote=True)
    return (f'<a download="{name}" href="data:{_MIME[kind]};base64,{data}" '
            f'class="am-download am-download-{kind}">download {name}</a>')


class WorkpaperPanel(Panel):
    """Write the workpaper of the engagement: :func:`~auditmean.workpaper.write_workbook` and
    :func:`~auditmean.workpaper.write_html_report`, into the engagement folder.

    Parameters
    ----------
    state:
        The shared state; needs ``state.engagement``.
    purpose:
        Prefill the purpose of the work, in your words (default: a sentence
        built from the plan).
    """

    title = "Workpaper"
    lead = (
        "The whole job in one record a reviewer can read and re-perform: the population and its fingerprint, "
        "the strata and why the sample is that large, the seed and keys, what was found, every method's "
        "projection, every warning with its rule and source, and the step log."
    )

    def __init__(self, state: EngagementState | None = None, *, purpose: str | None = None) -> None:
        super().__init__(state)
        self.purpose = widgets.Textarea(value=purpose or "", placeholder="the purpose of the work, in your words "
                                        "(optional; default: a sentence built from the plan)",
                                        layout=widgets.Layout(width="50em", height="4em"))
        self.write_button = widgets.Button(description="Write the workbook and the HTML report",
                                           button_style="primary", icon="file", layout=widgets.Layout(width="26em"))
        self.write_button.add_class("am-write-workpaper")
        self.task = Task(self, stoppable=False)
        self.written_html = widgets.HTML("")
        self.written: dict[str, Path] = {}
        self.write_button.on_click(self._handler(lambda _b: self.write()))
        self._observe_state(self._on_state, ("engagement", "selection", "results", "evaluation"))
        self.children = [self._head, self.purpose, self.write_button, self.task.box, self.message, self.written_html]
        self._show(self.state)

    def write(self) -> None:
        """Write both files into the engagement folder, in the background (see :meth:`wait`)."""
        self.clear_message()
        eng = self.state.engagement
        if eng is None:
            raise InputError("start the engagement first (save the plan, step Sample size)", table="workpaper")
        folder = Path(eng.folder)
        population = self.state.population
        purpose = self.purpose.value.strip() or None
        self.write_button.disabled = True

        def work(report: Any) -> dict[str, Path]:
            content = collect_workpaper(folder, population=population, purpose=purpose)
            report(1, 3)
            xlsx = write_workbook(folder, folder / DEFAULT_NAMES["xlsx"], workpaper=content)
            report(2, 3)
            page = write_html_report(folder, folder / DEFAULT_NAMES["html"], workpaper=content)
            report(3, 3)
            return {"xlsx": xlsx, "html": page}

        def done(paths: dict[str, Path]) -> None:
            self.written = paths
            links = " &nbsp; ".join(_download_link(p, k) for k, p in paths.items())
            where = ", ".join(html.escape(str(p)) for p in paths.values())
            self.written_html.value = box(f"Written: {where}.<br>{links}", "note")

        self.task.start("Writing the workpaper", work, done, after=lambda: self._show(self.state))

    def wait(self, timeout: float | None = None) -> None:
        """Wait for the writing to finish."""
        self.task.wait(timeout)

    def _on_state(self, change: StateChange) -> None:
        if "engagement" in change.names:
            self.written_html.value = ""
            self.written = {}
        self._show(change.state)

    def _show(self, state: EngagementState) -> None:
        self.write_button.disabled = state.engagement is None or self.task.running
        if state.engagement is None:
            self.written_html.value = box("Start the engagement first (save the plan, step Sample size).", "warning")
