"""The workbook: its sheets, its numbers (the engine's), and user text that never becomes a formula.

The engagement is the hostile one of ``workpaper_helpers`` (formula-like ids,
markup, tab/CR-leading notes, long texts, right-to-left text, emoji), run
through the whole chain. Numbers are checked against the saved evaluation
record and against ``auditmean.evaluate`` called directly; fingerprints
against hashlib; the cell limits against Excel's documented limit of 32,767
characters per cell (Microsoft's "Excel specifications and limits", from
memory).
"""

from __future__ import annotations

import hashlib
import zipfile
from collections import Counter

import openpyxl
import pytest

import auditmean
from auditmean.cautions import CAUTIONS
from auditmean.workflow import strata_table
from auditmean.workpaper import SHEET_NAMES, write_workbook
from auditmean.workpaper.workbook import FORMULA_STARTS, MAX_CELL_TEXT, put_text

from .workpaper_helpers import HOSTILE_IDS, HOSTILE_NOTES, PURPOSE, SEED, build_hostile_engagement


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    root = tmp_path_factory.mktemp("wp-xlsx")
    made = build_hostile_engagement(root)
    made["xlsx"] = write_workbook(made["folder"], root / "workpaper.xlsx", purpose=PURPOSE)
    made["wb"] = openpyxl.load_workbook(made["xlsx"])
    return made


def _cells(wb):
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if c.value is not None:
                    yield ws, c


def _table(ws, header_first: str):
    """Rows (dicts by header) of the table whose header row starts with ``header_first``."""
    rows = list(ws.iter_rows(values_only=True))
    for i, r in enumerate(rows):
        if r and r[0] == header_first:
            header = [h for h in r if h is not None]
            out = []
            for body in rows[i + 1:]:
                if body[0] is None:
                    break
                out.append(dict(zip(header, body)))
            return out
    raise AssertionError(f"no table starting with {header_first!r} in sheet {ws.title!r}")


def _field(ws, label: str):
    for r in ws.iter_rows(values_only=True):
        if r and r[0] == label:
            return r[1]
    raise AssertionError(f"no field {label!r} in sheet {ws.title!r}")


def test_the_sheets_in_order(made):
    assert made["wb"].sheetnames == list(SHEET_NAMES)


def test_no_cell_holds_a_formula(made):
    # openpyxl reads any <f> element as data_type "f"; none may exist, in the parsed cells or in the XML itself
    assert [f"{ws.title}!{c.coordinate}" for ws, c in _cells(made["wb"]) if c.data_type == "f"] == []
    with zipfile.ZipFile(made["xlsx"]) as z:
        for name in z.namelist():
            if name.startswith("xl/worksheets/"):
                xml = z.read(name).decode("utf-8")
                assert "<f>" not in xml and "<f " not in xml, name


def test_formula_like_ids_are_text_exactly_as_in_the_file(made):
    sel = made["wb"]["Selection"]
    ids = {r["item id"] for r in _table(sel, "stratum")}
    by_value = {c.value: c for ws, c in _cells(made["wb"]) if ws.title == "Selection"}
    for item in HOSTILE_IDS:
        assert item in ids  # every hostile item is in the top stratum, examined in full
        cell = by_value[item]
        assert cell.data_type == "s"
        if item.startswith(FORMULA_STARTS):
            assert cell.quotePrefix is True and cell.number_format == "@"


def test_hostile_notes_are_text(made):
    res = made["wb"]["Results"]
    notes = {r["item id"]: r["note"] for r in _table(res, "stratum")}
    for item, note in made["notes"].items():
        shown = notes[item]
        assert isinstance(shown, str)
        if note.startswith("\r"):
            assert shown == "\n" + note[1:]  # a carriage return is written as a line feed
        elif "\x07" in note:
            assert shown == note.replace("\x07", "\u2407")  # the control picture of BEL
        elif len(note) > MAX_CELL_TEXT:
            assert len(shown) == MAX_CELL_TEXT and shown.startswith("n" * 30_000) and "40,000 characters" in shown
        else:
            assert shown == note
    tab_cell = next(c for ws, c in _cells(made["wb"]) if ws.title == "Results" and c.value == HOSTILE_NOTES[0])
    assert tab_cell.quotePrefix is True and tab_cell.data_type == "s"


def test_negative_amounts_stay_numbers(made):
    rows = _table(made["wb"]["Results"], "stratum")
    credits = [r for r in rows if r["stratum"] == "credits"]
    assert credits and all(isinstance(r["book value"], float) and r["book value"] < 0 for r in credits)
    res = made["wb"]["Results"]
    negative = [c for ws, c in _cells(made["wb"]) if ws is res and isinstance(c.value, float) and c.value < 0]
    assert negative and all(c.data_type == "n" and c.number_format == "#,##0.00" for c in negative)


def test_evaluation_numbers_are_the_engines(made):
    ws = made["wb"]["Evaluation"]
    rows = {r["method"]: r for r in _table(ws, "method")}
    saved = made["saved"]["evaluation"]
    eng, plan = made["engagement"], made["plan"]
    frame = eng.sample_frame().frame
    direct = auditmean.evaluate(
        frame[["stratum", "item_id", "book_value", "audited_value"]], strata_table(plan, eng.plan()["strata"]),
        tolerable=plan.tolerable, expected=plan.expected, risk_incorrect_acceptance=plan.risk_incorrect_acceptance,
        risk_incorrect_rejection=plan.risk_incorrect_rejection, planned_allowance=plan.planned_allowance,
        primary="ratio", seed=SEED, bootstrap_replicates=300,
    )
    names = auditmean.evaluation.estimate.METHOD_NAMES
    assert set(rows) == {names[m] for m in saved["conclusions"]}
    for m, c in saved["conclusions"].items():
        row = rows[names[m]]
        e = saved["estimates"][m]
        # the saved record's floats, to the 16 significant digits openpyxl writes ("%.16g"; Excel keeps 15)
        for shown, rec in (
            (row["estimated audited total"], e["total"]),
            (row["standard error"], e["std_error"]),
            (row["upper misstatement limit"], c["upper_limit"]),
            (row["lower misstatement limit"], c["lower_limit"]),
            (row["projected misstatement"], c["projected_misstatement"]),
        ):
            assert shown == pytest.approx(rec, rel=1e-15, abs=0)
        # and the engine called directly on the same sample gives the same numbers
        assert row["upper misstatement limit"] == pytest.approx(direct.conclusions[m].upper_limit, rel=1e-12)
        assert row["estimated audited total"] == pytest.approx(direct.estimates[m].total, rel=1e-12)
        assert row["the sample"] == direct.conclusions[m].verdict
    cell = next(c for w, c in _cells(made["wb"]) if w is ws and c.value == rows[names["ratio"]]["standard error"])
    assert cell.number_format == "#,##0.00"


def test_summary_shows_cautions_and_warning_counts_first(made):
    ws = made["wb"]["Summary"]
    first_rows = [r[0] for r in ws.iter_rows(min_row=1, max_row=8, values_only=True)]
    for c in CAUTIONS:
        assert c in first_rows
    counts = {r["code"]: r["times raised"] for r in _table(ws, "code")}
    saved = made["saved"]["evaluation"]
    expected = Counter(f["code"] for f in saved["estimates"][saved["primary"]]["flags"])
    assert counts == dict(expected)
    assert _field(ws, "tolerable misstatement") == 60_000.0  # the plan's input (workpaper_helpers.TOLERABLE)
    rir = next(c for w, c in _cells(made["wb"]) if w is ws and c.value == 0.25)  # the input risk, as a share
    assert rir.number_format == "0.0%"
    assert PURPOSE in [r[0] for r in ws.iter_rows(values_only=True)]


def test_fingerprints_and_seed_for_re_performance(made):
    ws = made["wb"]["Re-performance"]
    assert _field(ws, "selection seed, exactly") == SEED
    data = made["ledger_path"].read_bytes()
    assert _field(ws, "file SHA-256 (read now)") == hashlib.sha256(data).hexdigest()
    # the content fingerprint by the recipe the workbook gives, with hashlib
    pop = made["population"].items
    rows = sorted(zip(pop["item_id"], pop["book_value"]))
    text = "".join(f"{i}\t{format(v, '.2f')}\n" for i, v in rows).replace("\t-0.00\n", "\t0.00\n")
    assert _field(ws, "content SHA-256 (read now)") == hashlib.sha256(text.encode("utf-8")).hexdigest()
    cmds = [r["command"] for r in _table(ws, "what")]
    assert any(c.startswith("auditmean verify --engagement ") for c in cmds)
    assert any(c.startswith("auditmean evaluate --engagement ") for c in cmds)
    assert _field(ws, "the recorded selection matches what the seed gives") == "yes"


def test_coverage_sheet_holds_the_record(made):
    ws = made["wb"]["Coverage check"]
    rows = _table(ws, "estimator")
    cov = made["coverage"]["by_estimator"]
    assert len(rows) == len(cov)
    for shown, rec in zip(rows, cov):
        assert shown["coverage"] == pytest.approx(rec["coverage"], rel=1e-15, abs=0)  # 16 digits, as above
        assert shown["bias"] == pytest.approx(rec["bias"], rel=1e-15, abs=0)


def test_layout_for_reading_and_printing(made):
    wb = made["wb"]
    sel = wb["Selection"]
    header = next(i for i, r in enumerate(sel.iter_rows(values_only=True), start=1) if r[0] == "stratum")
    assert sel.freeze_panes == f"A{header + 1}"
    assert sel.print_title_rows == f"${header}:${header}"
    res = wb["Results"]
    assert res.page_setup.orientation == "landscape"
    assert res.page_setup.fitToWidth == 1 and res.page_setup.fitToHeight == 0
    assert res.sheet_properties.pageSetUpPr.fitToPage is True
    for ws in wb.worksheets:
        assert ws.freeze_panes is not None and ws.print_title_rows
    # widths fit: the key column is at least as wide as a 16-digit key
    assert sel.column_dimensions["D"].width >= 16


def test_put_text_marks_every_formula_start():
    wb = openpyxl.Workbook()
    ws = wb.active
    for i, text in enumerate(["=1+2", "+1", "-2", "@SUM(A1)", "\tx", "\rx", "\uff1d1", "plain", "a=b"], start=1):
        put_text(ws.cell(i, 1), text)
    marked = [ws.cell(i, 1).quotePrefix for i in range(1, 10)]
    assert marked == [True] * 7 + [False, False]
    assert all(ws.cell(i, 1).data_type == "s" for i in range(1, 10))
