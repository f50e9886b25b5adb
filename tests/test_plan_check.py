"""Planning that reaches its stated risk: the per-stratum minimum from the checks and the plan's own coverage check.

Populations here are invented (lognormal book values, seeded) so that the
truth of every simulated sample is known.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import auditmean as am
from auditmean.plan import Plan
from auditmean.plan_check import LOW_ERROR_DEFAULT_TEXT, check_plan


def _ledger(n=6000, seed=7):
    rng = np.random.default_rng(seed)
    book = np.round(rng.lognormal(6.0, 1.3, size=n), 2)
    return pd.DataFrame({"item_id": [f"L{i:06d}" for i in range(n)], "book_value": book})


@pytest.fixture(scope="module")
def strata():
    return am.stratify(_ledger(), n_strata=4, top_items=20)


def test_default_minimum_passes_every_check(strata):
    plan = am.plan_sample(strata, tolerable=150_000, expected=10_000, risk_incorrect_acceptance=0.05)
    assert plan.minimum == "checks"
    # No planning-time check fires: every sampled stratum is at least its own minimum.
    assert plan.checks == ()
    values = np.asarray(strata.book_values)
    codes = np.asarray(strata.codes)
    for h, row in enumerate(plan.table.itertuples(index=False)):
        if row.take_all or row.count == 0:
            continue
        g1 = stats.skew(values[codes == h], bias=False)  # scipy's adjusted Fisher-Pearson G1
        # Sugden, Smith and Jones (2000): n > 28 + 25 G1^2; 30 items: common practice, no source
        need = max(30, math.floor(28 + 25 * g1 * g1) + 1)
        assert row.size >= min(need, row.count)
        assert row.minimum == need


def test_fixed_minimum_still_accepted_and_recorded(strata):
    plan = am.plan_sample(strata, tolerable=150_000, risk_incorrect_acceptance=0.05, minimum=2)
    assert plan.minimum == 2
    assert set(plan.table["minimum"]) == {2}
    again = Plan.from_dict(plan.to_dict())
    assert again.minimum == 2 and list(again.table["minimum"]) == list(plan.table["minimum"])
    checks = am.plan_sample(strata, tolerable=150_000, risk_incorrect_acceptance=0.05)
    back = Plan.from_dict(checks.to_dict())
    assert back.minimum == "checks"
    assert list(back.table["minimum"]) == list(checks.table["minimum"])


def test_plan_saved_before_the_minimum_column_still_reads(strata):
    d = am.plan_sample(strata, tolerable=150_000, risk_incorrect_acceptance=0.05, minimum=5).to_dict()
    for row in d["table"]:
        row.pop("minimum")
    plan = Plan.from_dict(d)
    assert set(plan.table["minimum"]) == {5}


def test_minimum_refuses_other_words(strata):
    with pytest.raises(am.ParameterError, match="minimum"):
        am.plan_sample(strata, tolerable=150_000, minimum="many")


def test_rare_errors_plan_misses_its_risk_and_says_so(strata):
    # A small plan (5 items per stratum) under the low-error default: the normal limit of
    # mean-per-unit/ratio is far too narrow, so the simulated risk is well above 5%.
    plan = am.plan_sample(strata, tolerable=150_000, expected=10_000, risk_incorrect_acceptance=0.05,
                          method="ratio", std_dev_source=(0.02, 0.5), minimum=5)
    check = check_plan(strata, plan, replications=1000, seed=11)
    assert check.model_is_default is False  # the plan's own pattern was used
    assert check.replications == 1000 and check.seed == 11
    assert check.simulated_risk > 0.05 + 2 * check.simulated_risk_mc_se
    assert check.misses
    assert "misses its stated risk" in check.line
    # The same number as the coverage check itself, run with the same seed and settings.
    from auditmean.plan_check import default_model

    model, _ = default_model(plan)
    labels = np.asarray(strata.labels, dtype=object)[strata.codes]
    direct = am.simulate_coverage(strata.book_values, labels, plan.sizes, model, estimators=("ratio",),
                                  replications=1000, confidence=0.95, tolerable=150_000, expected=10_000,
                                  seed=11)
    assert check.simulated_risk == pytest.approx(float(direct.by_estimator["risk_incorrect_acceptance"].iloc[0]))


def test_default_model_is_the_stated_low_error_pattern(strata):
    plan = am.plan_sample(strata, tolerable=150_000, risk_incorrect_acceptance=0.05)
    check = check_plan(strata, plan, replications=200, seed=3)
    assert check.model_is_default
    assert "2% of items misstated" in check.model
    assert "2%" in LOW_ERROR_DEFAULT_TEXT and "100%" in LOW_ERROR_DEFAULT_TEXT


def test_monetary_unit_design_beside_the_plan(strata):
    plan = am.plan_sample(strata, tolerable=150_000, expected=0.0, risk_incorrect_acceptance=0.05)
    check = check_plan(strata, plan, replications=200, seed=5)
    positive = float(np.asarray(strata.book_values)[np.asarray(strata.book_values) > 0].sum())
    assert check.positive_book_total == pytest.approx(positive, rel=1e-12)
    # With no expected misstatement the size is the smallest n with B * F(0) / n <= TM, and
    # F(0) = -ln(risk) (Poisson zero-event upper limit; scipy's gamma quantile with shape 1).
    f0 = stats.gamma.ppf(0.95, 1)
    assert f0 == pytest.approx(-math.log(0.05))
    n = check.monetary_unit_size
    assert positive * f0 / n <= 150_000 < positive * f0 / (n - 1)
    assert check.monetary_unit_zero_error_bound == pytest.approx(positive * f0 / n, rel=1e-9)
    assert check.monetary_unit_interval == pytest.approx(positive / n)
    assert "monetary-unit design" in check.summary()
