"""The workpaper of a monetary-unit engagement: every sheet, the engine's numbers, checked from outside.

A small ledger invented here (lognormal book values, three large items
examined in full, some with ids a spreadsheet would read as formulas or a
browser as markup, credits and zero balances, misstatements injected by the
test so the audited values are known) is run through the chain: plan,
select, record, evaluate; then the workbook (read back with openpyxl) and
the HTML report (parsed with the standard library) are written.

Outside checks:

* the sample size: the expansion-factor rule (smallest n with
  B F(n EM / B) / n <= TM, F(k) = scipy.stats.gamma.ppf(1 - RIA, k + 1), the
  Poisson confidence factor; Leslie, Teitlebaum and Anderson 1979 and the
  AICPA audit sampling guide, quoted from memory), searched here by brute force;
* the selection: re-performed with hashlib and Python integers from the rule
  as the workpaper itself writes it (Re-performance sheet);
* the Stringer bound worked by hand from those draws and the audited values
  the test injected (Stringer 1963: taints ranked from the largest,
  incremental Poisson factors from scipy.stats.gamma);
* the error-count bound from scipy.stats.beta (Clopper and Pearson 1934);
* the other bounds against ``auditmean.monetary_unit_bound`` called directly
  on the same sample (the workpaper passes the engine's numbers unchanged);
* credits and zero balances counted with numpy on the ledger.
"""

from __future__ import annotations

import hashlib
import json
import zipfile

import numpy as np
import openpyxl
import pandas as pd
import pytest
from scipy import stats

from auditmean.cli import main
from auditmean.workflow import (
    PopulationReading,
    draw_selection,
    evaluate_engagement,
    start_monetary_unit_engagement,
)
from auditmean.workpaper import write_html_report, write_workbook
from auditmean.workpaper._monetary_sheets import MONETARY_CAUTIONS, MONETARY_SHEET_NAMES
from auditmean.workpaper.workbook import FORMULA_STARTS

from .test_workpaper_html import _figure_specs, _Report, _values

SEED = 'invented ledger =1+1 <script>alert("s")</script>'
TOLERABLE = 40_000.0
EXPECTED = 2_000.0
RISK = 0.05
BIG_IDS = ("=HYPERLINK(\"http://evil.example\",\"x\")", "<img src=x onerror=alert(1)>", "+7 big")


def _ledger() -> tuple[pd.DataFrame, pd.Series]:
    """The invented ledger and every item's audited value (known to the test)."""
    rng = np.random.default_rng(31)
    n = 300
    book = np.round(rng.lognormal(6.3, 1.0, n), 2)
    book[:3] = [70_000.00, 52_500.50, 41_000.25]  # above any interval below: examined in full
    book[10:14] = -np.round(rng.uniform(10, 400, 4), 2)  # credits
    book[20:23] = 0.0  # zero balances
    ids = [f"AR-{i:04d}" for i in range(n)]
    ids[:3] = BIG_IDS
    audited = book.copy()
    audited[1] = book[1] - 1_500.00  # a large item overstated, found exactly
    small = np.flatnonzero(book > 0)[3:]
    wrong = rng.choice(small, 24, replace=False)
    audited[wrong[:6]] = 0.0  # overstated by all of their book value
    audited[wrong[6:20]] = np.round(book[wrong[6:20]] * 0.6, 2)  # overstated by 40%
    audited[wrong[20:]] = np.round(book[wrong[20:]] * 1.1, 2)  # understated by 10%
    order = rng.permutation(n)  # file order must not matter
    return (
        pd.DataFrame({"doc": np.array(ids, dtype=object)[order], "amount": book[order]}),
        pd.Series(audited[order], index=np.array(ids, dtype=object)[order]),
    )


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    root = tmp_path_factory.mktemp("wp-mus")
    df, truth = _ledger()
    path = root / "ledger =cmd.csv"
    df.to_csv(path, index=False)
    folder = root / "mus <b>engagement</b>"
    eng, pop, plan = start_monetary_unit_engagement(
        folder, PopulationReading(str(path), "doc", "amount"), tolerable=TOLERABLE, expected=EXPECTED,
        risk_incorrect_acceptance=RISK,
    )
    selection, _ = draw_selection(eng, pop, seed=SEED)
    ids = selection["item_id"].tolist()
    found = root / "found.csv"
    notes = ["=cmd note" if i == BIG_IDS[1] else "checked" for i in ids]
    pd.DataFrame({"id": ids, "value": truth.loc[ids].to_numpy(), "note": notes}).to_csv(found, index=False)
    eng.record_results_file(found, id_column="id", value_column="value", note_column="note")
    ev = evaluate_engagement(eng)
    xlsx = write_workbook(folder, root / "w.xlsx")
    html_text = write_html_report(folder, root / "w.html").read_text(encoding="utf-8")
    parsed = _Report()
    parsed.feed(html_text)
    parsed.close()
    return {
        "root": root, "df": df, "truth": truth, "folder": folder, "engagement": eng, "plan": plan,
        "evaluation": ev, "saved": eng.evaluations()[-1]["evaluation"], "xlsx": xlsx,
        "wb": openpyxl.load_workbook(xlsx), "html": html_text, "parsed": parsed,
    }


def _rows(ws):
    return list(ws.iter_rows(values_only=True))


def _field(ws, label: str):
    for r in ws.iter_rows(values_only=True):
        if r and r[0] == label:
            return r[1]
    raise AssertionError(f"no field {label!r} in sheet {ws.title!r}")


def _table(ws, caption: str):
    """Rows (dicts by header) of the table whose caption holds ``caption``."""
    rows = _rows(ws)
    i = next(i for i, r in enumerate(rows) if r and isinstance(r[0], str) and caption in r[0])
    header = [h for h in rows[i + 1] if h is not None]
    out = []
    for body in rows[i + 2:]:
        if body[0] is None:
            break
        out.append(dict(zip(header, body)))
    return out


def _by_hand(df: pd.DataFrame, n: int, seed: str):
    """The selection by the rule the Re-performance sheet writes: hashlib and Python integers only."""
    cents = {i: round(v * 100) for i, v in zip(df["doc"], df["amount"])}
    ids = sorted(i for i, c in cents.items() if c > 0)  # code-point order
    ends, total = [], 0
    for i in ids:
        total += cents[i]
        ends.append(total)
    draws = []
    for k in range(1, n + 1):
        u = int(hashlib.sha256(f"{seed}:unit:{k}".encode()).hexdigest()[:13], 16)
        p = u * total >> 52  # floor(u B / 2^52), exact
        draws.append(ids[int(np.searchsorted(ends, p, side="right"))])
    start = {i: e - cents[i] for i, e in zip(ids, ends)}
    in_full = {i for i in ids if cents[i] * n >= total}
    return draws, start, dict(zip(ids, ends)), in_full, total, cents


# --------------------------------------------------------------------------- the workbook


def test_the_sheets_and_the_cautions_first(made):
    wb = made["wb"]
    assert wb.sheetnames == list(MONETARY_SHEET_NAMES)
    first = [r[0] for r in wb["Summary"].iter_rows(min_row=1, max_row=6, values_only=True)]
    assert all(c in first for c in MONETARY_CAUTIONS)
    summary = [r[0] for r in _rows(wb["Summary"])]
    assert summary.index(MONETARY_CAUTIONS[-1]) < summary.index("Purpose") < summary.index("Conclusion")


def test_no_cell_is_a_formula_and_formula_like_text_is_marked(made):
    wb = made["wb"]
    assert not [c for ws in wb.worksheets for row in ws.iter_rows() for c in row if c.data_type == "f"]
    with zipfile.ZipFile(made["xlsx"]) as z:
        for name in z.namelist():
            if name.startswith("xl/worksheets/"):
                xml = z.read(name).decode("utf-8")
                assert "<f>" not in xml and "<f " not in xml, name
    cells = {c.value: c for row in wb["Selection"].iter_rows() for c in row if isinstance(c.value, str)}
    for item in BIG_IDS:
        assert item in cells  # examined in full, so selected
        if item.startswith(FORMULA_STARTS):
            assert cells[item].quotePrefix is True and cells[item].data_type == "s"
    note = next(c for row in wb["Results"].iter_rows() for c in row if c.value == "=cmd note")
    assert note.quotePrefix is True


def test_the_plan_follows_the_confidence_factors(made):
    ws = made["wb"]["Plan"]
    df = made["df"]
    cents = np.round(df["amount"].to_numpy() * 100).astype(np.int64)
    B = int(cents[cents > 0].sum())  # numpy on the ledger
    # the expansion-factor rule, searched by brute force: B F(n EM / B) / n <= TM (amounts in cents)
    n = next(n for n in range(1, 10_000)
             if B * stats.gamma.ppf(1 - RISK, n * EXPECTED * 100 / B + 1) / n <= TOLERABLE * 100)
    assert _field(ws, "sample size (monetary units to draw)") == n
    assert _field(ws, "positive book total (B)") == pytest.approx(B / 100, abs=0)
    assert _field(ws, "sampling interval (B / n)") == pytest.approx(B / 100 / n, rel=1e-15)
    assert _field(ws, "credits kept apart") == int(np.sum(cents < 0)) == 4
    assert _field(ws, "zero balances kept apart") == int(np.sum(cents == 0)) == 3
    assert _field(ws, "items examined in full (book value at or above the interval)") == int(
        np.sum((cents > 0) & (cents * n >= B))
    )
    assert _field(ws, "risk of incorrect acceptance (RIA)") == RISK
    text = " ".join(str(r[0]) for r in _rows(ws) if r[0])
    assert "GAMMA.INV(1 - RIA, k + 1, 1)" in text  # how to get the factor in a spreadsheet


def test_the_selection_re_performs_from_the_workpapers_own_rule(made):
    plan = made["plan"]
    draws, start, end, in_full, total, _ = _by_hand(made["df"], plan.sample_size, SEED)
    rows = _table(made["wb"]["Selection"], "selected items, in item-id order")
    expected_ids = sorted(set(draws) | in_full)
    assert [r["item id"] for r in rows] == expected_ids  # item-id order
    for r in rows:
        mine = [k + 1 for k, i in enumerate(draws) if i == r["item id"]]
        assert (r["draws that fell in it"] or "") == " ".join(map(str, mine))
        assert r["hits"] == len(mine)
        assert r["examined in full"] == ("yes" if r["item id"] in in_full else None)
        assert (r["first cent (unit_from)"], r["end cent (unit_to)"]) == (start[r["item id"]], end[r["item id"]])
    ws = made["wb"]["Re-performance"]
    assert _field(ws, "positive book total in cents (B)") == total
    assert _field(ws, "selection seed, exactly") == SEED
    assert _field(ws, "the recorded selection matches what the seed gives") == "yes"
    cmd = next(r for r in _table(ws, "Commands that reproduce the work") if str(r["what"]).startswith("draw 1"))
    assert cmd["command"] == "printf '%s' " + "'" + SEED.replace("'", "'\"'\"'") + ":unit:1' | sha256sum"
    assert f"(item {draws[0]})" in cmd["what"]


def _bound_rows(made):
    return {r["bound"]: r for r in _table(made["wb"]["Bounds"], "Every bound side by side")}


def test_stringer_and_error_count_by_hand(made):
    plan, truth = made["plan"], made["truth"]
    draws, _, _, in_full, total, cents = _by_hand(made["df"], plan.sample_size, SEED)
    conf = 1 - RISK
    book = made["df"].set_index("doc")["amount"]
    exact = sum(float(book[i] - truth[i]) for i in in_full)
    remainder = (total - sum(cents[i] for i in in_full)) / 100
    taints = [float((book[i] - truth[i]) / book[i]) for i in draws if i not in in_full]
    n_r = len(taints)
    ranked = sorted((max(t, 0.0) for t in taints), reverse=True)
    F = [stats.gamma.ppf(conf, k + 1) for k in range(n_r + 1)]  # Poisson factors
    u_stringer = min(1.0, (F[0] + sum(t * (F[i + 1] - F[i]) for i, t in enumerate(ranked))) / n_r)
    k = sum(t > 0 for t in taints)
    u_count = stats.beta.ppf(conf, k + 1, n_r - k)  # Clopper-Pearson upper limit
    rows = _bound_rows(made)
    assert rows["Stringer"]["upper bound of overstatement"] == pytest.approx(exact + remainder * u_stringer, rel=1e-9)
    assert rows["error count"]["upper bound of overstatement"] == pytest.approx(exact + remainder * u_count, rel=1e-9)
    assert rows["Stringer"]["draws with an overstatement"] == k
    mean = sum(taints) / n_r
    assert rows["Stringer"]["projected misstatement"] == pytest.approx(exact + remainder * mean, rel=1e-9)


def test_every_bound_is_the_engines_and_the_relied_on_one_is_marked(made):
    from auditmean.monetary_bound import monetary_unit_bound

    saved, plan, eng = made["saved"], made["plan"], made["engagement"]
    sel = eng.selection()
    sample = sel[["item_id", "book_value", "hits", "examined_in_full", "units"]].assign(
        audited_value=made["truth"].loc[sel["item_id"]].to_numpy())
    rows = _bound_rows(made)
    names = {"stringer": "Stringer", "count": "error count", "betting": "betting",
             "count_or_betting": "error count or betting"}
    assert set(rows) == {names[m] for m in saved["bounds"]}
    for m, rec in saved["bounds"].items():
        row = rows[names[m]]
        assert row["upper bound of overstatement"] == pytest.approx(rec["upper"], rel=1e-15, abs=0)  # 16 digits
        direct = monetary_unit_bound(sample, plan.book_total, plan.sample_size, confidence=1 - RISK, method=m)
        assert row["upper bound of overstatement"] == pytest.approx(direct.upper, rel=1e-12)
        assert row["relied on"] == ("yes" if m == saved["relied_on"] else None)
        assert row["what it guarantees"] == rec["guarantee"]
    assert saved["relied_on"] == plan.bound
    ws = made["wb"]["Summary"]
    assert _field(ws, "bound relied on") == names[plan.bound]
    assert _field(ws, "upper bound of overstatement relied on") == pytest.approx(saved["upper"], rel=1e-15)
    assert _field(ws, "what the sample supports") == saved["verdict"] == (
        "supports" if saved["upper"] <= TOLERABLE else "does not support")
    # each bound's assumptions, as recorded, under its own heading
    texts = [r[0] for r in _rows(made["wb"]["Bounds"]) if isinstance(r[0], str)]
    for m, rec in saved["bounds"].items():
        head = texts.index(f"The {names[m]} bound" + (" (the conclusion relies on it)" if m == plan.bound else ""))
        for a in rec["assumptions"]:
            assert f"Assumption: {a}" in texts[head:]
        assert f"What it guarantees: {rec['guarantee']}" in texts[head:]


def test_methods_name_their_sources(made):
    rows = _table(made["wb"]["Methods"], "Every formula of the monetary-unit design")
    by = {r["what"]: r for r in rows}
    assert "Stringer" in by["Stringer bound"]["published source"] and "1963" in by["Stringer bound"]["published source"]
    assert "Clopper" in by["error-count bound"]["published source"]
    assert "1934" in by["error-count bound"]["published source"]
    assert "Waudby-Smith" in by["betting bound"]["published source"]
    assert "2024" in by["betting bound"]["published source"]
    assert all(r["used here"] == "yes" for r in rows)  # every bound was computed
    assert "Neyman allocation" not in by and "normal limits" not in by  # the stratified design's formulas


def test_results_show_what_was_found(made):
    rows = _table(made["wb"]["Results"], "Audited values of")
    truth = made["truth"]
    book = made["df"].set_index("doc")["amount"]
    for r in rows:
        assert r["audited value"] == pytest.approx(truth[r["item id"]], abs=0)
        assert r["difference (audited - book)"] == pytest.approx(truth[r["item id"]] - book[r["item id"]], abs=1e-9)
        t = (book[r["item id"]] - truth[r["item id"]]) / book[r["item id"]]
        assert r["taint (from the evaluation)"] == (pytest.approx(t, rel=1e-12) if t != 0 else None)


# --------------------------------------------------------------------------- the report


def test_html_escapes_and_carries_the_engines_numbers(made):
    p = made["parsed"]
    text = "".join(p.text)
    for item in BIG_IDS:
        assert item in text  # as text
    assert SEED in text
    for tag, attrs in p.tags:
        assert not any(name.startswith("on") for name in attrs), (tag, attrs)
        assert tag not in ("b", "img")
    assert text.index(MONETARY_CAUTIONS[0]) < text.index("Purpose")
    table = next(t for t in p.tables if t["caption"].startswith("Every bound side by side"))
    header = [c["text"] for c in table["rows"][0]]
    saved = made["saved"]
    shown = {r[0]["text"]: dict(zip(header, r)) for r in table["rows"][1:]}
    stringer = shown["Stringer"]["upper bound of overstatement"]
    assert float(stringer["value"]) == saved["bounds"]["stringer"]["upper"]  # every digit of the record
    specs = _figure_specs(p)
    titles = [s["layout"]["title"]["text"] for s in specs]
    bounds = specs[next(i for i, t in enumerate(titles) if t.startswith("Upper bounds of overstatement"))]
    assert _values(bounds["data"][0]["x"]) == [b["upper"] for b in saved["bounds"].values()]
    dist = specs[next(i for i, t in enumerate(titles) if t.startswith("Book values"))]
    cents = np.round(made["df"]["amount"].to_numpy() * 100)
    assert sum(_values(dist["data"][0]["y"])) == int(np.sum(cents > 0))  # numpy on the ledger


def test_report_on_the_command_line(made, capsys):
    out_x, out_h = made["root"] / "cli.xlsx", made["root"] / "cli.html"
    assert main(["report", "--engagement", str(made["folder"]), "--xlsx", str(out_x), "--html", str(out_h),
                 "--json"]) == 0
    printed = json.loads(capsys.readouterr().out)
    assert printed["xlsx"] == str(out_x) and printed["html"] == str(out_h)
    wb = openpyxl.load_workbook(out_x)
    assert wb.sheetnames == list(MONETARY_SHEET_NAMES)
