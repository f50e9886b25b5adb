"""Tests of auditmean.population: intake, fingerprints and the profile.

Outside references: Python's csv, hashlib, fractions and sorted() (to write
the files and recompute the fingerprints from the documented rule),
openpyxl and pyarrow (to write the workbooks and Parquet files), numpy,
pandas and scipy.stats (for the statistics), and arithmetic shown beside
the checks.
"""

from __future__ import annotations

import csv
import hashlib
import math
from fractions import Fraction
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
import scipy.stats

from auditmean.errors import InputError, ParameterError
from auditmean.population import Population, Profile, content_fingerprint, load_population, profile

# item id as written, book value as written in the CSV, the value it means, stratum
ITEMS = [
    ("INV-10", "1,234.56", 1234.56, "North"),
    (" INV-9 ", "(10.00)", -10.0, "South"),  # id written with spaces around it
    ("1001", "0.00", 0.0, "North"),
    ("caf\u00e9", "5.50", 5.5, "South"),
    ("Zed", "0.10", 0.1, "North"),
    ("apple", "1000000", 1000000.0, "East"),
    ("007", "-0.004", -0.004, "East"),  # rounds to -0.00, written 0.00 in the fingerprint
]
IDS = [i.strip() for i, _, _, _ in ITEMS]
VALUES = [v for _, _, v, _ in ITEMS]
STRATA = [s for _, _, _, s in ITEMS]
# 1234.56 - 10 + 0 + 5.5 + 0.1 + 1000000 - 0.004 = 1001230.156
TOTAL = 1001230.156


def documented_fingerprint(ids, values, strata=None) -> str:
    """The canonical text as Population.content_sha256's docstring defines it, hashed with hashlib."""
    rows = sorted(zip(ids, values, strata if strata is not None else [None] * len(ids)))
    lines = []
    for item_id, value, stratum in rows:
        amount = format(value, ".2f")
        if amount == "-0.00":
            amount = "0.00"
        lines.append(f"{item_id}\t{amount}" + ("" if stratum is None else f"\t{stratum}") + "\n")
    return hashlib.sha256("".join(lines).encode("utf-8")).hexdigest()


def write_csv(path: Path, header, rows, trailer: str = "") -> Path:
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        w.writerows(rows)
        fh.write(trailer)
    return path


@pytest.fixture
def csv_file(tmp_path: Path) -> Path:
    return write_csv(
        tmp_path / "ledger.csv",
        ["invoice", "region", "amount"],
        [(i, s, a) for i, a, _, s in ITEMS],
    )


@pytest.fixture
def xlsx_file(tmp_path: Path) -> Path:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Ledger"
    ws.append(["invoice", "region", "amount"])
    for item_id, _, value, stratum in ITEMS:
        # a number cell for the whole-number id, text for the others; amounts as numbers
        ws.append([int(item_id) if item_id == "1001" else item_id, stratum, value])
    path = tmp_path / "ledger.xlsx"
    wb.save(path)
    return path


@pytest.fixture
def parquet_file(tmp_path: Path) -> Path:
    path = tmp_path / "ledger.parquet"
    table = pa.table(
        {
            "invoice": pa.array(IDS, pa.string()),
            "region": pa.array(STRATA, pa.string()),
            "amount": pa.array(VALUES, pa.float64()),
        }
    )
    pq.write_table(table, path)
    return path


def load(src, **kw) -> Population:
    return load_population(src, id_column="invoice", value_column="amount", **kw)


# ---------------------------------------------------------------------------
# Loading


def test_csv_items_values_and_types(csv_file: Path) -> None:
    pop = load(csv_file)
    assert list(pop.items.columns) == ["item_id", "book_value"]
    assert pop.items["item_id"].tolist() == IDS  # surrounding spaces removed, "007" kept as text
    assert pd.api.types.is_string_dtype(pop.items["item_id"].dtype)
    assert pop.items["book_value"].dtype == np.float64
    assert pop.items["book_value"].tolist() == VALUES  # the values written beside ITEMS
    assert pop.items.index.equals(pd.RangeIndex(len(ITEMS)))
    assert pop.count == 7
    assert pop.total == pytest.approx(TOTAL, rel=1e-15)  # arithmetic beside TOTAL
    assert pop.source == str(csv_file)
    assert (pop.id_column, pop.value_column, pop.stratum_column) == ("invoice", "amount", None)


def test_total_is_the_correctly_rounded_sum(csv_file: Path) -> None:
    pop = load(csv_file)
    # Outside reference: the exact rational sum of the float64 values, rounded once by float().
    assert pop.total == float(sum(Fraction(v) for v in pop.book_values))


def test_preassigned_stratum_column(csv_file: Path) -> None:
    pop = load(csv_file, stratum_column="region")
    assert list(pop.items.columns) == ["item_id", "book_value", "preassigned_stratum"]
    assert pop.items["preassigned_stratum"].tolist() == STRATA
    assert pop.preassigned_strata.tolist() == STRATA
    assert pop.stratum_column == "region"


def test_file_sha256_is_the_hash_of_the_bytes(csv_file: Path, xlsx_file: Path, parquet_file: Path) -> None:
    for path in (csv_file, xlsx_file, parquet_file):
        # Outside reference: hashlib.sha256 of the file's bytes
        assert load(path).file_sha256 == hashlib.sha256(path.read_bytes()).hexdigest()
    assert load(pd.DataFrame({"invoice": IDS, "amount": VALUES})).file_sha256 is None


def test_same_items_same_content_fingerprint_in_every_format(
    csv_file: Path, xlsx_file: Path, parquet_file: Path
) -> None:
    frame = pd.DataFrame({"invoice": IDS, "amount": VALUES, "region": STRATA})
    sources = [csv_file, xlsx_file, parquet_file, frame]
    plain = {load(s).content_sha256 for s in sources}
    with_strata = {load(s, stratum_column="region").content_sha256 for s in sources}
    assert plain == {documented_fingerprint(IDS, VALUES)}
    assert with_strata == {documented_fingerprint(IDS, VALUES, STRATA)}
    assert plain != with_strata
    assert {load(s).items["item_id"].tolist() == IDS for s in sources} == {True}


def test_content_fingerprint_follows_the_documented_rule() -> None:
    # ids that sort differently by code point than by eye or by number:
    # "10" < "9" < "B" < "a" < "é" (U+0031, U+0039, U+0042, U+0061, U+00E9)
    ids = ["\u00e9", "a", "B", "9", "10"]
    values = [1.005, -2.5, 0.0, 1e9 + 0.125, -0.0]
    expected = documented_fingerprint(ids, values)
    assert content_fingerprint(ids, values) == expected
    # the canonical text written out by hand from the rule (1.005 is stored as 1.00499999999999989...)
    text = "10\t0.00\n9\t1000000000.12\nB\t0.00\na\t-2.50\n\u00e9\t1.00\n"
    assert expected == hashlib.sha256(text.encode("utf-8")).hexdigest()


def test_content_fingerprint_ignores_row_order_and_float_noise_but_not_cents() -> None:
    frame = pd.DataFrame({"invoice": IDS, "amount": VALUES})
    base = load(frame).content_sha256
    assert load(frame.iloc[::-1]).content_sha256 == base
    noisy = frame.assign(amount=frame["amount"] + np.array([1e-9] + [0.0] * (len(IDS) - 1)))
    assert load(noisy).content_sha256 == base
    cent = frame.assign(amount=frame["amount"] + np.array([0.01] + [0.0] * (len(IDS) - 1)))
    assert load(cent).content_sha256 != base
    renamed = frame.assign(invoice=[i + "x" if i == "Zed" else i for i in IDS])
    assert load(renamed).content_sha256 != base


def test_excel_sheet_by_name_and_position(tmp_path: Path) -> None:
    wb = openpyxl.Workbook()
    wb.active.title = "Notes"
    wb.active.append(["nothing here"])
    ws = wb.create_sheet("Items")
    ws.append(["invoice", "amount"])
    ws.append(["A", "$1,000.00"])
    ws.append([1002, 25])
    path = tmp_path / "book.xlsx"
    wb.save(path)
    for sheet in ("Items", 1):
        pop = load(path, sheet=sheet)
        assert pop.items["item_id"].tolist() == ["A", "1002"]  # the number cell 1002 as its digits
        assert pop.book_values.tolist() == [1000.0, 25.0]
    with pytest.raises(InputError, match="no sheet named 'Ledger'; its sheets are 'Notes', 'Items'"):
        load(path, sheet="Ledger")
    with pytest.raises(InputError, match="no sheet at position 2"):
        load(path, sheet=2)


def test_decimal_comma_and_semicolon_file(tmp_path: Path) -> None:
    path = tmp_path / "eu.csv"
    path.write_text("invoice;amount\nA;1.234,56\nB;-0,50\n", encoding="utf-8")
    pop = load(path, sep=";", decimal=",")
    assert pop.book_values.tolist() == [1234.56, -0.5]  # as written, comma decimal


def test_tsv_and_other_encoding(tmp_path: Path) -> None:
    tsv = tmp_path / "items.tsv"
    tsv.write_text("invoice\tamount\nA\t1\n", encoding="utf-8")
    assert load(tsv).book_values.tolist() == [1.0]
    latin = tmp_path / "latin.csv"
    latin.write_bytes("invoice,amount\ncaf\u00e9,1\n".encode("cp1252"))
    with pytest.raises(InputError, match="not valid utf-8 text.*encoding='cp1252'"):
        load(latin)
    assert load(latin, encoding="cp1252").item_ids.tolist() == ["caf\u00e9"]


def test_byte_order_mark_and_trailing_empty_lines(tmp_path: Path) -> None:
    path = tmp_path / "bom.csv"
    path.write_bytes(b"\xef\xbb\xbfinvoice,amount\r\nA,1\r\nB,2\r\n\r\n\r\n")
    pop = load(path)
    assert pop.count == 2  # the empty lines after the data are not rows
    assert pop.book_values.tolist() == [1.0, 2.0]


def test_header_cells_are_trimmed(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "h.csv", [" invoice ", "amount "], [("A", "1")])
    assert load(path).count == 1


# ---------------------------------------------------------------------------
# Errors


def test_missing_file(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="no such file") as info:
        load(tmp_path / "nope.csv")
    assert info.value.file == str(tmp_path / "nope.csv")


def test_empty_file_and_header_only(tmp_path: Path) -> None:
    empty = tmp_path / "empty.csv"
    empty.write_bytes(b"")
    with pytest.raises(InputError, match="empty") as info:
        load(empty)
    assert "empty.csv" in str(info.value)
    header = tmp_path / "header.csv"
    header.write_text("invoice,amount\n")
    with pytest.raises(InputError, match="no data rows") as info:
        load(header)
    assert "header.csv" in str(info.value)
    frame = pd.DataFrame({"invoice": pd.Series([], dtype=str), "amount": pd.Series([], dtype=float)})
    with pytest.raises(InputError, match="no data rows"):
        load(frame)


def test_row_one_must_hold_the_header(tmp_path: Path) -> None:
    path = tmp_path / "late.csv"
    path.write_text("\ninvoice,amount\nA,1\n")
    with pytest.raises(InputError, match="row 1 is empty"):
        load(path)


def test_missing_columns_list_the_columns_present(csv_file: Path) -> None:
    with pytest.raises(InputError) as info:
        load_population(csv_file, id_column="invoice", value_column="book_value")
    err = info.value
    assert err.column == "book_value" and err.file == str(csv_file)
    assert "'invoice', 'region', 'amount'" in str(err)
    with pytest.raises(InputError, match="did you mean 'invoice'"):
        load_population(csv_file, id_column="Invoice", value_column="amount")


def test_semicolon_file_read_with_commas_gets_a_hint(tmp_path: Path) -> None:
    path = tmp_path / "semi.csv"
    path.write_text("invoice;amount\nA;1\n")
    with pytest.raises(InputError, match="pass sep=';'"):
        load(path)


def test_column_named_twice_in_header(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "twice.csv", ["invoice", "amount", "amount"], [("A", "1", "2")])
    with pytest.raises(InputError, match="2 columns 'amount' \\(columns B, C\\)"):
        load(path)


def test_duplicate_ids_list_the_rows_of_each(tmp_path: Path) -> None:
    rows = [("A", "1"), ("B", "2"), ("A", "3"), ("C", "4"), ("B", "5"), (" A ", "6")]
    path = write_csv(tmp_path / "dup.csv", ["invoice", "amount"], rows)
    with pytest.raises(InputError) as info:
        load(path)
    err = info.value
    # data positions 0, 2, 5 hold A and 1, 4 hold B; spreadsheet row = position + 2
    assert err.rows == (2, 3, 4, 6, 7)
    assert err.column == "invoice" and err.file == str(path)
    assert "'A' on rows 2, 4, 7" in str(err) and "'B' on rows 3, 6" in str(err)


def test_blank_ids_and_empty_lines_between_rows(tmp_path: Path) -> None:
    path = tmp_path / "blank.csv"
    path.write_text("invoice,amount\nA,1\n,2\n\nC,4\n   ,5\n")
    with pytest.raises(InputError) as info:
        load(path)
    err = info.value
    assert err.rows == (3, 4, 6)  # ",2" is row 3, the empty line row 4, "   ,5" row 6
    assert err.column == "invoice"
    assert "row 4 is entirely empty" in str(err)


def test_unreadable_amounts_name_file_column_and_rows(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "bad.csv", ["invoice", "amount"], [("A", "1"), ("B", "x"), ("C", ""), ("D", "1,23")])
    with pytest.raises(InputError) as info:
        load(path)
    err = info.value
    assert err.rows == (3, 4, 5)
    assert err.column == "amount" and err.file == str(path)
    assert "'x'" in str(err) and "decimal=','" in str(err)


def test_ids_with_line_breaks_or_tabs_are_refused(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "ctrl.csv", ["invoice", "amount"], [("A", "1"), ("B\nC", "2"), ("D\tE", "3")])
    with pytest.raises(InputError, match="control character") as info:
        load(path)
    assert info.value.rows == (3, 4)


def test_non_text_ids_in_a_frame_are_refused() -> None:
    frame = pd.DataFrame({"invoice": [1001.0, 1002.5], "amount": [1.0, 2.0]})
    with pytest.raises(InputError, match="neither text nor a whole number") as info:
        load(frame)
    assert info.value.rows == (2, 3) and info.value.table == "population"
    # whole numbers are written as their digits
    ints = load(pd.DataFrame({"invoice": [1001, 1002], "amount": [1.0, 2.0]}))
    assert ints.item_ids.tolist() == ["1001", "1002"]


def test_blank_preassigned_stratum_is_refused(tmp_path: Path) -> None:
    path = write_csv(tmp_path / "s.csv", ["invoice", "amount", "region"], [("A", "1", "North"), ("B", "2", " ")])
    with pytest.raises(InputError, match="without a stratum") as info:
        load(path, stratum_column="region")
    assert info.value.rows == (3,) and info.value.column == "region"


def test_unknown_file_type_and_bad_files(tmp_path: Path) -> None:
    js = tmp_path / "items.json"
    js.write_text("{}")
    with pytest.raises(InputError, match="'.json' is not one auditmean reads"):
        load(js)
    fake = tmp_path / "fake.xlsx"
    fake.write_text("not a workbook")
    with pytest.raises(InputError, match="cannot be read as an Excel workbook"):
        load(fake)
    fake_pq = tmp_path / "fake.parquet"
    fake_pq.write_text("not parquet")
    with pytest.raises(InputError, match="cannot be read as a Parquet file"):
        load(fake_pq)
    ragged = tmp_path / "ragged.csv"
    ragged.write_text("invoice,amount\nA,1,extra\n")
    with pytest.raises(InputError, match="cannot be read as ','-separated text"):
        load(ragged)


def test_bad_parameters(csv_file: Path) -> None:
    with pytest.raises(ParameterError, match="value_column"):
        load_population(csv_file, id_column="invoice", value_column="invoice")
    with pytest.raises(ParameterError, match="decimal"):
        load(csv_file, decimal=";")
    with pytest.raises(ParameterError, match="sep"):
        load(csv_file, sep=";;")
    with pytest.raises(ParameterError, match="encoding"):
        load(csv_file, encoding="no-such-encoding")
    with pytest.raises(ParameterError, match="source"):
        load(12345)


# ---------------------------------------------------------------------------
# Record output


def test_summary_html_and_dict(csv_file: Path) -> None:
    pop = load(csv_file, stratum_column="region")
    text = pop.summary()
    assert "7" in text and "1,001,230.16" in text  # TOTAL with two decimals
    assert "region (3 strata)" in text  # North, South, East
    assert pop.content_sha256 in text
    frame_pop = load(pd.DataFrame({"invoice": ["<b>x</b>"], "amount": [1.0]}))
    html_out = frame_pop._repr_html_()
    assert "&lt;DataFrame&gt;" in html_out and "<DataFrame>" not in html_out
    d = pop.to_dict()
    assert d["kind"] == "population" and d["content_sha256"] == pop.content_sha256


def test_book_values_are_read_only(csv_file: Path) -> None:
    values = load(csv_file).book_values
    with pytest.raises(ValueError):
        values[0] = 1.0


# ---------------------------------------------------------------------------
# Profile


@pytest.fixture(scope="module")
def skewed() -> np.ndarray:
    rng = np.random.default_rng(20240601)
    x = np.round(rng.lognormal(6.0, 1.4, 5000), 2)
    x[:60] = -x[:60]  # credits
    x[60:90] = 0.0  # zeros
    return x


def test_profile_against_numpy_scipy_and_pandas(skewed: np.ndarray) -> None:
    p = profile(skewed)
    assert p.count == 5000
    # exact rational sum rounded once (Python fractions)
    assert p.total == float(sum(Fraction(v) for v in skewed.tolist()))
    assert p.mean == pytest.approx(np.mean(skewed), rel=1e-13)  # numpy
    assert p.std_dev == pytest.approx(np.std(skewed, ddof=1), rel=1e-12)  # numpy, ddof=1
    assert p.skewness == pytest.approx(scipy.stats.skew(skewed, bias=False), rel=1e-10)  # scipy G1
    levels = [0, 0.01, 0.05, 0.25, 0.5, 0.75, 0.95, 0.99, 1]
    assert list(p.quantiles) == levels
    # pandas' linear interpolation is Hyndman & Fan's definition 7, as numpy's default
    expected = pd.Series(skewed).quantile(levels, interpolation="linear").to_numpy()
    assert np.allclose(list(p.quantiles.values()), expected, rtol=1e-14, atol=0)
    assert p.quantiles[0] == skewed.min() and p.quantiles[1] == skewed.max()
    assert (p.credit_count, p.zero_count, p.positive_count) == (60, 30, 4910)
    assert p.credit_total == pytest.approx(skewed[:60].sum(), rel=1e-13)
    assert p.positive_total == pytest.approx(skewed[90:].sum(), rel=1e-13)


def test_profile_counts_and_totals_by_hand() -> None:
    p = profile([100.0, 50.0, 30.0, 20.0, 0.0, 0.0, -10.0, -5.5])
    assert (p.credit_count, p.credit_total) == (2, -15.5)  # -10 - 5.5
    assert p.zero_count == 2
    assert (p.positive_count, p.positive_total) == (4, 200.0)  # 100 + 50 + 30 + 20
    assert p.total == 184.5  # 200 - 15.5
    assert p.mean == 184.5 / 8
    # four positive items: ceil(0.01 * 4) = ceil(0.05 * 4) = 1 item, the largest (100) of 200
    assert p.top_1pct_share == 0.5 and p.top_5pct_share == 0.5


def test_top_shares_by_hand() -> None:
    # 40 positive items 1..40 (total 40*41/2 = 820) plus credits and zeros, which do not count
    p = profile(np.concatenate([np.arange(1.0, 41.0), [0.0, -7.0, -100.0]]))
    assert p.top_1pct_share == pytest.approx(40 / 820)  # ceil(0.4) = 1 item: 40
    assert p.top_5pct_share == pytest.approx((40 + 39) / 820)  # ceil(2.0) = 2 items: 40 + 39
    # 200 positive items 1..200, total 200*201/2 = 20100
    p = profile(np.arange(200.0, 0.0, -1.0))
    assert p.top_1pct_share == pytest.approx((200 + 199) / 20100)  # ceil(2) = 2 items
    assert p.top_5pct_share == pytest.approx(sum(range(191, 201)) / 20100)  # 10 items: 1955
    # 300 items: 1% is exactly 3 items (not 4, whatever 0.01 * 300 rounds to)
    p = profile(np.arange(1.0, 301.0))
    assert p.top_1pct_share == pytest.approx((300 + 299 + 298) / (300 * 301 / 2))


def test_top_shares_without_positive_items_are_nan() -> None:
    p = profile([-1.0, 0.0, -3.0])
    assert math.isnan(p.top_1pct_share) and math.isnan(p.top_5pct_share)


def test_notes_on_credits_and_zeros() -> None:
    p = profile([10.0, 20.0, -5.0, 0.0, 0.0])
    assert len(p.notes) == 2
    assert p.notes[0].startswith("1 item has a credit (negative) book value, -5.00 in all")
    assert "stratum of their own" in p.notes[0]
    assert p.notes[1].startswith("2 items have a book value of zero")
    assert "unrecorded" in p.notes[1]
    assert profile([1.0, 2.0, 3.0]).notes == ()


def test_small_and_constant_samples() -> None:
    one = profile([5.0])
    assert math.isnan(one.std_dev) and math.isnan(one.skewness)
    two = profile([1.0, 3.0])
    assert two.std_dev == pytest.approx(math.sqrt(2.0))  # ((1-2)^2 + (3-2)^2) / (2-1) = 2
    assert math.isnan(two.skewness)  # G1 needs n >= 3 (divides by n - 2)
    # equal values: no spread; the package reports skewness 0 for them (core.moments convention)
    const = profile([0.1] * 10)
    assert const.std_dev == pytest.approx(0.0, abs=1e-15) and const.skewness == 0.0


def test_profile_of_population_equals_profile_of_its_values(csv_file: Path) -> None:
    pop = load(csv_file)
    assert profile(pop) == profile(pop.book_values)
    assert profile(pop).count == 7


def test_profile_reads_text_amounts_and_reports_bad_ones() -> None:
    assert profile(["$1,000.00", "(20.00)"]).total == 980.0  # 1000 - 20
    with pytest.raises(InputError) as info:
        profile(["1", "x"])
    assert info.value.rows == (3,) and info.value.table == "values"
    with pytest.raises(ParameterError):
        profile([])


def test_profile_record_output() -> None:
    p = profile([10.0, 20.0, -5.0, 0.0])
    assert isinstance(p, Profile)
    text = p.summary()
    assert "skewness (G1)" in text and "Notes:" in text and "50% (median)" in text
    assert "<li>" in p._repr_html_()
    d = p.to_dict()
    assert d["kind"] == "profile" and d["quantiles"]["0.5"] == 5.0  # median of -5, 0, 10, 20
