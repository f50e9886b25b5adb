"""Results intake: entries, history, files, completeness and the sample frame.

Outside references: amounts in files are written in forms whose value is
plain arithmetic (``"1,234.50"`` is 1234.5); Excel files are written with
pandas/openpyxl and read back; the history rule is checked against a plain
Python model (a dict of the last value per item) with hypothesis.
"""

from __future__ import annotations

from datetime import datetime, timedelta, timezone

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from auditmean.errors import InputError, ParameterError
from auditmean.results import (
    LOG_COLUMNS,
    MISSING_TREATMENTS,
    Results,
    missing_items,
    read_results_file,
    record_results_file,
    sample_frame,
)

WHEN = datetime(2024, 3, 1, 9, 30, tzinfo=timezone.utc)


@pytest.fixture
def population() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "item_id": [f"C{i:03d}" for i in range(12)],
            "book_value": [100.0 * (i + 1) for i in range(12)],
        }
    )


@pytest.fixture
def selection() -> pd.DataFrame:
    # A selection as select() returns it (written out, so these tests do not depend on keys).
    return pd.DataFrame(
        {
            "item_id": ["C001", "C004", "C007", "C010", "C011"],
            "stratum": [1, 1, 2, 2, 2],
            "key": ["0" * 16] * 5,
            "order": [1, 2, 1, 2, 3],
        }
    )


@pytest.fixture
def empty(selection) -> Results:
    return Results.start(selection)


# --------------------------------------------------------------------------- entries and history


def test_entry_repeat_and_refused_change(empty):
    r = empty.record("C001", 95.0, "invoice seen", entered_by="ann", entered_at=WHEN)
    r = r.record("C001", "95.00", entered_by="bob", entered_at=WHEN)  # same value: a repeat, accepted
    with pytest.raises(InputError, match="replace=True") as info:
        r.record("C001", 90.0, entered_by="bob", entered_at=WHEN)
    assert "'C001' has 95.00" in str(info.value)
    assert len(r.log) == 2
    assert r.log["action"].tolist() == ["new", "repeat"]
    cur = r.current
    assert cur["audited_value"].tolist() == [95.0]
    assert cur["note"].tolist() == ["invoice seen"]  # a repeat without a note keeps the note
    assert cur["entered_by"].tolist() == ["ann"]  # who set the value


def test_replace_keeps_history(empty):
    r = empty.record("C004", 400.0, "agrees", entered_by="ann", entered_at=WHEN)
    later = WHEN + timedelta(hours=2)
    r = r.record("C004", 380.0, "credit note found", replace=True, entered_by="bob", entered_at=later)
    assert r.value_of("C004") == 380.0
    assert r.log["audited_value"].tolist() == [400.0, 380.0]  # nothing lost
    assert r.log["action"].tolist() == ["new", "replace"]
    assert r.log["note"].tolist() == ["agrees", "credit note found"]
    cur = r.current.iloc[0]
    assert cur["entered_by"] == "bob" and cur["entered_at"] == "2024-03-01T11:30:00.000+00:00"
    r = r.record("C004", 370.0, replace=True, entered_at=later)
    assert r.current.iloc[0]["note"] is None  # a replacement without a note does not inherit the old one
    assert list(r.log.columns) == list(LOG_COLUMNS)
    assert r.log["sequence"].tolist() == [1, 2, 3]


def test_timestamps_are_utc_and_need_a_zone(empty):
    # 12:00 at UTC+02:00 is 10:00 UTC (arithmetic).
    at = datetime(2024, 3, 1, 12, 0, tzinfo=timezone(timedelta(hours=2)))
    r = empty.record("C001", 1.0, entered_at=at)
    assert r.log["entered_at"].iloc[0] == "2024-03-01T10:00:00.000+00:00"
    with pytest.raises(ParameterError, match="time zone"):
        empty.record("C001", 1.0, entered_at=datetime(2024, 3, 1, 12, 0))


def test_unknown_and_not_selected_ids(empty, population):
    with pytest.raises(InputError, match="not in the population: 'ZZZ'"):
        empty.record("ZZZ", 1.0, population_ids=population["item_id"])
    with pytest.raises(InputError, match="items not in the selection: 'C000'"):
        empty.record("C000", 1.0, population_ids=population["item_id"])
    with pytest.raises(InputError, match="not in the selection: 'C000'"):
        empty.record("C000", 1.0)


@pytest.mark.parametrize("value", ["abc", "", None, True, float("nan"), float("inf")])
def test_bad_values(empty, value):
    with pytest.raises((InputError, ParameterError)):
        empty.record("C001", value)


def test_negative_and_unicode_notes_kept(empty):
    note = "\u05d0\u05d9\u05e9\u05d5\u05e8 \U0001f9fe e\u0301"
    r = empty.record("C007", "(12.00)", note)  # parentheses: -12 by parse_amounts' rules
    assert r.value_of("C007") == -12.0
    assert r.current["note"].iloc[0] == note


# --------------------------------------------------------------------------- files


def write_csv(path, rows, header=("ref", "audited", "memo")):
    pd.DataFrame(rows, columns=list(header)).to_csv(path, index=False)
    return path


def test_read_csv_file(tmp_path):
    path = write_csv(tmp_path / "r.csv", [["C001", "1,234.50", "ok"], ["C004", "-7", ""]])
    got = read_results_file(path, id_column="ref", value_column="audited", note_column="memo")
    assert got["item_id"].tolist() == ["C001", "C004"]
    assert got["audited_value"].tolist() == [1234.5, -7.0]  # arithmetic on the texts written
    assert got["note"].tolist() == ["ok", None]
    assert got["row"].tolist() == [2, 3]  # spreadsheet rows


def test_ids_stripped_like_population_intake(tmp_path):
    path = write_csv(tmp_path / "r.csv", [["  C001 ", "1", ""]])
    got = read_results_file(path, id_column="ref", value_column="audited")
    assert got["item_id"].tolist() == ["C001"]


def test_read_csv_decimal_comma(tmp_path):
    path = write_csv(tmp_path / "r.csv", [["C001", "1.234,50", ""]])
    got = read_results_file(path, id_column="ref", value_column="audited", decimal=",")
    assert got["audited_value"].tolist() == [1234.5]


def test_read_excel_file(tmp_path):
    path = tmp_path / "r.xlsx"
    pd.DataFrame({"ref": ["C001", 1007], "audited": [12.5, 3], "memo": ["x", None]}).to_excel(path, index=False)
    got = read_results_file(path, id_column="ref", value_column="audited", note_column="memo")
    assert got["item_id"].tolist() == ["C001", "1007"]  # whole-number cell read as its digits
    assert got["audited_value"].tolist() == [12.5, 3.0]
    assert got["note"].tolist() == ["x", None]


def test_file_duplicates_and_unreadable_values(tmp_path):
    path = write_csv(tmp_path / "d.csv", [["C001", "1", ""], ["C004", "2", ""], ["C001", "3", ""]])
    with pytest.raises(InputError, match="same item more than once") as info:
        read_results_file(path, id_column="ref", value_column="audited")
    assert info.value.rows == (2, 4) and info.value.file == str(path)
    path = write_csv(tmp_path / "v.csv", [["C001", "12.x", ""], ["C004", "", ""], ["C007", "5", ""]])
    with pytest.raises(InputError) as info:
        read_results_file(path, id_column="ref", value_column="audited")
    assert info.value.rows == (2, 3) and info.value.column == "audited"
    with pytest.raises(InputError, match="missing column 'amount'"):
        read_results_file(path, id_column="ref", value_column="amount")


def test_file_problems_reported_together_and_nothing_recorded(tmp_path, empty, population):
    path = write_csv(
        tmp_path / "p.csv",
        [["C001", "10", ""], ["NOPE", "1", ""], ["C000", "2", ""], ["C004", "3", ""], ["C002", "4", ""]],
    )
    with pytest.raises(InputError) as info:
        record_results_file(
            empty, path, id_column="ref", value_column="audited", population_ids=population["item_id"]
        )
    msg = str(info.value)
    assert "not in the population: 'NOPE'" in msg and "not in the selection: 'C000', 'C002'" in msg
    assert info.value.rows == (3, 4, 6) and info.value.file == str(path)
    assert empty.log.empty  # the record passed in is unchanged (records are immutable)


def test_file_conflict_needs_replace(tmp_path, empty):
    r = empty.record("C001", 10.0, entered_at=WHEN)
    path = write_csv(tmp_path / "c.csv", [["C001", "11", "recount"], ["C004", "3", ""]])
    with pytest.raises(InputError, match="already have a different audited value") as info:
        record_results_file(r, path, id_column="ref", value_column="audited", note_column="memo")
    assert info.value.rows == (2,)
    r2 = record_results_file(r, path, id_column="ref", value_column="audited", note_column="memo", replace=True)
    assert r2.value_of("C001") == 11.0 and r2.value_of("C004") == 3.0
    assert r2.log["audited_value"].tolist() == [10.0, 11.0, 3.0]
    assert r2.log["source"].iloc[-1] == f"file {path}" and r2.log["source_row"].tolist()[1:] == [2, 3]


# --------------------------------------------------------------------------- completeness


def test_missing_items(selection, empty):
    r = empty.record("C001", 1.0).record("C010", 2.0)
    assert missing_items(selection, r)["item_id"].tolist() == ["C004", "C007", "C011"]
    plain = pd.DataFrame({"item_id": ["C004"], "audited_value": [5.0]})
    assert missing_items(selection, plain)["item_id"].tolist() == ["C001", "C007", "C010", "C011"]


def test_sample_frame_refuses_partial_set_by_default(selection, empty, population):
    r = empty.record("C001", 150.0)
    with pytest.raises(InputError, match="4 of 5 selected items have no audited value"):
        sample_frame(selection, r, population)
    with pytest.raises(ParameterError, match="missing_treatment"):
        sample_frame(selection, r, population, missing_treatment="exclude")
    assert MISSING_TREATMENTS == ("error", "at_book_value", "as_zero")


def test_sample_frame_treatments(selection, empty, population):
    r = empty.record("C001", 150.0, "short").record("C007", 800.0)
    at_book = sample_frame(selection, r, population, missing_treatment="at_book_value")
    f = at_book.frame
    assert list(f.columns) == ["stratum", "item_id", "book_value", "audited_value", "note", "audited_source"]
    assert f["item_id"].tolist() == ["C001", "C004", "C007", "C010", "C011"]
    # book value of C{i} is 100 * (i + 1) (fixture arithmetic)
    assert f["book_value"].tolist() == [200.0, 500.0, 800.0, 1100.0, 1200.0]
    assert f["audited_value"].tolist() == [150.0, 500.0, 800.0, 1100.0, 1200.0]
    assert at_book.missing["item_id"].tolist() == ["C004", "C010", "C011"]
    assert at_book.missing_treatment == "at_book_value"
    zero = sample_frame(selection, r, population, missing_treatment="as_zero").frame
    assert zero["audited_value"].tolist() == [150.0, 0.0, 800.0, 0.0, 0.0]
    assert zero["audited_source"].tolist()[:2] == ["entered", "missing: as_zero"]
    assert "treated as 'as_zero'" in sample_frame(selection, r, population, missing_treatment="as_zero").summary()


def test_sample_frame_complete_and_population_checks(selection, empty, population):
    r = empty
    for i, item in enumerate(selection["item_id"]):
        r = r.record(item, float(i))
    sf = sample_frame(selection, r, population)
    assert sf.missing.empty and sf.frame["audited_value"].tolist() == [0.0, 1.0, 2.0, 3.0, 4.0]
    with pytest.raises(InputError, match="not in the population"):
        sample_frame(selection, r, population[population["item_id"] != "C010"])
    with pytest.raises(InputError, match="duplicate item ids"):
        sample_frame(selection, r, pd.concat([population, population.iloc[[0]]], ignore_index=True))


# --------------------------------------------------------------------------- rebuilding from a log


def test_from_log_round_trip_and_checks(selection, empty):
    r = empty.record("C001", 1.0, "a").record("C001", 2.0, replace=True).record("C004", 3.0)
    entries = r.log.to_dict(orient="records")
    back = Results.from_log(selection, entries)
    pd.testing.assert_frame_equal(back.log, r.log)
    pd.testing.assert_frame_equal(back.current, r.current)
    tampered = [dict(e) for e in entries]
    tampered[1]["action"] = "repeat"  # a changed value not marked as a replacement
    with pytest.raises(InputError, match="action does not fit") as info:
        Results.from_log(selection, tampered)
    assert info.value.rows == (2,)
    broken = [dict(e) for e in entries]
    broken[2]["audited_value"] = "3"
    with pytest.raises(InputError, match="wrong type") as info:
        Results.from_log(selection, broken)
    assert info.value.rows == (3,)
    other = [dict(e) for e in entries]
    other[0]["item_id"] = "C999"
    with pytest.raises(InputError, match="not in the selection"):
        Results.from_log(selection, other)


@settings(max_examples=25, deadline=None)
@given(
    st.lists(
        st.tuples(st.sampled_from(["C001", "C004", "C007"]), st.integers(-3, 3), st.none() | st.text(max_size=4)),
        max_size=15,
    )
)
def test_property_current_is_last_value_and_nothing_lost(entries):
    r = Results.start(pd.DataFrame({"item_id": ["C001", "C004", "C007"], "stratum": ["a", "a", "b"]}))
    model: dict[str, float] = {}
    for item, value, note in entries:
        r = r.record(item, float(value), note, replace=True, entered_at=WHEN)
        model[item] = float(value)
    assert len(r.log) == len(entries)  # every entry kept
    assert dict(zip(r.current["item_id"], r.current["audited_value"])) == model
    assert r.log["audited_value"].tolist() == [float(v) for _, v, _ in entries]
    assert np.array_equal(Results.from_log(r.selection, r.log.to_dict("records")).current["audited_value"], r.current["audited_value"])


def test_summary_and_to_dict(empty):
    r = empty.record("C001", 1.0, "<b>bold</b>")
    assert "1 of 5 selected items" in r.summary()
    d = r.to_dict()
    assert d["kind"] == "results" and d["log"][0]["note"] == "<b>bold</b>"
