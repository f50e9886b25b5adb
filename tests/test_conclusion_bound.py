"""The conclusion rests on a limit that holds (issue 13, item 6).

Where the normal-approximation warnings fire for a method, its verdict rests
on the finite-sample bound (:func:`auditmean.overstatement_bound`) and the
normal limit is shown for information. Samples are drawn from invented
populations whose truth is known.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

import auditmean as am
from auditmean.evaluation.conclusion import BASIS_BOUND, BASIS_NONE, BASIS_NORMAL


def _stratified(rng, counts, scale, error_rate, taint_high, n_per):
    """An invented population in strata, and a simple random sample of n_per items per stratum."""
    rows, strata = [], []
    for h, (N, s) in enumerate(zip(counts, scale)):
        book = np.round(rng.uniform(0.2, 1.0, N) * s, 2)
        wrong = rng.random(N) < error_rate
        taint = np.where(wrong, rng.uniform(0.01, taint_high, N), 0.0)
        audited = np.round(book * (1 - taint), 2)
        take = rng.choice(N, size=n_per, replace=False)
        rows.append(pd.DataFrame({"stratum": str(h), "item_id": [f"S{h}-{i}" for i in take],
                                  "book_value": book[take], "audited_value": audited[take]}))
        strata.append({"stratum": str(h), "count": N, "book_total": float(book.sum()),
                       "largest_book_value": float(book.max())})
    return pd.concat(rows, ignore_index=True), pd.DataFrame(strata)


def test_warnings_move_the_verdict_to_the_bound():
    rng = np.random.default_rng(1)
    sample, strata = _stratified(rng, [2000, 800], [200.0, 2000.0], error_rate=0.01, taint_high=1.0, n_per=40)
    ev = am.evaluate(sample, strata, tolerable=200_000, risk_incorrect_acceptance=0.05, primary="ratio")
    c = ev.conclusion
    assert ev.estimates["ratio"].flags  # rare errors: the warnings fire
    assert c.basis == BASIS_BOUND == ev.basis
    bound = am.overstatement_bound(sample, strata, confidence=0.95)
    assert c.relied_upper_limit == pytest.approx(bound.upper)
    assert ev.overstatement_bound.upper == pytest.approx(bound.upper)
    assert c.verdict == ("supports" if bound.upper <= 200_000 else "does not support")
    assert "for information only" in c.wording
    assert "finite-sample upper bound" in c.wording
    # the normal limits are still there, as information
    assert math.isfinite(c.upper_limit) and c.upper_limit != c.relied_upper_limit
    assert "verdict rests on" in ev.summary()


def test_bound_above_tolerable_says_what_would_support_it():
    rng = np.random.default_rng(2)
    sample, strata = _stratified(rng, [3000, 1000], [300.0, 3000.0], error_rate=0.01, taint_high=1.0, n_per=30)
    tm = 60_000.0
    ev = am.evaluate(sample, strata, tolerable=tm, risk_incorrect_acceptance=0.05, primary="ratio")
    c = ev.conclusion
    assert c.basis == BASIS_BOUND
    assert c.relied_upper_limit > tm
    assert c.verdict == "does not support"
    assert "cannot support the conclusion with a limit that holds" in c.wording
    n = am.monetary_unit_sample_size(float(strata["book_total"].sum()), tm, 0.0, risk_incorrect_acceptance=0.05)
    assert f"monetary-unit sample of about {n:,} draws" in c.wording


def test_without_largest_book_values_no_limit_holds():
    rng = np.random.default_rng(3)
    sample, strata = _stratified(rng, [2000, 800], [200.0, 2000.0], error_rate=0.01, taint_high=1.0, n_per=40)
    ev = am.evaluate(sample, strata.drop(columns="largest_book_value"), tolerable=200_000,
                     risk_incorrect_acceptance=0.05, primary="ratio")
    assert ev.overstatement_bound is None
    assert "largest_book_value" in ev.bound_note
    assert ev.conclusion.basis == BASIS_NONE
    assert ev.conclusion.verdict == "cannot be assessed"
    assert math.isnan(ev.conclusion.relied_upper_limit)


def test_no_warnings_keeps_the_normal_limit():
    # Many small misstatements and large samples: the normal approximation's checks pass.
    rng = np.random.default_rng(4)
    sample, strata = _stratified(rng, [20_000], [100.0], error_rate=0.6, taint_high=0.1, n_per=400)
    ev = am.evaluate(sample, strata, tolerable=60_000, risk_incorrect_acceptance=0.05, primary="difference",
                     methods=["difference"])
    e = ev.estimates["difference"]
    assert not [f for f in e.flags if f.code != "ratio-undefined"]
    assert ev.conclusion.basis == BASIS_NORMAL
    assert ev.conclusion.relied_upper_limit == pytest.approx(ev.conclusion.upper_limit)


def test_saved_evaluation_carries_the_basis_and_the_bound():
    rng = np.random.default_rng(5)
    sample, strata = _stratified(rng, [2000, 800], [200.0, 2000.0], error_rate=0.01, taint_high=1.0, n_per=40)
    ev = am.evaluate(sample, strata, tolerable=200_000, risk_incorrect_acceptance=0.05, primary="ratio")
    d = ev.to_dict()
    assert d["conclusions"]["ratio"]["basis"] == BASIS_BOUND
    assert d["overstatement_bound"]["upper"] == pytest.approx(ev.overstatement_bound.upper)
    table = ev.table()
    assert {"basis", "relied_upper_limit"} <= set(table.columns)
