"""Hand-worked examples of every estimator, with the arithmetic shown.

Stratum "s": N = 10 items, book total X = 300 (so Xbar = 30); four items
examined:

    book x    = 10, 20, 30, 40     (sum 100, xbar 25)
    audited y = 10, 18, 30, 36     (sum 94,  ybar 23.5)

f = 4/10, so N^2 (1 - f) / n = 100 * 0.6 / 4 = 15 multiplies every s^2.
Formulas: Cochran (1977), Sampling Techniques, 3rd ed.
"""

from __future__ import annotations

import math

import pandas as pd
import pytest
from scipy import stats

from auditmean.evaluation import estimate_total

STRUCTURAL = {"single-item", "variance-not-estimable", "unsampled-stratum", "slope-undefined", "no-differences", "interval-unusable"}


def structural(r):
    """Codes of the flags about how strata were treated (the skewness flags are tested elsewhere)."""
    return [f.code for f in r.flags if f.code in STRUCTURAL]


SAMPLE = pd.DataFrame(
    {
        "stratum": ["s"] * 4,
        "item_id": ["a", "b", "c", "d"],
        "book_value": [10.0, 20.0, 30.0, 40.0],
        "audited_value": [10.0, 18.0, 30.0, 36.0],
    }
)
STRATA = pd.DataFrame({"stratum": ["s"], "count": [10], "book_total": [300.0]})


def test_mean_per_unit_by_hand():
    r = estimate_total(SAMPLE, STRATA, method="mpu")
    # T = N ybar = 10 * 23.5 = 235
    # deviations -13.5, -5.5, 6.5, 12.5; squares 182.25 + 30.25 + 42.25 + 156.25 = 411; s^2 = 411/3 = 137
    # v = 15 * 137 = 2055
    assert r.total == pytest.approx(235.0, abs=1e-12)
    assert r.std_error == pytest.approx(math.sqrt(2055.0), rel=1e-13)
    # misstatement = book total - audited estimate = 300 - 235 = 65
    assert r.misstatement == pytest.approx(65.0, abs=1e-12)
    assert r.df == pytest.approx(3.0, rel=1e-13)  # one stratum: n - 1


def test_difference_by_hand():
    r = estimate_total(SAMPLE, STRATA, method="difference")
    # d = 0, -2, 0, -4; dbar = -1.5; T = 300 + 10 * (-1.5) = 285
    # deviations 1.5, -0.5, 1.5, -2.5; squares sum 11; s^2 = 11/3; v = 15 * 11/3 = 55
    assert r.total == pytest.approx(285.0, abs=1e-12)
    assert r.std_error == pytest.approx(math.sqrt(55.0), rel=1e-13)


def test_ratio_by_hand_both_variance_forms():
    r2 = estimate_total(SAMPLE, STRATA, method="ratio")
    r1 = estimate_total(SAMPLE, STRATA, method="ratio", ratio_variance="population_book_mean")
    # R = 94 / 100 = 0.94; T = 0.94 * 300 = 282
    # e = y - 0.94 x = 0.6, -0.8, 1.8, -1.6; sum of squares 0.36 + 0.64 + 3.24 + 2.56 = 6.8; s^2 = 6.8/3
    # v1 = 15 * 6.8/3 = 34 (Cochran eq. 6.13 form, population book mean)
    # v2 = v1 * (Xbar / xbar)^2 = 34 * (30/25)^2 = 48.96 (sample book mean)
    assert r2.total == pytest.approx(282.0, abs=1e-12)
    assert r1.std_error == pytest.approx(math.sqrt(34.0), rel=1e-12)
    assert r2.std_error == pytest.approx(math.sqrt(48.96), rel=1e-12)
    assert r2.by_stratum["coefficient"].iloc[0] == pytest.approx(0.94, abs=1e-15)
    # combined ratio with one stratum is the separate ratio
    rc = estimate_total(SAMPLE, STRATA, method="combined_ratio")
    assert rc.total == pytest.approx(282.0, abs=1e-12)
    assert rc.std_error == pytest.approx(math.sqrt(48.96), rel=1e-12)


def test_regression_by_hand():
    r = estimate_total(SAMPLE, STRATA, method="regression")
    # sxx = 225 + 25 + 25 + 225 = 500; sxy = 202.5 + 27.5 + 32.5 + 187.5 = 450; b = 0.9
    # T = 10 * (23.5 + 0.9 * (30 - 25)) = 280
    # residuals (y - ybar) - 0.9 (x - xbar) = 0, -1, 2, -1; sum of squares 6; s^2 = 6 / (4 - 2) = 3
    # v = 15 * 3 = 45; df = n - 2 = 2
    assert r.total == pytest.approx(280.0, abs=1e-12)
    assert r.std_error == pytest.approx(math.sqrt(45.0), rel=1e-12)
    assert r.by_stratum["coefficient"].iloc[0] == pytest.approx(0.9, rel=1e-14)
    assert r.df == pytest.approx(2.0, rel=1e-13)


def test_stratum_examined_in_full_adds_exact_total_and_no_variance():
    top = pd.DataFrame(
        {"stratum": ["top", "top"], "item_id": ["t1", "t2"], "book_value": [100.0, 200.0], "audited_value": [100.0, 150.0]}
    )
    sample = pd.concat([SAMPLE, top], ignore_index=True)
    strata = pd.concat([STRATA, pd.DataFrame({"stratum": ["top"], "count": [2], "book_total": [300.0]})])
    for method, total_s, var_s in [
        ("mpu", 235.0, 2055.0),
        ("difference", 285.0, 55.0),
        ("ratio", 282.0, 48.96),
        ("combined_ratio", 282.0, 48.96),  # ratio taken over the sampled stratum only
        ("regression", 280.0, 45.0),
    ]:
        r = estimate_total(sample, strata, method=method)
        # the top stratum adds its audited 100 + 150 = 250 exactly
        assert r.total == pytest.approx(total_s + 250.0, abs=1e-10), method
        assert r.std_error == pytest.approx(math.sqrt(var_s), rel=1e-12), method
        row = r.by_stratum.set_index("stratum").loc["top"]
        assert row["variance"] == 0.0
        assert row["status"] == "examined in full"
        assert not [f for f in r.flags if f.stratum == "top"]  # examined in full: never flagged


def test_one_sided_bounds_and_misstatement_limits():
    r = estimate_total(SAMPLE, STRATA, method="difference", confidence=0.90, sides="lower")
    z = stats.norm.ppf(0.90)  # one-sided 90%: scipy's normal quantile, 1.2816
    assert r.lower == pytest.approx(285.0 - z * math.sqrt(55.0), rel=1e-13)
    assert r.upper == math.inf
    # a lower bound on the audited total is an upper bound on overstatement
    assert r.misstatement_upper == pytest.approx(300.0 - r.lower, rel=1e-13)
    assert r.misstatement_lower == -math.inf
    two = estimate_total(SAMPLE, STRATA, method="difference", confidence=0.90)
    z2 = stats.norm.ppf(0.95)
    assert two.upper - two.total == pytest.approx(z2 * math.sqrt(55.0), rel=1e-13)
    assert two.allowance == pytest.approx(z2 * math.sqrt(55.0), rel=1e-13)


def test_single_item_stratum_gets_average_variance_and_a_flag():
    lone = pd.DataFrame({"stratum": ["lone"], "item_id": ["z"], "book_value": [50.0], "audited_value": [45.0]})
    sample = pd.concat([SAMPLE, lone], ignore_index=True)
    strata = pd.concat([STRATA, pd.DataFrame({"stratum": ["lone"], "count": [5], "book_total": [260.0]})])
    r = estimate_total(sample, strata, method="difference")
    # stratum "lone": T = 260 + 5 * (-5) = 235; its variance term = the average of the
    # estimable strata's terms = 55 (only one other), so v = 55 + 55 = 110
    assert r.total == pytest.approx(285.0 + 235.0, abs=1e-10)
    assert r.std_error == pytest.approx(math.sqrt(110.0), rel=1e-12)
    assert structural(r) == ["single-item"]
    # Satterthwaite: (55 + 55)^2 / (55^2 / 3 + 55^2 / 1) = 12100 / 4033.33 = 3.0
    assert r.df == pytest.approx(110.0**2 / (55.0**2 / 3 + 55.0**2 / 1), rel=1e-12)
    z = estimate_total(sample, strata, method="difference", single_item="zero")
    assert z.std_error == pytest.approx(math.sqrt(55.0), rel=1e-12)
    assert structural(z) == ["single-item"]


def test_unsampled_stratum_at_book_value_is_flagged():
    strata = pd.concat([STRATA, pd.DataFrame({"stratum": ["skip"], "count": [7], "book_total": [70.0]})])
    r = estimate_total(SAMPLE, strata, method="ratio", unsampled="book_value")
    assert r.total == pytest.approx(282.0 + 70.0, abs=1e-10)
    assert structural(r) == ["unsampled-stratum"]


def test_no_differences_means_unusable_interval():
    sample = SAMPLE.assign(audited_value=SAMPLE["book_value"])
    strata = STRATA.assign(book_total=250.0)
    for method in ("difference", "ratio", "combined_ratio", "regression"):
        r = estimate_total(sample, strata, method=method)
        assert r.std_error == 0.0
        codes = {f.code for f in r.flags}
        assert {"no-differences", "interval-unusable"} <= codes, method
    # mean-per-unit measures the spread of the audited values themselves: no such flag
    r = estimate_total(sample, strata, method="mpu")
    assert not {f.code for f in r.flags} & {"no-differences", "interval-unusable"}


def test_regression_with_flat_book_values_uses_slope_one():
    sample = SAMPLE.assign(book_value=25.0)
    strata = STRATA.assign(book_total=250.0)
    r = estimate_total(sample, strata, method="regression")
    d = estimate_total(sample, strata, method="difference")
    assert r.total == pytest.approx(d.total, rel=1e-13)
    assert r.std_error == pytest.approx(d.std_error, rel=1e-13)
    assert "slope-undefined" in {f.code for f in r.flags}


def test_summary_and_html_are_escaped_and_complete():
    lone = pd.DataFrame({"stratum": ["<b>lone</b>"], "book_value": [50.0], "audited_value": [45.0]})
    sample = pd.concat([SAMPLE.drop(columns="item_id"), lone], ignore_index=True)
    strata = pd.concat([STRATA, pd.DataFrame({"stratum": ["<b>lone</b>"], "count": [5], "book_total": [260.0]})])
    r = estimate_total(sample, strata, method="ratio")
    text = r.summary()
    assert "ratio estimation (separate)" in text and "<b>lone</b>" in text  # the flag names the stratum
    html_out = r._repr_html_()
    assert "<b>lone</b>" not in html_out and "&lt;b&gt;lone&lt;/b&gt;" in html_out
    d = r.to_dict()
    assert d["kind"] == "estimate" and d["flags"][0]["code"] == "single-item"
