"""Published worked examples from textbooks.

Cochran (1977), Sampling Techniques, 3rd ed., chapter 2: the petition
example. N = 676 petition sheets; a simple random sample of n = 50 sheets
gave sum(y) = 1,471 signatures and sum(y^2) = 54,497. Cochran reports the
estimated total 19,888 signatures and its standard error 1,392, and 80%
limits of about 18,107 and 21,669 (with t = 1.28). All these numbers are
quoted from memory of the book, not copied from it.

Mean-per-unit estimation depends on the sample only through n, sum(y) and
sum(y^2), so the test builds 50 values with exactly those sums (half at
ybar + d, half at ybar - d, d^2 = sum((y - ybar)^2) / n).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from auditmean import estimate_total
from auditmean.plan import sample_size

N, n, SUM_Y, SUM_Y2 = 676, 50, 1471.0, 54497.0


def petition_sample() -> pd.DataFrame:
    ybar = SUM_Y / n
    d = math.sqrt((SUM_Y2 - SUM_Y**2 / n) / n)
    y = np.r_[np.full(25, ybar + d), np.full(25, ybar - d)]
    assert y.sum() == pytest.approx(SUM_Y, rel=1e-14)
    assert (y**2).sum() == pytest.approx(SUM_Y2, rel=1e-12)
    return pd.DataFrame({"stratum": "sheets", "audited_value": y})


def test_cochran_petition_example_total_and_standard_error():
    strata = pd.DataFrame({"stratum": ["sheets"], "count": [N]})
    r = estimate_total(petition_sample(), strata, method="mpu", confidence=0.80)
    assert r.total == pytest.approx(19_888, abs=0.5)  # Cochran: 19,888 (from memory)
    assert r.std_error == pytest.approx(1_392, abs=0.5)  # Cochran: 1,392 (from memory)
    # Cochran's 80% limits use t = 1.28 (rounded); with it, the engine's estimate and SE give his limits
    assert r.total - 1.28 * r.std_error == pytest.approx(18_107, abs=1)
    assert r.total + 1.28 * r.std_error == pytest.approx(21_669, abs=1)
    # the engine itself uses the exact quantile 1.2816 (scipy), slightly wider
    assert r.lower < 18_107 and r.upper > 21_669


def test_sample_size_on_the_petition_data():
    # Precision of +/- 1,000 signatures on the total with a one-sided risk of 10% (z = 1.2816):
    # n0 = (z S N / d)^2 = (1.2816 * 15.132 * 676 / 1000)^2 = 171.8; n = n0 / (1 + n0 / N) = 137.0.
    # Textbook data (Cochran 1977, from memory); our arithmetic with Cochran's chapter 4 formulas
    # (n0 = (z S N / d)^2 for a total, n = n0 / (1 + n0 / N); equation numbers not quoted).
    # sample_size with tolerable = 1,000 and expected = 0 is exactly this computation.
    S = math.sqrt((SUM_Y2 - SUM_Y**2 / n) / (n - 1))
    n_size = sample_size(S, N, tolerable=1000.0, expected=0.0, risk_incorrect_acceptance=0.10)
    z = 1.2815515655446004  # scipy.stats.norm.ppf(0.90)
    n0 = (z * S * N / 1000.0) ** 2
    assert n_size == math.ceil(n0 / (1 + n0 / N))
    assert n_size == 138  # 137.04 rounded up
