"""Tests of auditmean.core.boundaries: the boundary rules and the optimal boundaries.

Each expected boundary is worked by hand beside the check, or computed from
the published closed form, or found by exhaustive search in the test.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy.stats import skew

from auditmean.core import boundaries as bnd
from auditmean.core import sizing as sz


def _hand_table() -> np.ndarray:
    """Ten classes of width 1 on [0, 10] with frequencies 16, 9, 4, 9, 1, 1, 1, 0, 0, 1.

    The 0.0 and the 10.0 fix the range; the other values sit in the middle of their class.
    """
    freq = [16, 9, 4, 9, 1, 1, 1, 0, 0, 1]
    values = [0.0] + [0.5] * 15
    for j, f in enumerate(freq[1:9], start=1):
        values += [j + 0.5] * f
    values += [10.0]
    return np.array(values)


def test_cumulative_sqrt_rule_by_hand():
    # Dalenius and Hodges 1959; Cochran 1977, section 5A.7. With the table above:
    # sqrt(f) = 4, 3, 2, 3, 1, 1, 1, 0, 0, 1; cumulated = 4, 7, 9, 12, 13, 14, 15, 15, 15, 16.
    # L = 3: cut points 16/3 = 5.33 and 10.67. Nearest cumulated values: 4 (|1.33| < |1.67| for 7),
    # at the upper edge of class 0 = 1.0; and 12 (|1.33| < |1.67| for 9), upper edge of class 3 = 4.0.
    x = _hand_table()
    assert np.histogram(x, bins=10, range=(0, 10))[0].tolist() == [16, 9, 4, 9, 1, 1, 1, 0, 0, 1]
    b = bnd.cumulative_sqrt_frequency(x, 3, n_classes=10)
    assert b.tolist() == [1.0, 4.0]
    # Strata [0, 1), [1, 4), [4, 10]: 16, 22 and 4 values.
    assert np.bincount(bnd.assign(x, b)).tolist() == [16, 22, 4]


def test_cumulative_sqrt_rule_ties_and_plateaus():
    x = _hand_table()
    # L = 4: cut points 4, 8, 12. 4 and 12 are hit exactly (edges 1.0 and 4.0); 8 is as far from
    # 7 as from 9, and the tie goes to the lower class (class 1, upper edge 2.0).
    assert bnd.cumulative_sqrt_frequency(x, 4, n_classes=10).tolist() == [1.0, 2.0, 4.0]
    # Frequencies 1, 0, 0, 1 on [0, 4]: cumulated 1, 1, 1, 2; the cut at 1 could be at any edge of
    # the plateau; the rule takes its first, the edge just above the non-empty class: 1.0.
    assert bnd.cumulative_sqrt_frequency(np.array([0.0, 4.0]), 2, n_classes=4).tolist() == [1.0]


def test_cumulative_sqrt_rule_returns_fewer_when_classes_do_not_allow():
    # 100 values in class 0 and one in class 9: cumulated 10, ..., 10, 11; both cut points
    # (3.67, 7.33) go to the only candidate edge 1.0, so one boundary instead of two.
    x = np.concatenate([np.zeros(100), [10.0]])
    assert bnd.cumulative_sqrt_frequency(x, 3, n_classes=10).tolist() == [1.0]


def test_geometric_closed_form():
    # Gunning and Horgan 2004: b_h = a r^h, r = (b / a)^(1/L). a = 1, b = 1000, L = 3: r = 10 -> 10, 100.
    x = np.array([1.0, 3.0, 50.0, 700.0, 1000.0])
    assert np.allclose(bnd.geometric(x, 3), [10.0, 100.0], rtol=1e-12)
    # a = 5, b = 80, L = 4: r = 16^(1/4) = 2 -> 10, 20, 40.
    assert np.allclose(bnd.geometric(np.array([5.0, 7.0, 80.0]), 4), [10.0, 20.0, 40.0], rtol=1e-12)


def test_equal_value_by_hand():
    x = np.array([1, 1, 1, 1, 2, 2, 3, 9], dtype=float)
    # Total 20, L = 2, cut at 10: running totals 1, 2, 3, 4, 6, 8, 11, 20; 11 is nearer 10 than 8,
    # so the cut follows the 3: boundary 9, strata totals 11 and 9.
    assert bnd.equal_value(x, 2).tolist() == [9.0]
    # L = 3, cuts at 6.67 and 13.33: 6 is nearer than 8 -> cut before the second 2 -> boundary 2,
    # and the first 2 goes up with it (boundary convention); 11 is nearer 13.33 than 20 -> boundary 9.
    b = bnd.equal_value(x, 3)
    assert b.tolist() == [2.0, 9.0]
    assert np.bincount(bnd.assign(x, b), weights=x).tolist() == [4.0, 7.0, 9.0]


def test_assign_puts_boundary_values_in_the_stratum_above():
    # b_{h-1} <= x < b_h
    assert bnd.assign(np.array([0.5, 1.0, 1.5, 4.0, 9.0]), np.array([1.0, 4.0])).tolist() == [0, 1, 1, 2, 2]


def test_stratum_statistics_against_numpy_and_scipy():
    rng = np.random.default_rng(7)
    x = rng.lognormal(3, 1, 300)
    codes = rng.integers(0, 4, 300)
    codes[0] = 3  # keep stratum 3 non-empty
    st = bnd.stratum_statistics(x, codes, 5)  # stratum 4 is empty
    for h in range(4):
        v = x[codes == h]
        assert st.count[h] == v.size
        assert st.total[h] == math.fsum(v)
        assert st.std_dev[h] == pytest.approx(np.std(v, ddof=1), rel=1e-12)
        assert st.skewness[h] == pytest.approx(skew(v, bias=False), rel=1e-9)  # scipy's G1
        assert (st.minimum[h], st.maximum[h]) == (v.min(), v.max())
    assert st.count[4] == 0 and np.isnan(st.std_dev[4])


# ---------------------------------------------------------------------------
# optimal boundaries
# ---------------------------------------------------------------------------


def _size(xs: np.ndarray, cuts: list[int], top: int, V: float) -> float:
    """Top items plus Neyman size (Cochran 1977, sections 5.8-5.9), stratum statistics by plain numpy."""
    edges = [0, *cuts, top]
    counts = np.diff(edges)
    s = np.array([np.std(xs[a:b], ddof=1) for a, b in zip(edges[:-1], edges[1:])])
    return (xs.size - top) + sz.neyman_size(counts.astype(float), s, V)


def _design_size(x: np.ndarray, boundaries: np.ndarray, cutoff: float, V: float) -> float:
    xs = np.sort(x)
    top = int(np.searchsorted(xs, cutoff, side="left")) if math.isfinite(cutoff) else xs.size
    cuts = np.searchsorted(xs, boundaries, side="left").tolist()
    return _size(xs, cuts, top, V)


def _exhaustive(x: np.ndarray, n_strata: int, V: float, with_top: bool) -> float:
    """Smallest size over every placement of the boundaries (and top cutoff), strata of >= 2 values."""
    xs = np.sort(x)
    change = (np.flatnonzero(xs[1:] > xs[:-1]) + 1).tolist()
    best = math.inf
    for top in (change + [xs.size]) if with_top else [xs.size]:
        for comb in itertools.combinations([c for c in change if c < top], n_strata - 1):
            edges = [0, *comb, top]
            if min(np.diff(edges)) < 2:
                continue
            best = min(best, _size(xs, list(comb), top, V))
    return best


@pytest.mark.parametrize("seed", range(6))
@pytest.mark.parametrize("n_strata,with_top", [(2, False), (2, True), (3, False)])
def test_optimal_close_to_exhaustive_search(seed, n_strata, with_top):
    # Small lognormal populations where every design can be tried: the result is never worse than
    # the cumulative sqrt rule, and within 1% of the true minimum found by exhaustive search.
    rng = np.random.default_rng(seed)
    x = np.round(rng.lognormal(5, 1.2, 60), 2)
    V = (0.03 * x.sum()) ** 2
    start = bnd.cumulative_sqrt_frequency(x, n_strata, 20)
    assert start.size == n_strata - 1
    res = bnd.optimal_boundaries(x, V, start=start, search_top=with_top, n_classes=20)
    best = _exhaustive(x, n_strata, V, with_top)
    got = _design_size(x, res.boundaries, res.top_cutoff, V)
    assert got == pytest.approx(res.size, rel=1e-9)
    assert got <= _design_size(x, start, math.inf, V) * (1 + 1e-12)
    assert got <= best * 1.01


@pytest.mark.parametrize("seed", [11, 12, 13, 14])
@pytest.mark.parametrize("n_strata", [3, 4])
@pytest.mark.parametrize("with_top", [False, True])
def test_optimal_never_needs_more_items_than_the_sqrt_rule(seed, n_strata, with_top):
    rng = np.random.default_rng(seed)
    x = np.round(rng.lognormal(6, 0.8 + 0.1 * (seed % 3), 3000), 2)
    V = (0.02 * x.sum() / 2.5) ** 2
    start = bnd.cumulative_sqrt_frequency(x, n_strata)
    assert start.size == n_strata - 1
    res = bnd.optimal_boundaries(x, V, start=start, search_top=with_top, seed=seed)
    sqrt_size = _design_size(x, start, math.inf, V)
    opt_size = _design_size(x, res.boundaries, res.top_cutoff, V)
    assert opt_size <= sqrt_size * (1 + 1e-12)
    assert res.start_size == pytest.approx(sqrt_size, rel=1e-9)
    if not with_top:
        assert res.top_cutoff == math.inf


def test_optimal_shares_allocation_with_fixed_strata():
    # Credits or zeros kept apart enter the Neyman sums but do not move.
    rng = np.random.default_rng(3)
    x = np.round(rng.lognormal(5, 1, 800), 2)
    V = (0.03 * x.sum()) ** 2
    start = bnd.cumulative_sqrt_frequency(x, 3)
    res = bnd.optimal_boundaries(
        x, V, start=start, search_top=False, other_counts=np.array([40.0]), other_std_devs=np.array([25.0])
    )
    xs = np.sort(x)
    edges = [0, *np.searchsorted(xs, res.boundaries).tolist(), xs.size]
    counts = np.concatenate([np.diff(edges), [40]]).astype(float)
    s = np.array([np.std(xs[a:b], ddof=1) for a, b in zip(edges[:-1], edges[1:])] + [25.0])
    assert res.size == pytest.approx(sz.neyman_size(counts, s, V), rel=1e-9)
    assert res.size <= res.start_size


def test_optimal_is_reproducible_with_a_seed():
    rng = np.random.default_rng(5)
    x = np.round(rng.lognormal(5, 1.3, 2000), 2)
    V = (0.02 * x.sum()) ** 2
    start = bnd.cumulative_sqrt_frequency(x, 4)
    a = bnd.optimal_boundaries(x, V, start=start, search_top=True, seed=9)
    b = bnd.optimal_boundaries(x, V, start=start, search_top=True, seed=9)
    assert a.boundaries.tolist() == b.boundaries.tolist() and a.top_cutoff == b.top_cutoff
