"""What a workpaper holds: everything read from one engagement folder, once.

:func:`collect` opens the engagement with its population (whose content
fingerprint must equal the recorded one), reads every record the folder
holds (plan, selection, results and their log, the saved evaluations, any
coverage check, the step log), profiles the population with
:func:`auditmean.population.profile` and, unless asked not to, re-performs
the selection from the population and the recorded seed. Both writers
(:mod:`auditmean.workpaper.workbook` and
:mod:`auditmean.workpaper.report_html`) format this record and nothing
else, so the workbook and the report always say the same thing.

Nothing here computes a number the engine computes: the numbers of the
evaluation are those of the saved evaluation record, the profile is the
engine's, and the strata and plan are those recorded in ``plan.json``. The
one figure added for reading is each examined item's difference (audited
value minus book value).

Both designs
------------
An engagement of the stratified design (``plan.json`` without ``design``,
or ``"design": "stratified"``) fills :attr:`Workpaper.plan` and
:attr:`Workpaper.strata`; the plan's coverage check, when the plan was
checked, is read from ``plan.json``'s ``"plan_check"``
(``PlanCheck.to_dict()``). An engagement of the monetary-unit design
(``"design": "monetary_unit"``) fills :attr:`Workpaper.monetary_plan`
instead (``MonetaryUnitPlan``), its items carry the draws that selected
them, and its saved evaluation is a ``"monetary_unit_evaluation"``.

The coverage check
------------------
A coverage check is kept in the engagement folder as ``coverage.json``
(:data:`COVERAGE_FILE`), holding ``CoverageResult.to_dict()`` (kind
``"coverage_check"``). Every file of the folder whose name matches
``coverage*.json`` is read, in name order, so that more than one check can
be kept side by side (e.g. ``coverage-rare-errors.json``); a file that is
not a coverage record raises :class:`~auditmean.errors.RecordError`.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from auditmean._atomic import is_temporary
from auditmean._records import SCHEMA_VERSION, RecordMixin, format_number
from auditmean._version import __version__
from auditmean.engagement import Engagement
from auditmean.errors import ParameterError, RecordError
from auditmean.plan import Plan
from auditmean.population import Population, Profile, profile
from auditmean.selection import VerificationResult
from auditmean.workflow import design_of, engagement_plan, open_engagement, verify_engagement

__all__ = ["COVERAGE_FILE", "COVERAGE_PATTERN", "Workpaper", "collect"]

#: The name under which an engagement keeps its coverage check.
COVERAGE_FILE = "coverage.json"
#: Every file matching this pattern in the engagement folder is read as a coverage check.
COVERAGE_PATTERN = "coverage*.json"


@dataclass(frozen=True, eq=False)
class Workpaper(RecordMixin):
    """The content of a workpaper, read from one engagement folder.

    Attributes
    ----------
    folder:
        The engagement folder.
    generated_at:
        When this content was read (UTC, ISO 8601).
    tool_version:
        The auditmean version reading it (``engagement["tool_version"]``
        is the one that created the engagement).
    purpose:
        The purpose of the work, as given, or a sentence built from the plan.
    engagement:
        The content of ``engagement.json``.
    population, population_profile:
        The population read again from its file, and its profile.
    reading:
        How the population file is read (``plan.json``'s ``population_reading``).
    strata:
        The strata record of ``plan.json`` (``Strata.to_dict()``); empty for
        the monetary-unit design.
    plan:
        The saved stratified plan; None for the monetary-unit design.
    selection:
        The content of ``selection.json``, or None before a selection.
    items:
        One row per selected item, in stratum order then selection order:
        ``order``, ``item_id``, ``stratum``, ``key``, ``book_value``,
        ``audited_value`` (NaN until entered), ``difference`` (audited
        minus book), ``note``, ``entered_by``, ``entered_at``, ``source``,
        ``entries``. For the monetary-unit design, in item-id order (the
        order of the cumulative book value), with ``hits``,
        ``examined_in_full``, ``units``, ``unit_from`` and ``unit_to`` in
        place of ``key`` and ``stratum`` holding ``"in full"`` or
        ``"by units"``. None before a selection.
    entries:
        Every results entry ever made (the results log), oldest first.
    verification:
        The selection re-performed now from the population and the seed,
        or None (no selection, or not asked for).
    evaluation_file:
        The saved evaluation used (file name in ``evaluations/``), or None.
    saved_evaluation:
        That file's content (the evaluation under ``"evaluation"``), or None.
    evaluation_files:
        The names of every saved evaluation, oldest first.
    coverage:
        ``(file name, CoverageResult.to_dict())`` for each coverage check found.
    log:
        The step log, oldest first.
    notes:
        Sentences a reader must see: an evaluation older than the current
        results or selection, items without an audited value, a selection
        that does not re-perform.
    design:
        ``"stratified"`` or ``"monetary_unit"`` (``plan.json``).
    monetary_plan:
        The saved ``MonetaryUnitPlan`` of the monetary-unit design, else None.
    plan_check:
        ``PlanCheck.to_dict()`` as saved in ``plan.json`` under
        ``"plan_check"`` (the coverage check run on the proposed plan), or
        None when the plan was not checked.
    """

    record_kind = "workpaper"

    folder: str
    generated_at: str
    tool_version: str
    purpose: str
    engagement: dict[str, Any]
    population: Population = field(repr=False)
    population_profile: Profile = field(repr=False)
    reading: dict[str, Any]
    strata: dict[str, Any]
    plan: Plan | None = field(repr=False)
    selection: dict[str, Any] | None = field(repr=False)
    items: pd.DataFrame | None = field(repr=False)
    entries: pd.DataFrame = field(repr=False)
    verification: VerificationResult | None
    evaluation_file: str | None
    saved_evaluation: dict[str, Any] | None = field(repr=False)
    evaluation_files: tuple[str, ...]
    coverage: tuple[tuple[str, dict[str, Any]], ...] = field(repr=False)
    log: tuple[dict[str, Any], ...] = field(repr=False)
    notes: tuple[str, ...] = ()
    design: str = "stratified"
    monetary_plan: Any = field(default=None, repr=False)
    plan_check: dict[str, Any] | None = field(default=None, repr=False)

    @property
    def monetary(self) -> bool:
        """True for an engagement of the monetary-unit design."""
        return self.design == "monetary_unit"

    @property
    def evaluation(self) -> dict[str, Any] | None:
        """The evaluation itself (``Evaluation.to_dict()`` as saved), or None."""
        return None if self.saved_evaluation is None else self.saved_evaluation["evaluation"]

    @property
    def seed(self) -> str | None:
        return None if self.selection is None else self.selection["seed"]

    def to_dict(self) -> dict[str, Any]:
        """What the workpaper was made from, in short (the records themselves stay in the folder)."""
        return {
            "schema_version": SCHEMA_VERSION,
            "kind": self.record_kind,
            "folder": self.folder,
            "design": self.design,
            "generated_at": self.generated_at,
            "tool_version": self.tool_version,
            "purpose": self.purpose,
            "population": self.engagement.get("population"),
            "seed": self.seed,
            "items_selected": None if self.items is None else len(self.items),
            "evaluation_file": self.evaluation_file,
            "coverage_files": [name for name, _ in self.coverage],
            "plan_checked": self.plan_check is not None,
            "selection_matches": None if self.verification is None else bool(self.verification.match),
            "notes": list(self.notes),
        }

    def summary(self) -> str:
        ev = self.evaluation
        if self.monetary:
            mp = self.monetary_plan
            plan_line = (f"Plan (monetary-unit design): {mp.sample_size:,} monetary units, sampling interval "
                         f"{format_number(mp.interval)}")
            relied = None if ev is None else ev.get("relied_on")
        else:
            plan_line = f"Plan: {self.plan.total_size:,} items for {self.plan.method} estimation"
            relied = None if ev is None else ev.get("primary")
        lines = [
            f"Workpaper of the engagement in {self.folder}",
            f"Population {self.population.source}: {self.population.count:,} items, book total "
            f"{format_number(self.population.total)}, content SHA-256 {self.population.content_sha256}",
            plan_line,
            "Selection: " + ("none yet" if self.selection is None else f"{len(self.items):,} items, seed {self.seed!r}"),
            "Evaluation: " + ("none saved" if ev is None else f"{self.evaluation_file} ({relied} relied on)"),
        ]
        if not self.monetary:
            lines.append(f"Coverage checks: {len(self.coverage)}")
            if self.plan_check is not None:
                lines.append(f"Plan check: {self.plan_check.get('line', '')}")
        lines += [f"Note: {n}" for n in self.notes]
        return "\n".join(lines)


def _default_purpose(plan: Plan, population: Population) -> str:
    rir = (
        ""
        if plan.risk_incorrect_rejection is None
        else f" and a risk of incorrect rejection of {plan.risk_incorrect_rejection:.0%}"
    )
    return (
        f"To estimate by classical variables sampling the audited total of the {population.count:,} items "
        f"of {population.source} (book total {format_number(population.total)}), and to judge whether the "
        f"book value is misstated by more than the tolerable misstatement of {format_number(plan.tolerable)}, "
        f"at a risk of incorrect acceptance of {plan.risk_incorrect_acceptance:.0%}{rir}."
    )


def _default_monetary_purpose(plan: Any, population: Population) -> str:
    return (
        f"To test, by selecting monetary units (each item's chance of selection in proportion to its book "
        f"value), whether the positive book value of the {population.count:,} items of {population.source} "
        f"({format_number(plan.book_total)} in {plan.positive_items:,} items) is overstated by more than the "
        f"tolerable misstatement of {format_number(plan.tolerable)}, at a risk of incorrect acceptance of "
        f"{plan.risk_incorrect_acceptance:.0%}. Credits and zero balances are kept apart and counted; this "
        "sample does not cover them."
    )


def _read_coverage(path: Path) -> dict[str, Any]:
    try:
        data = json.loads(path.read_bytes().decode("utf-8"))
    except OSError as exc:
        raise RecordError(str(path), f"cannot be read ({exc.strerror})") from None
    except UnicodeDecodeError as exc:
        raise RecordError(str(path), f"is not UTF-8 text (byte {exc.start})") from None
    except json.JSONDecodeError as exc:
        raise RecordError(str(path), f"is not valid JSON (line {exc.lineno}, column {exc.colno}: {exc.msg})") from None
    kinds = {"coverage_check": ("by_estimator", "strata"), "monetary_unit_coverage_check": ("by_bound",)}
    if not isinstance(data, dict) or data.get("kind") not in kinds:
        raise RecordError(
            str(path),
            "is not a coverage check (a JSON object of kind 'coverage_check', CoverageResult.to_dict(), or "
            "'monetary_unit_coverage_check', MonetaryUnitCoverage.to_dict()); "
            f"rename or remove it: every {COVERAGE_PATTERN} file in the engagement folder is read as one",
        )
    for key in kinds[data["kind"]]:
        if not isinstance(data.get(key), list):
            raise RecordError(str(path), f"has no table {key!r}; not a complete coverage check")
    return data


def _pick_evaluation(eng: Engagement, evaluations: list[dict[str, Any]], evaluation: str | os.PathLike[str] | None):
    if not evaluations:
        if evaluation is not None:
            raise RecordError(str(Path(eng.folder) / "evaluations"), "no evaluation has been saved in this engagement")
        return None
    if evaluation is None:
        return evaluations[-1]
    name = Path(evaluation).name
    for e in evaluations:
        if e["file"] == name:
            return e
    raise ParameterError(
        "evaluation",
        f"no saved evaluation named {name!r} in {Path(eng.folder) / 'evaluations'}; the saved ones are "
        + ", ".join(repr(e["file"]) for e in evaluations),
    )


def _monetary_items_table(selection: pd.DataFrame, current: pd.DataFrame) -> pd.DataFrame:
    """The monetary-unit selection in item-id order (as recorded) with the current audited values."""
    sel = selection[["item_id", "stratum", "book_value", "hits", "examined_in_full", "units", "unit_from",
                     "unit_to"]].copy().reset_index(drop=True)
    sel.insert(0, "order", np.arange(1, len(sel) + 1, dtype=np.int64))
    cur = current.set_index("item_id")
    sel["audited_value"] = sel["item_id"].map(cur["audited_value"]).astype(float)
    sel["difference"] = sel["audited_value"] - sel["book_value"]
    for col in ("note", "entered_by", "entered_at", "source"):
        s = sel["item_id"].map(cur[col]).astype(object)
        sel[col] = s.where(s.notna(), None)
    sel["entries"] = sel["item_id"].map(cur["entries"]).fillna(0).astype(np.int64)
    return sel


def _items_table(plan: Plan, selection: pd.DataFrame, population: Population, current: pd.DataFrame) -> pd.DataFrame:
    book = population.items.set_index("item_id")["book_value"]
    sel = selection[["order", "item_id", "stratum", "key"]].copy()
    sel["stratum"] = sel["stratum"].map(str)
    rank = {str(s): i for i, s in enumerate(plan.table["stratum"])}
    sel["_rank"] = sel["stratum"].map(rank).fillna(len(rank)).astype(int)
    sel = sel.sort_values(["_rank", "order"], kind="stable").drop(columns="_rank").reset_index(drop=True)
    sel["book_value"] = sel["item_id"].map(book).astype(float)
    cur = current.set_index("item_id")
    sel["audited_value"] = sel["item_id"].map(cur["audited_value"]).astype(float)
    sel["difference"] = sel["audited_value"] - sel["book_value"]
    for col in ("note", "entered_by", "entered_at", "source"):
        s = sel["item_id"].map(cur[col]).astype(object)
        sel[col] = s.where(s.notna(), None)
    sel["entries"] = sel["item_id"].map(cur["entries"]).fillna(0).astype(np.int64)
    return sel


def _latest_entry_time(entries: pd.DataFrame) -> str | None:
    if entries.empty:
        return None
    return max(str(t) for t in entries["entered_at"])


def _parse_time(text: str) -> datetime | None:
    try:
        t = datetime.fromisoformat(text)
    except (TypeError, ValueError):
        return None
    return t if t.tzinfo is not None else t.replace(tzinfo=timezone.utc)


def _staleness(saved: dict[str, Any] | None, selection: dict[str, Any] | None, items, entries) -> list[str]:
    notes: list[str] = []
    if selection is not None and items is not None:
        missing = int(items["audited_value"].isna().sum())
        if missing:
            notes.append(f"{missing:,} of the {len(items):,} selected items have no audited value entered yet.")
    if saved is None:
        return notes
    ev = saved["evaluation"]
    if selection is not None:
        if saved.get("selection_saved_at") != selection.get("saved_at"):
            notes.append(
                "The selection was saved again (extended) after this evaluation: evaluate again before relying on it."
            )
        evaluated = _parse_time(saved.get("saved_at", ""))
        last = _latest_entry_time(entries)
        last_t = _parse_time(last) if last else None
        if evaluated is not None and last_t is not None and last_t > evaluated:
            notes.append(
                f"Results were entered after this evaluation was saved (last entry {last}): evaluate again "
                "before relying on it."
            )
    missing_items = ev.get("missing_items") or []
    if missing_items:
        notes.append(
            f"{len(missing_items):,} selected items had no audited value when this evaluation was made; they were "
            f"treated as {ev.get('missing_treatment')!r}."
        )
    return notes


def collect(
    folder: str | os.PathLike[str],
    *,
    population: Population | None = None,
    evaluation: str | os.PathLike[str] | None = None,
    purpose: str | None = None,
    reperform: bool = True,
) -> Workpaper:
    """Read everything a workpaper shows from an engagement folder.

    Parameters
    ----------
    folder:
        The engagement folder.
    population:
        The population, if already loaded; by default it is read again from
        the file recorded in ``plan.json``. Either way its content
        fingerprint must equal the recorded one.
    evaluation:
        The saved evaluation to report (its file name in ``evaluations/``);
        default the latest.
    purpose:
        The purpose of the work in the user's words; default a sentence
        built from the plan.
    reperform:
        Re-perform the selection from the population and the recorded seed
        and report whether it matches (default True).

    Returns
    -------
    Workpaper

    Raises
    ------
    RecordError
        The folder is not an engagement, has no plan, a record is corrupt,
        the population file is missing or has changed, or a
        ``coverage*.json`` file is not a coverage check.
    ParameterError
        ``evaluation`` names no saved evaluation.
    """
    if purpose is not None and not isinstance(purpose, str):
        raise ParameterError("purpose", f"must be text or None, got {type(purpose).__name__}")
    eng, pop = open_engagement(folder, population)
    design = design_of(eng)
    if design == "monetary_unit":
        from auditmean.monetary_engagement import monetary_unit_plan

        plan, monetary_plan = None, monetary_unit_plan(eng)
    else:
        plan, monetary_plan = engagement_plan(eng), None
    rec = eng.plan() or {}
    plan_check = rec.get("plan_check")
    if plan_check is not None and not (isinstance(plan_check, dict) and plan_check.get("kind") == "plan_check"):
        raise RecordError(
            str(Path(eng.folder) / "plan.json"),
            "holds a 'plan_check' entry that is not a plan check (PlanCheck.to_dict(), kind 'plan_check')",
        )
    selection_rec = eng.selection_record()
    selection = eng.selection()
    if selection is not None:
        results = eng.results()
        if monetary_plan is not None:
            items = _monetary_items_table(selection, results.current)
        else:
            items = _items_table(plan, selection, pop, results.current)
        entries = results.log.copy()
    else:
        items = None
        entries = pd.DataFrame()
    verification = verify_engagement(eng, pop) if (reperform and selection is not None) else None
    evaluations = eng.evaluations()
    saved = _pick_evaluation(eng, evaluations, evaluation)
    coverage = tuple(
        (p.name, _read_coverage(p))
        for p in sorted(Path(eng.folder).glob(COVERAGE_PATTERN))
        if p.is_file() and not is_temporary(p)
    )
    notes = _staleness(saved, selection_rec, items, entries)
    if verification is not None and not verification.match:
        notes.insert(0, "The selection does NOT re-perform from the population and the recorded seed: "
                        f"{len(verification.differences):,} differences (see Re-performance).")
    given = purpose.strip() if isinstance(purpose, str) and purpose.strip() else None
    default = _default_monetary_purpose(monetary_plan, pop) if monetary_plan is not None else _default_purpose(plan, pop)
    return Workpaper(
        folder=str(eng.folder),
        generated_at=datetime.now(timezone.utc).isoformat(timespec="seconds"),
        tool_version=__version__,
        purpose=given or default,
        engagement=eng.info,
        population=pop,
        population_profile=profile(pop),
        reading=dict(rec.get("population_reading") or {}),
        strata=dict(rec.get("strata") or {}),
        plan=plan,
        selection=selection_rec,
        items=items,
        entries=entries,
        verification=verification,
        evaluation_file=None if saved is None else saved["file"],
        saved_evaluation=saved,
        evaluation_files=tuple(e["file"] for e in evaluations),
        coverage=coverage,
        log=tuple(eng.log()),
        notes=tuple(notes),
        design=design,
        monetary_plan=monetary_plan,
        plan_check=plan_check,
    )

