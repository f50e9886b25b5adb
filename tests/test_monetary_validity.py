"""Coverage of every monetary-unit bound, by simulation on invented low-error populations.

Each population is invented (lognormal book values), so its true
overstatement is known. 2,000 monetary-unit samples per pattern are drawn as
the selection rule draws them (independent draws proportional to book value,
items at or above the sampling interval examined in full and their draws
absorbed), with numpy's random numbers instead of the SHA-256 draws: the
bounds' guarantee rests on the draws being independent and uniform over the
remainder's monetary units, which both give.

Every bound offered must cover the truth in at least ``confidence - 3`` Monte
Carlo standard errors of the samples (outside source: the binomial standard
error of a coverage proportion, ``sqrt(c (1 - c) / 2000)``). The coverage of
a plain normal-approximation limit on the same samples is printed beside
it, for information (nothing is asserted about it).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from auditmean.core import monetary as cm

SAMPLES = 2_000
N_ITEMS = 8_000


def _population(seed: int = 20240917) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return np.round(rng.lognormal(7.0, 1.3, N_ITEMS), 2)  # invented book values


BOOK = _population()


def _taints(pattern: str, n: int) -> np.ndarray:
    """Signed taint of every item (invented misstatement patterns)."""
    rng = np.random.default_rng(sum(map(ord, pattern)))  # fixed per pattern
    N = len(BOOK)
    t = np.zeros(N)
    if pattern == "no errors":
        pass
    elif pattern == "a few 100% taints":
        t[rng.choice(N, 24, replace=False)] = 1.0  # 0.3% of items wholly overstated
    elif pattern == "many small taints, 10% of items":
        hit = rng.random(N) < 0.10
        t[hit] = rng.uniform(0.01, 0.30, hit.sum())
    elif pattern == "many small taints, 50% of items":
        hit = rng.random(N) < 0.50
        t[hit] = rng.uniform(0.01, 0.20, hit.sum())
    elif pattern == "one huge error in a large item":
        below = np.flatnonzero(BOOK * n < BOOK.sum())
        t[below[np.argmax(BOOK[below])]] = 1.0  # the largest item below the interval, wholly overstated
    elif pattern == "understatements mixed in":
        u = rng.random(N)
        over = u < 0.04
        under = (u >= 0.04) & (u < 0.08)
        t[over] = rng.uniform(0.10, 1.00, over.sum())
        t[under] = -rng.uniform(0.05, 0.80, under.sum())
    elif pattern == "100% taints in 5% of items":
        t[rng.random(N) < 0.05] = 1.0
    else:  # pragma: no cover - a typo in the parameter list
        raise ValueError(pattern)
    return t


def _draw(taint: np.ndarray, n: int, seed: int):
    """SAMPLES monetary-unit samples of n draws: taints by draw (NaN where absorbed by an item in full)."""
    rng = np.random.default_rng(seed)
    B = BOOK.sum()
    in_full = BOOK * n >= B
    ends = np.cumsum(BOOK)
    hit = np.minimum(np.searchsorted(ends, rng.random((SAMPLES, n)) * B, side="right"), len(BOOK) - 1)
    values = taint[hit]
    values[in_full[hit]] = np.nan
    rest = ~in_full
    B_r = BOOK[rest].sum()
    truth_over = float(np.sum(BOOK[rest] * np.maximum(taint[rest], 0)) / B_r)
    truth_under = float(np.sum(BOOK[rest] * np.maximum(-taint[rest], 0)) / B_r)
    truth_net = float(np.sum(BOOK[rest] * taint[rest]) / B_r)
    return values, truth_over, truth_under, truth_net


def _normal_limit(values: np.ndarray, confidence: float) -> np.ndarray:
    """Mean taint + z x standard error over the draws (mean-per-unit of taints): for information only."""
    n = np.sum(~np.isnan(values), axis=1)
    mean = np.nanmean(values, axis=1)
    sd = np.nanstd(values, axis=1, ddof=1)
    return mean + stats.norm.ppf(confidence) * sd / np.sqrt(n)


def _floor(confidence: float) -> float:
    return confidence - 3 * math.sqrt(confidence * (1 - confidence) / SAMPLES)


BOUNDS = {
    "stringer": {"method": "stringer"},
    "stringer (binomial)": {"method": "stringer", "basis": "binomial"},
    "count": {"method": "count"},
    "betting": {"method": "betting"},
    "count_or_betting": {"method": "count_or_betting"},
}

CASES = [
    ("no errors", 100, 0.95),
    ("a few 100% taints", 100, 0.95),
    ("a few 100% taints", 60, 0.80),
    ("many small taints, 10% of items", 200, 0.95),
    ("many small taints, 50% of items", 200, 0.95),
    ("many small taints, 50% of items", 100, 0.80),
    ("one huge error in a large item", 100, 0.95),
    ("understatements mixed in", 150, 0.95),
    ("100% taints in 5% of items", 150, 0.95),
]


@pytest.mark.parametrize(("pattern", "n", "confidence"), CASES)
def test_every_bound_covers_the_overstatement(pattern, n, confidence):
    values, truth, _, truth_net = _draw(_taints(pattern, n), n, seed=n + int(confidence * 100))
    over = cm.overstatement_values(values)
    floor = _floor(confidence)
    lines = [f"{pattern}, n = {n}, confidence {confidence:.0%}, true mean overstatement taint {truth:.5f}"]
    failures = []
    for name, options in BOUNDS.items():
        upper = cm.mean_taint_upper(over, confidence, **options)
        covered = float(np.mean(upper >= truth))
        lines.append(f"  {name:20s} coverage {covered:.4f}  mean bound {np.mean(upper):.5f}")
        if covered < floor:
            failures.append((name, covered))
    normal = float(np.mean(_normal_limit(values, confidence) >= truth_net))
    lines.append(f"  {'normal (information)':20s} coverage {normal:.4f}  (not asserted)")
    print("\n" + "\n".join(lines))
    assert not failures, f"coverage below {floor:.4f}: {failures}"


@pytest.mark.parametrize(("pattern", "n"), [("understatements mixed in", 150), ("no errors", 100)])
def test_every_understatement_bound_covers(pattern, n):
    # The separate understatement bound: the same methods on max(-t, 0) (taints of at most 100% here).
    values, _, truth_under, _ = _draw(_taints(pattern, n), n, seed=7 * n)
    under = cm.understatement_values(values)
    floor = _floor(0.95)
    for name, options in BOUNDS.items():
        covered = float(np.mean(cm.mean_taint_upper(under, 0.95, **options) >= truth_under))
        print(f"understatement, {pattern}: {name:20s} coverage {covered:.4f}")
        assert covered >= floor, name


def test_the_truth_differs_from_the_normal_limit_where_errors_are_rare():
    # A check that the simulation can tell: with one huge error the plain normal limit misses often
    # (about 37% of samples contain no draw in the item: (1 - 1/n)^n, hand arithmetic), while the
    # bounds above hold.
    n = 100
    values, truth, _, truth_net = _draw(_taints("one huge error in a large item", n), n, seed=3)
    normal = float(np.mean(_normal_limit(values, 0.95) >= truth_net))
    assert normal < 0.8
    assert float(np.mean(cm.stringer_upper(cm.overstatement_values(values), 0.95) >= truth)) >= _floor(0.95)
