"""Tests of auditmean.core.normality: the rules for the normal approximation per stratum."""

from __future__ import annotations

import numpy as np

from auditmean.core import normality as nrm


def test_bounds_follow_the_published_rules():
    # Cochran 1977, section 2.15: n > 25 G1^2; G1 = 1.2 -> 25 * 1.44 = 36.
    # Sugden, Smith and Jones 2000 (constant 28 quoted from memory): 28 + 36 = 64.
    g1 = np.array([0.0, 1.2, -2.0, np.nan])
    assert np.allclose(nrm.cochran_minimum(g1)[:3], [0.0, 36.0, 100.0])
    assert np.allclose(nrm.sugden_minimum(g1)[:3], [28.0, 64.0, 128.0])
    # The smallest whole size strictly above a bound: 36 -> 37, 36.5 -> 37; NaN -> nothing required.
    assert nrm.smallest_size_above(np.array([36.0, 36.5, np.nan])).tolist() == [37, 37, 0]


def test_which_strata_fail():
    n = np.array([36, 37, 10, 64, 5])
    g1 = np.array([1.2, 1.2, np.nan, 1.2, 3.0])
    census = np.array([False, False, False, False, True])
    # n <= 25 G1^2 fails (36 <= 36), 37 passes; an undefined G1 is not checked; a census never fails.
    assert nrm.fails_cochran(n, g1, census).tolist() == [True, False, False, False, False]
    # n <= 28 + 25 G1^2 = 64 fails for 36, 37 and 64.
    assert nrm.fails_sugden(n, g1, census).tolist() == [True, True, False, True, False]
    # Rule of thumb (common practice, no source): fewer than 30 sampled items.
    assert nrm.fails_rule_of_thumb(n, census).tolist() == [False, False, True, False, False]
    assert nrm.fails_rule_of_thumb(np.array([29, 30])).tolist() == [True, False]
