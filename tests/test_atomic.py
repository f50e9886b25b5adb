"""Atomic writes: the old file survives a crash in the middle of a write.

Outside reference: the crash is simulated by making the standard library's
own calls (``os.replace``, ``os.fsync``, the file object's ``write``) fail
part-way; the content is compared byte for byte with what was written before.
"""

from __future__ import annotations

import io
import json
import math
import os
import stat

import pytest

from auditmean import _atomic
from auditmean._atomic import (
    TEMP_SUFFIX,
    is_temporary,
    write_bytes_atomic,
    write_json_atomic,
    write_text_atomic,
)


def leftovers(folder) -> list[str]:
    return [p.name for p in folder.iterdir() if is_temporary(p)]


def test_writes_and_replaces(tmp_path):
    target = tmp_path / "record.bin"
    write_bytes_atomic(target, b"first")
    assert target.read_bytes() == b"first"
    write_bytes_atomic(target, b"second, longer")
    assert target.read_bytes() == b"second, longer"
    write_text_atomic(tmp_path / "t.txt", "line 1\r\nlígne 2\n")
    assert (tmp_path / "t.txt").read_bytes() == "line 1\r\nlígne 2\n".encode()  # endings kept
    write_json_atomic(tmp_path / "r.json", {"seed": "\u05d0\U0001f512", "n": [1, 2]})
    assert json.loads((tmp_path / "r.json").read_text("utf-8")) == {"seed": "\u05d0\U0001f512", "n": [1, 2]}
    assert leftovers(tmp_path) == []


def test_crash_at_rename_keeps_old_file(tmp_path, monkeypatch):
    target = tmp_path / "plan.json"
    write_json_atomic(target, {"version": 1})
    before = target.read_bytes()

    def crash(src, dst):
        raise OSError("simulated crash before the rename")

    monkeypatch.setattr(_atomic.os, "replace", crash)
    with pytest.raises(OSError, match="simulated crash"):
        write_json_atomic(target, {"version": 2})
    assert target.read_bytes() == before
    assert leftovers(tmp_path) == []


def test_crash_half_way_through_writing_keeps_old_file(tmp_path, monkeypatch):
    target = tmp_path / "results_log.jsonl"
    write_bytes_atomic(target, b'{"a": 1}\n')
    real_fdopen = os.fdopen

    class HalfWriter(io.FileIO):
        def write(self, data):  # writes half the bytes, then the "machine dies"
            super().write(bytes(data)[: len(data) // 2])
            raise KeyboardInterrupt("simulated interruption mid-write")

    def fdopen(fd, mode="r", *args, **kwargs):
        if "w" in mode:
            return HalfWriter(fd, "w", closefd=True)
        return real_fdopen(fd, mode, *args, **kwargs)

    monkeypatch.setattr(_atomic.os, "fdopen", fdopen)
    with pytest.raises(KeyboardInterrupt):
        write_bytes_atomic(target, b'{"a": 1}\n{"b": 2}\n' * 100)
    assert target.read_bytes() == b'{"a": 1}\n'
    assert leftovers(tmp_path) == []


def test_crash_at_fsync_on_new_file(tmp_path, monkeypatch):
    target = tmp_path / "new.txt"

    def crash(fd):
        raise OSError("simulated disk failure")

    monkeypatch.setattr(_atomic.os, "fsync", crash)
    with pytest.raises(OSError):
        write_text_atomic(target, "never complete")
    assert not target.exists()
    assert list(tmp_path.iterdir()) == []


def test_json_that_cannot_be_written_leaves_old_file(tmp_path):
    target = tmp_path / "e.json"
    write_json_atomic(target, {"ok": True})
    before = target.read_bytes()
    with pytest.raises(ValueError):
        write_json_atomic(target, {"x": math.nan})  # JSON has no NaN: refused, not written
    with pytest.raises(TypeError):
        write_json_atomic(target, {"x": object()})
    assert target.read_bytes() == before
    assert leftovers(tmp_path) == []


def test_leftover_names_are_recognised():
    assert is_temporary(f".plan.json.0a1b2c3d4e5f{TEMP_SUFFIX}")
    assert not is_temporary("plan.json")
    assert not is_temporary(".hidden")


@pytest.mark.skipif(os.name != "posix", reason="permission bits are POSIX")
def test_replaced_file_keeps_its_permissions(tmp_path):
    target = tmp_path / "f.txt"
    target.write_text("old")
    os.chmod(target, 0o640)
    write_text_atomic(target, "new")
    assert stat.S_IMODE(os.stat(target).st_mode) == 0o640
    assert target.read_text() == "new"


def test_refuses_text_as_bytes(tmp_path):
    with pytest.raises(TypeError):
        write_bytes_atomic(tmp_path / "x", "not bytes")
    with pytest.raises(TypeError):
        write_text_atomic(tmp_path / "x", b"not text")
    assert list(tmp_path.iterdir()) == []
