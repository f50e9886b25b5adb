"""Invented populations for the benchmarks, written in chunks so that memory stays small.

Nothing here is real data: item ids are made up (``TX-`` and a number),
book values are lognormal amounts rounded to the cent, with a share of
credits and zeros, from a fixed seed.
"""

from __future__ import annotations

import os

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv
import pyarrow.parquet as pq

CHUNK = 1_000_000


def _chunk(rng: np.random.Generator, start: int, size: int) -> pa.Table:
    numbers = rng.permutation(np.arange(start, start + size, dtype=np.int64))
    ids = pc.binary_join_element_wise("TX-", pa.array(numbers).cast(pa.string()), "")
    book = np.round(rng.lognormal(5.0, 1.6, size), 2)
    u = rng.random(size)
    book[u < 0.01] = 0.0
    credits = u > 0.99
    book[credits] = -np.round(rng.lognormal(3.0, 1.0, int(credits.sum())), 2)
    return pa.table({"item_id": ids, "book_value": book})


def write_parquet(path: str, rows: int, seed: int = 20240901) -> str:
    """Write ``rows`` invented items to a Parquet file, one row group per million rows."""
    if os.path.exists(path) and pq.ParquetFile(path).metadata.num_rows == rows:
        return path
    rng = np.random.default_rng(seed)
    tmp = path + ".partial"
    with pq.ParquetWriter(tmp, pa.schema([("item_id", pa.string()), ("book_value", pa.float64())])) as w:
        for start in range(0, rows, CHUNK):
            w.write_table(_chunk(rng, start, min(CHUNK, rows - start)))
    os.replace(tmp, path)
    return path


def write_csv(path: str, rows: int, seed: int = 20240902) -> str:
    """Write ``rows`` invented items to a CSV file (header ``item_id,book_value``)."""
    if os.path.exists(path) and os.path.getsize(path) > 0:
        return path
    rng = np.random.default_rng(seed)
    tmp = path + ".partial"
    with pacsv.CSVWriter(tmp, pa.schema([("item_id", pa.string()), ("book_value", pa.float64())])) as w:
        for start in range(0, rows, CHUNK):
            w.write_table(_chunk(rng, start, min(CHUNK, rows - start)))
    os.replace(tmp, path)
    return path
