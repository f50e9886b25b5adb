"""The sheets of a workpaper, built from a :class:`~auditmean.workpaper._content.Workpaper`.

Every sheet is a list of blocks (:mod:`auditmean.workpaper._document`)
that both writers render, so the workbook and the HTML report show the same
numbers and words. The numbers are the engine's, as recorded; nothing here
computes one (counts of warnings by code excepted).
"""

from __future__ import annotations

import json
import shlex
from collections import Counter
from typing import Any

from auditmean.cautions import CAUTIONS
from auditmean.core.bootstrap import seed_to_int
from auditmean.core.estimators import METHOD_NAMES
from auditmean.core.flags import FLAG_CODES
from auditmean.evaluation.conclusion import BASIS_NORMAL
from auditmean.workpaper._content import COVERAGE_FILE, Workpaper
from auditmean.workpaper._document import (
    Column,
    Fields,
    Figure,
    Heading,
    Paragraph,
    Sheet,
    Table,
    is_number,
)
from auditmean.workpaper._methods import methods_for, used_here

__all__ = ["SHEET_NAMES", "build_sheets", "flag_counts", "method_name"]

#: The sheets, in order (the coverage sheet is always there; it says when no check is recorded).
SHEET_NAMES = (
    "Summary",
    "Population",
    "Strata and sizes",
    "Selection",
    "Results",
    "Entries",
    "Evaluation",
    "Warnings",
    "Coverage check",
    "Methods",
    "Re-performance",
    "Log",
)


def method_name(m: str) -> str:
    return METHOD_NAMES.get(m, m)


def _ev(wp: Workpaper) -> dict[str, Any] | None:
    return wp.evaluation


def _primary_flags(wp: Workpaper) -> list[dict[str, Any]]:
    ev = _ev(wp)
    if ev is None:
        return []
    return list(ev["estimates"][ev["primary"]].get("flags") or [])


def flag_counts(wp: Workpaper) -> list[tuple[str, str, int]]:
    """``(code, meaning, count)`` of the warnings raised for the relied-on method, in the order of :data:`FLAG_CODES`."""
    counts = Counter(f["code"] for f in _primary_flags(wp))
    known = [c for c in FLAG_CODES if c in counts]
    other = sorted(c for c in counts if c not in FLAG_CODES)
    return [(c, FLAG_CODES.get(c, ""), counts[c]) for c in known + other]


def _q(text: str) -> str:
    return shlex.quote(str(text))


# --------------------------------------------------------------------------- summary


def _summary(wp: Workpaper) -> Sheet:
    ev = _ev(wp)
    plan = wp.plan
    blocks: list[Any] = [Heading("Cautions")]
    blocks += [Paragraph(c, "caution") for c in CAUTIONS]
    if wp.notes:
        blocks.append(Heading("Read first"))
        blocks += [Paragraph(n, "note") for n in wp.notes]
    blocks.append(Heading("Warnings raised"))
    if ev is None:
        blocks.append(Paragraph("No evaluation has been saved yet, so no warning about the estimate has been raised."))
    else:
        counts = flag_counts(wp)
        total = sum(c for _, _, c in counts)
        name = method_name(ev["primary"])
        if counts:
            basis = ev["conclusions"][ev["primary"]].get("basis")
            rests = (
                f" Because of them the verdict rests on the {basis}, not on the normal limit."
                if basis is not None and basis != BASIS_NORMAL else ""
            )
            blocks.append(
                Paragraph(
                    f"{total} warning{'s' if total != 1 else ''} raised for the relied-on method, {name}; "
                    f"each is listed with its rule, source and advice under Warnings.{rests}"
                )
            )
            blocks.append(
                Table(
                    (Column("code", "code"), Column("what it means", wide=True), Column("times raised", "int")),
                    tuple(counts),
                    caption="Warnings for the relied-on method, by code",
                )
            )
        else:
            blocks.append(Paragraph(f"No warning was raised for the relied-on method, {name}."))
    if plan.checks:
        blocks.append(
            Paragraph(
                f"Planning raised {len(plan.checks)} check{'s' if len(plan.checks) != 1 else ''} of the normal "
                "approximation on the book values (listed under Warnings)."
            )
        )
    blocks += [Heading("Purpose"), Paragraph(wp.purpose)]
    blocks.append(Heading("Conclusion"))
    if ev is None:
        blocks.append(Paragraph("No evaluation has been saved yet: record the audited values and evaluate."))
    else:
        c = ev["conclusions"][ev["primary"]]
        blocks.append(Paragraph(c["wording"]))
        blocks.append(Fields(_conclusion_fields(wp, ev, c)))
        if c.get("basis") not in (None, BASIS_NORMAL):
            blocks.append(Heading("The finite-sample bound the verdict rests on"))
            blocks += _bound_blocks(ev)
    if wp.plan_check is not None:
        blocks.append(Heading("Does the plan reach its stated risk?"))
        blocks += _plan_check_blocks(wp.plan_check, short=True)
    blocks += [Heading("Population"), Fields(_population_fields(wp))]
    rir = plan.risk_incorrect_rejection
    params: list[tuple[str, Any, str]] = [
        ("tolerable misstatement", plan.tolerable, "money"),
        ("expected misstatement", plan.expected, "money"),
        ("risk of incorrect acceptance", plan.risk_incorrect_acceptance, "pct"),
        ("risk of incorrect rejection", rir if rir is not None else "not used", "pct"),
        ("estimation method planned", method_name(plan.method), "text"),
        ("stratification rule", str(wp.strata.get("method", "")), "text"),
        ("strata", len(plan.table), "int"),
        ("top cutoff (examined in full from)", wp.strata.get("top_cutoff"), "money"),
        ("allocation", plan.allocation, "text"),
        ("sample size", plan.total_size, "int"),
        ("selection seed", wp.seed if wp.seed is not None else "no selection yet", "code"),
    ]
    if ev is not None:
        params.append(("second-opinion bootstrap seed", str(ev.get("bootstrap_seed")), "code"))
    blocks += [Heading("Parameters"), Fields(tuple(params))]
    if wp.coverage:
        blocks.append(Heading("Coverage check"))
        for name, cov in wp.coverage:
            blocks.append(Paragraph(_coverage_headline(name, cov)))
    blocks += _this_workpaper(wp)
    return Sheet("Summary", "summary", "Sampling workpaper", tuple(blocks))


def _this_workpaper(wp: Workpaper, design: tuple[tuple[str, Any, str], ...] = ()) -> list[Any]:
    """The summary's closing fields of either design: the folder, ``design`` (if any), who
    created the engagement and when, and which version wrote this workpaper."""
    info = wp.engagement
    return [
        Heading("This workpaper"),
        Fields(
            (
                ("engagement folder", wp.folder, "code"),
                *design,
                ("engagement created", info.get("created"), "text"),
                ("created by", info.get("created_by"), "text"),
                ("auditmean version that created it", info.get("tool_version"), "text"),
                ("workpaper written", wp.generated_at, "text"),
                ("auditmean version writing it", wp.tool_version, "text"),
            )
        ),
    ]


def _conclusion_fields(wp: Workpaper, ev: dict[str, Any], c: dict[str, Any]) -> tuple[tuple[str, Any, str], ...]:
    """What the relied-on verdict says, what it rests on, and the normal limits (for information where so)."""
    basis = c.get("basis")
    info = " (for information only)" if basis not in (None, BASIS_NORMAL) else ""
    bound = ev.get("overstatement_bound") or None
    relied = c.get("relied_upper_limit")
    rows: list[tuple[str, Any, str]] = [
        ("relied-on method", method_name(ev["primary"]), "text"),
        ("what the sample supports", c["verdict"], "text"),
    ]
    if basis is not None:
        rows += [
            ("the verdict rests on", basis, "text"),
            ("upper limit of overstatement relied on",
             relied if is_number(relied) else "none: no limit that holds could be formed", "money"),
        ]
    rows += [
        ("tolerable misstatement", ev["tolerable"], "money"),
        ("projected misstatement", c["projected_misstatement"], "money"),
        (f"upper misstatement limit, normal approximation{info}", c["upper_limit"], "money"),
        (f"lower misstatement limit, normal approximation{info}", c["lower_limit"], "money"),
    ]
    if bound is not None:
        rows.append(("finite-sample upper bound of overstatement", bound.get("upper"), "money"))
    elif basis is not None and ev.get("bound_note"):
        rows.append(("finite-sample upper bound of overstatement", ev["bound_note"], "text"))
    rows += [
        ("second-opinion upper limit (for information only)", c.get("second_opinion_upper"), "money"),
        ("second-opinion lower limit (for information only)", c.get("second_opinion_lower"), "money"),
        ("evaluation record", f"evaluations/{wp.evaluation_file}", "code"),
    ]
    return tuple(rows)


#: How the fields of the finite-sample bound's record are shown (label, format); others by their name.
_BOUND_FIELDS = {
    "upper": ("upper bound of overstatement", "money"),
    "method": ("how it is formed", "text"),
    "confidence": ("confidence", "pct"),
    "projected": ("projected misstatement (difference estimation, for orientation only)", "money"),
    "book_total": ("book total", "money"),
    "sample_size": ("items examined", "int"),
    "population_count": ("items in the strata", "int"),
    "bet": ("fraction of capital bet on each draw", "num2"),
    "zero_error_upper": ("the bound this sample would give had no overstatement been found", "money"),
    "monetary_unit_zero_error_upper": (
        "what a monetary-unit sample of as many draws would give with no misstatement found", "money"),
}
#: Plain words for the methods of the finite-sample bound.
_BOUND_METHODS = {
    "stratified_betting": "a betting test in each stratum (sampling without replacement), combined across the "
                          "strata by a union-intersection test (stratified_betting)",
}
_BOUND_SKIP = ("schema_version", "kind", "by_stratum", "assumptions", "guarantee", "notes", "summary")


def _record_fields(rec: dict[str, Any], known: dict[str, tuple[str, str]], skip: tuple[str, ...]) -> tuple:
    """Label, value and format of a record's scalar fields, known ones first under their labels."""
    rows: list[tuple[str, Any, str]] = []
    for key, (label, fmt) in known.items():
        if rec.get(key) is not None:
            rows.append((label, rec[key], fmt))
    for key, value in rec.items():
        if key in known or key in skip or isinstance(value, (list, dict)) or value is None:
            continue
        rows.append((key.replace("_", " "), value, _guess_fmt(key, [value])))
    return tuple(rows)


def _bound_blocks(ev: dict[str, Any]) -> list[Any]:
    """The finite-sample bound of a stratified evaluation: upper, guarantee, assumptions, per-stratum table."""
    bound = ev.get("overstatement_bound") or None
    if bound is None:
        note = ev.get("bound_note") or "not formed (the evaluation record does not say why)"
        return [Paragraph(f"The finite-sample bound: {note}.", "note")]
    fields = tuple(
        (label, _BOUND_METHODS.get(value, value), fmt) if label == _BOUND_FIELDS["method"][0] else (label, value, fmt)
        for label, value, fmt in _record_fields(bound, _BOUND_FIELDS, _BOUND_SKIP)
    )
    blocks: list[Any] = [Fields(fields)]
    if bound.get("guarantee"):
        blocks.append(Paragraph(f"What it guarantees: {bound['guarantee']}"))
    for a in bound.get("assumptions") or ():
        blocks.append(Paragraph(f"Assumption: {a}"))
    rows = [r for r in bound.get("by_stratum") or () if isinstance(r, dict)]
    if rows:
        blocks.append(_generic_table(rows, "The finite-sample bound by stratum"))
    blocks += [Paragraph(str(n), "note") for n in bound.get("notes") or ()]
    return blocks


def _plan_check_blocks(pc: dict[str, Any], *, short: bool = False) -> list[Any]:
    """The plan's coverage check (``PlanCheck.to_dict()``): its sentence, the risks, the monetary-unit design."""
    misses = bool(pc.get("misses"))
    blocks: list[Any] = [Paragraph(str(pc.get("line", "")), "note" if misses else "text")]
    default = " (the stated low-error default)" if pc.get("model_is_default") else ""
    rows: list[tuple[str, Any, str]] = [
        ("estimation method planned", method_name(str(pc.get("method"))), "text"),
        ("risk of incorrect acceptance, planned", pc.get("planned_risk"), "pct"),
        ("risk of incorrect acceptance, simulated (normal limit)", pc.get("simulated_risk"), "pct"),
        ("  its Monte Carlo standard error", pc.get("simulated_risk_mc_se"), "pct"),
    ]
    if pc.get("bound_risk") is not None:
        rows += [
            ("risk of incorrect acceptance, simulated (finite-sample bound)", pc.get("bound_risk"), "pct"),
            ("  its Monte Carlo standard error", pc.get("bound_risk_mc_se"), "pct"),
        ]
    rows += [
        ("the plan misses its stated risk (by more than two standard errors)", misses, "text"),
        ("items the stratified plan examines", pc.get("total_size"), "int"),
    ]
    if pc.get("monetary_unit_size") is not None:
        rows += [
            ("monetary-unit design for the same risk: monetary units to draw", pc.get("monetary_unit_size"), "int"),
            ("  its sampling interval", pc.get("monetary_unit_interval"), "money"),
            ("  its upper limit of overstatement if no misstatement is found",
             pc.get("monetary_unit_zero_error_bound"), "money"),
            ("  positive book total it draws from", pc.get("positive_book_total"), "money"),
        ]
    else:
        rows.append(("monetary-unit design for the same risk", "could not be formed for these parameters", "text"))
    if not short:
        rows += [
            ("misstatement pattern simulated", f"{pc.get('model', '')}{default}", "text"),
            ("samples simulated", pc.get("replications"), "int"),
            ("seed of the simulation", str(pc.get("seed")), "code"),
        ]
    blocks.append(Fields(tuple(r for r in rows if r[1] is not None)))
    if short:
        blocks.append(Paragraph(
            f"Simulated {int(pc.get('replications') or 0):,} times under: {pc.get('model', '')}{default}. "
            "The details are under Strata and sizes."
        ))
    return blocks


def _population_fields(wp: Workpaper) -> tuple[tuple[str, Any, str], ...]:
    pop = wp.population
    fp = wp.engagement.get("population", {})
    return (
        ("population file", pop.source, "code"),
        ("items", pop.count, "int"),
        ("book value total", pop.total, "money"),
        ("item id column", pop.id_column, "text"),
        ("book value column", pop.value_column, "text"),
        ("preassigned stratum column", pop.stratum_column or "none", "text"),
        ("file SHA-256", pop.file_sha256 or "(not read from a file)", "code"),
        ("content SHA-256", pop.content_sha256, "code"),
        ("content SHA-256 recorded at the start", fp.get("content_sha256"), "code"),
    )


# --------------------------------------------------------------------------- population


def _population(wp: Workpaper) -> Sheet:
    p = wp.population_profile
    names = {0.0: "0% (smallest)", 0.5: "50% (median)", 1.0: "100% (largest)"}
    blocks: list[Any] = [
        Fields(_population_fields(wp)),
        Heading("Profile of book values"),
        Fields(
            (
                ("items", p.count, "int"),
                ("total", p.total, "money"),
                ("mean", p.mean, "money"),
                ("standard deviation", p.std_dev, "money"),
                ("skewness (G1)", p.skewness, "num3"),
                ("share of the positive total in the largest 1% of positive items", p.top_1pct_share, "pct"),
                ("share of the positive total in the largest 5% of positive items", p.top_5pct_share, "pct"),
            )
        ),
        Table(
            (Column("quantile"), Column("book value", "money")),
            tuple((names.get(float(q), f"{float(q) * 100:g}%"), v) for q, v in p.quantiles.items()),
            caption="Quantiles of the book values",
        ),
        Table(
            (Column("book value"), Column("items", "int"), Column("total", "money")),
            (
                ("credit (below zero)", p.credit_count, p.credit_total),
                ("zero", p.zero_count, 0.0),
                ("positive", p.positive_count, p.positive_total),
            ),
            caption="Items by sign",
        ),
    ]
    blocks += [Paragraph(n, "note") for n in p.notes]
    blocks.append(Figure("distribution", "Book values on a log scale, with the stratum boundaries"))
    return Sheet("Population", "population", "The population", tuple(blocks))


# --------------------------------------------------------------------------- strata and plan


def _strata(wp: Workpaper) -> Sheet:
    plan = wp.plan
    st = {str(r["stratum"]): r for r in wp.strata.get("table", [])}
    rows = []
    minimums = plan.table["minimum"] if "minimum" in plan.table.columns else [None] * len(plan.table)
    for r, least in zip(plan.table.itertuples(index=False), minimums):
        s = st.get(str(r.stratum), {})
        rows.append(
            (
                str(r.stratum), s.get("kind"), int(r.count), float(r.book_total), s.get("mean"), s.get("std_dev"),
                s.get("skewness"), s.get("min_book"), s.get("max_book"), float(r.std_dev),
                None if least is None else int(least), int(r.size), bool(r.take_all),
            )
        )
    table = Table(
        (
            Column("stratum"), Column("kind"), Column("items", "int"), Column("book total", "money"),
            Column("mean book value", "money"), Column("std dev of book values", "money"),
            Column("skewness (G1)", "num3"), Column("smallest", "money"), Column("largest", "money"),
            Column("std dev used for sizing", "money"), Column("fewest items allowed", "int"),
            Column("sample size", "int"), Column("examined in full", "yesno"),
        ),
        tuple(rows),
        caption="Strata and sample sizes",
        main=True,
    )
    blocks: list[Any] = [table]
    params = wp.strata.get("parameters") or {}
    fields: list[tuple[str, Any, str]] = [
        ("rule", str(wp.strata.get("method", "")), "text"),
        ("strata formed by the rule", wp.strata.get("n_strata"), "int"),
        ("classes (cumulative square-root rule)", params.get("n_classes"), "int"),
        ("top cutoff (every item at or above it examined in full)", wp.strata.get("top_cutoff"), "money"),
        ("how the top cutoff was set", wp.strata.get("top_rule"), "text"),
        ("credits", wp.strata.get("credits"), "text"),
        ("zeros", wp.strata.get("zeros"), "text"),
    ]
    blocks += [Heading("How the population was divided"), Fields(tuple(f for f in fields if f[1] is not None))]
    bounds = wp.strata.get("boundaries") or []
    if bounds:
        blocks.append(
            Table(
                (Column("boundary", "int"), Column("book value", "money")),
                tuple((i + 1, float(b)) for i, b in enumerate(bounds)),
                caption="Boundaries between the rule's strata (a value equal to a boundary goes to the stratum above)",
            )
        )
    details = wp.strata.get("details") or {}
    if details:
        blocks.append(Paragraph("What the search found: " + json.dumps(details, ensure_ascii=False), "code"))
    blocks += [Paragraph(n, "note") for n in wp.strata.get("notes") or []]
    rir = plan.risk_incorrect_rejection
    source = {"book": "the book values", "pilot": "pilot standard deviations", "pattern": "an assumed misstatement pattern"}
    blocks += [
        Heading("Why the sample is this large"),
        Fields(
            tuple(
                f
                for f in (
                    ("estimation method planned", method_name(plan.method), "text"),
                    ("allocation", plan.allocation, "text"),
                    ("minimum per stratum", plan.minimum, "int") if plan.minimum != "checks" else (
                        "minimum per stratum", "the size its normal-approximation checks ask for, "
                        "max(30, floor(28 + 25 G1^2) + 1) with G1 the skewness of its book values (column "
                        "'fewest items allowed' above; a stratum that cannot reach it is examined in full)", "text"),
                    ("tolerable misstatement (TM)", plan.tolerable, "money"),
                    ("expected misstatement (EM)", plan.expected, "money"),
                    ("risk of incorrect acceptance (RIA)", plan.risk_incorrect_acceptance, "pct"),
                    ("risk of incorrect rejection (RIR)", rir if rir is not None else "not used", "pct"),
                    ("z_A (one-sided)", plan.z_acceptance, "num4"),
                    ("z_R (two-sided)", plan.z_rejection if plan.z_rejection is not None else "not used", "num4"),
                    ("standard error aimed at, (TM - EM) / (z_A + z_R)", plan.target_std_error, "money"),
                    ("planned allowance for sampling risk", plan.planned_allowance, "money"),
                    ("standard error reached with these sizes", plan.achieved_std_error, "money"),
                    ("standard deviations from", source.get(plan.std_dev_source, plan.std_dev_source), "text"),
                    ("assumed error rate", plan.error_rate, "pct"),
                    ("assumed typical taint", plan.typical_taint, "pct"),
                    ("sample size", plan.total_size, "int"),
                    ("items in the population", plan.population_count, "int"),
                    ("book total", plan.book_total, "money"),
                )
                if f[1] is not None
            )
        ),
    ]
    if plan.pilot_std_devs:
        blocks.append(
            Table(
                (Column("stratum"), Column("pilot standard deviation", "money")),
                tuple((str(k), float(v)) for k, v in plan.pilot_std_devs.items()),
                caption="Pilot standard deviations given",
            )
        )
    blocks += [Paragraph(n, "note") for n in plan.notes]
    blocks.append(Heading("Does the plan reach its stated risk?"))
    if wp.plan_check is None:
        blocks.append(Paragraph(
            "The plan was not checked by simulation when it was made (no 'plan_check' in plan.json). The coverage "
            "check (auditmean simulate --engagement DIR) measures how often the plan's limits hold on these "
            "book values."
        ))
    else:
        blocks += _plan_check_blocks(wp.plan_check)
    blocks.append(Figure("value_share", "Share of items and of book value by stratum"))
    blocks.append(Figure("allocation", "Items in each stratum and the sample planned"))
    return Sheet("Strata and sizes", "strata", "Strata and sample sizes", tuple(blocks), landscape=True)


# --------------------------------------------------------------------------- selection and results


def _selection(wp: Workpaper) -> Sheet:
    if wp.selection is None or wp.items is None:
        return Sheet("Selection", "selection", "The selection", (Paragraph("No selection has been drawn yet."),))
    rec = wp.selection
    it = wp.items
    head = Paragraph(
        f"Seed {json.dumps(rec['seed'], ensure_ascii=False)} (exactly as recorded). Rule: {rec.get('rule', '')}.",
        "code",
    )
    table = Table(
        (Column("stratum"), Column("order", "int"), Column("item id"), Column("key", "code"), Column("book value", "money")),
        tuple(
            (r.stratum, int(r.order), r.item_id, r.key, r.book_value)
            for r in it[["stratum", "order", "item_id", "key", "book_value"]].itertuples(index=False)
        ),
        caption=f"The {len(it):,} selected items, by stratum in selection order",
        main=True,
    )
    chosen = it.groupby("stratum", sort=False).size()
    sizes = tuple((str(s["stratum"]), int(s["n"]), int(chosen.get(str(s["stratum"]), 0))) for s in rec["sizes"])
    blocks: list[Any] = [
        head,
        table,
        Heading("Sizes"),
        Table((Column("stratum"), Column("planned", "int"), Column("selected", "int")), sizes),
        Fields(
            (
                ("seed", rec["seed"], "code"),
                ("saved at", rec.get("saved_at"), "text"),
                ("re-performed from the population when saved", bool(rec.get("verified_against_frame")), "yesno"),
                ("population content SHA-256", rec.get("population_content_sha256"), "code"),
                ("earlier versions (extensions)", len(rec.get("history") or []), "int"),
            )
        ),
    ]
    return Sheet("Selection", "selection", "The selection", tuple(blocks))


def _results(wp: Workpaper) -> Sheet:
    if wp.items is None:
        return Sheet("Results", "results", "What was found", (Paragraph("No selection has been drawn yet."),))
    it = wp.items
    done = int(it["audited_value"].notna().sum())
    table = Table(
        (
            Column("stratum"), Column("order", "int"), Column("item id"), Column("book value", "money"),
            Column("audited value", "money"), Column("difference (audited - book)", "money"),
            Column("note", wide=True), Column("entered by"), Column("entered at"), Column("source", wide=True),
            Column("entries", "int"),
        ),
        tuple(
            (r.stratum, int(r.order), r.item_id, r.book_value, r.audited_value, r.difference, r.note, r.entered_by,
             r.entered_at, r.source, int(r.entries))
            for r in it[["stratum", "order", "item_id", "book_value", "audited_value", "difference", "note",
                         "entered_by", "entered_at", "source", "entries"]].itertuples(index=False)
        ),
        caption=f"Audited values of {done:,} of the {len(it):,} selected items",
        main=True,
    )
    blocks: list[Any] = [
        Paragraph(
            "The current audited value of each selected item; a blank means none has been entered. Every entry "
            "ever made is kept in the results log (sheet Entries); nothing is overwritten."
        ),
        table,
    ]
    return Sheet("Results", "results", "What was found", tuple(blocks), landscape=True)


def _entries(wp: Workpaper) -> Sheet:
    e = wp.entries
    if e is None or e.empty:
        return Sheet("Entries", "entries", "Every results entry", (Paragraph("No results have been entered yet."),))
    cols = ["sequence", "item_id", "audited_value", "note", "action", "entered_by", "entered_at", "source", "source_row"]
    rows = tuple(tuple(None if _missing(v) else v for v in r) for r in e[cols].itertuples(index=False))
    table = Table(
        (
            Column("entry", "int"), Column("item id"), Column("audited value", "money"), Column("note", wide=True),
            Column("action"), Column("entered by"), Column("entered at"), Column("source", wide=True),
            Column("row in source", "int"),
        ),
        rows,
        caption=f"The results log: {len(e):,} entries, oldest first (results_log.jsonl)",
        main=True,
    )
    return Sheet("Entries", "entries", "Every results entry", (table,), landscape=True)


def _missing(v: Any) -> bool:
    try:
        return v is None or (is_number(v) and v != v)
    except TypeError:
        return False


# --------------------------------------------------------------------------- evaluation

_STRATUM_COLUMNS = (
    ("stratum", "stratum", "text"),
    ("status", "status", "text"),
    ("count", "items", "int"),
    ("sampled", "sampled", "int"),
    ("book_total", "book total", "money"),
    ("sampled_book", "sampled book values", "money"),
    ("sampled_audited", "sampled audited values", "money"),
    ("nonzero_differences", "non-zero differences", "int"),
    ("total", "estimated audited total", "money"),
    ("misstatement", "projected misstatement", "money"),
    ("variance", "variance term", "money"),
    ("std_error", "standard error", "money"),
    ("df", "degrees of freedom", "num2"),
    ("coefficient", "ratio or slope", "num4"),
    ("skewness", "skewness (G1) of what is averaged", "num3"),
    ("treatment", "treatment", "text"),
)


def _evaluation(wp: Workpaper) -> Sheet:
    ev = _ev(wp)
    if ev is None:
        return Sheet(
            "Evaluation", "evaluation", "How it was projected",
            (Paragraph("No evaluation has been saved yet: record the audited values and evaluate."),),
        )
    rows = []
    for m, c in ev["conclusions"].items():
        e = ev["estimates"][m]
        rows.append(
            (
                method_name(m), m == ev["primary"], e["total"], e["std_error"], e["lower"], e["upper"],
                c["projected_misstatement"], c["lower_limit"], c["upper_limit"], c["achieved_allowance"],
                c["adjusted_allowance"], c.get("second_opinion_lower"), c.get("second_opinion_upper"),
                len(e.get("flags") or []), c.get("basis"), c.get("relied_upper_limit"), c["verdict"],
            )
        )
    table = Table(
        (
            Column("method"), Column("relied on", "yesno"), Column("estimated audited total", "money"),
            Column("standard error", "money"), Column("lower limit (audited total)", "money"),
            Column("upper limit (audited total)", "money"), Column("projected misstatement", "money"),
            Column("lower misstatement limit", "money"), Column("upper misstatement limit", "money"),
            Column("achieved allowance", "money"), Column("adjusted allowance", "money"),
            Column("second-opinion lower limit", "money"), Column("second-opinion upper limit", "money"),
            Column("warnings", "int"), Column("verdict rests on"), Column("upper limit relied on", "money"),
            Column("the sample"),
        ),
        tuple(rows),
        caption="Every estimator side by side (misstatement = book total - estimated audited total; where a "
                "verdict rests on the finite-sample bound, the normal limits are for information only)",
        main=True,
    )
    first = ev["estimates"][ev["primary"]]
    rir = ev.get("risk_incorrect_rejection")
    replicates = {so.get("replicates") for so in (ev.get("second_opinions") or {}).values()}
    blocks: list[Any] = [
        table,
        Heading("Parameters of the evaluation"),
        Fields(
            (
                ("tolerable misstatement", ev["tolerable"], "money"),
                ("expected misstatement", ev["expected"], "money"),
                ("risk of incorrect acceptance", ev["risk_incorrect_acceptance"], "pct"),
                ("risk of incorrect rejection", rir if rir is not None else "not used", "pct"),
                ("planned allowance for sampling risk", ev["planned_allowance"], "money"),
                ("confidence of the two-sided limits (1 - 2 RIA)", first["confidence"], "pct"),
                ("distribution of the limits", first["distribution"], "text"),
                ("critical value", first["critical_value"], "num4"),
                ("items examined", first["sample_size"], "int"),
                ("items in the population", first["population_count"], "int"),
                ("book total", first["book_total"], "money"),
                ("ratio variance", first["ratio_variance"], "text"),
                ("stratum with one sampled item", first["single_item"], "text"),
                ("stratum with no sampled item", first["unsampled"], "text"),
                ("selected items without an audited value", ev.get("missing_treatment", "error"), "text"),
                ("second-opinion bootstrap seed", str(ev.get("bootstrap_seed")), "code"),
                ("second-opinion bootstrap replicates", ", ".join(str(r) for r in sorted(r for r in replicates if r is not None)) or "none computed", "text"),
                ("saved evaluation", f"evaluations/{wp.evaluation_file}", "code"),
                ("saved at", wp.saved_evaluation.get("saved_at") if wp.saved_evaluation else None, "text"),
            )
        ),
        Heading("What each method says"),
    ]
    for m, c in ev["conclusions"].items():
        blocks.append(Paragraph(f"{method_name(m)}: {c['wording']}"))
    for m, why in (ev.get("not_applicable") or {}).items():
        blocks.append(Paragraph(f"{method_name(m)}: not applicable: {why}", "note"))
    if "overstatement_bound" in ev or "bound_note" in ev:
        blocks.append(Heading("The finite-sample bound for stratified samples"))
        blocks.append(Paragraph(
            "An upper bound of overstatement that holds whatever the sample size, under the assumptions it "
            "states. Where warnings about the normal approximation are raised for a method, its verdict rests on "
            "this bound and its normal limits are for information only. A simple random sample of items can miss "
            "the few large misstated items, so this bound is often wide."
        ))
        blocks += _bound_blocks(ev)
    for m, e in ev["estimates"].items():
        bs = e.get("by_stratum") or []
        present = [c for c in _STRATUM_COLUMNS if any(c[0] in r for r in bs)]
        blocks.append(Heading(f"{method_name(m)}: by stratum"))
        blocks.append(
            Table(
                tuple(Column(h, f) for _, h, f in present),
                tuple(tuple(r.get(k) for k, _, _ in present) for r in bs),
            )
        )
    ops = ev.get("second_opinions") or {}
    if ops:
        blocks.append(Heading("Second opinions"))
        blocks.append(
            Paragraph(
                "Computed for every method whose estimate raised a warning: the rescaling bootstrap's percentile "
                "limits and, where one stratum is sampled, Johnson's skewness-adjusted t limits."
            )
        )
        blocks.append(
            Table(
                (
                    Column("method"), Column("bootstrap lower (audited total)", "money"),
                    Column("bootstrap upper (audited total)", "money"), Column("bootstrap standard error", "money"),
                    Column("misstatement lower", "money"), Column("misstatement upper", "money"),
                    Column("Johnson lower (audited total)", "money"), Column("Johnson upper (audited total)", "money"),
                    Column("replicates", "int"), Column("seed", "code"),
                ),
                tuple(
                    (
                        method_name(m), so.get("bootstrap_lower"), so.get("bootstrap_upper"), so.get("bootstrap_std_error"),
                        so.get("bootstrap_misstatement_lower"), so.get("bootstrap_misstatement_upper"),
                        so.get("johnson_lower"), so.get("johnson_upper"), so.get("replicates"), str(so.get("seed")),
                    )
                    for m, so in ops.items()
                ),
            )
        )
    blocks.append(Figure("estimate", "Each estimate with its limits, against the book value and the tolerable misstatement"))
    return Sheet("Evaluation", "evaluation", "How it was projected, and what it says", tuple(blocks), landscape=True)


# --------------------------------------------------------------------------- warnings


def _warnings(wp: Workpaper) -> Sheet:
    ev = _ev(wp)
    rows = []
    if ev is not None:
        for m, e in ev["estimates"].items():
            for f in e.get("flags") or []:
                rows.append(
                    (method_name(m), m == ev["primary"], f["code"], f.get("stratum"), f["message"], f["rule"],
                     f["source"], f["advice"])
                )
    for f in wp.plan.checks:
        rows.append(("planning (book values)", False, f.code, f.stratum, f.message, f.rule, f.source, f.advice))
    table = Table(
        (
            Column("raised by"), Column("relied on", "yesno"), Column("code", "code"), Column("stratum"),
            Column("warning", wide=True), Column("rule"), Column("source of the rule", wide=True),
            Column("what would fix it", wide=True),
        ),
        tuple(rows),
        caption="Every warning: estimates first (relied-on method marked), then the planning checks",
        main=True,
    )
    blocks: list[Any] = [
        table,
        Paragraph("A warning never changes a number; it says where the normal approximation behind the limits "
                  "cannot be trusted. Where one is raised for a method, that method's verdict rests on the "
                  "finite-sample bound instead (see Evaluation)."),
        Heading("The codes"),
        Table((Column("code", "code"), Column("meaning", wide=True)), tuple(FLAG_CODES.items())),
    ]
    if not rows:
        blocks.insert(0, Paragraph("No warning was raised."))
    return Sheet("Warnings", "warnings", "Warnings, with their rules and sources", tuple(blocks), landscape=True)


# --------------------------------------------------------------------------- coverage


def _coverage_headline(name: str, cov: dict[str, Any]) -> str:
    done = cov.get("replications")
    asked = cov.get("replications_requested")
    how = "one misstated population sampled again and again" if cov.get("fixed_population") else (
        "a new misstated population for every simulated sample"
    )
    part = " (stopped early: partial results)" if cov.get("partial") else ""
    conf = cov.get("confidence")
    conf_text = f"{100 * conf:.0f}%" if is_number(conf) else "?"
    return (
        f"{name}: {done:,} of {asked:,} simulated samples{part}, {how}; nominal {conf_text} limits."
        if is_number(done) and is_number(asked)
        else f"{name}: coverage check."
    )


def _model_text(model: Any) -> str:
    from auditmean.coverage import MisstatementModel

    try:
        return MisstatementModel.from_dict(model).summary()
    except Exception:  # noqa: BLE001 - a record of another version: show it as recorded
        return "Misstatement model (as recorded): " + json.dumps(model, ensure_ascii=False)


def _guess_fmt(col: str, values: list[Any]) -> str:
    if not any(is_number(v) for v in values):
        return "text"
    c = col.lower()
    whole = ("replications", "replications_flagged", "count", "size", "large_items", "sampled", "sample_size",
             "population_count", "items", "items_in_full", "draws", "errors", "understatement_errors", "hits")
    if c in whole or c.endswith("_used") or c.endswith("_replications"):
        return "int"
    if any(k in c for k in ("coverage", "rate", "risk", "share", "acceptance", "rejection", "taint")):
        return "pct"
    if any(k in c for k in ("bias", "std_error", "error_sd", "total", "book", "misstatement", "estimate",
                            "overstatement", "understatement", "audited", "upper", "lower", "projected")):
        return "money"
    return "num4"


def _generic_table(rows: list[dict[str, Any]], caption: str, names: dict[str, str] | None = None) -> Table:
    cols: list[str] = []
    for r in rows:
        for k in r:
            if k not in cols:
                cols.append(k)
    names = names or {}
    fmts = [_guess_fmt(c, [r.get(c) for r in rows]) for c in cols]
    out_rows = []
    for r in rows:
        vals = []
        for c in cols:
            v = r.get(c)
            if c == "estimator" and isinstance(v, str):
                v = method_name(v)
            vals.append(v)
        out_rows.append(tuple(vals))
    return Table(tuple(Column(names.get(c, c.replace("_", " ")), f) for c, f in zip(cols, fmts)), tuple(out_rows), caption=caption)


def _coverage(wp: Workpaper) -> Sheet:
    if not wp.coverage:
        return Sheet(
            "Coverage check", "coverage", "The coverage check",
            (
                Paragraph(
                    "No coverage check is recorded in this engagement. A coverage check repeats the planned sample "
                    "many times on the population's own book values, misstated by a model, and measures how often "
                    f"the limits really hold. It is kept in the engagement folder as {COVERAGE_FILE} "
                    "(auditmean simulate --engagement DIR), and the workpaper then shows it here."
                ),
            ),
        )
    blocks: list[Any] = []
    for i, (name, cov) in enumerate(wp.coverage):
        blocks.append(Heading(f"Coverage check {name}"))
        blocks.append(Paragraph(_coverage_headline(name, cov)))
        blocks.append(Paragraph(_model_text(cov.get("model"))))
        blocks.append(
            Fields(
                tuple(
                    f
                    for f in (
                        ("replications", cov.get("replications"), "int"),
                        ("replications asked for", cov.get("replications_requested"), "int"),
                        ("stopped early", bool(cov.get("partial")), "yesno"),
                        ("nominal confidence", cov.get("confidence"), "pct"),
                        ("distribution of the limits", cov.get("distribution"), "text"),
                        ("one population sampled again and again", bool(cov.get("fixed_population")), "yesno"),
                        ("seed", str(cov.get("seed")), "code"),
                        ("tolerable misstatement", cov.get("tolerable"), "money"),
                        ("expected misstatement", cov.get("expected"), "money"),
                        ("book total", cov.get("book_total"), "money"),
                        ("true audited total (average over populations when new ones are drawn)", cov.get("true_total"), "money"),
                        ("misstatement the model expects", cov.get("expected_model_misstatement"), "money"),
                        ("second-opinion replicates per sample", cov.get("second_opinion_replicates"), "int"),
                    )
                    if f[1] is not None
                )
            )
        )
        blocks.append(_generic_table(list(cov.get("by_estimator") or []), "Coverage and risks by estimator (shares; mc se = Monte Carlo standard error)"))
        if cov.get("by_bound"):
            blocks.append(_generic_table(
                list(cov["by_bound"]), "Coverage and risks of the bounds that hold in finite samples (shares)"
            ))
        blocks.append(_generic_table(list(cov.get("strata") or []), "The design simulated"))
        rates = [r for r in cov.get("flag_rates") or [] if (r.get("replications_flagged") or 0) > 0]
        if rates:
            blocks.append(_generic_table(rates, "Share of simulated samples in which each warning was raised"))
        blocks += [Paragraph(n, "note") for n in cov.get("notes") or []]
        blocks.append(Figure(f"coverage:{i}", f"How often the limits held ({name})"))
        blocks.append(Figure(f"coverage_risks:{i}", f"Risks of incorrect acceptance and rejection ({name})"))
    return Sheet("Coverage check", "coverage", "The coverage check", tuple(blocks), landscape=True)


# --------------------------------------------------------------------------- methods


def _facts(wp: Workpaper) -> dict[str, Any]:
    ev = _ev(wp)
    methods = tuple(ev["estimates"]) if ev else ()
    thin = False
    if ev:
        thin = any(
            r.get("status") == "variance not estimable" for e in ev["estimates"].values() for r in e.get("by_stratum") or []
        )
    taints = tuple(str((c.get("model") or {}).get("taint", {}).get("kind")) for _, c in wp.coverage)
    pc = wp.plan_check
    return {
        "stratify": wp.strata.get("method"),
        "allocation": wp.plan.allocation,
        "std_dev_source": wp.plan.std_dev_source,
        "methods": methods,
        "ratio_variance": any(m in ("ratio", "combined_ratio") for m in methods),
        "single_item": thin,
        "second_opinion": bool(ev and ev.get("second_opinions")),
        "coverage": bool(wp.coverage),
        "taints": taints,
        "minimum": str(wp.plan.minimum),
        "plan_check": pc is not None,
        "monetary_size": bool(pc is not None and pc.get("monetary_unit_size") is not None),
        "finite_bound": bool(ev and ev.get("overstatement_bound")),
    }


def _methods(wp: Workpaper) -> Sheet:
    return _methods_sheet(
        wp.design,
        _facts(wp),
        "Every formula auditmean uses, and its source",
        "Notation: N_h items and book total X_h in stratum h, n_h examined, f_h = n_h / N_h; y audited and x book "
        "values; TM, EM tolerable and expected misstatement; RIA, RIR the risks of incorrect acceptance and rejection. "
        "Sources marked 'from memory' were not checked against the publication.",
    )


def _methods_sheet(design: str, facts: dict[str, Any], caption: str, notation: str) -> Sheet:
    """The Methods sheet of either design: every formula of ``design`` with its source and
    whether this workpaper used it (from ``facts``), under a paragraph of ``notation``."""
    table = Table(
        (
            Column("step"), Column("what"), Column("formula", wide=True), Column("published source", wide=True),
            Column("where in auditmean", "code"), Column("used here", "yesno"),
        ),
        tuple((m.step, m.name, m.formula, m.source, m.where, used_here(m, facts)) for m in methods_for(design)),
        caption=caption,
        main=True,
    )
    return Sheet("Methods", "methods", "Methods and their sources", (Paragraph(notation), table), landscape=True)


# --------------------------------------------------------------------------- re-performance


def evaluate_command(wp: Workpaper) -> str:
    """The command that evaluates the engagement again with the options of the saved evaluation."""
    parts = ["auditmean", "evaluate", "--engagement", _q(wp.folder)]
    ev = _ev(wp)
    if ev is None:
        return " ".join(parts)
    first = ev["estimates"][ev["primary"]]
    if ev.get("missing_treatment", "error") != "error":
        parts += ["--missing", _q(ev["missing_treatment"])]
    default_primary = wp.plan.method if wp.plan.method in ("mpu", "difference", "ratio") else "ratio"
    if ev["primary"] != default_primary:
        parts += ["--rely-on", _q(ev["primary"])]
    if first.get("distribution", "normal") != "normal":
        parts += ["--distribution", _q(first["distribution"])]
    reps = {so.get("replicates") for so in (ev.get("second_opinions") or {}).values()}
    if reps and reps != {2000} and len(reps) == 1:
        parts += ["--replicates", str(next(iter(reps)))]
    if first.get("single_item", "average") != "average":
        parts += ["--single-item", _q(first["single_item"])]
    if first.get("unsampled", "error") != "error":
        parts += ["--unsampled", _q(first["unsampled"])]
    seed = wp.seed
    bootstrap = ev.get("bootstrap_seed")
    if bootstrap is not None and (seed is None or seed_to_int(seed) != int(bootstrap)):
        parts += ["--seed", str(bootstrap)]
    return " ".join(parts)


def _reperformance(wp: Workpaper) -> Sheet:
    seed = wp.seed
    blocks: list[Any] = [
        _reperformance_fields(
            wp,
            after=(
                ("second-opinion bootstrap seed", str(_ev(wp).get("bootstrap_seed")) if _ev(wp) else None, "code"),
            ),
        ),
        Heading("Commands that reproduce the work"),
    ]
    more: list[tuple[str, str]] = []
    if wp.items is not None and len(wp.items) and seed is not None:
        first = wp.items.iloc[0]
        text = f"{seed}:{first['item_id']}"
        more.append(
            (f"key of item {first['item_id']} (the first 16 characters must be {first['key']})",
             f"printf '%s' {_q(text)} | sha256sum")
        )
    blocks.append(_commands_table(wp, evaluate_command(wp), more))
    blocks += [
        Heading("Re-performing the selection by hand, with any SHA-256 tool"),
        Paragraph(
            "1. For each item, compute SHA-256 of the UTF-8 text seed:item_id (the recorded seed exactly as written, "
            "a colon, the item id exactly as in the population file, with surrounding spaces removed)."
        ),
        Paragraph("2. The item's key is the first 16 hexadecimal digits of that digest, read as an unsigned integer."),
        Paragraph(
            "3. In each stratum, sort the items by key (ties, practically impossible, by item id); the sample is the "
            "first n items. A stratum examined in full takes all its items. Which stratum an item is in follows "
            "from its book value and the boundaries under Strata and sizes."
        ),
        *_fingerprint_blocks("; with a preassigned stratum column, a TAB and the stratum follow the amount on each line"),
    ]
    return _reperformance_sheet(wp, blocks)


def _reperformance_fields(
    wp: Workpaper,
    after_seed: tuple[tuple[str, Any, str], ...] = (),
    after: tuple[tuple[str, Any, str], ...] = (),
) -> Fields:
    """The opening fields of the re-performance sheet of either design.

    The versions, the selection seed and the population file's fingerprints; ``after_seed``
    follows the seed's fields and ``after`` ends the list. A field with no value is left out.
    """
    pop = wp.population
    fp = wp.engagement.get("population", {})
    seed = wp.seed
    return Fields(
        tuple(
            f
            for f in (
                ("auditmean version writing this workpaper", wp.tool_version, "text"),
                ("auditmean version that created the engagement", wp.engagement.get("tool_version"), "text"),
                ("selection seed, exactly", seed if seed is not None else "no selection yet", "code"),
                ("the seed as a quoted string (shows spaces)", json.dumps(seed, ensure_ascii=False) if seed is not None else None, "code"),
                ("characters in the seed", len(seed) if seed is not None else None, "int"),
                *after_seed,
                ("population file", pop.source, "code"),
                ("file SHA-256 (recorded)", fp.get("file_sha256"), "code"),
                ("file SHA-256 (read now)", pop.file_sha256, "code"),
                ("content SHA-256 (recorded)", fp.get("content_sha256"), "code"),
                ("content SHA-256 (read now)", pop.content_sha256, "code"),
                ("items", pop.count, "int"),
                *after,
            )
            if f[1] is not None
        )
    )


def _commands_table(wp: Workpaper, evaluate: str, more: list[tuple[str, str]]) -> Table:
    """The commands that reproduce the work, for either design: ``evaluate`` evaluates again and
    ``more`` (what to do, command) are the design's own checks of the selection."""
    cmds = [
        ("re-perform the selection (exit status 0 when it matches)", f"auditmean verify --engagement {_q(wp.folder)}"),
        ("evaluate again (saves a new evaluation beside this one; the numbers must be the same)", evaluate),
        ("check the population file's fingerprint", f"sha256sum {_q(wp.population.source)}"),
        *more,
        ("write this workpaper again", f"auditmean report --engagement {_q(wp.folder)}"),
    ]
    return Table((Column("what", wide=True), Column("command", "code", wide=True)), tuple(cmds))


def _fingerprint_blocks(more: str = "") -> list[Any]:
    """How to recompute the content fingerprint in Python; ``more`` is added inside the closing brackets."""
    return [
        Heading("Recomputing the content fingerprint"),
        Paragraph(
            "rows = sorted(zip(ids, values)); text = ''.join(f'{i}\\t{format(v, \".2f\")}\\n' for i, v in rows); "
            "text = text.replace('\\t-0.00\\n', '\\t0.00\\n'); hashlib.sha256(text.encode('utf-8')).hexdigest()  "
            f"(Python{more})",
            "code",
        ),
    ]


def _reperformance_sheet(wp: Workpaper, blocks: list[Any]) -> Sheet:
    """The Re-performance sheet of either design: ``blocks``, then what re-performing the selection
    found when the workpaper was written."""
    v = wp.verification
    blocks = [*blocks, Heading("Re-performed when this workpaper was written")]
    if v is None:
        blocks.append(Paragraph("The selection was not re-performed (no selection, or not asked for)."))
    else:
        blocks.append(
            Fields(
                (
                    ("the recorded selection matches what the seed gives", bool(v.match), "text"),
                    ("items recorded", v.n_recorded, "int"),
                    ("items expected", v.n_expected, "int"),
                    ("differences", len(v.differences), "int"),
                )
            )
        )
        if len(v.differences):
            d = v.differences
            blocks.append(
                Table(
                    (Column("item id"), Column("problem"), Column("expected"), Column("recorded")),
                    tuple((str(r.item_id), str(r.problem), str(r.expected), str(r.recorded)) for r in d.itertuples(index=False)),
                    caption="Where the recorded selection differs",
                )
            )
    return Sheet("Re-performance", "reperformance", "Re-performing the work", tuple(blocks), landscape=True)


# --------------------------------------------------------------------------- log


def _log(wp: Workpaper) -> Sheet:
    rows = []
    for e in wp.log:
        rest = {k: v for k, v in e.items() if k not in ("at", "by", "step")}
        rows.append((e.get("at"), e.get("by"), e.get("step"), json.dumps(rest, ensure_ascii=False) if rest else ""))
    files = tuple((f, f == wp.evaluation_file) for f in wp.evaluation_files)
    blocks: list[Any] = [
        Table(
            (Column("at (UTC)"), Column("by"), Column("step"), Column("details", "code", wide=True)),
            tuple(rows),
            caption="Every step taken in this engagement (log.jsonl), oldest first",
            main=True,
        ),
    ]
    if files:
        blocks += [
            Heading("Saved evaluations"),
            Table((Column("file in evaluations/", "code"), Column("used in this workpaper", "yesno")), files),
        ]
    return Sheet("Log", "log", "The step log", tuple(blocks), landscape=True)


def build_sheets(wp: Workpaper) -> tuple[Sheet, ...]:
    """Every sheet of the workpaper, in the order of :data:`SHEET_NAMES`.

    For an engagement of the monetary-unit design, the sheets of
    :func:`auditmean.workpaper._monetary_sheets.build_monetary_sheets`
    (:data:`~auditmean.workpaper._monetary_sheets.MONETARY_SHEET_NAMES`).
    """
    if wp.monetary:
        from auditmean.workpaper._monetary_sheets import build_monetary_sheets

        return build_monetary_sheets(wp)
    return (
        _summary(wp), _population(wp), _strata(wp), _selection(wp), _results(wp), _entries(wp), _evaluation(wp),
        _warnings(wp), _coverage(wp), _methods(wp), _reperformance(wp), _log(wp),
    )
