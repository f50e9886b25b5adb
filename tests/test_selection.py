"""Selection by permanent random numbers: keys, smallest-key rule, extension, checks.

Outside references: the keys are recomputed here from the documented rule
with Python's hashlib, and two are hard-coded from the ``sha256sum``
command-line tool (GNU coreutils); the equal-probability property is checked
with scipy.stats (chi-square goodness of fit and binomial tests).
"""

from __future__ import annotations

import hashlib
import itertools
import re
import unicodedata

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from auditmean.errors import InputError, ParameterError
from auditmean.selection import (
    SEED_ALPHABET,
    VerificationResult,
    _rank,
    extend_selection,
    item_key,
    item_keys,
    propose_seed,
    select,
    verify_selection,
)

SEED = "k7mq-x3rt-9ab2-hnpw"


def rule_key(seed: str, item_id: str) -> str:
    """The documented rule, written out independently of the package."""
    return hashlib.sha256((seed + ":" + item_id).encode("utf-8")).hexdigest()[:16]


def expected_by_rule(pop: pd.DataFrame, sizes: dict, seed: str) -> dict:
    """Per stratum, the item ids in selection order, by sorting in plain Python."""
    out = {}
    for stratum, n in sizes.items():
        ids = pop.loc[pop["stratum"] == stratum, "item_id"].tolist()
        ranked = sorted(ids, key=lambda i: (int(rule_key(seed, i), 16), i))
        out[stratum] = ranked[:n]
    return out


@pytest.fixture
def pop() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "item_id": [f"INV-{i:04d}" for i in range(60)],
            "stratum": ["low"] * 30 + ["mid"] * 20 + ["top"] * 10,
            "book_value": np.arange(60, dtype=float),
        }
    )


# --------------------------------------------------------------------------- keys


def test_key_against_sha256sum_tool():
    # Computed in a shell with GNU coreutils:
    #   printf '%s' 'k7mq-x3rt-9ab2-hnpw:INV-1' | sha256sum
    #   -> b1eae2037c324ef82fa35f17edefe2464811ed22eb981bfc7fb65029f1334a4d
    assert item_key(SEED, "INV-1") == "b1eae2037c324ef8"


def test_unicode_key_against_sha256sum_tool():
    # printf '%s' 'é🔒שלום:Ω-7' | sha256sum  (é typed as the single code point U+00E9)
    #   -> c8ac0a72dfab1b939ab700c67571c723fe3c4d23e66a254fdbda4a4955059f82
    seed = "\u00e9\U0001f512\u05e9\u05dc\u05d5\u05dd"
    assert item_key(seed, "\u03a9-7") == "c8ac0a72dfab1b93"


def test_keys_follow_documented_rule(pop):
    sel = select(pop, {"low": 30, "mid": 20, "top": 10}, SEED)  # everything: every key shown
    assert len(sel) == 60
    for item_id, key, key_int in zip(sel["item_id"], sel["key"], sel["key_int"]):
        assert key == rule_key(SEED, item_id)  # hashlib, documented rule
        assert int(key_int) == int(key, 16)  # the same 16 hex digits read as an integer
    assert sel["key_int"].dtype == np.uint64
    hexes, ints = item_keys(SEED, ["a", "b"])
    assert list(hexes) == [rule_key(SEED, "a"), rule_key(SEED, "b")]
    assert [int(v) for v in ints] == [int(rule_key(SEED, "a"), 16), int(rule_key(SEED, "b"), 16)]


def test_selection_is_smallest_keys_per_stratum(pop):
    sizes = {"low": 7, "mid": 4, "top": 0}
    sel = select(pop, sizes, SEED)
    expected = expected_by_rule(pop, sizes, SEED)  # plain-Python sort by (key, id)
    for stratum, ids in expected.items():
        got = sel[sel["stratum"] == stratum]
        assert got["item_id"].tolist() == ids
        assert got["order"].tolist() == list(range(1, len(ids) + 1))
    assert list(sel.columns) == ["item_id", "stratum", "key", "key_int", "order"]
    assert sel["stratum"].tolist() == ["low"] * 7 + ["mid"] * 4  # sorted by stratum then order


def test_full_stratum_takes_all(pop):
    sel = select(pop, {"low": 0, "mid": 0, "top": 10}, SEED)
    assert sorted(sel["item_id"]) == [f"INV-{i:04d}" for i in range(50, 60)]


def test_ties_broken_by_item_id():
    # Equal keys need a 64-bit collision, so the tie-break is checked on the ranking
    # helper with keys made equal by hand: Python string order decides ("B" < "a").
    codes = np.array([0, 0, 0, 1, 1], dtype=np.int64)
    keys = np.array([5, 5, 3, 5, 5], dtype=np.uint64)
    ids = ["a", "B", "z", "y", "x"]
    perm, rank = _rank(codes, keys, ids)
    assert [ids[i] for i in perm] == ["z", "B", "a", "x", "y"]
    assert rank.tolist() == [0, 1, 2, 0, 1]


def test_row_order_does_not_matter(pop):
    sizes = {"low": 5, "mid": 5, "top": 3}
    base = select(pop, sizes, SEED)
    rng = np.random.default_rng(20240501)
    for _ in range(5):
        shuffled = pop.iloc[rng.permutation(len(pop))].reset_index(drop=True)
        pd.testing.assert_frame_equal(select(shuffled, sizes, SEED), base)


@settings(max_examples=40, deadline=None)
@given(
    ids=st.lists(st.text(min_size=1, max_size=6).filter(lambda s: s.strip() != ""), min_size=1, max_size=25, unique=True),
    seed=st.text(min_size=1, max_size=8).filter(lambda s: s.strip() != ""),
    data=st.data(),
)
def test_property_shuffle_and_rule(ids, seed, data):
    try:
        (seed + "".join(ids)).encode("utf-8")
    except UnicodeEncodeError:  # lone surrogates: refused, checked elsewhere
        return
    strata = data.draw(st.lists(st.sampled_from([1, 2, 3]), min_size=len(ids), max_size=len(ids)))
    p = pd.DataFrame({"item_id": ids, "stratum": strata})
    counts = p["stratum"].value_counts().to_dict()
    sizes = {s: data.draw(st.integers(0, c)) for s, c in counts.items()}
    sel = select(p, sizes, seed)
    perm = data.draw(st.permutations(range(len(ids))))
    pd.testing.assert_frame_equal(select(p.iloc[list(perm)], sizes, seed), sel)
    for s, want in expected_by_rule(p, sizes, seed).items():
        assert sel.loc[sel["stratum"] == s, "item_id"].tolist() == want


# --------------------------------------------------------------------------- probabilities


def test_every_subset_equally_likely_and_inclusion_n_over_N():
    # Stratum "a": 5 items, n = 2 -> C(5, 2) = 10 possible samples, each expected
    # R/10 times under simple random sampling; stratum "b": 8 items, n = 3 -> each
    # item included with probability 3/8. R = 1200 seeds "freq-0" ... "freq-1199".
    p = pd.DataFrame(
        {"item_id": [f"a{i}" for i in range(5)] + [f"b{i}" for i in range(8)], "stratum": ["a"] * 5 + ["b"] * 8}
    )
    R = 1200
    subsets = {frozenset(c): 0 for c in itertools.combinations([f"a{i}" for i in range(5)], 2)}
    incl = {f"b{i}": 0 for i in range(8)}
    for r in range(R):
        sel = select(p, {"a": 2, "b": 3}, f"freq-{r}")
        subsets[frozenset(sel.loc[sel["stratum"] == "a", "item_id"])] += 1
        for i in sel.loc[sel["stratum"] == "b", "item_id"]:
            incl[i] += 1
    # scipy.stats.chisquare against the uniform distribution over the 10 subsets;
    # the seeds are fixed, so this is deterministic. Tolerance: reject at p < 0.001.
    chi = stats.chisquare(list(subsets.values()))
    assert chi.pvalue > 0.001
    # Inclusion counts of stratum "b": each Binomial(R, 3/8) (scipy.stats.binomtest);
    # with 8 tests, a Bonferroni level 0.001 / 8 per item.
    for count in incl.values():
        assert stats.binomtest(count, R, 3 / 8).pvalue > 0.001 / 8
    # Arithmetic: the counts must add up to R * n.
    assert sum(incl.values()) == R * 3


# --------------------------------------------------------------------------- extension


def test_extension_equals_first_n_plus_k_keys(pop):
    first = select(pop, {"low": 4, "mid": 2, "top": 1}, SEED)
    ext = extend_selection(pop, first, {"low": 3, "top": 2}, SEED)
    pd.testing.assert_frame_equal(ext, select(pop, {"low": 7, "mid": 2, "top": 3}, SEED))
    expected = expected_by_rule(pop, {"low": 7, "mid": 2, "top": 3}, SEED)  # plain-Python rule
    for s, ids in expected.items():
        assert ext.loc[ext["stratum"] == s, "item_id"].tolist() == ids
    # the earlier items keep their order numbers
    merged = first.merge(ext, on="item_id", suffixes=("_1", "_2"))
    assert len(merged) == len(first)
    assert (merged["order_1"] == merged["order_2"]).all()


def test_extension_refuses_a_selection_not_from_the_seed(pop):
    first = select(pop, {"low": 4, "mid": 2, "top": 1}, SEED)
    with pytest.raises(InputError, match="not the selection this seed gives"):
        extend_selection(pop, first, {"low": 1}, "another seed")
    swapped = first.copy()
    outsider = next(i for i in pop.loc[pop["stratum"] == "low", "item_id"] if i not in set(first["item_id"]))
    swapped.loc[0, "item_id"] = outsider
    with pytest.raises(InputError, match="recorded but not expected"):
        extend_selection(pop, swapped, {"low": 1}, SEED)


def test_extension_limits(pop):
    first = select(pop, {"low": 4, "mid": 2, "top": 9}, SEED)
    with pytest.raises(ParameterError, match="more items than the stratum has"):
        extend_selection(pop, first, {"top": 2}, SEED)
    with pytest.raises(ParameterError, match="not in the population"):
        extend_selection(pop, first, {"nowhere": 2}, SEED)


# --------------------------------------------------------------------------- verification


def test_verify_own_selection_and_csv_round_trip(pop, tmp_path):
    sizes = {"low": 5, "mid": 3, "top": 2}
    sel = select(pop, sizes, SEED)
    res = verify_selection(pop, sizes, SEED, sel)
    assert isinstance(res, VerificationResult) and res.match and res.differences.empty
    path = tmp_path / "sel.csv"
    sel.to_csv(path, index=False)
    back = pd.read_csv(path, dtype={"item_id": str, "stratum": str, "key": str})
    assert verify_selection(pop, sizes, SEED, back).match
    assert "matches" in res.summary()


def test_verify_lists_differences(pop):
    sizes = {"low": 5, "mid": 3, "top": 2}
    sel = select(pop, sizes, SEED)
    bad = sel.copy()
    dropped = bad.loc[0, "item_id"]
    outsider = next(i for i in pop["item_id"] if i not in set(sel["item_id"]))
    bad.loc[0, "item_id"] = outsider
    bad.loc[1, "order"] = 99
    bad.loc[2, "key"] = "0" * 16
    bad = pd.concat([bad, bad.iloc[[3]]], ignore_index=True)
    res = verify_selection(pop, sizes, SEED, bad)
    assert not res.match
    problems = {(r.item_id, r.problem) for r in res.differences.itertuples()}
    assert (dropped, "expected but not recorded") in problems
    assert (outsider, "recorded but not expected") in problems
    assert (bad.loc[1, "item_id"], "different order") in problems
    assert (bad.loc[2, "item_id"], "different key") in problems
    assert (bad.loc[3, "item_id"], "listed more than once") in problems
    assert len(res.differences) == 5
    assert res.to_dict()["match"] is False
    assert "DOES NOT MATCH" in res.summary()


# --------------------------------------------------------------------------- seeds


def test_propose_seed_format_and_randomness():
    seeds = [propose_seed() for _ in range(200)]
    pattern = re.compile(f"^[{SEED_ALPHABET}]{{4}}(-[{SEED_ALPHABET}]{{4}}){{3}}$")
    assert all(pattern.match(s) for s in seeds)
    assert not set("0o1li") & set("".join(seeds))
    # 31**16 possible seeds: a repeat among 200 would mean the generator is broken.
    assert len(set(seeds)) == 200


@pytest.mark.parametrize(
    "seed",
    [
        "\U0001f9fe\U0001f50d audit 2024 \U0001f468\u200d\U0001f469\u200d\U0001f467",  # emoji, ZWJ sequence
        "e\u0301te\u0301 \u0915\u094d\u0937",  # combining acute accents, Devanagari conjunct
        "\u05d1\u05d3\u05d9\u05e7\u05d4 \u200f2024\u200e \u0645\u0631\u0627\u062c\u0639\u0629",  # RTL with marks
        "  leading and trailing spaces  ",
    ],
)
def test_unicode_seeds_used_exactly(pop, seed):
    sel = select(pop, {"low": 3, "mid": 2, "top": 1}, seed)
    for item_id, key in zip(sel["item_id"], sel["key"]):
        assert key == rule_key(seed, item_id)  # hashlib on the exact UTF-8 bytes
    for s, ids in expected_by_rule(pop, {"low": 3, "mid": 2, "top": 1}, seed).items():
        assert sel.loc[sel["stratum"] == s, "item_id"].tolist() == ids


def test_normal_forms_are_different_seeds():
    nfc = unicodedata.normalize("NFC", "caf\u00e9")
    nfd = unicodedata.normalize("NFD", "caf\u00e9")
    assert nfc != nfd
    assert item_key(nfc, "X") == rule_key(nfc, "X") != item_key(nfd, "X") == rule_key(nfd, "X")


# --------------------------------------------------------------------------- validation


@pytest.mark.parametrize("seed", ["", "   ", None, 123, b"bytes", "bad \ud800 surrogate"])
def test_bad_seeds(pop, seed):
    with pytest.raises(ParameterError, match="seed"):
        select(pop, {"low": 1, "mid": 1, "top": 1}, seed)


def test_missing_columns(pop):
    with pytest.raises(InputError, match="missing column 'stratum'"):
        select(pop.drop(columns="stratum"), {"low": 1}, SEED)
    with pytest.raises(InputError, match="DataFrame"):
        select({"item_id": ["a"]}, {"low": 1}, SEED)


def test_duplicate_ids_reported_with_rows(pop):
    p = pop.copy()
    p.loc[5, "item_id"] = p.loc[2, "item_id"]
    with pytest.raises(InputError) as info:
        select(p, {"low": 1, "mid": 1, "top": 1}, SEED)
    assert info.value.rows == (4, 7)  # data rows 2 and 5 -> spreadsheet rows 4 and 7
    assert "duplicate" in str(info.value)


def test_blank_and_non_text_ids(pop):
    p = pop.astype({"item_id": object})
    p.loc[3, "item_id"] = "  "
    with pytest.raises(InputError, match="blank item ids") as info:
        select(p, {"low": 1, "mid": 1, "top": 1}, SEED)
    assert info.value.rows == (5,)
    p.loc[3, "item_id"] = 1001
    with pytest.raises(InputError, match="must be text") as info:
        select(p, {"low": 1, "mid": 1, "top": 1}, SEED)
    assert info.value.rows == (5,)
    q = pop.copy()
    q["stratum"] = q["stratum"].astype(object)
    q.loc[0, "stratum"] = None
    with pytest.raises(InputError, match="without a stratum"):
        select(q, {"low": 1, "mid": 1, "top": 1}, SEED)


@pytest.mark.parametrize(
    "sizes, message",
    [
        ({"low": 1, "mid": 1, "top": 1, "extra": 2}, "not in the population: 'extra'"),
        ({"low": 1, "mid": 1}, "no sample size given for strata 'top'"),
        ({"low": -1, "mid": 1, "top": 1}, "must not be negative"),
        ({"low": 31, "mid": 1, "top": 1}, "above the number of items"),
        ({"low": 2.5, "mid": 1, "top": 1}, "whole number"),
        ({"low": 2.0, "mid": 1, "top": 1}, "whole number"),
        ({"low": "3", "mid": 1, "top": 1}, "whole number"),
        ({"low": True, "mid": 1, "top": 1}, "whole number"),
        ([("low", 1)], "mapping"),
    ],
)
def test_bad_sizes(pop, sizes, message):
    with pytest.raises(ParameterError, match=re.escape(message)):
        select(pop, sizes, SEED)


def test_numpy_sizes_and_integer_strata_accepted():
    p = pd.DataFrame({"item_id": list("abcdef"), "stratum": np.array([1, 1, 1, 2, 2, 2])})
    sel = select(p, {np.int64(1): np.int64(2), 2: 3}, SEED)
    assert sel.groupby("stratum").size().to_dict() == {1: 2, 2: 3}
    with pytest.raises(ParameterError, match="1 is not '1'"):
        select(p, {"1": 2, "2": 3}, SEED)
