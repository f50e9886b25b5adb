"""Tests of auditmean.strata.stratify and the Strata record.

Per-stratum statistics are checked against pandas group-bys, numpy and scipy
computed in the test; boundaries against hand-worked tables and closed forms.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest
from scipy.stats import skew

from auditmean.core import boundaries as bnd
from auditmean.core import sizing as sz
from auditmean.errors import InputError, ParameterError
from auditmean.strata import Strata, stratify


def _population(seed: int = 0, n: int = 600) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    x = np.round(rng.lognormal(5, 1.0, n), 2)
    x[:7] = 0.0
    x[7:12] = -np.round(rng.uniform(1, 80, 5), 2)
    return pd.DataFrame({"item_id": [f"INV-{i:05d}" for i in range(n)], "book_value": x})


def test_no_item_is_dropped_and_statistics_match_a_groupby():
    df = _population()
    s = stratify(df, n_strata=4, top_cutoff=800.0)
    assert isinstance(s, Strata)
    assert s.item_count == len(df) and int(s.table["count"].sum()) == len(df)
    # Credits, zeros and top are counted in strata of their own.
    assert s.count_of("credits") == 5 and s.count_of("zeros") == 7
    assert s.count_of("top") == int((df.book_value >= 800).sum())
    assert list(s.labels) == ["credits", "zeros", "1", "2", "3", "4", "top"]
    # Outside check: a pandas group-by on the assignment.
    g = df.assign(stratum=s.assignment.astype(str)).groupby("stratum")["book_value"]
    t = s.table.set_index("stratum")
    for label, v in g:
        assert t.loc[label, "count"] == v.size
        assert t.loc[label, "book_total"] == math.fsum(v)
        if v.size > 1:
            assert t.loc[label, "std_dev"] == pytest.approx(v.std(ddof=1), rel=1e-12)
        if v.size > 2 and v.std() > 0:
            assert t.loc[label, "skewness"] == pytest.approx(skew(v, bias=False), rel=1e-9)
    assert s.book_total == pytest.approx(df.book_value.sum(), rel=1e-12)


def test_boundary_convention_and_top_cutoff():
    df = pd.DataFrame({"item_id": list("abcdefg"), "book_value": [1.0, 2.0, 5.0, 5.0, 9.0, 10.0, 12.0]})
    s = stratify(df, boundaries=[5.0], top_cutoff=10.0)
    # [min, 5) -> "1"; [5, 10) -> "2"; >= 10 -> top. The items worth 5 are in "2", the 10 in top.
    assert s.assignment.astype(str).tolist() == ["1", "1", "2", "2", "2", "top", "top"]
    assert s.method == "boundaries" and s.boundaries == (5.0,) and s.top_cutoff == 10.0


def test_top_items_with_ties_are_noted():
    x = np.array([1.0, 2.0, 3.0, 50.0, 50.0, 80.0, 4.0, 5.0, 6.0, 7.0])
    s = stratify(x, boundaries=[4.0], top_items=2)
    # The 2nd largest is 50, shared by two items: three items at or above 50 go to the top.
    assert s.top_cutoff == 50.0 and s.count_of("top") == 3
    assert any("joined the top stratum" in n for n in s.notes)
    # Array input: ids are the positions, from "1".
    assert s.item_ids[:3].tolist() == ["1", "2", "3"]


def test_cumulative_sqrt_through_the_public_entry():
    # Same hand table as tests/test_boundaries.py: frequencies 16, 9, 4, 9, 1, 1, 1, 0, 0, 1 on [0, 10]
    # (0.0 counts as a zero, so the zeros are included here), boundaries 1.0 and 4.0.
    values = [0.0] + [0.5] * 15 + [1.5] * 9 + [2.5] * 4 + [3.5] * 9 + [4.5, 5.5, 6.5, 10.0]
    s = stratify(np.array(values), n_strata=3, n_classes=10, zeros="include")
    assert s.boundaries == (1.0, 4.0)
    assert s.table["count"].tolist() == [16, 22, 4]


def test_geometric_and_equal_value_through_the_public_entry():
    x = np.array([1.0, 3.0, 50.0, 700.0, 1000.0, 0.0, -5.0])
    s = stratify(x, method="geometric", n_strata=3)  # credits and zeros apart, 1..1000 divided
    assert np.allclose(s.boundaries, [10.0, 100.0])  # Gunning and Horgan: r = 1000^(1/3) = 10
    assert s.count_of("credits") == 1 and s.count_of("zeros") == 1
    y = np.array([1, 1, 1, 1, 2, 2, 3, 9], dtype=float)
    e = stratify(y, method="equal_value", n_strata=3)
    assert e.table["book_total"].tolist() == [4.0, 7.0, 9.0]  # worked in tests/test_boundaries.py


def test_preassigned_strata():
    df = _population(1, 200)
    df["preassigned_stratum"] = np.where(df.book_value > 150, 2.0, 10.0)  # read from a file as floats
    s = stratify(df, use_preassigned=True, top_cutoff=900.0)
    assert s.method == "preassigned"
    # Numbers sort by value ("2" before "10"); 1.0-style labels read as "2", "10".
    assert [lab for lab in s.labels if lab not in ("credits", "zeros", "top")] == ["2", "10"]
    assert int(s.table["count"].sum()) == 200


def test_optimal_through_the_public_entry_is_never_worse_than_sqrt():
    df = _population(2, 3000)
    tm = 0.02 * df.book_value.sum()
    opt = stratify(df, method="optimal", n_strata=3, top_cutoff=1500.0, tolerable=tm, risk_incorrect_rejection=0.2)
    sqrt = stratify(df, method="cumulative_sqrt", n_strata=3, top_cutoff=1500.0)
    # Neyman size (Cochran 1977, sections 5.8-5.9) of each design from its own strata table,
    # top stratum counted in full; V from (TM - EM) / (z_A + z_R).
    se = sz.target_std_error(tm, 0.0, sz.z_acceptance(0.10), sz.z_rejection(0.20))

    def size(s):
        t = s.table
        rest = t["kind"] != "top"
        return s.count_of("top") + sz.neyman_size(
            t.loc[rest, "count"].to_numpy(), t.loc[rest, "std_dev"].fillna(0).to_numpy(), se**2
        )

    assert size(opt) <= size(sqrt) * (1 + 1e-9)
    assert opt.details["size"] == pytest.approx(size(opt), rel=1e-9)
    assert opt.details["start_size"] == pytest.approx(size(sqrt), rel=1e-9)
    assert opt.top_cutoff == 1500.0  # fixed by the caller, not searched


def test_optimal_may_choose_the_top_cutoff():
    df = _population(3, 3000)
    tm = 0.02 * df.book_value.sum()
    s = stratify(df, method="optimal", n_strata=3, tolerable=tm)
    # On this skewed population a top stratum pays: the search sets one.
    assert s.top_cutoff is not None and s.top_rule == "chosen by the optimal method"
    assert s.count_of("top") == int((df.book_value >= s.top_cutoff).sum())
    assert s.details["size"] < s.details["start_size"]


def test_record_outputs():
    df = _population()
    df.loc[20, "item_id"] = "<b>odd</b>"
    s = stratify(df, n_strata=3, top_cutoff=700.0)
    d = json.loads(json.dumps(s.to_dict()))
    assert d["kind"] == "strata" and d["item_count"] == len(df)
    assert [r["stratum"] for r in d["table"]] == list(s.labels)
    assert "codes" not in d and "item_ids" not in d
    assert "credits" in s.summary() and "top" in s.summary()
    frame = s.assignment_frame()
    assert frame.shape == (len(df), 3) and frame["stratum"].tolist() == s.assignment.astype(str).tolist()
    assert "<b>" not in s._repr_html_()


def test_population_record_duck_typed_on_items():
    class Pop:
        items = _population(4, 100)

    assert stratify(Pop(), n_strata=2).item_count == 100


# ---------------------------------------------------------------------------
# errors
# ---------------------------------------------------------------------------


def test_bad_book_values_and_ids_name_the_rows():
    df = _population()
    df.loc[[3, 9], "book_value"] = np.nan
    with pytest.raises(InputError) as e:
        stratify(df)
    assert e.value.rows == (5, 11) and e.value.column == "book_value"  # spreadsheet rows
    df = _population()
    df.loc[4, "item_id"] = df.loc[2, "item_id"]
    with pytest.raises(InputError) as e:
        stratify(df)
    assert e.value.rows == (4, 6)
    with pytest.raises(InputError):
        stratify(pd.DataFrame({"item_id": ["a"]}))


def test_parameter_errors():
    df = _population()
    with pytest.raises(ParameterError) as e:
        stratify(df, method="geometric", zeros="include")
    assert e.value.parameter == "zeros"
    with pytest.raises(ParameterError) as e:
        stratify(df, method="equal_value", credits="include")
    assert e.value.parameter == "credits"
    with pytest.raises(ParameterError) as e:
        stratify(df, boundaries=[300.0, 100.0])
    assert e.value.parameter == "boundaries"
    with pytest.raises(ParameterError):
        stratify(df, boundaries=[-1e9])  # outside the values: a stratum would be empty
    with pytest.raises(ParameterError) as e:
        stratify(df, n_strata=80)
    assert e.value.parameter == "n_strata"
    with pytest.raises(ParameterError):
        stratify(df, top_cutoff=100.0, top_items=3)
    with pytest.raises(ParameterError):
        stratify(df, top_cutoff=-5.0)
    with pytest.raises(ParameterError) as e:
        stratify(df, method="optimal")
    assert e.value.parameter == "tolerable"
    with pytest.raises(ParameterError):
        stratify(df, tolerable=1000.0)  # only the optimal method uses it
    with pytest.raises(ParameterError):
        stratify(df, method="kmeans")
    with pytest.raises(ParameterError):
        stratify(df, use_preassigned=True, method="geometric")


def test_preassigned_errors():
    df = _population(5, 50)
    with pytest.raises(InputError):
        stratify(df, use_preassigned=True)  # no column
    df["preassigned_stratum"] = ["A"] * 49 + [None]
    with pytest.raises(InputError) as e:
        stratify(df, use_preassigned=True)
    assert e.value.rows == (51,)
    df["preassigned_stratum"] = ["A"] * 49 + ["top"]
    with pytest.raises(InputError):
        stratify(df, use_preassigned=True)


def test_rule_results_are_those_of_the_core():
    df = _population(6, 900)
    s = stratify(df, n_strata=4, top_cutoff=1000.0, n_classes=50)
    rest = df.book_value[(df.book_value > 0) & (df.book_value < 1000.0)].to_numpy()
    assert np.allclose(s.boundaries, bnd.cumulative_sqrt_frequency(rest, 4, 50))


@pytest.mark.parametrize(
    "options",
    [
        {"method": "boundaries", "boundaries": [200.0, 800.0], "top_items": 3},
        {"use_preassigned": True},
        {"method": "optimal", "n_strata": 3, "tolerable": 20000.0},
        {"method": "geometric", "n_strata": 3},
        {"method": "cumulative_sqrt", "n_strata": 3, "top_cutoff": 2000.0},
    ],
)
def test_recorded_parameters_make_the_same_strata_again(options):
    # the engagement folder replays stratify(population, **strata.parameters) to recover the assignment
    rng = np.random.default_rng(1)
    x = np.round(rng.lognormal(6, 1, 500), 2)
    df = pd.DataFrame(
        {"item_id": [f"i{i}" for i in range(500)], "book_value": x, "preassigned_stratum": np.where(np.arange(500) % 2, "a", "b")}
    )
    first = stratify(df, **options)
    again = stratify(df, **first.parameters)
    assert list(again.labels) == list(first.labels)
    assert np.array_equal(again.codes, first.codes)
