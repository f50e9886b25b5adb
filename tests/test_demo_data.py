"""Integrity checks of the INVENTED demo data in ``demo_data/``.

These check that the demo is what its README says it is: reproducible byte
for byte from ``make_demo.py``, internally consistent (strata add up, the
sample is drawn from the ledger, audited values agree across files). Every
number compared here is recomputed in this file by plain arithmetic on the
committed CSVs; nothing is a claim about estimation.
"""

from __future__ import annotations

import hashlib
import importlib.util
import json
import subprocess
import sys
from decimal import Decimal
from pathlib import Path

import pandas as pd
import pytest

DEMO = Path(__file__).resolve().parents[1] / "demo_data"
SCRIPT = DEMO / "make_demo.py"


def _load_script():
    spec = importlib.util.spec_from_file_location("make_demo_under_test", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


make_demo = _load_script()


def _read(name: str) -> pd.DataFrame:
    """A demo CSV as text, exactly as written (no type guessing, no NA parsing)."""
    return pd.read_csv(DEMO / name, dtype=str, keep_default_na=False)


def _cents(text: str) -> int:
    """Whole cents of a plain amount such as ``-1234.50``; refuses anything else."""
    value = Decimal(text)
    if value.as_tuple().exponent != -2:
        raise ValueError(f"amount {text!r} does not have exactly two decimals")
    return int(value * 100)


def _cents_column(frame: pd.DataFrame, column: str) -> list[int]:
    return [_cents(v) for v in frame[column]]


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture(scope="module")
def manifest() -> dict:
    return json.loads((DEMO / "MANIFEST.json").read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def regenerated(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("demo")
    subprocess.run(
        [sys.executable, str(SCRIPT), "--out", str(out)],
        check=True,
        capture_output=True,
        timeout=120,
    )
    return out


@pytest.fixture(scope="module")
def invoices() -> pd.DataFrame:
    frame = _read("invoices.csv")
    frame["book_cents"] = _cents_column(frame, "book_value")
    return frame


@pytest.fixture(scope="module")
def audited() -> pd.DataFrame:
    frame = _read("invoices_audited.csv")
    frame["audited_cents"] = _cents_column(frame, "audited_value")
    return frame


def _stratum_of(book_cents: int) -> str:
    """Stratum of one invoice by the README's rule, written out here (only the bounds are shared)."""
    upper_1, upper_2, upper_3 = make_demo.STRATUM_UPPER_CENTS
    if book_cents < 0:
        return "credits"
    if book_cents >= make_demo.TOP_THRESHOLD_CENTS:
        return "top"
    if book_cents < upper_1:
        return "1"
    if book_cents < upper_2:
        return "2"
    if book_cents < upper_3:
        return "3"
    return "4"


# -- reproducibility -------------------------------------------------------


def test_rerun_reproduces_committed_files(manifest, regenerated):
    # Each regenerated file must hash to the committed MANIFEST entry, and the
    # committed file too (so nobody edited a CSV by hand).
    assert set(manifest["files"]) == {p.name for p in regenerated.glob("*.csv")}
    for name, entry in manifest["files"].items():
        assert _sha256(regenerated / name) == entry["sha256"], name
        assert _sha256(DEMO / name) == entry["sha256"], name
    assert (regenerated / "MANIFEST.json").read_bytes() == (DEMO / "MANIFEST.json").read_bytes()


def test_labelled_invented(manifest):
    assert manifest["invented"] is True
    assert "INVENTED" in manifest["note"]
    assert all("INVENTED" in e["description"] for e in manifest["files"].values())
    assert "INVENTED" in (DEMO / "README.md").read_text(encoding="utf-8")
    assert "INVENTED" in (SCRIPT.read_text(encoding="utf-8").split('"""')[1])


def test_manifest_rows_and_totals_match_files(manifest):
    for name, entry in manifest["files"].items():
        frame = _read(name)
        assert len(frame) == entry["rows"], name
        column = entry["total_of"]
        if column is None:
            assert entry["total"] is None, name
        elif column == "lines":
            assert sum(int(v) for v in frame[column]) == entry["total"], name
        elif name == "invoices_export.csv":
            continue  # its amounts are checked against invoices.csv below
        else:
            # The manifest rounds the cent sum to 2 decimals; compare in cents.
            assert sum(_cents_column(frame, column)) == round(entry["total"] * 100), name


# -- invoices --------------------------------------------------------------


def test_ids_unique(invoices, audited):
    assert invoices["invoice_no"].is_unique
    assert invoices["invoice_no"].str.fullmatch(r"INV-\d{6}").all()
    assert audited["invoice_no"].is_unique
    sample = _read("invoice_sample.csv")
    assert sample["invoice_no"].is_unique
    stock = _read("stock_lines.csv")
    assert stock["line_id"].is_unique
    assert stock["sku"].is_unique
    assert _read("stock_counted.csv")["line_id"].is_unique


def test_audited_file_covers_every_invoice_in_the_same_order(invoices, audited):
    assert audited["invoice_no"].tolist() == invoices["invoice_no"].tolist()
    wrong = [a != b for a, b in zip(invoices["book_cents"], audited["audited_cents"], strict=True)]
    noted = (audited["finding"] != "").tolist()
    # A finding is written exactly where the audited value differs from book.
    assert wrong == noted


def test_invoice_dates_within_the_year(invoices):
    dates = pd.to_datetime(invoices["invoice_date"], format="%Y-%m-%d")
    assert dates.min() >= pd.Timestamp("2024-01-01")
    assert dates.max() <= pd.Timestamp("2024-12-31")


def test_export_amounts_read_back_to_book_values(invoices):
    export = _read("invoices_export.csv")
    assert export.drop(columns="book_value").equals(
        invoices.drop(columns=["book_value", "book_cents"])
    )

    def back(text: str) -> int:
        negative = text.startswith("(") and text.endswith(")")
        body = text[1:-1] if negative else text
        assert body.startswith("¤"), text
        cents = _cents(body[1:].replace(",", ""))
        return -cents if negative else cents

    assert [back(v) for v in export["book_value"]] == invoices["book_cents"].tolist()
    # Thousands separators are present where the amount reaches 1,000.00.
    assert export["book_value"][invoices["book_cents"].abs() >= 100_000].str.contains(",").all()


def test_strata_counts_and_totals_are_sums_of_invoices(invoices):
    strata = _read("invoice_strata.csv")
    expected: dict[str, list[int]] = {}
    for cents in invoices["book_cents"]:
        entry = expected.setdefault(_stratum_of(cents), [0, 0])
        entry[0] += 1
        entry[1] += cents
    got = {
        name: [int(count), _cents(total)]
        for name, count, total in zip(
            strata["stratum"], strata["count"], strata["book_total"], strict=True
        )
    }
    assert got == expected
    # Arithmetic: the strata partition the ledger.
    assert sum(c for c, _ in got.values()) == len(invoices)
    assert sum(t for _, t in got.values()) == sum(invoices["book_cents"])


def test_sample_items_come_from_the_ledger(invoices, audited):
    sample = _read("invoice_sample.csv")
    book = dict(zip(invoices["invoice_no"], invoices["book_cents"], strict=True))
    true = dict(zip(audited["invoice_no"], audited["audited_cents"], strict=True))
    for row in sample.itertuples():
        assert row.invoice_no in book, row.invoice_no
        assert _cents(row.book_value) == book[row.invoice_no], row.invoice_no
        assert _cents(row.audited_value) == true[row.invoice_no], row.invoice_no
        assert row.stratum == _stratum_of(book[row.invoice_no]), row.invoice_no


def test_sample_sizes_and_top_stratum_in_full(invoices):
    sample = _read("invoice_sample.csv")
    strata = _read("invoice_strata.csv").set_index("stratum")
    drawn = sample["stratum"].value_counts()
    top_ids = set(invoices["invoice_no"][invoices["book_cents"] >= make_demo.TOP_THRESHOLD_CENTS])
    assert top_ids  # the demo has a top stratum at all
    assert set(sample["invoice_no"][sample["stratum"] == "top"]) == top_ids
    assert drawn["top"] == int(strata.loc["top", "count"])
    for name, size in make_demo.SAMPLE_SIZE.items():
        assert drawn[name] == min(size, int(strata.loc[name, "count"])), name
    assert set(drawn.index) == set(strata.index)


# -- stock count -----------------------------------------------------------


def test_stock_counted_value_is_quantity_times_unit_cost():
    lines = _read("stock_lines.csv")
    counted = _read("stock_counted.csv")
    assert counted["line_id"].tolist() == lines["line_id"].tolist()
    quantity = [int(q) for q in counted["counted_quantity"]]
    assert min(quantity) >= 0
    unit = _cents_column(lines, "unit_cost")
    value = _cents_column(counted, "counted_value")
    # Arithmetic: value in cents = quantity x unit cost in cents, exactly.
    assert value == [q * u for q, u in zip(quantity, unit, strict=True)]


def test_stock_locations_count_the_lines():
    lines = _read("stock_lines.csv")
    locations = _read("stock_locations.csv")
    assert locations["location"].is_unique
    counts = lines["location"].value_counts()
    assert {r.location: int(r.lines) for r in locations.itertuples()} == counts.to_dict()
