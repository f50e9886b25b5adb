"""The scan interface: the in-memory path and the DuckDB path give the same strata and selections.

Outside references, beside each check: the statistics are recomputed in the
tests with numpy, scipy.stats and math.fsum straight from the generated
values; the keys and the selection with Python's hashlib by the documented
rule (as in tests/test_selection.py); the content fingerprint with hashlib
by its documented canonical text. Agreement of the two paths is checked to
1e-9 relative for statistics and exactly for selections.
"""

from __future__ import annotations

import hashlib
import math

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from auditmean.core import boundaries as bnd
from auditmean.core.moments import skewness_of_spread
from auditmean.errors import InputError, ParameterError
from auditmean.population import load_population, profile
from auditmean.scan import (
    DuckDBScan,
    LargePopulation,
    PandasScan,
    PopulationScan,
    ScannedStrata,
    StratumRule,
    choose_engine,
    open_population,
    select_scan,
    stratify_scan,
)
from auditmean.selection import select
from auditmean.strata import stratify

SEED = "k7mq-x3rt-9ab2-hnpw"
REL = 1e-9


def rule_key(seed: str, item_id: str) -> int:
    """The documented key, written out with hashlib."""
    return int(hashlib.sha256((seed + ":" + item_id).encode("utf-8")).hexdigest()[:16], 16)


def documented_fingerprint(ids, values, strata=None) -> str:
    """The canonical text of population.content_fingerprint, written out with hashlib."""
    rows = sorted(zip(ids, values, strata if strata is not None else [None] * len(ids)))
    lines = []
    for i, v, s in rows:
        amount = format(v, ".2f")
        amount = "0.00" if amount == "-0.00" else amount
        lines.append(f"{i}\t{amount}" + (f"\t{s}" if s is not None else "") + "\n")
    return hashlib.sha256("".join(lines).encode("utf-8")).hexdigest()


def tricky_population(n: int = 3000, seed: int = 7) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    ids = [f"INV-{k}" for k in rng.permutation(n)]
    ids[:6] = ['say "hi"', "a,b,c", "caf\u00e9-\u65e5\u672c", "  padded  ", "\u00e9", "'single'"]
    values = np.round(rng.lognormal(5.0, 1.5, n), 2)
    values[6:40] = 0.0
    values[40:90] = -np.round(rng.lognormal(2.0, 1.0, 50), 2)
    values[90] = 0.125  # a tie at the cent under the documented rounding
    values[91] = -0.004  # rounds to -0.00, written 0.00
    return pd.DataFrame({"invoice": ids, "amount": values})


@pytest.fixture(scope="module")
def files(tmp_path_factory) -> dict[str, object]:
    folder = tmp_path_factory.mktemp("scan")
    frame = tricky_population()
    csv_path = folder / "ledger.csv"
    frame.to_csv(csv_path, index=False)
    parquet_path = folder / "ledger.parquet"
    pq.write_table(pa.Table.from_pandas(frame, preserve_index=False), parquet_path)
    return {"frame": frame, "csv": csv_path, "parquet": parquet_path}


@pytest.fixture(scope="module", params=["csv", "parquet"])
def both(request, files):
    path = files[request.param]
    pop = load_population(path, id_column="invoice", value_column="amount")
    scan = DuckDBScan(path, id_column="invoice", value_column="amount")
    return files["frame"], pop, scan


# ---------------------------------------------------------------------------
# the same population on both paths


def test_both_scans_implement_the_interface(both) -> None:
    _, pop, scan = both
    assert isinstance(scan, PopulationScan) and isinstance(PandasScan(pop), PopulationScan)


def test_fingerprints_and_totals_agree_with_the_documented_rule(both) -> None:
    frame, pop, scan = both
    ids = [i.strip() for i in frame["invoice"]]
    file_sha, content_sha = scan.fingerprint()
    # hashlib over the documented canonical text, and over the file's bytes
    assert content_sha == documented_fingerprint(ids, frame["amount"].tolist()) == pop.content_sha256
    assert file_sha == hashlib.sha256(open(scan.source, "rb").read()).hexdigest() == pop.file_sha256
    assert scan.count == len(frame)
    assert math.isclose(scan.total, math.fsum(frame["amount"]), rel_tol=REL)  # math.fsum


def test_profile_agrees_with_numpy_and_scipy(both) -> None:
    frame, pop, scan = both
    x = frame["amount"].to_numpy()
    got = scan.profile()
    assert got.count == x.size
    assert math.isclose(got.total, math.fsum(x), rel_tol=REL)
    assert math.isclose(got.std_dev, float(np.std(x, ddof=1)), rel_tol=REL)  # numpy
    assert math.isclose(got.skewness, float(stats.skew(x, bias=False)), rel_tol=REL)  # scipy G1
    for p, q in got.quantiles.items():
        assert math.isclose(q, float(np.quantile(x, p)), rel_tol=REL, abs_tol=1e-12)  # numpy, definition 7
    pos = np.sort(x[x > 0])[::-1]
    k1 = math.ceil(0.01 * pos.size)
    assert math.isclose(got.top_1pct_share, math.fsum(pos[:k1]) / math.fsum(pos), rel_tol=REL)
    assert got.credit_count == int((x < 0).sum()) and got.zero_count == int((x == 0).sum())
    assert got.notes == profile(pop).notes


STRATIFY_CASES = [
    {"n_strata": 3},
    {"n_strata": 3, "top_cutoff": 1500.0},
    {"method": "geometric", "n_strata": 4, "top_items": 25},
    {"boundaries": [50.0, 100.0, 500.0]},
    {"n_strata": 2, "credits": "include", "zeros": "include", "n_classes": 40},
]


@pytest.mark.parametrize("options", STRATIFY_CASES)
def test_strata_and_selection_agree(both, options) -> None:
    frame, pop, scan = both
    expected = stratify(pop, **options)
    for engine in (scan, PandasScan(pop)):
        got = stratify_scan(engine, **options)
        assert isinstance(got, ScannedStrata)
        assert got.labels == expected.labels and got.boundaries == expected.boundaries
        assert got.top_cutoff == expected.top_cutoff and got.notes == expected.notes
        assert got.parameters == expected.parameters and got.item_count == expected.item_count
        a, b = got.table, expected.table
        assert list(a["count"]) == list(b["count"]) and list(a["kind"]) == list(b["kind"])
        for column in ("book_total", "mean", "std_dev", "skewness", "min_book", "max_book"):
            np.testing.assert_allclose(a[column], b[column], rtol=REL, atol=1e-12)
        sizes = {lab: min(int(c), 9) for lab, c in zip(b["stratum"], b["count"])}
        frame_in_memory = expected.assignment_frame()[["item_id", "stratum"]]
        pd.testing.assert_frame_equal(select_scan(got, sizes, SEED), select(frame_in_memory, sizes, SEED))


def test_stratum_statistics_by_hand(both) -> None:
    frame, _, scan = both
    x = frame["amount"].to_numpy()
    rule = StratumRule(top_cutoff=1000.0, boundaries=(100.0,))
    s = scan.count_and_moments(rule)
    # groups: credits, zeros, [0+, 100), [100, 1000), top -- numpy on the same masks
    masks = [x < 0, x == 0, (x > 0) & (x < 100), (x >= 100) & (x < 1000), x >= 1000]
    for g, m in enumerate(masks):
        assert s.count[g] == m.sum()
        assert math.isclose(s.total[g], math.fsum(x[m]), rel_tol=REL)
        assert math.isclose(s.std_dev[g], float(np.std(x[m], ddof=1)), rel_tol=REL)
        # scipy's G1; for equal values (the zeros) scipy gives NaN and the documented rule 0
        g1 = 0.0 if np.ptp(x[m]) == 0 else float(stats.skew(x[m], bias=False))
        assert math.isclose(s.skewness[g], g1, rel_tol=REL, abs_tol=1e-12)
        assert s.minimum[g] == x[m].min() and s.maximum[g] == x[m].max()


def test_selection_follows_the_documented_rule(both) -> None:
    frame, _, scan = both
    strata = stratify_scan(scan, n_strata=3, top_cutoff=1500.0)
    sizes = {lab: min(int(c), 12) for lab, c in zip(strata.table["stratum"], strata.table["count"])}
    chosen = select_scan(strata, sizes, SEED)
    x = frame["amount"].to_numpy()
    ids = np.array([i.strip() for i in frame["invoice"]], dtype=object)
    labels = np.asarray(strata.labels, dtype=object)[
        [strata.groups.index(g) for g in strata.rule.groups(x)]
    ]
    for lab, n in sizes.items():
        members = ids[labels == lab].tolist()
        ranked = sorted(members, key=lambda i: (rule_key(SEED, i), i))[:n]  # hashlib, plain sort
        assert chosen.loc[chosen["stratum"] == lab, "item_id"].tolist() == ranked


@settings(max_examples=12, deadline=None)
@given(
    values=st.lists(
        st.one_of(st.just(0.0), st.floats(-500, 5000, allow_nan=False).map(lambda v: round(v, 2))),
        min_size=8,
        max_size=60,
    ),
    seed=st.text(alphabet="abcxyz-\u00e9", min_size=1, max_size=6),
)
def test_property_duckdb_selection_matches_the_rule(tmp_path_factory, values, seed) -> None:
    path = tmp_path_factory.mktemp("prop") / "p.parquet"
    ids = [f"id,{k}\u00e9" for k in range(len(values))]
    pq.write_table(pa.table({"id": ids, "v": values}), path)
    scan = DuckDBScan(path, id_column="id", value_column="v")
    assert scan.fingerprint()[1] == documented_fingerprint(ids, values)
    rule = StratumRule(boundaries=(100.0,))
    groups = rule.groups(np.asarray(values))
    sizes = np.zeros(rule.n_groups, dtype=np.int64)
    sizes[: rule.n_groups] = 3
    got = scan.smallest_keys(seed, rule, sizes)
    for g in range(rule.n_groups):
        members = [i for i, h in zip(ids, groups) if h == g]
        expected = sorted(members, key=lambda i: (rule_key(seed, i), i))[:3]  # hashlib by the rule
        assert got.loc[got["group"] == g, "item_id"].tolist() == expected
    scan.close()


def test_preassigned_strata_agree(tmp_path) -> None:
    rng = np.random.default_rng(3)
    n = 400
    frame = pd.DataFrame(
        {
            "id": [f"L{k}" for k in range(n)],
            "amount": np.round(rng.lognormal(4, 1, n), 2),
            "region": rng.choice(["North", "South", "10", "2", " East "], n),
        }
    )
    path = tmp_path / "regions.csv"
    frame.to_csv(path, index=False)
    pop = load_population(path, id_column="id", value_column="amount", stratum_column="region")
    scan = DuckDBScan(path, id_column="id", value_column="amount", stratum_column="region")
    assert scan.fingerprint()[1] == pop.content_sha256
    expected = stratify(pop, use_preassigned=True, top_cutoff=200.0)
    got = stratify_scan(scan, use_preassigned=True, top_cutoff=200.0)
    assert got.labels == expected.labels == ("2", "10", "East", "North", "South", "top")  # natural order
    assert got.notes == expected.notes
    np.testing.assert_allclose(got.table["book_total"], expected.table["book_total"], rtol=REL)
    sizes = dict.fromkeys(got.labels, 5)
    frame_in_memory = expected.assignment_frame()[["item_id", "stratum"]]
    pd.testing.assert_frame_equal(select_scan(got, sizes, SEED), select(frame_in_memory, sizes, SEED))


def test_rules_that_need_sorted_values_are_refused_on_the_large_path(both) -> None:
    _, _, scan = both
    for method in ("equal_value", "optimal"):
        with pytest.raises(ParameterError, match="needs every book value in memory"):
            stratify_scan(scan, method=method, tolerable=1e5 if method == "optimal" else None)


def test_histogram_and_largest_agree_with_numpy(both) -> None:
    frame, _, scan = both
    x = frame["amount"].to_numpy()
    rule = StratumRule()  # credits and zeros apart: the histogram counts the positive items
    positive = x[x > 0]
    edges = np.histogram_bin_edges(positive, bins=37)
    np.testing.assert_array_equal(scan.histogram(rule, edges), np.histogram(positive, bins=37)[0])  # numpy
    assert scan.largest(5) == float(np.sort(x)[-5])


# ---------------------------------------------------------------------------
# the automatic choice


def test_automatic_choice_by_file_size(files) -> None:
    path = files["parquet"]
    assert choose_engine(path).engine == "pandas"
    low = choose_engine(path, threshold_bytes=100)
    assert low.engine == "duckdb" and "at or above" in low.reason
    rows = choose_engine(path, threshold_rows=10)
    assert rows.engine == "duckdb" and "rows" in rows.reason
    big = open_population(path, id_column="invoice", value_column="amount", threshold_bytes=100)
    small = open_population(path, id_column="invoice", value_column="amount")
    assert isinstance(big, LargePopulation) and big.engine == "duckdb" and "threshold" in big.reason
    assert big.content_sha256 == small.content_sha256 and big.count == small.count
    assert "read by" in big.summary() and "scan" not in big.to_dict()
    assert choose_engine(files["frame"]).engine == "pandas"
    with pytest.raises(ParameterError, match="engine"):
        open_population(path, id_column="invoice", value_column="amount", engine="spark")


def test_workflow_runs_end_to_end_on_the_duckdb_path(tmp_path, files) -> None:
    from auditmean.workflow import (
        PopulationReading,
        draw_selection,
        open_engagement,
        start_engagement,
        verify_engagement,
    )

    options = {"stratify_options": {"n_strata": 3, "top_cutoff": 1500.0},
               "plan_options": {"tolerable": 60000.0, "risk_incorrect_acceptance": 0.05}}
    chosen = {}
    for engine in ("duckdb", "pandas"):
        reading = PopulationReading(str(files["parquet"]), id_column="invoice", value_column="amount", engine=engine)
        eng, pop, strata, plan = start_engagement(tmp_path / engine, reading, **options)
        assert isinstance(pop, LargePopulation) == (engine == "duckdb")
        selection, _ = draw_selection(eng, pop, seed=SEED)
        chosen[engine] = selection
        eng2, pop2 = open_engagement(tmp_path / engine)
        assert verify_engagement(eng2, pop2).match
        assert eng2.info["population"]["n_items"] == len(files["frame"])
        assert eng2.plan()["population_engine"]["engine"] == engine
    pd.testing.assert_frame_equal(chosen["duckdb"], chosen["pandas"])
    # the book values of the selected items are looked up in the file for evaluation
    eng, pop = open_engagement(tmp_path / "duckdb")
    looked_up = pop.items_for(chosen["duckdb"]["item_id"].tolist()).set_index("item_id")["book_value"]
    truth = files["frame"].assign(invoice=files["frame"]["invoice"].str.strip()).set_index("invoice")["amount"]
    assert (looked_up == truth.loc[looked_up.index]).all()


# ---------------------------------------------------------------------------
# errors name the file, the column and the rows


def test_bad_amounts_name_file_column_and_rows(tmp_path) -> None:
    path = tmp_path / "bad.csv"
    path.write_text("id,amount\nA,1\nB,x\nC,\nD,2\n", encoding="utf-8")
    with pytest.raises(InputError) as info:
        DuckDBScan(path, id_column="id", value_column="amount")
    err = info.value
    assert err.file == str(path) and err.column == "amount" and err.rows == (3, 4)  # B on row 3, C on row 4
    assert "2 of 4 amounts" in str(err)


def test_text_amounts_with_separators_ask_for_conversion(tmp_path) -> None:
    path = tmp_path / "money.csv"
    path.write_text('id,amount\nA,"$1,234.50"\nB,12\n', encoding="utf-8")
    with pytest.raises(InputError, match="convert the column to plain numbers") as info:
        DuckDBScan(path, id_column="id", value_column="amount")
    assert info.value.rows == (2,)
    # the in-memory path reads the same file (auditmean.amounts' rules)
    assert load_population(path, id_column="id", value_column="amount").book_values.tolist() == [1234.5, 12.0]


def test_parquet_errors_give_file_row_numbers(tmp_path) -> None:
    path = tmp_path / "gaps.parquet"
    pq.write_table(pa.table({"id": ["A", "B", None, "D"], "v": [1.0, float("nan"), 3.0, 4.0]}), path)
    with pytest.raises(InputError) as info:
        DuckDBScan(path, id_column="id", value_column="v")
    assert info.value.column == "v" and info.value.rows == (3,)  # the NaN is the second item: row 3
    pq.write_table(pa.table({"id": ["A", "B", None, "D"], "v": [1.0, 2.0, 3.0, 4.0]}), path)
    with pytest.raises(InputError, match="without an item id") as info:
        DuckDBScan(path, id_column="id", value_column="v")
    assert info.value.column == "id" and info.value.rows == (4,)


def test_repeated_and_control_character_ids(tmp_path) -> None:
    path = tmp_path / "dupes.parquet"
    pq.write_table(pa.table({"id": ["A", "B", "A", "C", "B"], "v": [1.0, 2.0, 3.0, 4.0, 5.0]}), path)
    with pytest.raises(InputError, match="appear more than once") as info:
        DuckDBScan(path, id_column="id", value_column="v")
    assert info.value.rows == (2, 3, 4, 6) and "'A' on rows 2, 4" in str(info.value)
    pq.write_table(pa.table({"id": ["A", "B\tC"], "v": [1.0, 2.0]}), path)
    with pytest.raises(InputError, match="control character") as info:
        DuckDBScan(path, id_column="id", value_column="v")
    assert info.value.rows == (3,)


def test_missing_columns_and_unreadable_files(tmp_path, files) -> None:
    with pytest.raises(InputError, match="no column named 'amt'.*the columns are: 'invoice', 'amount'") as info:
        DuckDBScan(files["csv"], id_column="invoice", value_column="amt")
    assert info.value.file == str(files["csv"])
    with pytest.raises(InputError, match="no such file"):
        DuckDBScan(tmp_path / "absent.parquet", id_column="a", value_column="b")
    broken = tmp_path / "broken.parquet"
    broken.write_bytes(b"not parquet at all")
    with pytest.raises(InputError, match="cannot be read as a Parquet file"):
        DuckDBScan(broken, id_column="a", value_column="b")
    ragged = tmp_path / "ragged.csv"
    ragged.write_text("id,amount\nA,1\nB,2,3\n", encoding="utf-8")
    with pytest.raises(InputError, match="cannot be read") as info:
        DuckDBScan(ragged, id_column="id", value_column="amount")
    assert info.value.rows == (3,)
    with pytest.raises(InputError, match="reads CSV"):
        DuckDBScan(tmp_path / "book.xlsx", id_column="a", value_column="b")


# ---------------------------------------------------------------------------
# the two core pieces the scan reuses


def test_cumulative_sqrt_from_a_histogram_is_the_rule_on_the_values() -> None:
    x = np.random.default_rng(11).lognormal(3, 1.2, 5000)
    freq, edges = np.histogram(x, bins=100, range=(x.min(), x.max()))  # numpy's classes
    np.testing.assert_array_equal(
        bnd.cumulative_sqrt_from_histogram(freq, edges, 4), bnd.cumulative_sqrt_frequency(x, 4)
    )


def test_skewness_of_spread_is_scipys_g1_and_zero_for_rounding_noise() -> None:
    x = np.random.default_rng(5).gamma(2.0, 3.0, 300)
    d = x - x.mean()
    g1 = skewness_of_spread(np.array([x.size]), np.array([d @ d]), np.array([(d**3).sum()]), np.array([x @ x]))[0]
    assert math.isclose(g1, float(stats.skew(x, bias=False)), rel_tol=1e-12)  # scipy
    # spread of 1e-20 on values of 1: m2 = 1e-40 <= 1e-24 * 3, so G1 is taken as 0 (the documented threshold)
    assert skewness_of_spread(np.array([3]), np.array([1e-40]), np.array([1e-60]), np.array([3.0]))[0] == 0.0
