"""The workpaper: a record of the sampling work that a reviewer can read and re-perform.

:func:`write_workbook` writes an Excel workbook and :func:`write_html_report`
one self-contained HTML file (interactive pictures, works offline, prints
cleanly) from an engagement folder. Both show the same content, read once
by :func:`collect_workpaper`: the purpose; the population and its
fingerprint; how it was stratified and why the sample is that large; how it
was selected (seed and keys); what was found; how it was projected by every
estimator and what the sample supports; every warning with its rule and
source; the coverage check when one is recorded (``coverage.json`` in the
folder, holding ``CoverageResult.to_dict()``); every formula with its
published source; how to re-perform the selection and the evaluation; and
the step log. The cautions and the warnings raised for the relied-on method
come first. The conclusion says what the verdict rests on (the normal limit,
or, where warnings fired, the finite-sample bound with its assumptions,
guarantee and per-stratum table, the normal limits then for information
only), and the plan's own coverage check (``plan.json``'s ``"plan_check"``)
is shown beside the risk it states, with the monetary-unit design for the
same risk.

An engagement of the monetary-unit design gets the sheets of
:data:`MONETARY_SHEET_NAMES` instead: the plan (sample size from the
confidence factors, interval, items examined in full, credits and zero
balances kept apart and counted), the draws that selected each item and the
rule to re-perform them by hand, what was found, and every bound (Stringer,
error count, betting, the combined one) with its assumptions and guarantee,
the relied-on one marked.

Example
-------
>>> from auditmean.workpaper import write_workbook, write_html_report   # doctest: +SKIP
>>> write_workbook("engagements/receivables-2024", "receivables.xlsx")    # doctest: +SKIP
>>> write_html_report("engagements/receivables-2024", "receivables.html") # doctest: +SKIP
"""

from __future__ import annotations

import os
from pathlib import Path

from auditmean.errors import ParameterError
from auditmean.population import Population
from auditmean.workpaper._content import COVERAGE_FILE, Workpaper, collect
from auditmean.workpaper._monetary_sheets import MONETARY_SHEET_NAMES
from auditmean.workpaper._sheets import SHEET_NAMES
from auditmean.workpaper.report_html import report_html, save_html
from auditmean.workpaper.workbook import save_workbook

__all__ = [
    "COVERAGE_FILE",
    "DEFAULT_NAMES",
    "SHEET_NAMES",
    "MONETARY_SHEET_NAMES",
    "Workpaper",
    "collect_workpaper",
    "write_workbook",
    "write_html_report",
    "report_html",
]

#: The files ``auditmean report`` and ``auditmean demo`` write into the engagement folder.
DEFAULT_NAMES = {"xlsx": "workpaper.xlsx", "html": "workpaper.html"}


def collect_workpaper(
    engagement_folder: str | os.PathLike[str],
    *,
    population: Population | None = None,
    evaluation: str | os.PathLike[str] | None = None,
    purpose: str | None = None,
    reperform: bool = True,
) -> Workpaper:
    """Read what the workpaper shows from an engagement folder (see :func:`auditmean.workpaper._content.collect`).

    Pass the result as ``workpaper=`` to both writers to read the folder once.
    """
    return collect(engagement_folder, population=population, evaluation=evaluation, purpose=purpose, reperform=reperform)


def _target(path: str | os.PathLike[str] | None, folder: str | os.PathLike[str], kind: str) -> Path:
    target = Path(folder) / DEFAULT_NAMES[kind] if path is None else Path(path)
    if target.exists() and target.is_dir():
        raise ParameterError("path", f"{str(target)!r} is a folder; give a file name ending in .{kind}")
    if not target.parent.exists():
        raise ParameterError("path", f"the folder {str(target.parent)!r} does not exist; create it first")
    return target


def _content(engagement_folder, workpaper, population, evaluation, purpose, reperform) -> Workpaper:
    if workpaper is not None:
        if not isinstance(workpaper, Workpaper):
            raise ParameterError("workpaper", f"must be the result of collect_workpaper, got {type(workpaper).__name__}")
        if Path(workpaper.folder).resolve() != Path(engagement_folder).resolve():
            raise ParameterError(
                "workpaper", f"was read from {workpaper.folder!r}, not from {str(engagement_folder)!r}"
            )
        return workpaper
    return collect(engagement_folder, population=population, evaluation=evaluation, purpose=purpose, reperform=reperform)


def write_workbook(
    engagement_folder: str | os.PathLike[str],
    path: str | os.PathLike[str] | None = None,
    *,
    population: Population | None = None,
    evaluation: str | os.PathLike[str] | None = None,
    purpose: str | None = None,
    reperform: bool = True,
    workpaper: Workpaper | None = None,
) -> Path:
    """Write the workpaper of an engagement as an Excel workbook.

    Parameters
    ----------
    engagement_folder:
        The engagement folder.
    path:
        The ``.xlsx`` file to write (replaced atomically if it exists);
        default ``workpaper.xlsx`` in the engagement folder.
    population:
        The population, if already loaded (default: read again from the
        recorded file; its content fingerprint must match either way).
    evaluation:
        Which saved evaluation to report (file name in ``evaluations/``);
        default the latest.
    purpose:
        The purpose of the work in your words (default: a sentence built
        from the plan).
    reperform:
        Re-perform the selection and say whether it matches (default True).
    workpaper:
        The content already read by :func:`collect_workpaper` (then the
        other reading options are not used).

    Returns
    -------
    pathlib.Path
        The file written.

    Raises
    ------
    RecordError
        A record of the engagement is missing, corrupt or does not match its population.
    ParameterError
        ``path`` is in a folder that does not exist, or ``evaluation`` names no saved evaluation.
    """
    target = _target(path, engagement_folder, "xlsx")
    wp = _content(engagement_folder, workpaper, population, evaluation, purpose, reperform)
    return save_workbook(wp, target)


def write_html_report(
    engagement_folder: str | os.PathLike[str],
    path: str | os.PathLike[str] | None = None,
    *,
    population: Population | None = None,
    evaluation: str | os.PathLike[str] | None = None,
    purpose: str | None = None,
    reperform: bool = True,
    workpaper: Workpaper | None = None,
) -> Path:
    """Write the workpaper of an engagement as one self-contained HTML file.

    The parameters are those of :func:`write_workbook`; the default file is
    ``workpaper.html`` in the engagement folder. The file embeds plotly.js
    (about 4.8 MB) once and fetches nothing when opened.
    """
    target = _target(path, engagement_folder, "html")
    wp = _content(engagement_folder, workpaper, population, evaluation, purpose, reperform)
    return save_html(wp, target)
