"""``auditmean demo`` from any folder: a folder of its own, replaced by the next run, no one else's.

Outside references: the committed demo files in ``demo_data/`` and their
SHA-256 in ``demo_data/MANIFEST.json`` (the data the installed package
writes must be those files, byte for byte); everything else is checked on
the file system directly. A real ``pip install .`` into a new environment is
too slow for the suite; instead the demo runs with the current folder set to
an empty temporary folder, where nothing of the project is within reach of a
relative path, and the test checks that the engagement reads the data the
demo wrote into its own folder.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from auditmean.cli import main
from auditmean.cli.demo import (
    DATA_SUBFOLDER,
    DEMO_FOLDER,
    ENGAGEMENT_SUBFOLDER,
    MARKER,
    prepare_demo_folder,
    write_demo_data,
)
from auditmean.errors import ParameterError

from .conftest import PROJECT_ROOT

DEMO_DATA = PROJECT_ROOT / "demo_data"
FILES = ("invoices.csv", "invoices_audited.csv")


def _after_header(out: str) -> str:
    """The demo's report from the engagement line on (the lines before name the folders)."""
    return out[out.index("Engagement folder:"):]


def test_the_package_writes_the_published_demo_files(tmp_path):
    from auditmean._demo_data import INVOICE_FILES_SHA256

    manifest = json.loads((DEMO_DATA / "MANIFEST.json").read_text(encoding="utf-8"))
    folder, as_published = write_demo_data(tmp_path / "data")
    assert as_published
    for name in FILES:
        # reference: the committed file, and its SHA-256 in the committed manifest
        assert (folder / name).read_bytes() == (DEMO_DATA / name).read_bytes(), name
        assert INVOICE_FILES_SHA256[name] == manifest["files"][name]["sha256"], name


def test_demo_runs_from_an_empty_folder_and_replaces_its_own(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)  # empty: no demo_data/ here, nothing of the project
    assert main(["demo"]) == 0
    first = capsys.readouterr().out
    root = tmp_path / DEMO_FOLDER
    eng = root / ENGAGEMENT_SUBFOLDER
    assert f"Demo folder: {root}\n" in first and f"Engagement folder: {eng}\n" in first
    assert (root / MARKER).is_file()
    assert sorted(p.name for p in (root / DATA_SUBFOLDER).iterdir()) == sorted(FILES)
    assert (eng / "selection.csv").exists() and list((eng / "evaluations").glob("*.json"))
    assert (eng / "workpaper.xlsx").exists() and (eng / "workpaper.html").exists()
    # the engagement was built on the data the demo wrote into its own folder
    recorded = json.loads((eng / "engagement.json").read_text(encoding="utf-8"))["population"]["source"]
    assert Path(recorded) == root / DATA_SUBFOLDER / "invoices.csv"

    (root / "left-over.txt").write_text("written between the runs", encoding="utf-8")
    assert main(["demo"]) == 0
    second = capsys.readouterr().out
    assert f"Demo folder: {root} (the earlier demo there was replaced)" in second
    assert not (root / "left-over.txt").exists()
    assert [p.name for p in tmp_path.iterdir()] == [DEMO_FOLDER]  # replaced, not piled up
    # the same invented data, settings and seed: the same report, word for word
    assert _after_header(second) == _after_header(first)


def test_demo_refuses_a_folder_it_did_not_write(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    theirs = tmp_path / DEMO_FOLDER
    theirs.mkdir()
    (theirs / "notes.txt").write_text("keep me", encoding="utf-8")
    assert main(["demo"]) == 2
    err = capsys.readouterr().err
    assert "'--folder'" in err and MARKER in err and "did not write" in err
    assert [p.name for p in theirs.iterdir()] == ["notes.txt"]
    assert (theirs / "notes.txt").read_text(encoding="utf-8") == "keep me"

    a_file = tmp_path / "a-file.txt"
    a_file.write_text("a file", encoding="utf-8")
    assert main(["demo", "--folder", str(a_file)]) == 2
    assert "is a file" in capsys.readouterr().err
    assert a_file.read_text(encoding="utf-8") == "a file"


def test_demo_checks_its_data_folder_before_deleting_anything(tmp_path, capsys):
    root = tmp_path / "demo"
    prepare_demo_folder(root)
    (root / "earlier.txt").write_text("an earlier demo's file", encoding="utf-8")
    assert main(["demo", "--folder", str(root), "--data", str(tmp_path / "no-such-folder")]) == 2
    assert "invoices.csv" in capsys.readouterr().err
    assert (root / "earlier.txt").exists()


def test_prepare_demo_folder_rules(tmp_path, monkeypatch):
    # a new folder, and an existing empty one, are made the demo's (marker written)
    assert prepare_demo_folder(tmp_path / "new" / "demo") is False
    assert [p.name for p in (tmp_path / "new" / "demo").iterdir()] == [MARKER]
    (tmp_path / "empty").mkdir()
    assert prepare_demo_folder(tmp_path / "empty") is False
    assert (tmp_path / "empty" / MARKER).is_file()

    # never the folder the demo runs in, nor one holding it
    root = tmp_path / "new" / "demo"
    (root / "inner").mkdir()
    for here in (root, root / "inner"):
        monkeypatch.chdir(here)
        with pytest.raises(ParameterError, match="current folder"):
            prepare_demo_folder(root)
        assert (root / "inner").is_dir()
    monkeypatch.chdir(tmp_path)
    assert prepare_demo_folder(root) is True
    assert [p.name for p in root.iterdir()] == [MARKER]

    # a marker that is not a plain file does not count
    odd = tmp_path / "odd"
    (odd / MARKER).mkdir(parents=True)
    with pytest.raises(ParameterError, match="did not write"):
        prepare_demo_folder(odd)
    assert (odd / MARKER).is_dir()

    # a link is refused, and what it points to is untouched
    target = tmp_path / "target"
    prepare_demo_folder(target)
    link = tmp_path / "link"
    link.symlink_to(target, target_is_directory=True)
    with pytest.raises(ParameterError, match="is a link"):
        prepare_demo_folder(link)
    assert (target / MARKER).is_file()
