"""Bad input to estimate_total gets a specific error naming what and where."""

from __future__ import annotations

import pandas as pd
import pytest

from auditmean import InputError, MethodNotApplicable, ParameterError
from auditmean.evaluation import estimate_total

SAMPLE = pd.DataFrame(
    {
        "stratum": ["a", "a", "a", "b", "b"],
        "item_id": ["1", "2", "3", "4", "5"],
        "book_value": [10.0, 20.0, 30.0, 5.0, 6.0],
        "audited_value": [10.0, 19.0, 30.0, 5.0, 6.0],
    }
)
STRATA = pd.DataFrame({"stratum": ["a", "b"], "count": [10, 8], "book_total": [210.0, 44.0]})


def test_missing_column_is_named_with_the_reason():
    with pytest.raises(InputError, match=r"table 'sample', column 'book_value'.*needs book values"):
        estimate_total(SAMPLE.drop(columns="book_value"), STRATA, method="ratio")
    with pytest.raises(InputError, match=r"column 'book_total'"):
        estimate_total(SAMPLE, STRATA.drop(columns="book_total"), method="difference")
    # mean-per-unit needs neither
    estimate_total(SAMPLE.drop(columns="book_value"), STRATA.drop(columns="book_total"), method="mpu")


def test_unknown_stratum_names_rows():
    bad = SAMPLE.assign(stratum=["a", "a", "zz", "b", "b"])
    with pytest.raises(InputError, match=r"column 'stratum', row 4: stratum 'zz' is not in the strata table"):
        estimate_total(bad, STRATA, method="mpu")


def test_more_sampled_than_the_stratum_holds():
    with pytest.raises(InputError, match=r"stratum 'b'.*2 items sampled but the stratum holds only 1"):
        estimate_total(SAMPLE, STRATA.assign(count=[10, 1]), method="mpu")


def test_non_numeric_and_missing_values_name_rows_and_column():
    bad = SAMPLE.assign(audited_value=["10", "x9", None, "5", "6"])
    with pytest.raises(InputError, match=r"column 'audited_value', rows 3, 4: missing or non-numeric values \(for example 'x9'\)"):
        estimate_total(bad, STRATA, method="mpu")


def test_negative_or_fractional_counts():
    with pytest.raises(InputError, match=r"column 'count', row 3: values must not be below 0"):
        estimate_total(SAMPLE, STRATA.assign(count=[10, -8]), method="mpu")
    with pytest.raises(InputError, match=r"column 'count', row 2: values must be whole numbers"):
        estimate_total(SAMPLE, STRATA.assign(count=[10.5, 8]), method="mpu")


def test_duplicated_strata_and_items():
    dup = pd.concat([STRATA, STRATA.iloc[[0]]], ignore_index=True)
    with pytest.raises(InputError, match=r"column 'stratum', rows 2, 4: each stratum must appear once"):
        estimate_total(SAMPLE, dup, method="mpu")
    with pytest.raises(InputError, match=r"column 'item_id', rows 3, 4: an item may be examined only once"):
        estimate_total(SAMPLE.assign(item_id=["1", "2", "2", "4", "5"]), STRATA, method="mpu")


def test_unsampled_stratum_refused_by_default():
    strata = pd.concat([STRATA, pd.DataFrame({"stratum": ["c"], "count": [4], "book_total": [1.0]})])
    with pytest.raises(InputError, match=r"stratum 'c'.*no item was sampled"):
        estimate_total(SAMPLE, strata, method="mpu")


def test_full_stratum_book_total_must_match():
    with pytest.raises(InputError, match=r"stratum 'b'.*add up to 11.00, not the stratum's book_total 12.00"):
        estimate_total(SAMPLE, STRATA.assign(count=[10, 2], book_total=[210.0, 12.0]), method="ratio")


def test_ratio_with_zero_book_values_falls_back_to_difference_with_a_flag():
    zero = SAMPLE.assign(book_value=[10.0, 20.0, 30.0, 0.0, 0.0])
    for method in ("ratio", "combined_ratio"):
        r = estimate_total(zero, STRATA, method=method)
        d = estimate_total(zero, STRATA, method="difference")
        row = r.by_stratum.set_index("stratum").loc["b"]
        # stratum b by difference: X_b + N_b (ybar - xbar) = 44 + 8 * (5.5 - 0) = 88
        assert row["total"] == pytest.approx(88.0, abs=1e-12)
        assert row["total"] == pytest.approx(d.by_stratum.set_index("stratum").loc["b", "total"], rel=1e-15)
        assert "ratio-undefined" in {f.code for f in r.flags if f.stratum == "b"}


def test_thin_strata_with_error_treatment_and_nothing_to_average():
    thin = SAMPLE[SAMPLE["stratum"] == "a"].iloc[:1]
    with pytest.raises(MethodNotApplicable, match=r"nothing to average"):
        estimate_total(thin, STRATA.iloc[:1], method="mpu")
    two = SAMPLE.iloc[:4]
    with pytest.raises(MethodNotApplicable, match=r"stratum 'b'.*fewer than 2"):
        estimate_total(two, STRATA, method="mpu", single_item="error")
    # regression needs 3 per stratum: stratum b has 2
    with pytest.raises(MethodNotApplicable, match=r"fewer than 3"):
        estimate_total(SAMPLE, STRATA, method="regression", single_item="error")


@pytest.mark.parametrize(
    "kwargs, name",
    [
        ({"method": "median"}, "method"),
        ({"confidence": 1.0}, "confidence"),
        ({"confidence": "high"}, "confidence"),
        ({"sides": "both"}, "sides"),
        ({"distribution": "cauchy"}, "distribution"),
        ({"ratio_variance": "other"}, "ratio_variance"),
        ({"single_item": "drop"}, "single_item"),
        ({"unsampled": "ignore"}, "unsampled"),
    ],
)
def test_bad_parameters_are_named(kwargs, name):
    with pytest.raises(ParameterError, match=rf"parameter '{name}'"):
        estimate_total(SAMPLE, STRATA, **kwargs)


def test_not_a_frame():
    with pytest.raises(InputError, match=r"table 'sample': expected a pandas DataFrame"):
        estimate_total([1, 2, 3], STRATA)
