"""Tests of the vectorised paths behind intake, profile and stratification.

Outside references, named beside each check: Python's ``math.fsum`` and
``fractions.Fraction`` (exact sums), ``numpy.quantile`` (quantiles),
Python's ``dict``/``set`` of ``str`` (which ids repeat), ``hashlib`` with the
documented fingerprint rule (tests/test_population.py's re-implementation),
and hypothesis for the generated cases. Every population here is generated
in the test; none is real data.
"""

from __future__ import annotations

import math
import threading
from fractions import Fraction
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

import auditmean._repeats as repeats_module
from auditmean._frames import duplicated_rows
from auditmean._repeats import id_hashes, labels_may_repeat
from auditmean.core.boundaries import stratum_statistics
from auditmean.core.moments import exact_group_sums, exact_sum_of_groups
from auditmean.core.profile import (
    QUANTILE_LEVELS,
    TOP_FRACTIONS,
    describe,
    exact_sum,
    quantiles,
    top_share,
)
from auditmean.errors import InputError
from auditmean.population import content_fingerprint, load_population
from auditmean.strata import stratify

finite = st.floats(allow_nan=False, allow_infinity=False, width=64)


def fraction_sum(values) -> float:
    """The exact rational sum, rounded once (Fraction -> float rounds correctly: Python's fractions module)."""
    return float(sum((Fraction(v) for v in values), Fraction(0)))


# --- exact sums ---------------------------------------------------------------


@settings(max_examples=300, deadline=None)
@given(st.lists(finite, min_size=0, max_size=60))
def test_exact_sum_is_the_correctly_rounded_sum(values) -> None:
    # reference: the exact rational sum (fractions), which math.fsum also returns when it does not overflow
    x = np.asarray(values, dtype=np.float64)
    try:
        expected = fraction_sum(values)
    except OverflowError:  # the exact sum itself is beyond float64
        return
    assert exact_sum(x) == expected
    try:
        assert exact_sum(x) == math.fsum(values)
    except OverflowError:  # fsum can overflow in an intermediate step where the exact sum does not
        pass


@settings(max_examples=100, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 4), finite), min_size=1, max_size=80))
def test_exact_group_sums_match_fsum_per_group(pairs) -> None:
    # reference: math.fsum over each group's values
    codes = np.array([c for c, _ in pairs], dtype=np.intp)
    x = np.array([v for _, v in pairs], dtype=np.float64)
    try:
        expected = [math.fsum(v for c, v in pairs if c == g) for g in range(5)]
        whole = math.fsum(x.tolist())
    except OverflowError:
        return
    by_group, total = exact_sum_of_groups(codes, 5, x)
    assert by_group.tolist() == expected
    assert exact_group_sums(codes, 5, x).tolist() == expected
    assert total == whole


def test_exact_sums_across_blocks_with_different_exponents() -> None:
    # more than one block of 65,536 values, each block with its own range of exponents
    rng = np.random.default_rng(11)
    x = np.concatenate(
        [
            np.round(rng.lognormal(4.0, 1.0, 70_000), 2),
            rng.standard_normal(70_000) * 1e-9,
            -np.round(rng.lognormal(12.0, 1.0, 70_000), 2),
        ]
    )
    codes = rng.integers(0, 3, x.size)
    assert exact_sum(x) == math.fsum(x.tolist())  # reference: math.fsum
    got = exact_group_sums(codes, 3, x)
    assert got.tolist() == [math.fsum(x[codes == g].tolist()) for g in range(3)]


def test_exact_sum_where_fsum_overflows_in_between() -> None:
    # 1e308 + 1e308 - 1e308 is exactly 1e308 (fractions); fsum raises "intermediate overflow"
    x = np.array([1e308, 1e308, -1e308])
    assert exact_sum(x) == fraction_sum(x.tolist()) == 1e308
    with pytest.raises(OverflowError):
        math.fsum(x.tolist())


def test_exact_sum_of_subnormal_values() -> None:
    x = np.array([5e-324, 1e-310, -3e-320, 2.5e-308])
    assert exact_sum(x) == fraction_sum(x.tolist())  # reference: fractions


# --- profile: one partial sort for quantiles and the largest items ----------


@settings(max_examples=200, deadline=None)
@given(st.lists(st.floats(-1e9, 1e9, allow_nan=False), min_size=1, max_size=200))
def test_profile_quantiles_are_numpys_to_the_last_bit(values) -> None:
    # reference: numpy.quantile, method "linear" (Hyndman and Fan definition 7)
    x = np.asarray(values, dtype=np.float64)
    stats = describe(x)
    expected = np.quantile(x, QUANTILE_LEVELS).tolist()
    assert [stats.quantiles[p] for p in QUANTILE_LEVELS] == expected
    assert [quantiles(x)[p] for p in QUANTILE_LEVELS] == expected


@settings(max_examples=200, deadline=None)
@given(st.lists(st.sampled_from([-3.0, 0.0, 0.01, 1.0, 2.5, 2.5, 40.0, 1e6]), min_size=1, max_size=300))
def test_profile_top_shares_and_sign_totals(values) -> None:
    # reference: top_share on the positive values alone (its own partial sort) and math.fsum by sign
    x = np.asarray(values, dtype=np.float64)
    stats = describe(x)
    positive = x[x > 0]
    for got, fraction in zip((stats.top_1pct_share, stats.top_5pct_share), TOP_FRACTIONS):
        want = top_share(positive, fraction)
        assert (math.isnan(got) and math.isnan(want)) or got == want
    assert stats.total == math.fsum(values)
    assert stats.credit_total == math.fsum(v for v in values if v < 0)
    assert stats.positive_total == math.fsum(v for v in values if v > 0)
    assert (stats.credit_count, stats.zero_count, stats.positive_count) == (
        int((x < 0).sum()),
        int((x == 0).sum()),
        int((x > 0).sum()),
    )


def test_stratum_statistics_min_max_and_totals_per_stratum() -> None:
    # reference: numpy min/max and math.fsum over each stratum's values; stratum 3 is empty
    rng = np.random.default_rng(5)
    x = np.round(rng.lognormal(3.0, 1.5, 5_000), 2)
    codes = rng.choice([0, 1, 2, 4], x.size)
    st_ = stratum_statistics(x, codes, 5)
    for h in (0, 1, 2, 4):
        v = x[codes == h]
        assert st_.minimum[h] == v.min() and st_.maximum[h] == v.max()
        assert st_.total[h] == math.fsum(v.tolist())
    assert np.isnan(st_.minimum[3]) and np.isnan(st_.maximum[3]) and st_.total[3] == 0.0


# --- repeated ids: 64-bit hashes, confirmed exactly ----------------------------

id_text = st.text(
    alphabet=st.characters(blacklist_categories=("Cc", "Cs", "Zs", "Zl", "Zp")), min_size=1, max_size=30
)


@settings(max_examples=150, deadline=None)
@given(st.lists(id_text, min_size=1, max_size=60))
@example(["000000000", "0"])  # a short id after a long one: found by this test, once read past the block's bytes
def test_equal_ids_have_equal_hashes_and_distinct_ones_differ(ids) -> None:
    # reference: Python str equality. Equal ids must hash equal; distinct ids of these
    # sizes colliding in 64 bits would be a one-in-2**58 event, so any collision is a fault.
    h = id_hashes(pa.array(ids, type=pa.string())).tolist()
    for i in range(len(ids)):
        for j in range(len(ids)):
            assert (h[i] == h[j]) == (ids[i] == ids[j])


def test_hashes_do_not_depend_on_position_or_block() -> None:
    # the same id in different blocks of 65,536 (and after an offset slice) hashes the same
    accent = "\u00e9"
    ids = [f"X{i:06d}-{accent * (i % 5)}{'z' * (i % 23)}" for i in range(140_000)]
    arr = pa.array(ids, type=pa.string())
    whole = id_hashes(arr)
    part = id_hashes(arr.slice(70_001))
    assert np.array_equal(whole[70_001:], part)
    assert len(set(whole.tolist())) == len(ids)  # reference: Python set of the distinct ids (all distinct)


def test_repeats_far_apart_are_reported_with_their_rows(tmp_path: Path) -> None:
    ids = [f"R{i}" for i in range(150_000)]
    ids[140_000] = ids[3]  # rows 5 and 140,002 in spreadsheet numbering (header = row 1)
    frame = pd.DataFrame({"id": ids, "amount": np.ones(len(ids))})
    with pytest.raises(InputError) as err:
        load_population(frame, id_column="id", value_column="amount")
    assert "'R3' on rows 5, 140002" in str(err.value)


def test_a_hash_collision_costs_time_not_a_false_report(monkeypatch) -> None:
    # every id hashed alike: the exact check must still accept distinct ids and report a real repeat
    monkeypatch.setattr(repeats_module, "id_hashes", lambda ids: np.zeros(len(ids), dtype=np.uint64))
    frame = pd.DataFrame({"id": ["a", "b", "c"], "amount": [1.0, 2.0, 3.0]})
    pop = load_population(frame, id_column="id", value_column="amount")
    assert pop.count == 3
    with pytest.raises(InputError, match="appear more than once"):
        load_population(frame.assign(id=["a", "b", "a"]), id_column="id", value_column="amount")
    assert duplicated_rows(pd.Series(["a", "b", "c"])) == []
    assert duplicated_rows(pd.Series(["a", "b", "a"])) == [2, 4]


@pytest.mark.parametrize(
    "labels",
    [
        ["x", "y", "x"],  # text
        ["x", None, "y", None],  # missing entries: the exact check decides
        [1, 2, 1],  # numbers
        pd.Series(["b", "a", "b"], dtype="category"),
        pd.Series(["b", "a", "b"], dtype="str"),
    ],
)
def test_repeated_labels_in_tables_as_pandas_finds_them(labels) -> None:
    # reference: pandas Series.duplicated(keep=False), the check before the hash prefilter
    series = labels if isinstance(labels, pd.Series) else pd.Series(labels, dtype=object)
    expected = [i + 2 for i in np.flatnonzero(series.duplicated(keep=False).to_numpy())]
    assert duplicated_rows(series) == expected
    assert labels_may_repeat(series) or expected == []


# --- the content fingerprint, computed when first read --------------------------


def test_fingerprint_describes_the_items_as_loaded() -> None:
    # reference: content_fingerprint on the ids and values given (itself checked against
    # hashlib and the documented rule in tests/test_population.py)
    frame = pd.DataFrame({"id": ["B-2", "A-1", "C-3"], "amount": [20.0, 10.5, -3.25]})
    pop = load_population(frame, id_column="id", value_column="amount")
    expected = content_fingerprint(["B-2", "A-1", "C-3"], [20.0, 10.5, -3.25])
    values_before = pop.book_values.copy()
    # a user writing into the items table afterwards changes neither the fingerprint nor the values
    pop.items.loc[0, "book_value"] = 999.0
    assert pop.content_sha256 == expected
    assert np.array_equal(pop.book_values, values_before)
    assert pop.to_dict()["content_sha256"] == expected


def test_fingerprint_asked_from_several_threads_is_computed_once_and_agrees() -> None:
    rng = np.random.default_rng(2)
    ids = [f"T{i}" for i in rng.permutation(20_000)]
    values = np.round(rng.lognormal(3, 1, 20_000), 2)
    pop = load_population(pd.DataFrame({"id": ids, "v": values}), id_column="id", value_column="v")
    seen: list[str] = []
    threads = [threading.Thread(target=lambda: seen.append(pop.content_sha256)) for _ in range(6)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert seen == [content_fingerprint(ids, values)] * 6


# --- stratify trusts a Population's own checks ----------------------------------


def test_stratify_a_population_as_its_items_table() -> None:
    rng = np.random.default_rng(8)
    values = np.round(rng.lognormal(5.0, 1.4, 30_000), 2)
    values[:300] = 0.0
    values[300:600] *= -1
    ids = [f"S{i}" for i in range(values.size)]
    pop = load_population(pd.DataFrame({"id": ids, "v": values}), id_column="id", value_column="v")
    a = stratify(pop, n_strata=4, top_items=25)
    b = stratify(pop.items, n_strata=4, top_items=25)  # the validating path, reading the table
    pd.testing.assert_frame_equal(a.table, b.table)
    assert np.array_equal(a.codes, b.codes)
    assert list(a.item_ids[:3]) == ["S0", "S1", "S2"]
    assert a.assignment_frame()["item_id"].tolist() == ids
