"""Properties every estimator must have, checked on random designs (hypothesis).

These are mathematical identities of the estimators (Cochran 1977, chapters
5-7), not numbers from a source: with audited values equal to book values
the book-value methods reproduce the book total with no error; a stratum
examined in full contributes its exact total and no variance; the order of
rows is irrelevant; every estimate is homogeneous of degree one in money.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from auditmean.evaluation import estimate_total

METHODS = ["mpu", "difference", "ratio", "combined_ratio", "regression"]
BOOK_METHODS = METHODS[1:]


def _design(seed: int, n_strata: int, with_full: bool):
    """A random stratified design with skewed positive book values and a few taints."""
    rng = np.random.default_rng(seed)
    rows, strata = [], []
    for h in range(n_strata):
        n = int(rng.integers(3, 15))
        full = with_full and h == 0
        N = n if full else n + int(rng.integers(1, 200))
        x = np.round(rng.lognormal(6, 1.2, n), 2)
        taint = np.where(rng.random(n) < 0.3, rng.uniform(-0.2, 0.8, n), 0.0)
        y = np.round(x * (1 - taint), 2)
        X = float(x.sum()) if full else float(np.round(x.mean() * N * rng.uniform(0.7, 1.3), 2))
        strata.append({"stratum": f"S{h}", "count": N, "book_total": X})
        rows += [
            {"stratum": f"S{h}", "item_id": f"{h}-{i}", "book_value": xi, "audited_value": yi}
            for i, (xi, yi) in enumerate(zip(x, y))
        ]
    return pd.DataFrame(rows), pd.DataFrame(strata)


designs = st.tuples(st.integers(0, 2**32 - 1), st.integers(1, 5), st.booleans())
SETTINGS = settings(max_examples=40, deadline=None)


@SETTINGS
@given(designs)
def test_audited_equal_to_book_gives_book_total_and_zero_error(d):
    sample, strata = _design(*d)
    sample = sample.assign(audited_value=sample["book_value"])
    for method in BOOK_METHODS:
        r = estimate_total(sample, strata, method=method)
        assert r.total == pytest.approx(strata["book_total"].sum(), rel=1e-12), method
        assert r.std_error == 0.0, method
        assert r.misstatement == pytest.approx(0.0, abs=1e-9 * strata["book_total"].sum())


@SETTINGS
@given(designs)
def test_full_stratum_adds_exact_total_and_no_variance(d):
    sample, strata = _design(d[0], d[1], with_full=False)
    rng = np.random.default_rng(d[0] + 1)
    x = np.round(rng.lognormal(9, 0.5, 3), 2)
    y = np.round(x * rng.uniform(0.5, 1.0, 3), 2)
    top = pd.DataFrame({"stratum": "top", "item_id": ["t0", "t1", "t2"], "book_value": x, "audited_value": y})
    sample2 = pd.concat([sample, top], ignore_index=True)
    strata2 = pd.concat(
        [strata, pd.DataFrame({"stratum": ["top"], "count": [3], "book_total": [float(x.sum())]})],
        ignore_index=True,
    )
    for method in METHODS:
        a = estimate_total(sample, strata, method=method)
        b = estimate_total(sample2, strata2, method=method)
        assert b.total == pytest.approx(a.total + y.sum(), rel=1e-12), method
        assert b.std_error == pytest.approx(a.std_error, rel=1e-12, abs=1e-9), method


@SETTINGS
@given(designs, st.integers(0, 2**32 - 1))
def test_row_order_changes_nothing(d, perm_seed):
    sample, strata = _design(*d)
    rng = np.random.default_rng(perm_seed)
    shuffled = sample.iloc[rng.permutation(len(sample))].reset_index(drop=True)
    strata_shuffled = strata.iloc[rng.permutation(len(strata))].reset_index(drop=True)
    for method in METHODS:
        a = estimate_total(sample, strata, method=method)
        b = estimate_total(shuffled, strata_shuffled, method=method)
        assert b.total == pytest.approx(a.total, rel=1e-12), method
        assert b.std_error == pytest.approx(a.std_error, rel=1e-9, abs=1e-9), method
        assert b.df == pytest.approx(a.df, rel=1e-9, nan_ok=True), method


@SETTINGS
@given(designs, st.sampled_from([0.01, 3.0, 1000.0, 1e6]))
def test_scaling_money_scales_totals_and_errors(d, c):
    sample, strata = _design(*d)
    scaled = sample.assign(book_value=sample["book_value"] * c, audited_value=sample["audited_value"] * c)
    strata_scaled = strata.assign(book_total=strata["book_total"] * c)
    for method in METHODS:
        a = estimate_total(sample, strata, method=method)
        b = estimate_total(scaled, strata_scaled, method=method)
        assert b.total == pytest.approx(c * a.total, rel=1e-10), method
        assert b.std_error == pytest.approx(c * a.std_error, rel=1e-8, abs=1e-9 * c), method
        assert b.lower == pytest.approx(c * a.lower, rel=1e-9), method
        assert b.df == pytest.approx(a.df, rel=1e-8, nan_ok=True), method
