"""Finding repeated ids and labels fast: a 64-bit hash of each text, confirmed exactly by the caller.

:func:`ids_may_repeat` answers "certainly all different" or "some may
repeat" for a column of text in vectorised passes; only in the second case
does the caller run its exact (and slower) search for the repeats, whose
message names them and their rows. Used at intake
(:func:`auditmean.population.load_population`) and by every check of
repeated labels in tables (:func:`auditmean._frames.duplicated_rows`).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyarrow as pa

__all__ = ["id_hashes", "ids_may_repeat", "labels_may_repeat"]

_HASH_LENGTH = np.uint64(0x9E3779B97F4A7C15)
_HASH_WORD = np.uint64(0xBF58476D1CE4E5B9)
_HASH_FINAL = np.uint64(0x94D049BB133111EB)
_WORD_MASKS = np.array([0] + [(1 << (8 * r)) - 1 for r in range(1, 8)] + [(1 << 64) - 1], dtype=np.uint64)
_HASH_BLOCK = 1 << 16  # ids per block: small temporary arrays, reused block after block


def id_hashes(ids: pa.Array) -> np.ndarray:
    """A 64-bit hash of each id's UTF-8 bytes and length, in vectorised passes of eight bytes.

    Equal ids have equal hashes; different ids almost never do. It serves
    only to find the ids that may repeat, which the caller then confirms
    exactly, so a collision costs time, never a wrong answer. Each
    step multiplies by an odd 64-bit constant and folds the high bits down
    (xor-shift); the constants are those of the SplitMix64 generator's
    finaliser (Steele, Lea and Flood 2014, "Fast splittable pseudorandom
    number generators", OOPSLA; quoted from memory), the arrangement is ours.
    Its quality is checked only by the tests (no collision among distinct
    ids of the generated cases).
    """
    n = len(ids)
    width = np.int64 if pa.types.is_large_string(ids.type) else np.int32
    offsets = np.frombuffer(ids.buffers()[1], dtype=width)[ids.offset : ids.offset + n + 1]
    data = ids.buffers()[2]
    raw = np.frombuffer(data, dtype=np.uint8) if data is not None else np.empty(0, dtype=np.uint8)
    out = np.empty(n, dtype=np.uint64)
    s30, s31 = np.uint64(30), np.uint64(31)
    for a in range(0, n, _HASH_BLOCK):
        b = min(n, a + _HASH_BLOCK)
        off = offsets[a : b + 1].astype(np.int64)
        first, last = int(off[0]), int(off[-1])
        padded = np.zeros(last - first + 8, dtype=np.uint8)
        padded[: last - first] = raw[first:last]
        # every run of eight bytes, as a little-endian word, starting at each byte
        words = np.ndarray((last - first + 1,), dtype="<u8", buffer=padded, strides=(1,))
        starts = off[:-1] - first
        lengths = off[1:] - off[:-1]
        h = lengths.astype(np.uint64) * _HASH_LENGTH
        for j in range(0, int(lengths.max()), 8):
            # ids shorter than j bytes are masked to nothing; their position is only kept in range
            h ^= words[np.minimum(starts + j, last - first)] & _WORD_MASKS[np.clip(lengths - j, 0, 8)]
            h *= _HASH_WORD
            h ^= h >> s31
        h ^= h >> s30
        h *= _HASH_FINAL
        h ^= h >> s31
        out[a:b] = h
    return out


def ids_may_repeat(ids: pa.Array) -> bool:
    """False when the ids are certainly all different; True when some may repeat (then check exactly)."""
    if len(ids) < 2:
        return False
    return not pd.Index(id_hashes(ids)).is_unique


def labels_may_repeat(labels: pd.Series) -> bool:
    """:func:`ids_may_repeat` for a Series of text; True (check exactly) when it is not all text."""
    if len(labels) < 2:
        return False
    try:
        arr = pa.array(labels, type=pa.large_string(), from_pandas=True)
    except (pa.ArrowException, TypeError, ValueError):  # numbers or other objects: the exact check decides
        return True
    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks()
    if arr.null_count:
        return True
    return ids_may_repeat(arr)
