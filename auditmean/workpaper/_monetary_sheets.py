"""The sheets of a workpaper of the monetary-unit design.

Built from the same :class:`~auditmean.workpaper._content.Workpaper` as the
stratified sheets (:mod:`auditmean.workpaper._sheets`), rendered by the
same two writers. The numbers are those of the records in the engagement
folder: the plan (``MonetaryUnitPlan`` in ``plan.json``), the selection
(``selection.json``, kind ``"monetary_unit_selection"``), the results log
and the saved evaluation (``MonetaryUnitEvaluation.to_dict()``, every
bound's ``MonetaryUnitBound.to_dict()`` under ``"bounds"``). Nothing here
computes one; each item's difference (audited minus book) is the one
figure added for reading, as in the stratified workpaper.
"""

from __future__ import annotations

import json
import shlex
from typing import Any

from auditmean.cautions import CAUTIONS
from auditmean.workpaper._content import Workpaper
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

__all__ = ["MONETARY_SHEET_NAMES", "MONETARY_CAUTIONS", "build_monetary_sheets", "bound_name"]

#: The sheets of a monetary-unit workpaper, in order.
MONETARY_SHEET_NAMES = (
    "Summary",
    "Population",
    "Plan",
    "Selection",
    "Results",
    "Entries",
    "Bounds",
    "Methods",
    "Re-performance",
    "Log",
)

#: The cautions of a monetary-unit workpaper: the general ones (not the one about the normal
#: approximation, which this design does not use), then what its bounds rest on.
MONETARY_CAUTIONS: tuple[str, ...] = tuple(c for c in CAUTIONS if "normal approximation" not in c) + (
    "Each bound holds only under the assumptions it states, chiefly that no item is overstated by more "
    "than its book value (no audited value below zero) and that the monetary units were drawn as recorded. "
    "Credits and zero balances hold no monetary unit: this sample says nothing about them.",
)

#: Plain names of the bounds (as ``auditmean.monetary_engagement.BOUND_NAMES``; repeated here so the
#: workpaper can name a bound recorded by another version).
_BOUND_NAMES = {
    "stringer": "Stringer",
    "count": "error count",
    "betting": "betting",
    "count_or_betting": "error count or betting",
}

#: ``--bound`` spelling on the command line for each method (auditmean.cli._monetary.BOUND_CHOICES, reversed).
_BOUND_OPTIONS = {"count_or_betting": "count-or-betting", "betting": "betting", "count": "count", "stringer": "stringer"}


def bound_name(method: str) -> str:
    """The plain name of a monetary-unit bound."""
    try:
        from auditmean.monetary_engagement import BOUND_NAMES

        return BOUND_NAMES.get(method, _BOUND_NAMES.get(method, method))
    except ImportError:  # pragma: no cover - the module is part of the package
        return _BOUND_NAMES.get(method, method)


def _q(text: Any) -> str:
    return shlex.quote(str(text))


def _pct_words(p: Any) -> str:
    return f"{100 * float(p):.4g}%" if is_number(p) else "?"


def _ev(wp: Workpaper) -> dict[str, Any] | None:
    ev = wp.evaluation
    if ev is not None and ev.get("kind") not in (None, "monetary_unit_evaluation"):
        return None
    return ev


def _bounds(ev: dict[str, Any]) -> dict[str, dict[str, Any]]:
    return {str(m): b for m, b in (ev.get("bounds") or {}).items() if isinstance(b, dict)}


def _understatement(b: dict[str, Any]) -> Any:
    for key in ("understatement_upper", "lower_understatement"):
        if b.get(key) is not None:
            return b[key]
    return None


def _population_fields(wp: Workpaper) -> tuple[tuple[str, Any, str], ...]:
    from auditmean.workpaper._sheets import _population_fields as fields

    return fields(wp)


# --------------------------------------------------------------------------- summary


def _summary(wp: Workpaper) -> Sheet:
    from auditmean.workpaper._sheets import _this_workpaper

    ev = _ev(wp)
    mp = wp.monetary_plan
    blocks: list[Any] = [Heading("Cautions")]
    blocks += [Paragraph(c, "caution") for c in MONETARY_CAUTIONS]
    notes = list(wp.notes) + ([str(n) for n in ev.get("notes") or ()] if ev else [])
    if wp.evaluation is not None and ev is None:
        notes.insert(0, "The saved evaluation used here is not of the monetary-unit design; evaluate again.")
    if notes:
        blocks.append(Heading("Read first"))
        blocks += [Paragraph(n, "note") for n in notes]
    blocks.append(Heading("What the conclusion rests on"))
    if ev is None:
        blocks.append(Paragraph(
            f"No evaluation has been saved yet. It will rest on the {bound_name(mp.bound)} bound, with every other "
            "bound shown beside it."
        ))
    else:
        relied = str(ev.get("relied_on"))
        b = _bounds(ev).get(relied, {})
        blocks.append(Paragraph(
            f"The {bound_name(relied)} upper bound of overstatement at {_pct_words(ev.get('confidence'))} "
            f"confidence. What it guarantees: {b.get('guarantee') or 'not recorded'}."
        ))
    blocks += [Heading("Purpose"), Paragraph(wp.purpose)]
    blocks.append(Heading("Conclusion"))
    if ev is None:
        blocks.append(Paragraph("No evaluation has been saved yet: record the audited values and evaluate."))
    else:
        blocks.append(Paragraph(str(ev.get("wording", ""))))
        relied = str(ev.get("relied_on"))
        blocks.append(
            Fields(
                tuple(
                    f
                    for f in (
                        ("what the sample supports", ev.get("verdict"), "text"),
                        ("bound relied on", bound_name(relied), "text"),
                        ("upper bound of overstatement relied on", ev.get("upper"), "money"),
                        ("tolerable misstatement", ev.get("tolerable"), "money"),
                        ("projected misstatement", ev.get("projected"), "money"),
                        ("its bound on understatement", ev.get("understatement_upper"), "money"),
                        ("confidence of every bound", ev.get("confidence"), "pct"),
                        ("evaluation record", f"evaluations/{wp.evaluation_file}", "code"),
                    )
                    if f[1] is not None
                )
            )
        )
        blocks.append(_bounds_table(ev, caption="Every bound, at the same confidence (the relied-on one marked)"))
    blocks += [Heading("Population"), Fields(_population_fields(wp))]
    blocks += [Heading("Parameters"), Fields(_plan_fields(wp, short=True))]
    blocks += _this_workpaper(
        wp, (("design", "monetary units (selection with probability proportional to book value)", "text"),)
    )
    return Sheet("Summary", "summary", "Sampling workpaper (monetary units)", tuple(blocks))


def _bounds_table(ev: dict[str, Any], caption: str) -> Table:
    relied = ev.get("relied_on")
    rows = []
    for m, b in _bounds(ev).items():
        rows.append(
            (
                bound_name(m), m == relied, b.get("projected"), b.get("upper"), _understatement(b),
                b.get("errors"), b.get("guarantee"),
            )
        )
    return Table(
        (
            Column("bound"), Column("relied on", "yesno"), Column("projected misstatement", "money"),
            Column("upper bound of overstatement", "money"), Column("bound on understatement", "money"),
            Column("draws with an overstatement", "int"), Column("what it guarantees", wide=True),
        ),
        tuple(rows),
        caption=caption,
        main=True,
    )


# --------------------------------------------------------------------------- population


def _population(wp: Workpaper) -> Sheet:
    from auditmean.workpaper._sheets import _population as stratified_population

    sheet = stratified_population(wp)
    mp = wp.monetary_plan
    blocks = [b for b in sheet.blocks if not isinstance(b, Figure)]
    blocks.append(Table(
        (Column("book value"), Column("items", "int"), Column("total", "money"), Column("how it is treated", wide=True)),
        (
            ("positive", mp.positive_items, mp.book_total, "reached by the monetary units drawn"),
            ("  of which at or above the sampling interval", mp.in_full_count, mp.in_full_total,
             "examined in full; its misstatement is added exactly"),
            ("credit (below zero)", mp.credits_count, mp.credits_total, "kept apart and counted; never selected"),
            ("zero", mp.zeros_count, 0.0, "kept apart and counted; never selected"),
        ),
        caption="What the monetary units reach (from the plan; book values in whole cents)",
    ))
    blocks.append(Figure("distribution", "Book values on a log scale, with the sampling interval"))
    return Sheet("Population", "population", "The population", tuple(blocks))


# --------------------------------------------------------------------------- plan


def _plan_fields(wp: Workpaper, *, short: bool = False) -> tuple[tuple[str, Any, str], ...]:
    mp = wp.monetary_plan
    basis = {"poisson": "Poisson (gamma quantiles)", "binomial": "binomial (beta quantiles)"}.get(mp.basis, mp.basis)
    rows: list[tuple[str, Any, str]] = [
        ("tolerable misstatement (TM)", mp.tolerable, "money"),
        ("expected misstatement (EM)", mp.expected, "money"),
        ("risk of incorrect acceptance (RIA)", mp.risk_incorrect_acceptance, "pct"),
        ("confidence of every bound (1 - RIA)", mp.confidence, "pct"),
        ("confidence factors of the size", basis, "text"),
        ("positive book total (B)", mp.book_total, "money"),
        ("sample size (monetary units to draw)", mp.sample_size, "int"),
        ("sampling interval (B / n)", mp.interval, "money"),
        ("items examined in full (book value at or above the interval)", mp.in_full_count, "int"),
        ("their book total", mp.in_full_total, "money"),
        ("credits kept apart", mp.credits_count, "int"),
        ("their total", mp.credits_total, "money"),
        ("zero balances kept apart", mp.zeros_count, "int"),
        ("bound the conclusion relies on", bound_name(mp.bound), "text"),
        ("bounds shown beside it", ", ".join(bound_name(b) for b in mp.bounds_shown if b != mp.bound), "text"),
    ]
    if short:
        rows.append(("selection seed", wp.seed if wp.seed is not None else "no selection yet", "code"))
    return tuple(rows)


def _plan(wp: Workpaper) -> Sheet:
    mp = wp.monetary_plan
    factor = "GAMMA.INV(1 - RIA, k + 1, 1)" if mp.basis == "poisson" else "n x BETA.INV(1 - RIA, k + 1, n - k)"
    blocks: list[Any] = [
        Fields(_plan_fields(wp)),
        Heading("Why the sample is this large"),
        Paragraph(
            "The sample size n is the smallest number of monetary units for which the bound, with the expected "
            "misstatement found, stays within tolerable: B x F(k) / n <= TM with k = n x EM / B, the "
            "misstatement the sample expects to find counted in whole monetary units. F(k) is the confidence "
            f"factor at the planned risk: in a spreadsheet, F(k) = {factor}. With no expected misstatement this "
            "is n = B x F(0) / TM, rounded up."
        ),
        Paragraph(
            "Every item whose book value is at or above the sampling interval is examined in full, whatever "
            "the draws, and its misstatement is added exactly; the bounds project only from the draws that fall "
            "in the other items (the remainder)."
        ),
    ]
    blocks += [Paragraph(n, "note") for n in mp.notes]
    blocks.append(Paragraph(
        "Recorded in plan.json under 'monetary_unit_plan'; the numbers above are the record's.",
    ))
    return Sheet("Plan", "plan", "The plan: how many monetary units, and why", tuple(blocks))


# --------------------------------------------------------------------------- selection and results


def _selection(wp: Workpaper) -> Sheet:
    if wp.selection is None or wp.items is None:
        return Sheet("Selection", "selection", "The selection", (Paragraph("No selection has been drawn yet."),))
    rec = wp.selection
    it = wp.items
    credits = rec.get("credits") or {}
    zeros = rec.get("zeros") or {}
    history = rec.get("history") or []
    blocks: list[Any] = [
        Paragraph(
            f"Seed {json.dumps(rec['seed'], ensure_ascii=False)} (exactly as recorded). Rule: {rec.get('rule', '')}.",
            "code",
        ),
        Table(
            (
                Column("order", "int"), Column("item id"), Column("group"), Column("book value", "money"),
                Column("hits", "int"), Column("examined in full", "yesno"), Column("draws that fell in it", "code"),
                Column("first cent (unit_from)", "int"), Column("end cent (unit_to)", "int"),
            ),
            tuple(
                (int(r.order), r.item_id, r.stratum, r.book_value, int(r.hits), bool(r.examined_in_full), r.units,
                 int(r.unit_from), int(r.unit_to))
                for r in it[["order", "item_id", "stratum", "book_value", "hits", "examined_in_full", "units",
                             "unit_from", "unit_to"]].itertuples(index=False)
            ),
            caption=f"The {len(it):,} selected items, in item-id order (the order of the cumulative book value; "
                    "an item covers the cents from unit_from up to, not including, unit_to)",
            main=True,
        ),
        Heading("What was drawn"),
        Fields(
            tuple(
                f
                for f in (
                    ("seed", rec["seed"], "code"),
                    ("monetary units drawn (n)", rec.get("sample_size"), "int"),
                    ("positive book total (B)", rec.get("book_total"), "money"),
                    ("positive book total in cents", rec.get("book_total_cents"), "int"),
                    ("sampling interval", rec.get("interval"), "money"),
                    ("items selected", rec.get("n_items"), "int"),
                    ("of which examined in full", rec.get("examined_in_full"), "int"),
                    ("credits kept apart", credits.get("count"), "int"),
                    ("their total", credits.get("total"), "money"),
                    ("zero balances kept apart", zeros.get("count"), "int"),
                    ("saved at", rec.get("saved_at"), "text"),
                    ("re-performed from the population when saved", bool(rec.get("verified_against_population")),
                     "yesno"),
                    ("population content SHA-256", rec.get("population_content_sha256"), "code"),
                    ("earlier versions (extensions)", len(history), "int"),
                )
                if f[1] is not None
            )
        ),
    ]
    if history:
        blocks.append(Table(
            (Column("saved at"), Column("monetary units", "int"), Column("items", "int")),
            tuple((h.get("saved_at"), h.get("sample_size"), h.get("n_items")) for h in history),
            caption="Earlier versions of the selection, before it was extended (draws 1..n are kept by every "
                    "extension)",
        ))
        blocks.append(Paragraph(
            "The selection was extended. The Stringer and error-count bounds assume the sample size was fixed "
            "before any result was seen; the betting bound holds however the size was chosen.", "note",
        ))
    return Sheet("Selection", "selection", "The selection", tuple(blocks), landscape=True)


def _taints(ev: dict[str, Any] | None) -> dict[str, Any]:
    """Each item's taint as the relied-on bound's record gives it (``by_item``), by item id."""
    if ev is None:
        return {}
    b = _bounds(ev).get(str(ev.get("relied_on"))) or {}
    out = {}
    for r in b.get("by_item") or ():
        if isinstance(r, dict) and "item_id" in r and r.get("taint") is not None:
            out[str(r["item_id"])] = r["taint"]
    return out


def _results(wp: Workpaper) -> Sheet:
    if wp.items is None:
        return Sheet("Results", "results", "What was found", (Paragraph("No selection has been drawn yet."),))
    it = wp.items
    taint = _taints(_ev(wp))
    done = int(it["audited_value"].notna().sum())
    table = Table(
        (
            Column("order", "int"), Column("item id"), Column("group"), Column("book value", "money"),
            Column("hits", "int"), Column("audited value", "money"), Column("difference (audited - book)", "money"),
            Column("taint (from the evaluation)", "pct"), Column("note", wide=True), Column("entered by"),
            Column("entered at"), Column("source", wide=True), Column("entries", "int"),
        ),
        tuple(
            (int(r.order), r.item_id, r.stratum, r.book_value, int(r.hits), r.audited_value, r.difference,
             taint.get(str(r.item_id)), r.note, r.entered_by, r.entered_at, r.source, int(r.entries))
            for r in it[["order", "item_id", "stratum", "book_value", "hits", "audited_value", "difference", "note",
                         "entered_by", "entered_at", "source", "entries"]].itertuples(index=False)
        ),
        caption=f"Audited values of {done:,} of the {len(it):,} selected items",
        main=True,
    )
    differ = int((it["difference"].fillna(0) != 0).sum())
    blocks: list[Any] = [
        Paragraph(
            "The current audited value of each selected item; a blank means none has been entered. Every entry "
            "ever made is kept in the results log (sheet Entries); nothing is overwritten. The taint, "
            "(book - audited) / book, is shown where the evaluation found one; an item counts once for each "
            "draw that fell in it."
        ),
        table,
        Fields((("items whose audited value differs from the book value", differ, "int"),)),
    ]
    return Sheet("Results", "results", "What was found", tuple(blocks), landscape=True)


# --------------------------------------------------------------------------- bounds


#: How the fields of a bound's record are shown (label, format); the others by their name.
_BOUND_FIELDS = {
    "upper": ("upper bound of overstatement", "money"),
    "projected": ("projected misstatement", "money"),
    "confidence": ("confidence", "pct"),
    "exact_in_full": ("misstatement of the items examined in full (exact)", "money"),
    "remainder_total": ("book value of the remainder (B_r)", "money"),
    "draws": ("draws in the remainder", "int"),
    "errors": ("draws with an overstatement", "int"),
    "understatement_upper": ("bound on understatement", "money"),
    "lower_understatement": ("bound on understatement", "money"),
    "projected_understatement": ("projected understatement", "money"),
}
_BOUND_SKIP = ("schema_version", "kind", "method", "assumptions", "guarantee", "by_item", "notes", "name")


def _bounds_sheet(wp: Workpaper) -> Sheet:
    from auditmean.workpaper._sheets import _generic_table, _record_fields

    ev = _ev(wp)
    if ev is None:
        return Sheet(
            "Bounds", "bounds", "What the sample supports: every bound",
            (Paragraph("No evaluation has been saved yet: record the audited values and evaluate."),),
        )
    relied = str(ev.get("relied_on"))
    blocks: list[Any] = [
        _bounds_table(ev, caption="Every bound side by side (misstatement = book value - audited value; "
                                  "positive is overstatement)"),
        Paragraph(str(ev.get("wording", ""))),
        Heading("Parameters of the evaluation"),
        Fields(
            tuple(
                f
                for f in (
                    ("tolerable misstatement", ev.get("tolerable"), "money"),
                    ("expected misstatement", ev.get("expected"), "money"),
                    ("risk of incorrect acceptance", ev.get("risk_incorrect_acceptance"), "pct"),
                    ("confidence of every bound", ev.get("confidence"), "pct"),
                    ("monetary units drawn", ev.get("sample_size"), "int"),
                    ("positive book total", ev.get("book_total"), "money"),
                    ("sampling interval", ev.get("interval"), "money"),
                    ("items examined", ev.get("items"), "int"),
                    ("of which examined in full", ev.get("items_in_full"), "int"),
                    ("draws with an overstatement (relied-on bound)", ev.get("errors"), "int"),
                    ("credits not sampled", ev.get("credits_count"), "int"),
                    ("their total", ev.get("credits_total"), "money"),
                    ("zero balances not sampled", ev.get("zeros_count"), "int"),
                    ("selected items without an audited value", ev.get("missing_treatment"), "text"),
                    ("sample sizes before extensions", ", ".join(f"{n:,}" for n in ev.get("extended_from") or ())
                     or "never extended", "text"),
                    ("saved evaluation", f"evaluations/{wp.evaluation_file}", "code"),
                    ("saved at", wp.saved_evaluation.get("saved_at") if wp.saved_evaluation else None, "text"),
                )
                if f[1] is not None
            )
        ),
    ]
    blocks += [Paragraph(str(n), "note") for n in ev.get("notes") or ()]
    for m, b in _bounds(ev).items():
        mark = " (the conclusion relies on it)" if m == relied else ""
        blocks.append(Heading(f"The {bound_name(m)} bound{mark}"))
        blocks.append(Fields(_record_fields(b, _BOUND_FIELDS, _BOUND_SKIP)))
        blocks.append(Paragraph(f"What it guarantees: {b.get('guarantee') or 'not recorded'}"))
        for a in b.get("assumptions") or ():
            blocks.append(Paragraph(f"Assumption: {a}"))
        blocks += [Paragraph(str(n), "note") for n in b.get("notes") or ()]
        rows = [r for r in b.get("by_item") or () if isinstance(r, dict)]
        if rows and m == relied:
            blocks.append(_generic_table(rows, "The items with a misstatement, as this bound used them"))
    blocks.append(Figure("bounds", "Every upper bound of overstatement against the tolerable misstatement"))
    return Sheet("Bounds", "bounds", "What the sample supports: every bound", tuple(blocks), landscape=True)


# --------------------------------------------------------------------------- methods


def _methods(wp: Workpaper) -> Sheet:
    from auditmean.workpaper._sheets import _methods_sheet

    ev = _ev(wp)
    facts = {
        "bounds": tuple(_bounds(ev)) if ev else tuple(wp.monetary_plan.bounds_shown),
        "monetary_size": True,
    }
    return _methods_sheet(
        "monetary_unit",
        facts,
        "Every formula of the monetary-unit design, and its source",
        "Notation: B the positive book total (cents where said), n the monetary units drawn, J = B / n the "
        "sampling interval, B_r and n_r the book value of the items below the interval and the draws that fell "
        "in them, t a draw's taint, TM and EM the tolerable and expected misstatement, RIA the risk of "
        "incorrect acceptance, alpha = RIA. Sources marked 'from memory' were not checked against the publication.",
    )


# --------------------------------------------------------------------------- re-performance


def evaluate_command(wp: Workpaper) -> str:
    """The command that evaluates the engagement again with the options of the saved evaluation."""
    parts = ["auditmean", "evaluate", "--engagement", _q(wp.folder)]
    ev = _ev(wp)
    if ev is None:
        return " ".join(parts)
    if ev.get("missing_treatment", "error") != "error":
        parts += ["--missing", _q(ev["missing_treatment"])]
    relied = ev.get("relied_on")
    if relied is not None and relied != wp.monetary_plan.bound:
        parts += ["--bound", _q(_BOUND_OPTIONS.get(relied, relied))]
    return " ".join(parts)


def _reperformance(wp: Workpaper) -> Sheet:
    from auditmean.workpaper._sheets import (
        _commands_table,
        _fingerprint_blocks,
        _reperformance_fields,
        _reperformance_sheet,
    )

    seed = wp.seed
    rec = wp.selection or {}
    blocks: list[Any] = [
        _reperformance_fields(
            wp,
            after_seed=(
                ("monetary units drawn (n)", rec.get("sample_size"), "int"),
                ("positive book total in cents (B)", rec.get("book_total_cents"), "int"),
            ),
        ),
        Heading("Commands that reproduce the work"),
    ]
    more: list[tuple[str, str]] = []
    if wp.items is not None and seed is not None:
        first = wp.items[wp.items["units"].map(lambda u: "1" in str(u).split(" "))]
        if len(first):
            r = first.iloc[0]
            more.append((
                f"draw 1: take the first 13 hexadecimal digits of this digest as a whole number u; the drawn cent "
                f"floor(u x B / 2^52) must lie from {int(r['unit_from']):,} up to {int(r['unit_to']):,} "
                f"(item {r['item_id']})",
                f"printf '%s' {_q(f'{seed}:unit:1')} | sha256sum",
            ))
    blocks.append(_commands_table(wp, evaluate_command(wp), more))
    blocks += [
        Heading("Re-performing the selection by hand, with any SHA-256 tool and a spreadsheet"),
        Paragraph(
            "1. Take every item's book value in whole cents, c = round(100 x book value) (halves to even). "
            "Items with c <= 0 (credits and zero balances) hold no monetary unit and are never selected."
        ),
        Paragraph(
            "2. Sort the items with c > 0 by item id (Unicode code-point order, the order of the UTF-8 bytes; "
            "the order of the rows in the file does not matter) and cumulate their cents: item i covers the "
            "cents from C(i-1) up to, not including, C(i), with C(0) = 0. B, the last C, is the positive book "
            "total in cents."
        ),
        Paragraph(
            "3. For each draw k = 1 .. n, compute SHA-256 of the UTF-8 text seed:unit:k (the recorded seed "
            "exactly as written, then ':unit:' and k in decimal digits) and read its first 13 hexadecimal "
            "digits as a whole number u (below 2^52). In a spreadsheet, with the digest's text in A1: "
            "=HEX2DEC(LEFT(A1,5))*2^32+HEX2DEC(MID(A1,6,8))."
        ),
        Paragraph(
            "4. The drawn cent is p = floor(u x B / 2^52), in exact whole-number arithmetic (in Python: "
            "u * B >> 52). A spreadsheet's =FLOOR(A2/2^52*B,1) gives the same cent except when the product "
            "lies within rounding of a whole cent; confirm draws that fall at an item's edge exactly. The draw "
            "falls in the item whose range holds p."
        ),
        Paragraph(
            "5. Every item with c x n >= B (book value at or above the sampling interval) is examined in full, "
            "whether or not a draw fell in it. The sample is every item a draw fell in, plus those items; the "
            "Selection sheet lists each item's draws, hits and range."
        ),
        *_fingerprint_blocks(),
    ]
    return _reperformance_sheet(wp, blocks)


def build_monetary_sheets(wp: Workpaper) -> tuple[Sheet, ...]:
    """Every sheet of a monetary-unit workpaper, in the order of :data:`MONETARY_SHEET_NAMES`."""
    from auditmean.workpaper._sheets import _entries, _log

    return (
        _summary(wp), _population(wp), _plan(wp), _selection(wp), _results(wp), _entries(wp), _bounds_sheet(wp),
        _methods(wp), _reperformance(wp), _log(wp),
    )
