"""Tests of auditmean.plan: sample_size, allocate, plan_sample and the Plan record.

Expected sizes are recomputed from the published formulas with scipy's
normal quantiles, with the arithmetic beside the check; the misstatement
pattern's standard deviations are checked by exact enumeration.
"""

from __future__ import annotations

import itertools
import json
import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import norm

from auditmean.errors import InputError, ParameterError, RecordError
from auditmean.plan import MisstatementPattern, Plan, allocate, plan_sample, sample_size
from auditmean.strata import stratify

# ---------------------------------------------------------------------------
# sample_size
# ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    "s,n_items,tm,em,ria,rir",
    [
        (50.0, 2000, 10000.0, 0.0, 0.05, None),
        (120.0, 8000, 60000.0, 12000.0, 0.10, 0.20),
        (15.5, 350, 900.0, 100.0, 0.025, 0.05),
        (400.0, 50000, 1.5e6, 2.5e5, 0.30, 0.50),
    ],
)
def test_sample_size_is_the_classical_formula(s, n_items, tm, em, ria, rir):
    # n0 = ((z_A + z_R) S N / (TM - EM))^2, z_A one-sided, z_R two-sided, z_R = 0 without RIR
    # (Roberts 1978; AICPA audit sampling guide; quoted from memory); n = n0 / (1 + n0 / N) rounded up.
    z_a = norm.ppf(1 - ria)
    z_r = 0.0 if rir is None else norm.ppf(1 - rir / 2)
    n0 = ((z_a + z_r) * s * n_items / (tm - em)) ** 2
    expected_n = min(math.ceil(n0 / (1 + n0 / n_items)), n_items)
    got = sample_size(s, n_items, tm, em, risk_incorrect_acceptance=ria, risk_incorrect_rejection=rir)
    assert isinstance(got, int) and got == expected_n


def test_sample_size_worked_example():
    # S = 50, N = 2000, TM = 10000, RIA = 0.05: z_A = 1.6449; n0 = (1.6449 * 50 * 2000 / 10000)^2
    # = 270.55; n = 270.55 / (1 + 270.55 / 2000) = 238.3 -> 239 (arithmetic by hand).
    assert sample_size(std_dev=50.0, count=2000, tolerable=10000.0, risk_incorrect_acceptance=0.05) == 239


@pytest.mark.parametrize(
    "kwargs,name",
    [
        ({"tolerable": 100.0, "expected": 100.0}, "tolerable"),
        ({"tolerable": 100.0, "expected": -1.0}, "expected"),
        ({"tolerable": 100.0, "risk_incorrect_acceptance": 0.0}, "risk_incorrect_acceptance"),
        ({"tolerable": 100.0, "risk_incorrect_acceptance": 1.0}, "risk_incorrect_acceptance"),
        ({"tolerable": 100.0, "risk_incorrect_rejection": 1.5}, "risk_incorrect_rejection"),
        ({"tolerable": float("nan")}, "tolerable"),
        ({"tolerable": True}, "tolerable"),
    ],
)
def test_sample_size_parameter_errors(kwargs, name):
    with pytest.raises(ParameterError) as e:
        sample_size(10.0, 100, **kwargs)
    assert e.value.parameter == name


def test_sample_size_count_and_std_dev_errors():
    with pytest.raises(ParameterError) as e:
        sample_size(10.0, 0, 100.0)
    assert e.value.parameter == "count"
    with pytest.raises(ParameterError):
        sample_size(10.0, 10.5, 100.0)
    with pytest.raises(ParameterError) as e:
        sample_size(-1.0, 100, 100.0)
    assert e.value.parameter == "std_dev"


# ---------------------------------------------------------------------------
# allocate
# ---------------------------------------------------------------------------


def test_allocate_returns_sizes_by_stratum():
    t = pd.DataFrame({"stratum": ["a", "b", "c"], "count": [100, 300, 5], "std_dev": [30.0, 10.0, 0.0]})
    out = allocate(t, 64, minimum=4)
    # Neyman weights 3000, 3000, 0: "c" keeps its minimum 4, the 60 others split 30 / 30.
    assert out.to_dict() == {"a": 30, "b": 30, "c": 4}
    assert out.dtype == np.int64 and out.name == "size" and out.index.name == "stratum"
    # Proportional to 100, 300, 5 for 81 items: 20.0, 60.0, 1.0 exactly.
    assert allocate(t, 81, rule="proportional").tolist() == [20, 60, 1]


def test_allocate_errors_name_what_is_wrong():
    t = pd.DataFrame({"stratum": ["a", "b"], "count": [10, 20], "std_dev": [1.0, 2.0]})
    with pytest.raises(ParameterError) as e:
        allocate(t, 31)
    assert e.value.parameter == "total"  # more than the 30 items
    with pytest.raises(ParameterError):
        allocate(t, 5, minimum=3)  # the minimum needs 6
    with pytest.raises(ParameterError) as e:
        allocate(t, 5, rule="optimal")
    assert e.value.parameter == "rule"
    with pytest.raises(InputError) as e:
        allocate(t.assign(count=[10, -1]), 5)
    assert e.value.column == "count"
    with pytest.raises(InputError):
        allocate(t.assign(count=[10.5, 3]), 5)
    with pytest.raises(InputError) as e:
        allocate(t.assign(std_dev=[1.0, np.nan]), 5)
    assert e.value.stratum == "b"
    with pytest.raises(InputError):
        allocate(t.assign(stratum=["a", "a"]), 5)
    # std_dev is not needed by the proportional rule
    assert allocate(t.drop(columns="std_dev"), 6, rule="proportional").tolist() == [2, 4]


@settings(max_examples=60, deadline=None)
@given(
    rows=st.lists(st.tuples(st.integers(0, 300), st.floats(0, 1e3)), min_size=1, max_size=7),
    data=st.data(),
    minimum=st.integers(0, 8),
)
def test_allocate_properties(rows, data, minimum):
    counts = np.array([r[0] for r in rows])
    std = np.array([r[1] for r in rows])
    t = pd.DataFrame({"stratum": [f"s{i}" for i in range(len(rows))], "count": counts, "std_dev": std})
    lo = np.minimum(minimum, counts)
    total = data.draw(st.integers(int(lo.sum()), int(counts.sum())))
    n = allocate(t, total, minimum=minimum).to_numpy()
    assert int(n.sum()) == total
    assert np.all(n >= lo) and np.all(n <= counts)
    # Where no bound binds, Neyman sizes are within one item of total * N_h S_h / sum N S.
    w = counts * std
    if w.sum() > 0 and minimum == 0:
        share = total * w / w.sum()
        if np.all(share <= counts):
            assert np.all(np.abs(n - share) < 1 + 1e-9)


# ---------------------------------------------------------------------------
# plan_sample
# ---------------------------------------------------------------------------


def _frame(counts, std, totals=None, kind=None, skewness=None):
    d = {"stratum": [f"s{i + 1}" for i in range(len(counts))], "count": counts, "std_dev": std}
    if totals is not None:
        d["book_total"] = totals
    if kind is not None:
        d["kind"] = kind
    if skewness is not None:
        d["skewness"] = skewness
    return pd.DataFrame(d)


def test_one_stratum_plan_equals_sample_size():
    for s, n_items, tm, ria, rir in [(50.0, 2000, 10000.0, 0.05, None), (80.0, 3000, 20000.0, 0.1, 0.25)]:
        plan = plan_sample(
            _frame([n_items], [s]), tolerable=tm, risk_incorrect_acceptance=ria, risk_incorrect_rejection=rir, minimum=0
        )
        assert plan.total_size == sample_size(s, n_items, tm, 0.0, ria, rir)


def test_neyman_plan_against_cochran_5_25():
    # Cochran 1977, section 5.9: n = (sum N S)^2 / (V + sum N S^2), V = (TM / z_A)^2 with RIA 0.10:
    # z_A = 1.28155, V = (5000 / 1.28155)^2 = 1.5222e7; sum N S = 400*30 + 600*80 = 60000;
    # sum N S^2 = 400*900 + 600*6400 = 4.2e6; n = 3.6e9 / (1.5222e7 + 4.2e6) = 185.4.
    plan = plan_sample(_frame([400, 600], [30.0, 80.0]), tolerable=5000.0, minimum=0)
    V = (5000.0 / norm.ppf(0.9)) ** 2
    n = 60000.0**2 / (V + 4.2e6)
    assert 185 < n < 186
    assert plan.target_std_error == pytest.approx(math.sqrt(V))
    # Whole sizes: the smallest total from ceil(n) whose Neyman allocation reaches V
    # (variance of the total sum N (N - n) S^2 / n, Cochran 1977, section 5.3).
    t = math.ceil(n)
    while True:
        sizes = allocate(_frame([400, 600], [30.0, 80.0]), t).to_numpy()
        if np.sum(np.array([400, 600]) * (np.array([400, 600]) - sizes) * np.array([900, 6400]) / sizes) <= V:
            break
        t += 1
    assert plan.total_size == t and plan.table["size"].tolist() == sizes.tolist()
    # Neyman proportions 1 : 4 (12000 : 48000) within rounding.
    assert abs(plan.table["size"].iloc[0] - plan.total_size / 5) < 1
    assert plan.achieved_std_error <= plan.target_std_error


def test_top_stratum_is_examined_in_full_and_left_out_of_the_sums():
    f = _frame([400, 600, 25], [30.0, 80.0, 9000.0], kind=["range", "range", "top"])
    plan = plan_sample(f, tolerable=5000.0, minimum=0)
    without_top = plan_sample(_frame([400, 600], [30.0, 80.0]), tolerable=5000.0, minimum=0)
    assert plan.table["size"].tolist() == without_top.table["size"].tolist() + [25]
    assert plan.table["take_all"].tolist() == [False, False, True]


def test_overflowing_stratum_becomes_take_all():
    # Neyman share above the count (Cochran 1977, section 5.8): the stratum is examined in full.
    plan = plan_sample(_frame([30, 5000], [5000.0, 20.0]), tolerable=20000.0, minimum=0)
    assert plan.table["size"].iloc[0] == 30 and bool(plan.table["take_all"].iloc[0])


def test_planned_allowance():
    # A = (TM - EM) z_R / (z_A + z_R); RIA 0.05 and RIR 0.10 have equal quantiles 1.6449: A = (TM - EM) / 2.
    plan = plan_sample(
        _frame([1000], [40.0]), tolerable=9000.0, expected=1000.0, risk_incorrect_acceptance=0.05, risk_incorrect_rejection=0.10
    )
    assert plan.planned_allowance == pytest.approx(4000.0)
    assert plan.z_rejection == pytest.approx(norm.ppf(0.95))
    # Without RIR the allowance is TM - EM.
    assert plan_sample(_frame([1000], [40.0]), tolerable=9000.0, expected=1000.0).planned_allowance == 8000.0


@pytest.mark.parametrize("method", ["mpu", "difference", "ratio"])
def test_pattern_std_dev_by_exact_enumeration(method):
    # Each item misstated with probability p by the fraction t of its book value. Enumerate the
    # 2^6 patterns of which items are misstated and average the finite-population variance
    # (divisor N - 1) of what the method averages: y (mpu), y - x (difference), y - R x with
    # R = 1 - p t (ratio).
    x = np.array([12.0, 40.0, 55.0, 90.0, 300.0, 1000.0])
    p, t = 0.3, 0.4
    expected_var = 0.0
    for pattern in itertools.product([0, 1], repeat=x.size):
        b = np.array(pattern)
        prob = np.prod(np.where(b == 1, p, 1 - p))
        y = x * (1 - t * b)
        z = {"mpu": y, "difference": y - x, "ratio": y - (1 - p * t) * x}[method]
        expected_var += prob * np.var(z, ddof=1)
    f = _frame([6], [float(np.std(x, ddof=1))], totals=[float(x.sum())])
    plan = plan_sample(f, tolerable=100.0, method=method, std_dev_source=MisstatementPattern(p, t))
    assert plan.table["std_dev"].iloc[0] ** 2 == pytest.approx(expected_var, rel=1e-12)
    # A plain tuple means the same pattern.
    plan2 = plan_sample(f, tolerable=100.0, method=method, std_dev_source=(p, t))
    assert plan2.table["std_dev"].iloc[0] == plan.table["std_dev"].iloc[0]


def test_pilot_std_devs():
    f = _frame([500, 800, 10], [1.0, 1.0, 1.0], kind=["range", "range", "top"])
    plan = plan_sample(f, tolerable=2000.0, method="difference", std_dev_source={"s1": 12.0, "s2": 30.0})
    assert plan.table["std_dev"].tolist()[:2] == [12.0, 30.0]
    assert plan.std_dev_source == "pilot"
    with pytest.raises(InputError) as e:
        plan_sample(f, tolerable=2000.0, method="difference", std_dev_source={"s1": 12.0})
    assert e.value.stratum == "s2"
    with pytest.raises(ParameterError):
        plan_sample(f, tolerable=2000.0, method="difference", std_dev_source={"s1": 1.0, "s2": 1.0, "s9": 1.0})
    with pytest.raises(ParameterError) as e:
        plan_sample(f, tolerable=2000.0, method="ratio")  # book values do not describe ratio residuals
    assert e.value.parameter == "std_dev_source"


def test_normality_checks():
    # s1: 1000 items, G1 = 3 -> Cochran needs n > 225, Sugden et al. n > 253 (28 + 225).
    # s2: 4 items with minimum 5 -> examined in full -> no flag.
    f = _frame([1000, 4], [10.0, 3.0], skewness=[3.0, 5.0])
    plan = plan_sample(f, tolerable=2000.0, minimum=5)
    n1 = int(plan.table["size"].iloc[0])
    assert n1 <= 225
    codes = {(fl.code, fl.stratum) for fl in plan.checks}
    assert ("skew-cochran", "s1") in codes and ("skew-studentized", "s1") in codes
    assert all(fl.stratum != "s2" for fl in plan.checks)
    assert (("few-items", "s1") in codes) == (n1 < 30)  # rule of thumb, common practice
    cochran = next(fl for fl in plan.checks if fl.code == "skew-cochran")
    assert "226" in cochran.advice and cochran.source.startswith("Cochran 1977")
    # Enough items: no skewness flag once n > 28 + 25 G1^2 = 253.
    big = plan_sample(f, tolerable=2000.0, minimum=254)
    assert not [fl for fl in big.checks if fl.stratum == "s1"]


def test_plan_from_strata_record_and_json_round_trip():
    rng = np.random.default_rng(4)
    x = np.round(rng.lognormal(6, 1.1, 5000), 2)
    x[:3] = 0.0
    s = stratify(x, n_strata=4, top_cutoff=8000.0)
    plan = plan_sample(s, tolerable=0.03 * x.sum(), risk_incorrect_rejection=0.3)
    assert plan.population_count == 5000
    assert plan.table["stratum"].tolist() == list(s.labels)
    assert plan.table.loc[plan.table["stratum"] == "top", "take_all"].item()
    assert plan.sizes["top"] == s.count_of("top")
    d = json.loads(json.dumps(plan.to_dict()))
    assert d["kind"] == "plan"
    back = Plan.from_dict(d)
    assert back.to_dict() == d
    assert back.sizes == plan.sizes and back.checks == plan.checks and back.total_size == plan.total_size
    with pytest.raises(RecordError):
        Plan.from_dict({**d, "kind": "strata"})
    with pytest.raises(RecordError):
        Plan.from_dict({k: v for k, v in d.items() if k != "table"})
    assert "Sample size" in plan.summary()


def test_plan_html_is_escaped():
    f = pd.DataFrame({"stratum": ["<i>x</i>"], "count": [100], "std_dev": [5.0]})
    assert "<i>" not in plan_sample(f, tolerable=200.0)._repr_html_()


def test_plan_parameter_errors():
    f = _frame([100], [5.0])
    with pytest.raises(ParameterError):
        plan_sample(f, tolerable=10.0, expected=20.0)
    with pytest.raises(ParameterError):
        plan_sample(f, tolerable=10.0, method="regression")
    with pytest.raises(ParameterError):
        plan_sample(f, tolerable=10.0, allocation="optimal")
    with pytest.raises(ParameterError):
        plan_sample(f, tolerable=10.0, minimum=-1)
    with pytest.raises(ParameterError):
        plan_sample(f, tolerable=10.0, method="difference", std_dev_source=(1.5, 0.2))
    with pytest.raises(InputError):
        plan_sample(f.drop(columns="count"), tolerable=10.0)
    with pytest.raises(InputError):
        plan_sample(f, tolerable=10.0, method="mpu", std_dev_source=(0.1, 0.2))  # no book_total
