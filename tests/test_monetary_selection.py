"""Selection by monetary unit: checked against the documented rule re-performed outside auditmean.

Sources named beside the checks:

* the rule as the README and ``auditmean/monetary_selection.py`` document it, re-performed in
  :func:`reference_selection` with :mod:`hashlib`, :mod:`bisect` and Python's unbounded
  integers only (no auditmean helper);
* SHA-256 itself (NIST FIPS 180-4): the worked example's digests are the ones
  ``printf '%s' 'k7mq-x3rt-9ab2-hnpw:unit:1' | sha256sum`` prints;
* the binomial distribution: with independent draws, each uniform over the ``B`` cents, an item
  of ``c`` cents is hit ``Binomial(n, c / B)`` times, with mean ``n c / B`` and variance
  ``n p (1 - p)`` (e.g. Feller, 1968, *An Introduction to Probability Theory*, vol. 1, ch. VI;
  quoted from memory); and Pearson's chi-square for multinomial counts (Pearson, 1900), its
  quantile from ``scipy.stats.chi2``.

Every population here is invented.
"""

from __future__ import annotations

import bisect
import hashlib

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import auditmean
from auditmean.errors import InputError, ParameterError
from auditmean.monetary_selection import (
    _points,
    extend_monetary_units,
    select_monetary_units,
    unit_draws,
    verify_monetary_units,
)

# ---------------------------------------------------------------------------
# the documented rule, re-performed with hashlib and Python integers alone
# ---------------------------------------------------------------------------


def reference_selection(ids, book_values, n, seed):
    """The README's rule, step by step, with nothing but the standard library.

    Returns one dict per selected item, in item-id order.
    """
    items = []
    for item_id, value in zip(ids, book_values):
        cents = round(value * 100)  # Python's round: halves to even
        if cents > 0:
            items.append((item_id.strip(), cents))
    items.sort()  # Python compares text by code point
    ends, total = [], 0
    for _, cents in items:
        total += cents
        ends.append(total)
    draws: dict[int, list[int]] = {}
    for k in range(1, n + 1):
        digest = hashlib.sha256(f"{seed}:unit:{k}".encode()).hexdigest()
        u = int(digest[:13], 16)
        point = u * total // 2**52  # exact: Python integers have no size limit
        j = bisect.bisect_right(ends, point)  # the item with C(j-1) <= point < C(j)
        draws.setdefault(j, []).append(k)
    rows = []
    for j, (item_id, cents) in enumerate(items):
        ks = draws.get(j, [])
        in_full = cents * n >= total
        if ks or in_full:
            rows.append(
                {
                    "item_id": item_id,
                    "hits": len(ks),
                    "examined_in_full": in_full,
                    "units": " ".join(str(k) for k in ks),
                    "first_unit": ks[0] if ks else 0,
                    "unit_from": ends[j] - cents,
                    "unit_to": ends[j],
                }
            )
    return rows, total


def as_rows(selection: pd.DataFrame) -> list[dict]:
    cols = ["item_id", "hits", "examined_in_full", "units", "first_unit", "unit_from", "unit_to"]
    return [
        {c: (v.item() if isinstance(v, np.generic) else v) for c, v in zip(cols, row)}
        for row in selection[cols].itertuples(index=False)
    ]


def invented_population(rng: np.random.Generator, count: int, credits: int = 0, zeros: int = 0) -> pd.DataFrame:
    """Skewed invented book values, ids of several forms (mixed case, accents, long ids, spaces)."""
    values = np.round(rng.lognormal(6.0, 1.6, count), 2)
    values[:credits] = -np.round(rng.uniform(1, 500, credits), 2)
    values[credits : credits + zeros] = 0.0
    forms = [
        lambda i: f"INV-{i:05d}",
        lambda i: f"inv-{i}",
        lambda i: f"Rechnung-Ä{i}",
        lambda i: f"é{i}",
        lambda i: f"  padded-{i} ",
        lambda i: f"a-very-long-invoice-identifier-from-the-ledger-{i:06d}",
    ]
    ids = [forms[i % len(forms)](i) for i in range(count)]
    order = rng.permutation(count)
    return pd.DataFrame({"item_id": [ids[i] for i in order], "book_value": values[order]})


# ---------------------------------------------------------------------------
# (1) re-performed from the documented rule
# ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("seed", "count", "n"),
    [("k7mq-x3rt-9ab2-hnpw", 300, 25), ("sémillon 7", 2_000, 120), ("x", 50, 400), ("audit-2025", 5_000, 60)],
)
def test_selection_is_the_documented_rule_reperformed_with_hashlib(seed, count, n):
    rng = np.random.default_rng(count + n)
    pop = invented_population(rng, count, credits=7, zeros=3)
    got = select_monetary_units(pop, n, seed, nonpositive="apart")
    want, total = reference_selection(pop["item_id"], pop["book_value"], n, seed)
    # source: reference_selection, the README's rule with hashlib and Python integers
    assert as_rows(got) == want
    meta = got.attrs["monetary_units"]
    assert meta["book_total_cents"] == total
    assert meta["sample_size"] == n
    assert meta["credits"]["count"] == 7 and meta["zeros"]["count"] == 3
    # the credits' total, added in the test: the negative book values
    assert meta["credits"]["total"] == pytest.approx(pop["book_value"][pop["book_value"] < 0].sum())
    in_full = got["examined_in_full"].to_numpy()
    assert meta["draws_in_full_items"] + meta["draws_in_remainder"] == n
    assert meta["draws_in_full_items"] == int(got["hits"][in_full].sum())
    full_cents = int((got["unit_to"] - got["unit_from"])[in_full].sum())
    assert meta["remainder_total"] == pytest.approx((total - full_cents) / 100)
    # book values carried as given; the interval is B / n in currency units
    assert meta["interval"] == pytest.approx(total / n / 100)


def test_worked_example_of_the_readme():
    # source: the digests are SHA-256 as `printf '%s' 'k7mq-x3rt-9ab2-hnpw:unit:1' | sha256sum`
    # prints (878d82d59ce41c71...); the points are floor(u * 2,000,000 / 2^52), worked in the README
    seed = "k7mq-x3rt-9ab2-hnpw"
    assert hashlib.sha256(b"k7mq-x3rt-9ab2-hnpw:unit:1").hexdigest().startswith("878d82d59ce41")
    assert [int(u) for u in unit_draws(seed, 4)] == [
        int("878d82d59ce41", 16),
        int("e72055d4576cf", 16),
        int("da0640a2379ec", 16),
        int("f23a725caf707", 16),
    ]
    pop = pd.DataFrame(
        {
            "item_id": ["INV-1006", "INV-1002", "INV-1003", "INV-1001", "INV-1007", "INV-1005", "INV-1004"],
            "book_value": [5206.40, 5987.10, -75.00, 2412.35, 1791.10, 1598.25, 3004.80],
        }
    )
    got = select_monetary_units(pop, 4, seed, nonpositive="apart")
    # README table: points 1,059,006 (INV-1004), 1,805,674 and 1,703,315 (INV-1006),
    # 1,892,408 (INV-1007); INV-1002 and INV-1006 at or above the interval 5,000.00
    assert got["item_id"].tolist() == ["INV-1002", "INV-1004", "INV-1006", "INV-1007"]
    assert got["hits"].tolist() == [0, 1, 2, 1]
    assert got["units"].tolist() == ["", "1", "2 3", "4"]
    assert got["examined_in_full"].tolist() == [True, False, True, False]
    assert got.attrs["monetary_units"]["interval"] == 5000.0
    assert got.attrs["monetary_units"]["remainder_total"] == pytest.approx(8806.50)
    # extending to 5 draws: draw 5 (point 699,553) falls in INV-1002, already examined in full
    ext = extend_monetary_units(pop, got, 5, seed)
    assert ext["units"].tolist() == ["5", "1", "2 3", "4"] and not ext["added"].any()


def test_exact_integer_points_agree_with_python_integers():
    # source: Python's unbounded integers, floor(u * B / 2^52) computed directly
    rng = np.random.default_rng(5)
    for total in [1, 2, 3, 10**6, 2**53 + 1, 2**61 - 1, 2**62, *rng.integers(1, 2**62, 20).tolist()]:
        u = np.concatenate(([0, 2**52 - 1, 2**51], rng.integers(0, 2**52, 2_000))).astype(np.uint64)
        want = [int(x) * int(total) >> 52 for x in u.tolist()]
        assert _points(u, int(total)).tolist() == want


def test_amounts_beyond_double_precision_cents_are_handled_exactly():
    # book totals above 2^53 cents: the reference works in Python integers throughout
    pop = pd.DataFrame(
        {"item_id": ["A", "B", "C", "D"], "book_value": [1.1e16, 9.5e15, 1.23456789e16, 1.0e14]}
    )
    seed = "large"
    got = select_monetary_units(pop, 9, seed)
    want, total = reference_selection(pop["item_id"], pop["book_value"], 9, seed)
    assert total > 2**53
    assert as_rows(got) == want


# ---------------------------------------------------------------------------
# (2) independent of row order
# ---------------------------------------------------------------------------


def test_row_order_does_not_matter():
    rng = np.random.default_rng(11)
    pop = invented_population(rng, 3_000, credits=4)
    pop["note"] = [f"line {i}" for i in range(len(pop))]  # a carried column follows its item
    first = select_monetary_units(pop, 80, "order-check", nonpositive="apart")
    for _ in range(3):
        shuffled = pop.sample(frac=1.0, random_state=int(rng.integers(1 << 30))).reset_index(drop=True)
        again = select_monetary_units(shuffled, 80, "order-check", nonpositive="apart")
        pd.testing.assert_frame_equal(again, first)
    # the note went with its item: the same pairs as in the population (ids stripped)
    notes = dict(zip(pop["item_id"].str.strip(), pop["note"]))
    assert [notes[i] for i in first["item_id"]] == first["note"].tolist()


def test_a_population_record_gives_the_same_selection():
    rng = np.random.default_rng(3)
    frame = invented_population(rng, 500, credits=2, zeros=1).rename(columns={"item_id": "inv", "book_value": "amt"})
    pop = auditmean.load_population(frame, id_column="inv", value_column="amt")
    from_record = select_monetary_units(pop, 40, "same", nonpositive="apart")
    from_frame = select_monetary_units(
        frame.rename(columns={"inv": "item_id", "amt": "book_value"}), 40, "same", nonpositive="apart"
    )
    pd.testing.assert_frame_equal(from_record, from_frame)
    assert verify_monetary_units(pop, from_record, "same").match


# ---------------------------------------------------------------------------
# (3) over many seeds, hits average n * book value / book total
# ---------------------------------------------------------------------------


def test_average_hits_are_proportional_to_book_value_over_many_seeds():
    values = np.array([7.31, 14.62, 21.93, 29.24, 36.55, 43.86, 51.17, 58.48, 65.79, 73.10, 80.41, 400.00])
    cents = np.rint(values * 100).astype(np.int64)
    total = int(cents.sum())
    pop = pd.DataFrame({"item_id": [f"I{i:02d}" for i in range(values.size)], "book_value": values})
    n, seeds = 30, 2_000
    in_full = cents * n >= total  # arithmetic in the test: c * n >= B
    assert 0 < in_full.sum() < values.size
    counts = np.zeros(values.size, dtype=np.int64)
    for s in range(seeds):
        sel = select_monetary_units(pop, n, f"many-seeds-{s}")
        pos = sel["item_id"].str[1:].astype(int).to_numpy()
        counts[pos] += sel["hits"].to_numpy()
        # (4) every draw lands in an item, and the items at or above the interval are always in
        assert int(sel["hits"].sum()) == n
        assert set(np.flatnonzero(in_full)) <= set(pos.tolist())
        assert (sel["examined_in_full"].to_numpy() == in_full[pos]).all()
    p = cents / total
    expected = seeds * n * p  # source: the mean of a binomial count, n p per seed
    sd = np.sqrt(seeds * n * p * (1 - p))  # source: the binomial variance n p (1 - p)
    # each item within 4 standard deviations (12 items: a false alarm has probability below 1e-3)
    assert np.all(np.abs(counts - expected) <= 4 * sd), (counts, expected)
    # all items together: Pearson's chi-square of multinomial counts (Pearson 1900), scipy's quantile
    chi2 = float(((counts - expected) ** 2 / expected).sum())
    assert chi2 <= stats.chi2.ppf(0.999, values.size - 1)
    # the average per seed is n * book value / book total, within the same tolerance
    assert np.all(np.abs(counts / seeds - n * values / values.sum()) <= 4 * sd / seeds + 1e-12)


# ---------------------------------------------------------------------------
# (4) the hits and the items examined in full
# ---------------------------------------------------------------------------


def test_items_exactly_at_the_interval_are_examined_in_full():
    # B = 100.00 (10,000 cents) and n = 2: the interval is 50.00 (arithmetic: 10,000 / 2 = 5,000 cents)
    pop = pd.DataFrame({"item_id": ["A", "B", "C"], "book_value": [50.00, 49.99, 0.01]})
    for seed in ["a", "b", "c", "d", "e"]:
        sel = select_monetary_units(pop, 2, seed).set_index("item_id")
        assert bool(sel.loc["A", "examined_in_full"])  # 5,000 * 2 >= 10,000
        assert "B" not in sel.index or not bool(sel.loc["B", "examined_in_full"])  # 4,999 * 2 < 10,000
        assert int(sel["hits"].sum()) == 2
    # B = 100.01 (10,001 cents), n = 2: the interval is 5,000.5 cents, so 50.00 is just below it
    # (arithmetic: 5,000 * 2 = 10,000 < 10,001) and 50.01 is above it (5,001 * 2 = 10,002)
    pop = pd.DataFrame({"item_id": ["A", "B"], "book_value": [50.00, 50.01]})
    for seed in ["a", "b", "c", "d", "e", "f"]:
        sel = select_monetary_units(pop, 2, seed).set_index("item_id")
        assert bool(sel.loc["B", "examined_in_full"])
        assert "A" not in sel.index or not bool(sel.loc["A", "examined_in_full"])
        assert "A" in sel.index or int(sel.loc["B", "hits"]) == 2  # A is in only if a draw fell in it


def test_sample_size_equal_to_the_total_in_cents_takes_every_item_in_full():
    pop = pd.DataFrame({"item_id": ["A", "B", "C"], "book_value": [0.40, 0.35, 0.25]})
    sel = select_monetary_units(pop, 100, "all")  # B = 100 cents
    assert sel["item_id"].tolist() == ["A", "B", "C"]
    assert sel["examined_in_full"].all()
    assert int(sel["hits"].sum()) == 100
    assert (sel["unit_to"] - sel["unit_from"]).tolist() == [40, 35, 25]
    # every draw number appears exactly once
    numbers = sorted(int(k) for u in sel["units"] for k in u.split())
    assert numbers == list(range(1, 101))


def test_fractions_of_a_cent_are_rounded_half_to_even():
    # 0.125 * 100 = 12.5 exactly in binary, rounded to 12; 0.135 * 100 = 13.5 -> 14 (Python's round)
    pop = pd.DataFrame({"item_id": ["A", "B"], "book_value": [0.125, 0.135]})
    sel = select_monetary_units(pop, 26, "r")
    assert sel.attrs["monetary_units"]["book_total_cents"] == round(0.125 * 100) + round(0.135 * 100) == 26


# ---------------------------------------------------------------------------
# (5) extension
# ---------------------------------------------------------------------------


def test_extension_keeps_every_item_and_the_first_draws():
    rng = np.random.default_rng(21)
    pop = invented_population(rng, 1_500)
    for seed in ["ext-1", "ext-2", "ext-3"]:
        small = select_monetary_units(pop, 20, seed)
        big = extend_monetary_units(pop, small, 75, seed)
        direct = select_monetary_units(pop, 75, seed)
        pd.testing.assert_frame_equal(big.drop(columns="added"), direct, check_like=False)
        assert set(small["item_id"]) <= set(big["item_id"])
        merged = small.merge(big, on="item_id", suffixes=("_s", "_b"))
        assert len(merged) == len(small)
        assert (merged["hits_b"] >= merged["hits_s"]).all()
        # the draws 1..20 fall where they fell before
        for r in merged.itertuples():
            before = [int(k) for k in r.units_s.split()]
            after = [int(k) for k in r.units_b.split() if int(k) <= 20]
            assert before == after
        assert big["added"].tolist() == (~big["item_id"].isin(small["item_id"])).tolist()
        meta = big.attrs["monetary_units"]
        assert meta["previous_sample_size"] == 20 and meta["added"] == int(big["added"].sum())


def test_extension_of_a_selection_read_back_from_a_file(tmp_path):
    rng = np.random.default_rng(8)
    pop = invented_population(rng, 400)
    sel = select_monetary_units(pop, 15, "file")
    path = tmp_path / "selection.csv"
    sel.to_csv(path, index=False)
    back = pd.read_csv(path, dtype={"item_id": str})  # no attrs: the size comes from the units
    assert verify_monetary_units(pop, back, "file").match
    ext = extend_monetary_units(pop, back, 30, "file")
    pd.testing.assert_frame_equal(ext.drop(columns="added"), select_monetary_units(pop, 30, "file"))


def test_extension_refuses_a_smaller_size_or_a_foreign_selection():
    pop = invented_population(np.random.default_rng(2), 200)
    sel = select_monetary_units(pop, 12, "e")
    with pytest.raises(ParameterError, match="new_size.*above the 12 draws"):
        extend_monetary_units(pop, sel, 12, "e")
    with pytest.raises(InputError, match="not the selection this seed gives"):
        extend_monetary_units(pop, sel, 20, "another seed")


# ---------------------------------------------------------------------------
# (6) bad input
# ---------------------------------------------------------------------------


def test_credits_and_zeros_are_refused_by_default_with_rows_and_counts():
    pop = pd.DataFrame(
        {"item_id": ["A", "B", "C", "D", "E"], "book_value": [100.0, -20.0, 0.0, 0.004, -1.0]}
    )
    with pytest.raises(InputError) as info:
        select_monetary_units(pop, 3, "s")
    err = info.value
    assert err.rows == (3, 4, 5, 6)  # spreadsheet rows: header is row 1
    assert err.column == "book_value"
    text = str(err)
    assert "2 credits" in text and "2 zero balances" in text and "nonpositive='apart'" in text
    sel = select_monetary_units(pop, 3, "s", nonpositive="apart")
    meta = sel.attrs["monetary_units"]
    assert meta["credits"] == {"count": 2, "total": -21.0}
    assert meta["zeros"] == {"count": 2}
    assert meta["items"] == 5 and meta["positive_items"] == 1
    assert sel["item_id"].tolist() == ["A"]
    with pytest.raises(ParameterError, match="nonpositive"):
        select_monetary_units(pop, 3, "s", nonpositive="skip")


def test_a_population_with_no_positive_item_is_refused():
    pop = pd.DataFrame({"item_id": ["A", "B"], "book_value": [-5.0, 0.0]})
    with pytest.raises(ParameterError, match="no item with a positive book value"):
        select_monetary_units(pop, 1, "s", nonpositive="apart")


@pytest.mark.parametrize(
    ("size", "message"),
    [
        (0, "at least 1"),
        (-3, "at least 1"),
        (2.5, "whole number"),
        (10.0, "whole number"),
        (True, "whole number"),
        ("10", "whole number"),
        (30_001, r"30,001 draws asked.*only 30,000 monetary units"),
    ],
)
def test_bad_sample_sizes(size, message):
    pop = pd.DataFrame({"item_id": ["A", "B"], "book_value": [100.0, 200.0]})  # 30,000 cents
    with pytest.raises(ParameterError, match=message) as info:
        select_monetary_units(pop, size, "s")
    assert info.value.parameter == "sample_size"
    assert len(select_monetary_units(pop, np.int64(30_000), "s")) == 2  # the largest size is accepted


def test_duplicate_blank_and_non_text_ids():
    dup = pd.DataFrame({"item_id": ["A", "B", " A "], "book_value": [1.0, 2.0, 3.0]})
    with pytest.raises(InputError, match="duplicate item ids") as info:
        select_monetary_units(dup, 1, "s")
    assert info.value.rows == (2, 4) and info.value.column == "item_id"
    blank = pd.DataFrame({"item_id": ["A", "  ", None], "book_value": [1.0, 2.0, 3.0]})
    with pytest.raises(InputError, match="blank item ids") as info:
        select_monetary_units(blank, 1, "s")
    assert info.value.rows == (3, 4)
    numbers = pd.DataFrame({"item_id": ["A", 1001, "C"], "book_value": [1.0, 2.0, 3.0]})
    with pytest.raises(InputError, match="must be text") as info:
        select_monetary_units(numbers, 1, "s")
    assert info.value.rows == (3,)


def test_missing_columns_bad_amounts_and_clashing_columns():
    with pytest.raises(InputError, match="missing column 'book_value'"):
        select_monetary_units(pd.DataFrame({"item_id": ["A"], "amount": [1.0]}), 1, "s")
    with pytest.raises(InputError, match="missing columns 'item_id', 'book_value'"):
        select_monetary_units(pd.DataFrame({"id": ["A"]}), 1, "s")
    with pytest.raises(InputError, match="non-numeric") as info:
        select_monetary_units(pd.DataFrame({"item_id": ["A", "B"], "book_value": [1.0, "x"]}), 1, "s")
    assert info.value.rows == (3,)
    with pytest.raises(InputError, match="'hits'.*would be overwritten"):
        select_monetary_units(pd.DataFrame({"item_id": ["A"], "book_value": [1.0], "hits": [3]}), 1, "s")
    with pytest.raises(InputError, match="DataFrame"):
        select_monetary_units([("A", 1.0)], 1, "s")


def test_totals_beyond_exact_whole_cents_are_refused():
    too_big_item = pd.DataFrame({"item_id": ["A", "B"], "book_value": [5e16, 1.0]})
    with pytest.raises(InputError, match="exact whole") as info:
        select_monetary_units(too_big_item, 1, "s")
    assert info.value.rows == (2,)
    too_big_total = pd.DataFrame({"item_id": ["A", "B", "C"], "book_value": [2e16, 2e16, 2e16]})
    with pytest.raises(InputError, match=r"above the 4,611,686,018,427,387,904 cents \(2\^62\)"):
        select_monetary_units(too_big_total, 1, "s")


def test_bad_seeds():
    pop = pd.DataFrame({"item_id": ["A"], "book_value": [1.0]})
    for seed in ["", "   ", 17, None]:
        with pytest.raises(ParameterError) as info:
            select_monetary_units(pop, 1, seed)
        assert info.value.parameter == "seed"


def test_verification_names_the_items_that_differ():
    rng = np.random.default_rng(31)
    pop = invented_population(rng, 600)
    sel = select_monetary_units(pop, 25, "v")
    assert verify_monetary_units(pop, sel, "v").match
    # another seed: the whole selection differs
    assert not verify_monetary_units(pop, sel, "w").match

    tampered = sel.copy()
    gone = tampered["item_id"].iloc[0]
    not_drawn = sorted(set(pop["item_id"].str.strip()) - set(sel["item_id"]))[0]
    changed = tampered["item_id"].iloc[1]
    tampered.loc[1, "units"] = "99"
    tampered = pd.concat(
        [tampered.iloc[1:], pd.DataFrame({"item_id": [not_drawn, changed], "hits": [0, 0]})], ignore_index=True
    )
    result = verify_monetary_units(pop, tampered, "v", sample_size=25)
    assert not result.match
    d = result.differences
    problems = set(zip(d["item_id"], d["problem"]))
    assert (gone, "expected but not recorded") in problems
    assert (not_drawn, "recorded but not expected") in problems
    assert (changed, "listed more than once") in problems
    assert (changed, "different units") in problems
    assert gone in result.summary() and not_drawn in result.summary()
    # a recorded hit count that does not add up to the sample size
    short = sel.copy()
    short.loc[0, "hits"] = short.loc[0, "hits"] + 1
    result = verify_monetary_units(pop, short, "v", sample_size=25)
    assert ("(whole selection)", "hits do not add up to the sample size") in set(
        zip(result.differences["item_id"], result.differences["problem"])
    )
    with pytest.raises(InputError, match="missing column 'hits'"):
        verify_monetary_units(pop, sel.drop(columns="hits"), "v")


def test_public_names_are_exported():
    assert auditmean.select_monetary_units is select_monetary_units
    assert auditmean.extend_monetary_units is extend_monetary_units
    assert auditmean.verify_monetary_units is verify_monetary_units
    for name in ("select_monetary_units", "extend_monetary_units", "verify_monetary_units"):
        assert name in auditmean.__all__
