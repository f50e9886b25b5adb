"""Writes that leave either the old file or the new one, never half of either.

Each function writes the data to a temporary file in the same folder as the
target, flushes it, forces it to disk with :func:`os.fsync`, renames it over
the target with :func:`os.replace` (atomic on POSIX and on Windows when both
paths are on one volume), then forces the folder entry to disk where the
operating system allows it. If anything fails before the rename, the
temporary file is removed and the target is untouched.

After a hard crash (power cut) a temporary file may remain. Its name starts
with ``"."`` and ends with :data:`TEMP_SUFFIX`; readers of an engagement
folder never read such files (see :func:`is_temporary`).

The sequence write - flush - fsync - rename - fsync(folder) is common practice
for crash-safe replacement of a file on POSIX systems (no single published
source; see the POSIX descriptions of ``rename`` and ``fsync``).
"""

from __future__ import annotations

import json
import os
import secrets
from pathlib import Path
from typing import Any

__all__ = [
    "TEMP_SUFFIX",
    "is_temporary",
    "json_text",
    "write_bytes_atomic",
    "write_json_atomic",
    "write_text_atomic",
]

TEMP_SUFFIX = ".partial"


def is_temporary(path: str | os.PathLike[str]) -> bool:
    """True for a leftover temporary file of an interrupted atomic write."""
    name = Path(path).name
    return name.startswith(".") and name.endswith(TEMP_SUFFIX)


def _fsync_directory(directory: str) -> None:
    # Opening a folder for fsync is POSIX-only; Windows and some file systems
    # refuse it, and there the rename is as durable as the system makes it.
    if os.name != "posix":
        return
    try:
        fd = os.open(directory, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def write_bytes_atomic(path: str | os.PathLike[str], data: bytes) -> None:
    """Replace the file at ``path`` with ``data`` in one step.

    Parameters
    ----------
    path:
        The target file; its folder must exist.
    data:
        The complete new content.

    Notes
    -----
    A new file gets the permissions an ordinary ``open(path, "w")`` would
    give it (mode 0o666 less the process umask); a replaced file keeps its
    permission bits.
    """
    if not isinstance(data, (bytes, bytearray, memoryview)):
        raise TypeError(f"data must be bytes, got {type(data).__name__}")
    target = os.path.abspath(os.fspath(path))
    directory = os.path.dirname(target)
    tmp = os.path.join(
        directory, f".{os.path.basename(target)}.{secrets.token_hex(6)}{TEMP_SUFFIX}"
    )
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0), 0o666)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        try:
            os.chmod(tmp, os.stat(target).st_mode & 0o7777)
        except FileNotFoundError:
            pass
        os.replace(tmp, target)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise
    _fsync_directory(directory)


def write_text_atomic(path: str | os.PathLike[str], text: str, encoding: str = "utf-8") -> None:
    """Replace the file at ``path`` with ``text`` (encoded, line endings kept as given)."""
    if not isinstance(text, str):
        raise TypeError(f"text must be str, got {type(text).__name__}")
    write_bytes_atomic(path, text.encode(encoding))


def json_text(obj: Any) -> str:
    """The JSON text :func:`write_json_atomic` writes: UTF-8, indented, strict.

    ``NaN`` and infinities are refused (:class:`ValueError`) rather than
    written as the non-standard tokens ``NaN``/``Infinity``; convert them
    first (``auditmean._records.json_safe`` turns them into ``null``).
    """
    return json.dumps(obj, ensure_ascii=False, indent=2, allow_nan=False) + "\n"


def write_json_atomic(path: str | os.PathLike[str], obj: Any) -> None:
    """Replace the file at ``path`` with ``obj`` as JSON.

    The object is turned into text before anything is written, so an object
    JSON cannot hold (:class:`TypeError`, or :class:`ValueError` for ``NaN``)
    leaves the old file as it was.
    """
    write_text_atomic(path, json_text(obj))
