"""The conclusion against tolerable misstatement, worked by hand.

The sample is the hand-worked one of test_estimate_worked.py: difference
estimation gives a projected misstatement PM = 300 - 285 = 15 with
SE = sqrt(55) = 7.4162. Normal quantiles from scipy: z_A = 1.6449 for a 5%
risk of incorrect acceptance (one-sided), z_R = 1.2816 for a 20% risk of
incorrect rejection (two-sided).
"""

from __future__ import annotations

import math

import pytest
from scipy import stats

from auditmean import ParameterError
from auditmean.evaluation.conclusion import evaluate

from .test_estimate_worked import SAMPLE, STRATA

SE = math.sqrt(55.0)
Z_A = stats.norm.ppf(0.95)
Z_R = stats.norm.ppf(0.90)


def test_supported_when_upper_limit_within_tolerable():
    ev = evaluate(SAMPLE, STRATA, tolerable=40.0, risk_incorrect_acceptance=0.05, risk_incorrect_rejection=0.20, methods=["difference"])
    c = ev.conclusion
    assert c.projected_misstatement == pytest.approx(15.0, abs=1e-10)
    # UML = 15 + 1.6449 * 7.4162 = 27.199 <= 40; LML = 2.801 >= -40
    assert c.upper_limit == pytest.approx(15.0 + Z_A * SE, rel=1e-12)
    assert c.lower_limit == pytest.approx(15.0 - Z_A * SE, rel=1e-12)
    # planned allowance A = TM z_R / (z_A + z_R) = 40 * 0.4379 = 17.52; achieved A' = z_R SE = 9.50 < A
    assert c.planned_allowance == pytest.approx(40.0 * Z_R / (Z_A + Z_R), rel=1e-12)
    assert c.achieved_allowance == pytest.approx(Z_R * SE, rel=1e-12)
    assert math.isnan(c.adjusted_allowance)
    # the classical rule on the normal limits supports ...
    assert c.normal_verdict == "supports"
    # ... but four items raise the normal-approximation warnings, so the verdict rests on a limit
    # that holds; without each stratum's largest book value none can be formed
    assert c.basis == "no limit that holds" and c.verdict == "cannot be assessed"
    assert "for information only" in c.wording and "does not replace" in c.wording
    assert ev.primary == "difference"


def test_without_warnings_the_normal_limits_decide():
    # The same arithmetic with the warnings taken as absent: the classical rule decides.
    from auditmean.evaluation.conclusion import _verdict_words

    verdict, words = _verdict_words("difference", 15.0, 15.0 + Z_A * SE, 15.0 - Z_A * SE, 40.0, 0.05, False)
    assert verdict == "supports" and "supports the conclusion" in words


def test_not_supported_and_adjusted_allowance():
    ev = evaluate(SAMPLE, STRATA, tolerable=20.0, risk_incorrect_acceptance=0.05, risk_incorrect_rejection=0.20, methods=["difference"])
    c = ev.conclusion
    # A = 20 * 0.4379 = 8.758 < A' = 9.504, so A'' = A' + TM (1 - A'/A) (AICPA guide, from memory)
    A = 20.0 * Z_R / (Z_A + Z_R)
    A1 = Z_R * SE
    assert c.adjusted_allowance == pytest.approx(A1 + 20.0 * (1 - A1 / A), rel=1e-12)
    # ... which is TM - z_A SE = 20 - 12.199 = 7.80
    assert c.adjusted_allowance == pytest.approx(20.0 - Z_A * SE, rel=1e-12)
    # UML = 27.2 > 20: not supported, and |PM| = 15 > A'' = 7.8 says the same
    assert c.normal_verdict == "does not support"
    assert abs(c.projected_misstatement) > c.adjusted_allowance
    from auditmean.evaluation.conclusion import _verdict_words

    verdict, words = _verdict_words("difference", 15.0, c.upper_limit, c.lower_limit, 20.0, 0.05, False)
    assert verdict == "does not support" and "examine more items" in words


def test_expected_misstatement_enters_the_planned_allowance():
    ev = evaluate(SAMPLE, STRATA, tolerable=40.0, expected=10.0, risk_incorrect_acceptance=0.05, risk_incorrect_rejection=0.20, methods=["difference"])
    assert ev.conclusion.planned_allowance == pytest.approx(30.0 * Z_R / (Z_A + Z_R), rel=1e-12)
    ev2 = evaluate(SAMPLE, STRATA, tolerable=40.0, expected=10.0, planned_allowance=12.5, methods=["difference"])
    assert ev2.conclusion.planned_allowance == 12.5


def test_every_method_side_by_side_with_second_opinion_where_flagged():
    ev = evaluate(SAMPLE, STRATA, tolerable=60.0, seed=4)
    assert list(ev.conclusions) == ["mpu", "difference", "ratio", "combined_ratio", "regression"]
    assert ev.primary == "ratio"
    # four items: every method raises the fewer-than-30 flag, so each has a second opinion
    assert set(ev.second_opinions) == set(ev.conclusions)
    for m, c in ev.conclusions.items():
        assert c.second_opinion_upper == pytest.approx(ev.second_opinions[m].bootstrap_misstatement_upper)
    table = ev.table()
    assert list(table["method"]) == list(ev.conclusions)
    text = ev.summary()
    assert "Caution:" in text and "professional judgement" in text
    d = ev.to_dict()
    assert d["kind"] == "evaluation" and d["conclusions"]["ratio"]["normal_verdict"] in ("supports", "does not support")
    # every method is flagged and the strata table has no largest book values: no limit holds
    assert {c.verdict for c in ev.conclusions.values()} == {"cannot be assessed"}


def test_zero_width_interval_cannot_be_assessed():
    sample = SAMPLE.assign(audited_value=SAMPLE["book_value"])
    ev = evaluate(sample, STRATA.assign(book_total=250.0), tolerable=10.0, methods=["difference", "mpu"], primary="difference")
    assert ev.conclusion.verdict == "cannot be assessed"
    assert ev.conclusions["mpu"].normal_verdict in ("supports", "does not support")


def test_zero_width_interval_with_largest_values_rests_on_the_bound():
    sample = SAMPLE.assign(audited_value=SAMPLE["book_value"])
    strata = STRATA.assign(book_total=250.0, largest_book_value=100.0)
    ev = evaluate(sample, strata, tolerable=10.0, methods=["difference"], primary="difference")
    assert ev.conclusion.basis == "finite-sample bound"
    assert ev.conclusion.relied_upper_limit == pytest.approx(ev.overstatement_bound.upper)


@pytest.mark.parametrize(
    "kwargs, name",
    [
        ({"tolerable": -1.0}, "tolerable"),
        ({"tolerable": 10.0, "expected": 10.0}, "expected"),
        ({"tolerable": 10.0, "risk_incorrect_acceptance": 0.7}, "risk_incorrect_acceptance"),
        ({"tolerable": 10.0, "risk_incorrect_rejection": 0.0}, "risk_incorrect_rejection"),
        ({"tolerable": 10.0, "primary": "mpu", "methods": ["ratio"]}, "primary"),
        ({"tolerable": 10.0, "planned_allowance": -3.0}, "planned_allowance"),
    ],
)
def test_bad_parameters(kwargs, name):
    with pytest.raises(ParameterError, match=rf"parameter '{name}'"):
        evaluate(SAMPLE, STRATA, **kwargs)
