"""The engagement folder: records on disk, resuming, refusing corrupt or foreign files.

Outside references: population fingerprints are computed here with Python's
hashlib on the bytes of the test file; JSON files are read back with the
standard library's json module; crashes are simulated by making ``os.replace``
fail, and the folder is compared byte for byte before and after.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest

from auditmean import _atomic
from auditmean._atomic import is_temporary
from auditmean.engagement import FILES, Engagement, EngagementStatus
from auditmean.errors import InputError, RecordError
from auditmean.results import Results
from auditmean.selection import extend_selection, select

SEED = "k7mq-x3rt-9ab2-hnpw"
SIZES = {"low": 4, "top": 2}


@pytest.fixture
def population(tmp_path):
    items = pd.DataFrame(
        {"item_id": [f"P{i:03d}" for i in range(30)], "book_value": [10.0 * (i + 1) for i in range(30)]}
    )
    src = tmp_path / "population.csv"
    items.to_csv(src, index=False)
    raw = src.read_bytes()
    content = "\n".join(f"{a}\t{b!r}" for a, b in zip(items["item_id"], items["book_value"])).encode()
    return SimpleNamespace(
        items=items,
        source=str(src),
        file_sha256=hashlib.sha256(raw).hexdigest(),  # hashlib on the file's bytes
        content_sha256=hashlib.sha256(content).hexdigest(),
        id_column="item_id",
        value_column="book_value",
        stratum_column=None,
    )


@pytest.fixture
def frame(population):
    return population.items.assign(stratum=["low"] * 25 + ["top"] * 5)


@pytest.fixture
def eng(tmp_path, population, frame):
    e = Engagement.create(tmp_path / "job", population, created_by="tester")
    e.save_plan({"schema_version": 1, "kind": "plan", "sizes": SIZES, "confidence": 0.95})
    e.save_selection(select(frame, SIZES, SEED), SEED, SIZES, frame=frame)
    return e


def snapshot(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


# --------------------------------------------------------------------------- create and open


def test_create_records_fingerprint(tmp_path, population):
    e = Engagement.create(tmp_path / "new", population)
    info = json.loads((tmp_path / "new" / "engagement.json").read_text("utf-8"))
    assert info["kind"] == "engagement" and info["schema_version"] == 1
    assert info["population"]["file_sha256"] == population.file_sha256
    assert info["population"]["content_sha256"] == population.content_sha256
    assert info["population"]["source"] == population.source
    assert info["population"]["n_items"] == 30
    assert info["tool_version"] and info["created"].endswith("+00:00")
    assert e.status().next_step.startswith("plan the sample sizes")
    with pytest.raises(RecordError, match="already exists"):
        Engagement.create(tmp_path / "new", population)
    (tmp_path / "busy").mkdir()
    (tmp_path / "busy" / "notes.txt").write_text("x")
    with pytest.raises(RecordError, match="already holds files"):
        Engagement.create(tmp_path / "busy", population)


def test_open_checks_population(eng, population):
    again = Engagement.open(eng.folder, population)
    assert again.seed() == SEED
    other = SimpleNamespace(**{**vars(population), "content_sha256": "0" * 64})
    before = snapshot(eng.folder)
    with pytest.raises(RecordError, match="not the one this engagement was built on") as info:
        Engagement.open(eng.folder, other)
    assert info.value.path.endswith("engagement.json")
    assert snapshot(eng.folder) == before
    resaved = SimpleNamespace(**{**vars(population), "file_sha256": "1" * 64})
    Engagement.open(eng.folder, resaved)  # same content, other bytes: opens, and says so in the log
    assert eng.log()[-1]["step"] == "population file differs in bytes, same content"
    renamed = SimpleNamespace(**{**vars(population), "value_column": "amount"})
    Engagement.open(eng.folder, renamed)  # same content under another column name: noted in the log
    assert eng.log()[-1]["columns"] == {"value_column": {"recorded": "book_value", "given": "amount"}}
    with pytest.raises(RecordError, match="not an engagement folder"):
        Engagement.open(eng.folder / "evaluations")


# --------------------------------------------------------------------------- plan and selection


def test_plan_rules(tmp_path, population, eng):
    assert eng.plan()["sizes"] == SIZES
    with pytest.raises(RecordError, match="selection has been drawn"):
        eng.save_plan({"sizes": {}}, replace=True)
    fresh = Engagement.create(tmp_path / "p", population)
    fresh.save_plan({"v": 1})
    with pytest.raises(RecordError, match="replace=True"):
        fresh.save_plan({"v": 2})
    fresh.save_plan({"v": 2, "x": np.float64(0.5), "bad": float("nan")}, replace=True)
    assert json.loads((tmp_path / "p" / "plan.json").read_text()) == {"v": 2, "x": 0.5, "bad": None}
    assert [e["step"] for e in fresh.log()] == ["created", "plan saved", "plan saved"]
    assert fresh.log()[-1]["replaced"] == {"v": 1}  # the replaced plan stays in the log


def test_selection_saved_and_read_back(eng, frame):
    sel = eng.selection()
    expected = select(frame, SIZES, SEED)
    assert sel["item_id"].tolist() == expected["item_id"].tolist()
    assert sel["key"].tolist() == expected["key"].tolist()
    assert sel["key_int"].tolist() == expected["key_int"].tolist()
    assert eng.sizes() == SIZES
    # selection.csv is the table a reviewer opens: read it with pandas and compare
    copy = pd.read_csv(eng.folder / "selection.csv", dtype=str)
    assert copy["key"].tolist() == expected["key"].tolist()
    assert copy["order"].astype(int).tolist() == expected["order"].tolist()


def test_selection_checks(tmp_path, population, frame):
    e = Engagement.create(tmp_path / "s", population)
    sel = select(frame, SIZES, SEED)
    swapped = sel.copy()
    swapped.loc[0, "item_id"] = next(i for i in frame["item_id"] if i not in set(sel["item_id"]))
    with pytest.raises(InputError, match="keys differ"):
        e.save_selection(swapped, SEED, SIZES)
    with pytest.raises(InputError, match="counts differ"):
        e.save_selection(sel, SEED, {"low": 5, "top": 2})
    # drawn with another seed: its keys are not this seed's; saved under its own seed, the keys
    # pass, but re-performing it from a frame with other strata does not
    other = select(frame, {"low": 4, "top": 2}, "another seed")
    with pytest.raises(InputError, match="keys differ"):
        e.save_selection(other, SEED, SIZES)
    with pytest.raises(InputError, match="not what the seed and sizes give"):
        e.save_selection(other, "another seed", SIZES, frame=frame.assign(stratum=["top"] * 5 + ["low"] * 25))
    assert not (tmp_path / "s" / "selection.json").exists()


def test_extension_only(eng, frame):
    eng.record_result(eng.selection()["item_id"][0], 5.0)
    ext = extend_selection(frame, eng.selection(), {"low": 3}, SEED)
    eng.save_selection(ext, SEED, {"low": 7, "top": 2}, frame=frame)
    assert len(eng.selection()) == 9
    assert len(eng.results().current) == 1  # the result entered stays valid
    rec = json.loads((eng.folder / "selection.json").read_text("utf-8"))
    assert rec["history"][0]["sizes"] == [{"stratum": "low", "n": 4}, {"stratum": "top", "n": 2}]
    with pytest.raises(RecordError, match="another seed"):
        eng.save_selection(select(frame, SIZES, "x"), "x", SIZES)
    smaller = select(frame, {"low": 2, "top": 2}, SEED)
    with pytest.raises(RecordError, match="only an extension"):
        eng.save_selection(smaller, SEED, {"low": 2, "top": 2})


@pytest.mark.parametrize(
    "seed",
    [
        "\U0001f9fe\U0001f50d-2024",  # emoji
        "cafe\u0301 e\u0301te\u0301",  # combining acute accents (NFD form)
        "\u05d1\u05d3\u05d9\u05e7\u05d4\u200f 2024 \u0645\u0631\u0627\u062c\u0639\u0629",  # RTL with a mark
    ],
)
def test_unicode_seed_recorded_exactly(tmp_path, population, frame, seed):
    e = Engagement.create(tmp_path / "u", population)
    e.save_selection(select(frame, SIZES, seed), seed, SIZES, frame=frame)
    raw = json.loads((tmp_path / "u" / "selection.json").read_bytes().decode("utf-8"))
    assert raw["seed"] == seed  # the exact code points, no normalisation
    assert seed in (tmp_path / "u" / "selection.json").read_text("utf-8")  # written as text, not escaped
    again = Engagement.open(tmp_path / "u", population)
    assert again.seed() == seed
    pd.testing.assert_frame_equal(
        again.selection()[["item_id", "key"]].astype(object),
        select(frame, SIZES, seed)[["item_id", "key"]].astype(object),
    )


# --------------------------------------------------------------------------- results


def test_results_persist_and_history_kept(eng, population, tmp_path):
    ids = eng.selection()["item_id"].tolist()
    eng.record_result(ids[0], 100.0, "seen", entered_by="ann")
    with pytest.raises(InputError, match="replace=True"):
        eng.record_result(ids[0], 90.0)
    eng.record_result(ids[0], 90.0, "credit note", True, entered_by="bob")
    path = tmp_path / "batch.csv"
    pd.DataFrame({"id": ids[1:3], "value": ["1,000.00", "12"]}).to_csv(path, index=False)
    eng.record_results_file(path, id_column="id", value_column="value")
    again = Engagement.open(eng.folder, population)
    res = again.results()
    assert isinstance(res, Results)
    assert dict(zip(res.current["item_id"], res.current["audited_value"])) == {
        ids[0]: 90.0,
        ids[1]: 1000.0,  # "1,000.00" read by parse_amounts
        ids[2]: 12.0,
    }
    lines = [json.loads(x) for x in (eng.folder / "results_log.jsonl").read_text("utf-8").splitlines()]
    assert [(e["item_id"], e["audited_value"], e["action"]) for e in lines] == [
        (ids[0], 100.0, "new"),
        (ids[0], 90.0, "replace"),
        (ids[1], 1000.0, "new"),
        (ids[2], 12.0, "new"),
    ]
    step = again.log()[-1]
    assert step["step"] == "results file entered"
    assert step["file_sha256"] == hashlib.sha256(path.read_bytes()).hexdigest()  # hashlib
    with pytest.raises(InputError, match="not in the population: 'NOPE'"):
        again.record_result("NOPE", 1.0)
    copy = pd.read_csv(eng.folder / "results.csv", dtype={"item_id": str})
    assert copy["audited_value"].tolist() == [90.0, 1000.0, 12.0]


def test_sample_frame_and_status(eng, population):
    ids = eng.selection()["item_id"].tolist()
    st = eng.status()
    assert isinstance(st, EngagementStatus)
    assert st.steps.set_index("step")["done"].to_dict() == {
        "population": True,
        "plan": True,
        "selection": True,
        "results": False,
        "evaluation": False,
    }
    assert st.next_step.startswith("enter the audited values")
    with pytest.raises(Exception, match="opened without its population"):
        Engagement.open(eng.folder).sample_frame()
    for item in ids:
        eng.record_result(item, 1.0)
    sf = Engagement.open(eng.folder, population).sample_frame()
    assert sf.frame["audited_value"].tolist() == [1.0] * 6
    assert eng.status().next_step.startswith("evaluate the sample")
    saved = eng.save_evaluation({"method": "mean-per-unit", "total": 123.0, "upper": float("inf")})
    data = json.loads(saved.read_text("utf-8"))
    assert data["evaluation"] == {"method": "mean-per-unit", "total": 123.0, "upper": None}
    assert data["selection_seed"] == SEED
    second = eng.save_evaluation({"total": 124.0})
    assert second != saved and saved.exists()
    assert [e["evaluation"].get("total") for e in eng.evaluations()] == [123.0, 124.0]
    assert eng.status().next_step.startswith("all steps done")


# --------------------------------------------------------------------------- corrupt files and crashes


def _truncate(path: Path) -> None:
    raw = path.read_bytes()
    path.write_bytes(raw[: len(raw) // 2])


@pytest.mark.parametrize(
    "name, damage, call",
    [
        ("engagement.json", _truncate, lambda e, pop: Engagement.open(e.folder, pop)),
        ("engagement.json", lambda p: p.write_text("[1, 2]"), lambda e, pop: Engagement.open(e.folder)),
        ("plan.json", _truncate, lambda e, pop: e.plan()),
        ("selection.json", _truncate, lambda e, pop: e.selection()),
        ("selection.json", lambda p: p.write_bytes(b"\xff\xfe"), lambda e, pop: e.status()),
        ("selection.csv", _truncate, lambda e, pop: e.selection()),
        ("results_log.jsonl", _truncate, lambda e, pop: e.results()),
        ("results_log.jsonl", lambda p: p.write_text("{oops\n"), lambda e, pop: e.record_result("X", 1.0)),
        ("results.csv", lambda p: p.write_text("item_id\n"), lambda e, pop: e.results()),
        ("log.jsonl", _truncate, lambda e, pop: e.save_evaluation({"a": 1})),
    ],
)
def test_corrupt_files_give_record_error(eng, population, name, damage, call):
    ids = eng.selection()["item_id"].tolist()
    eng.record_result(ids[0], 1.0)
    eng.record_result(ids[1], 2.0)
    damage(eng.folder / name)
    before = snapshot(eng.folder)
    with pytest.raises(RecordError) as info:
        call(eng, population)
    assert info.value.path.endswith(name)
    assert snapshot(eng.folder) == before  # nothing written


def test_selection_record_not_following_its_seed(eng):
    path = eng.folder / "selection.json"
    rec = json.loads(path.read_text("utf-8"))
    rec["seed"] = rec["seed"] + "!"
    path.write_text(json.dumps(rec), encoding="utf-8")
    with pytest.raises(RecordError, match="does not follow its own seed"):
        eng.selection()


def test_results_log_edited_value_detected(eng):
    ids = eng.selection()["item_id"].tolist()
    eng.record_result(ids[0], 1.0)
    eng.record_result(ids[0], 1.0)  # repeat
    path = eng.folder / "results_log.jsonl"
    lines = path.read_text("utf-8").splitlines()
    second = json.loads(lines[1])
    second["audited_value"] = 7.0  # changed value without "replace"
    path.write_text(lines[0] + "\n" + json.dumps(second) + "\n", encoding="utf-8")
    with pytest.raises(RecordError, match="action does not fit"):
        eng.results()


def _drop_last_line(path: Path) -> None:
    lines = path.read_text("utf-8").splitlines(keepends=True)
    path.write_text("".join(lines[:-1]), encoding="utf-8")


def test_log_cut_at_a_line_boundary_is_detected(eng):
    ids = eng.selection()["item_id"].tolist()
    eng.record_result(ids[0], 1.0)
    eng.record_result(ids[1], 2.0)
    _drop_last_line(eng.folder / "results_log.jsonl")  # still valid JSONL, one entry fewer
    with pytest.raises(RecordError, match="log.jsonl records that 2 were made") as info:
        eng.results()
    assert info.value.path.endswith("results_log.jsonl")
    # with the step log cut too, results.csv still shows the lost entry
    _drop_last_line(eng.folder / "log.jsonl")
    before = snapshot(eng.folder)
    with pytest.raises(RecordError, match="results.csv shows 2") as info:
        eng.results()
    assert info.value.path.endswith("results_log.jsonl")
    with pytest.raises(RecordError, match="results.csv shows 2"):
        eng.rewrite_copies()  # would overwrite the only trace of the lost entry: refused
    assert snapshot(eng.folder) == before


def test_edited_copy_can_be_rewritten(eng):
    (eng.folder / "selection.csv").write_text("edited in a spreadsheet\n")
    with pytest.raises(RecordError, match="rewrite_copies"):
        eng.selection()
    written = eng.rewrite_copies()
    assert [p.name for p in written] == ["selection.csv"]
    assert len(eng.selection()) == 6


def test_crash_while_recording_keeps_record(eng, monkeypatch):
    ids = eng.selection()["item_id"].tolist()
    eng.record_result(ids[0], 1.0)
    before = snapshot(eng.folder)

    def crash(src, dst):
        raise OSError("simulated crash")

    monkeypatch.setattr(_atomic.os, "replace", crash)
    with pytest.raises(OSError, match="simulated crash"):
        eng.record_result(ids[1], 2.0)
    monkeypatch.undo()
    assert snapshot(eng.folder) == before
    assert not [p for p in eng.folder.rglob("*") if is_temporary(p)]
    assert dict(zip(eng.results().current["item_id"], eng.results().current["audited_value"])) == {ids[0]: 1.0}


def test_crash_between_record_and_copy_is_reported_then_repaired(eng, monkeypatch):
    ids = eng.selection()["item_id"].tolist()
    eng.record_result(ids[1], 4.0)
    real = _atomic.os.replace

    def replace_then_die(src, dst):
        if str(dst).endswith(FILES["results_copy"]):
            raise OSError("simulated crash after the log was written")
        return real(src, dst)

    monkeypatch.setattr(_atomic.os, "replace", replace_then_die)
    with pytest.raises(OSError):
        eng.record_result(ids[0], 3.0)
    monkeypatch.undo()
    with pytest.raises(RecordError, match="is behind the record") as info:
        eng.results()
    assert info.value.path.endswith("results.csv")
    eng.rewrite_copies()
    assert eng.results().value_of(ids[0]) == 3.0  # the entry typed was not lost
    leftovers = [p for p in eng.folder.rglob("*") if is_temporary(p)]
    assert leftovers == [] and eng.status().leftover_files == ()


def test_with_loaded_population(tmp_path):
    # The population intake's own record: same content saved with other line endings
    # opens (file bytes differ, content the same); a changed amount does not.
    from auditmean.population import load_population

    table = pd.DataFrame({"ref": [f"R{i}" for i in range(8)], "amount": [f"{100 + i}.00" for i in range(8)]})
    src = tmp_path / "pop.csv"
    src.write_bytes(table.to_csv(index=False, lineterminator="\n").encode())
    pop = load_population(src, id_column="ref", value_column="amount")
    e = Engagement.create(tmp_path / "job", pop)
    assert e.info["population"]["file_sha256"] == hashlib.sha256(src.read_bytes()).hexdigest()  # hashlib
    src.write_bytes(table.to_csv(index=False, lineterminator="\r\n").encode())
    Engagement.open(tmp_path / "job", load_population(src, id_column="ref", value_column="amount"))
    assert e.log()[-1]["step"] == "population file differs in bytes, same content"
    table.loc[3, "amount"] = "103.01"
    src.write_bytes(table.to_csv(index=False).encode())
    with pytest.raises(RecordError, match="not the one this engagement was built on"):
        Engagement.open(tmp_path / "job", load_population(src, id_column="ref", value_column="amount"))
    frame = pop.items.assign(stratum="all")
    e.save_selection(select(frame, {"all": 3}, SEED), SEED, {"all": 3}, frame=frame)
    from_frame = load_population(pop.items, id_column="item_id", value_column="book_value")
    assert from_frame.file_sha256 is None
    Engagement.open(tmp_path / "job", from_frame).record_result(e.selection()["item_id"][0], 1.0)
