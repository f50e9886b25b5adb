"""The vectorised pieces of population intake against the plain Python they replace.

Outside references: Python's own ``format(v, ".2f")``, ``str.strip()``,
``sorted()`` and ``float()``, and pandas' C reader of delimited text; the
fingerprint against hashlib over the documented canonical text.
"""

from __future__ import annotations

import hashlib

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from auditmean.amounts import parse_amounts
from auditmean.population import (
    _amount_texts,
    _id_order,
    _read_delimited,
    _read_delimited_fast,
    content_fingerprint,
    load_population,
    strip_text,
    update_fingerprint,
)


def python_amount(v: float) -> str:
    text = format(v, ".2f")  # the documented rule: Python's format, -0.00 written 0.00
    return "0.00" if text == "-0.00" else text


def test_amounts_match_python_format_including_ties_at_half_a_cent() -> None:
    rng = np.random.default_rng(1)
    # 0.125 and 2.675 sit at or next to half a cent; 1e15 + 0.125 and 1e300 are beyond the fast bound
    special = [0.125, 0.375, 1.005, 2.675, -0.005, 0.005, -0.0, -0.004, 1e15 + 0.125, 5e13, 1e300, -1e20, 123456.785]
    values = np.concatenate([special, np.round(rng.lognormal(5, 2, 20000), 2), rng.normal(0, 1e7, 20000),
                             np.arange(-5000, 5000) / 1000])
    assert _amount_texts(values).to_pylist() == [python_amount(v) for v in values.tolist()]


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(allow_nan=False, allow_infinity=False, width=64), min_size=1, max_size=50))
def test_property_amounts_match_python_format(values) -> None:
    assert _amount_texts(np.asarray(values, dtype=float)).to_pylist() == [python_amount(v) for v in values]


@settings(max_examples=60, deadline=None)
@given(st.lists(st.one_of(st.none(), st.text(alphabet=" \t\n\x1c\x1f\x85\xa0\u2000\u3000\u200bab\u00e9", max_size=6)), max_size=40))
def test_property_strip_is_pythons_strip(texts) -> None:
    expected = [None if t is None else t.strip() for t in texts]  # Python's str.strip()
    assert strip_text(pa.array(texts, type=pa.string())).to_pylist() == expected


@pytest.mark.parametrize("ascii_only", [True, False])
def test_id_order_is_code_point_order(ascii_only) -> None:
    rng = np.random.default_rng(2)
    alphabet = list("AB9az-_ ") + ([] if ascii_only else ["\u00e9", "\u65e5"])
    ids = sorted({"".join(rng.choice(alphabet, rng.integers(1, 12))) for _ in range(3000)}, key=lambda _: rng.random())
    order = _id_order(pa.array(ids, type=pa.string()))
    assert [ids[i] for i in order] == sorted(ids)  # Python's sorted: code-point order


def test_streamed_fingerprint_equals_the_whole_one() -> None:
    rng = np.random.default_rng(3)
    ids = sorted(f"X{k}" for k in range(1000))
    values = np.round(rng.normal(0, 500, 1000), 2)
    h = hashlib.sha256()
    for start in range(0, 1000, 300):  # batches, in id order, as the DuckDB scan feeds them
        update_fingerprint(h, pa.array(ids[start : start + 300]), values[start : start + 300])
    text = "".join(f"{i}\t{python_amount(v)}\n" for i, v in zip(ids, values.tolist()))
    assert h.hexdigest() == hashlib.sha256(text.encode("utf-8")).hexdigest() == content_fingerprint(ids, values)


def test_fast_reader_gives_the_pandas_table_or_steps_aside(tmp_path) -> None:
    data = 'id,amount\n"a ""quoted"", id",1\n"two\nlines",2\n  spaced  , 3 \n\u00e9,4\n'.encode()
    fast = _read_delimited_fast(data, ",")
    slow = pd.read_csv(pd.io.common.BytesIO(data), header=None, dtype=str, keep_default_na=False,
                       na_filter=False, skip_blank_lines=False)  # pandas' C reader, as _read_delimited uses
    assert fast is not None and fast.astype(object).values.tolist() == slow.astype(object).values.tolist()
    assert _read_delimited_fast(b"id,amount\nA,1\nB,2,3\n", ",") is None  # a ragged row: pandas reads it
    assert _read_delimited_fast(b"id,amount\ncaf\xe9,1\n", ",") is None  # not UTF-8: pandas reports it
    with pytest.raises(Exception, match="cannot be read|Expected"):
        _read_delimited(b"id,amount\nA,1\nB,2,3\n", "f.csv", encoding="utf-8", sep=",")


def test_plain_number_column_takes_the_quick_path_with_the_same_values() -> None:
    texts = pd.Series(["1234.5", "-0.0", "1e3", ".5", "+12", "007"], dtype="str")
    # Python's float() on each text; -0.0 comes back as 0.0
    assert parse_amounts(texts).tolist() == [1234.5, 0.0, 1000.0, 0.5, 12.0, 7.0]
    mixed = pd.Series(["1,234.50", "12"], dtype="str")
    assert parse_amounts(mixed).tolist() == [1234.5, 12.0]  # the general path reads the separator
    with pytest.raises(Exception, match="not a finite amount|cannot be read"):
        parse_amounts(pd.Series(["1", "inf"], dtype="str"))


def test_repeated_ids_are_still_reported_before_bad_amounts(tmp_path) -> None:
    path = tmp_path / "both.csv"
    path.write_text("id,amount\nA,1\nA,x\n", encoding="utf-8")
    with pytest.raises(Exception, match="appear more than once"):
        load_population(path, id_column="id", value_column="amount")
