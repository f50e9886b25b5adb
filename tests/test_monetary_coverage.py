"""The coverage check of a monetary-unit sample (auditmean.simulate_monetary_units).

Outside references, named beside each check:

* auditmean.monetary_unit_bound, the public evaluation, run on each kept
  simulated sample one at a time: the per-replication upper bounds must be
  the same numbers, bit for bit (the simulation calls the same functions on
  the same taints in draw order; a batch row gives exactly what the sample
  alone gives).
* The binomial law (scipy.stats.binom): with one population sampled again
  and again and no item at or above the interval, the number of draws that
  fall in a misstated item is binomial with n draws and the misstated
  items' share of the monetary units.
* The selection rule of /work/notes/MUS_SPEC.md, restated as arithmetic in
  the test: each draw falls in an item with probability book / B, and draws
  in items at or above the interval are absorbed.
* Validity by simulation on invented low-error populations whose true
  misstatement is known: every bound offered covers the truth in at least
  ``confidence - 3`` Monte Carlo standard errors of 2,000 samples
  (``sqrt(c (1 - c) / 2000)``, the binomial standard error of a
  proportion); the actual risk of incorrect acceptance of the bounds that
  hold in finite samples is at most ``risk + 3`` standard errors at
  populations misstated by exactly tolerable. The normal limit's coverage
  is printed beside them (nothing is asserted about it).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from auditmean import ParameterError, simulate_monetary_units
from auditmean.coverage import FixedTaint, MisstatementModel, ObservedTaints, UniformTaint
from auditmean.errors import InputError
from auditmean.monetary_bound import monetary_unit_bound
from auditmean.monetary_coverage import MonetaryUnitCoverage

SAMPLES = 2_000


def _book(seed: int = 7, size: int = 5_000) -> np.ndarray:
    """Invented book values (lognormal), the first item made large: 1.5% of the total."""
    book = np.round(np.random.default_rng(seed).lognormal(6.0, 1.0, size), 2)
    book[0] = round(0.015 * book.sum(), 2)
    return book


BOOK = _book()
TOTAL = float(BOOK.sum())


def _floor(p: float, n: int = SAMPLES) -> float:
    """``p - 3`` binomial standard errors of a proportion over ``n`` samples."""
    return p - 3.0 * math.sqrt(p * (1.0 - p) / n)


# --------------------------------------------------------------------------- the same numbers as the evaluation


@pytest.mark.parametrize("fixed", [True, False])
def test_every_upper_bound_is_the_evaluations_own_on_the_same_sample(fixed):
    # Invented ledger: credits and zero balances, items at or above the interval, a few large
    # errors, understatements: every path of the evaluation is taken.
    book = np.round(np.random.default_rng(1).lognormal(6.0, 1.5, 3_000), 2)
    book[:10] = -5.0
    book[10:15] = 0.0
    model = MisstatementModel(0.05, UniformTaint(0.05, 1.0), understatement_share=0.2, large_items=5,
                              large_item_taint=1.0, large_item_probability=0.5)
    r = simulate_monetary_units(book, 150, model, replications=300, seed=11, keep_samples=8,
                                fixed_population=fixed)
    assert r.items_in_full > 0 and r.credits_count == 10 and r.zeros_count == 5
    kept = r.kept_samples
    assert sorted(kept["replication"].unique()) == list(range(8))
    compared = 0
    for rep, sample in kept.groupby("replication"):
        assert int(sample["hits"].sum()) == 150  # every draw falls in one selected item
        for j, method in enumerate(r.bounds):
            # Outside reference: the public evaluation of this one sample.
            public = monetary_unit_bound(sample, r.book_total, 150, 0.95, method)
            assert public.upper == r.upper[rep, j], (rep, method)
            compared += 1
        assert public.exact_in_full == r.exact_in_full[rep]
        assert public.draws == r.draws_in_remainder[rep]
    assert compared == 8 * 4


def test_understatements_and_observed_taints_give_the_same_numbers_too():
    model = MisstatementModel(0.2, ObservedTaints((0.1, 0.5, 1.0, -0.3)))
    r = simulate_monetary_units(BOOK, 80, model, replications=50, seed=3, keep_samples=5)
    for rep, sample in r.kept_samples.groupby("replication"):
        for j, method in enumerate(r.bounds):
            assert monetary_unit_bound(sample, r.book_total, 80, 0.95, method).upper == r.upper[rep, j]


# --------------------------------------------------------------------------- the draws


def test_draws_in_misstated_items_are_binomial():
    # One population, no item at or above the interval: the draws that hit a misstated item are
    # Binomial(n, S / B), S the misstated items' cents (outside reference: scipy.stats.binom).
    book = np.round(np.random.default_rng(3).uniform(10.0, 100.0, 2_000), 2)
    model = MisstatementModel(0.05, FixedTaint(0.4))
    n = 60
    r = simulate_monetary_units(book, n, model, replications=SAMPLES, seed=5, fixed_population=True)
    assert r.items_in_full == 0
    tau = model.audited_values(book, seed=5)  # the same population (documented: audited_values, same seed)
    share = float(np.rint(book * 100)[tau != book].sum() / np.rint(book * 100).sum())
    observed = np.bincount(r.errors, minlength=n + 1)
    expected = stats.binom.pmf(np.arange(n + 1), n, share) * SAMPLES
    # Pool the thin tails so that every cell expects at least 5 (the usual rule for the chi-square test).
    lo, hi = int(stats.binom.ppf(0.01, n, share)), int(stats.binom.ppf(0.99, n, share))
    obs = np.r_[observed[: lo + 1].sum(), observed[lo + 1 : hi], observed[hi:].sum()]
    exp = np.r_[expected[: lo + 1].sum(), expected[lo + 1 : hi], expected[hi:].sum()]
    assert exp.min() >= 5
    assert stats.chisquare(obs, exp * obs.sum() / exp.sum()).pvalue > 1e-3
    assert np.all(r.draws_in_remainder == n)


def test_each_item_is_hit_in_proportion_to_its_book_value_and_full_items_absorb():
    # Arithmetic of the rule: a draw falls in item i with probability c_i / B; items with c_i n >= B
    # are examined in full and draws in them are absorbed.
    book = np.array([500.0, 200.0, 120.0, 100.0, 50.0, 30.0])  # B = 1,000.00, n = 4: interval 250
    n = 4
    model = MisstatementModel(0.0, FixedTaint(0.5))
    r = simulate_monetary_units(book, n, model, replications=100, seed=2, keep_samples=100, fixed_population=True)
    kept = r.kept_samples
    assert r.items_in_full == 1 and r.remainder_total == 500.0
    full = kept[kept["examined_in_full"]]
    assert set(full["item"]) == {0} and len(full) == 100  # listed in every replication, hit or not
    hits = kept.groupby("item")["hits"].sum().reindex(range(6), fill_value=0).to_numpy()
    expected = n * 100 * book / book.sum()
    assert stats.chisquare(hits, expected).pvalue > 1e-3  # outside reference: scipy.stats.chisquare
    # Absorbed draws: n minus the draws that fell in the remainder.
    assert np.array_equal(r.draws_in_remainder, n - full.sort_values("replication")["hits"].to_numpy())


# --------------------------------------------------------------------------- validity


PATTERNS = {
    # name: (model, draws) -- invented low-error patterns
    "a few 100% taints": (MisstatementModel(0.004, FixedTaint(1.0)), 60),
    "many small taints": (MisstatementModel(0.3, UniformTaint(0.01, 0.1)), 100),
    "one huge error in a large item": (
        MisstatementModel(0.002, FixedTaint(0.5), large_items=1, large_item_taint=1.0, large_item_probability=1.0),
        40,
    ),
    "understatements": (MisstatementModel(0.05, UniformTaint(0.1, 0.8), understatement_share=0.5), 100),
}


@pytest.mark.parametrize("pattern", list(PATTERNS))
def test_every_bound_covers_at_least_nominally(pattern, capsys):
    model, n = PATTERNS[pattern]
    r = simulate_monetary_units(BOOK, n, model, replications=SAMPLES, seed=20240917)
    assert r.replications == SAMPLES and r.bounds == ("stringer", "count", "betting", "count_or_betting")
    rows = r.by_bound.set_index("bound")
    with capsys.disabled():
        print(f"\n{pattern}: " + ", ".join(f"{b} {rows.loc[b, 'coverage']:.3f}" for b in r.limits))
    for b in r.bounds:
        assert rows.loc[b, "replications"] == SAMPLES
        assert rows.loc[b, "coverage"] >= _floor(0.95), b
    # The per-replication flags are what the table summarises.
    assert rows.loc["stringer", "coverage"] == pytest.approx(r.covers[:, 0].mean())


def test_risk_of_incorrect_acceptance_at_tolerable_within_the_assumption():
    # 2% of items wholly overstated, populations scaled down to a tolerable of 1.5% of the book total:
    # the scaled taints stay at or below 100% wherever the population's misstatement exceeds tolerable.
    model = MisstatementModel(0.02, FixedTaint(1.0))
    tm = 0.015 * TOTAL
    r = simulate_monetary_units(BOOK, 200, model, replications=SAMPLES, seed=1, tolerable=tm, expected=0.0)
    rows = r.by_bound.set_index("bound")
    print(rows[["risk_incorrect_acceptance", "replications_at_tolerable", "outside_assumption_at_tolerable"]])
    for b in ("count", "betting", "count_or_betting"):
        n_tm = int(rows.loc[b, "replications_at_tolerable"])
        assert n_tm + int(rows.loc[b, "outside_assumption_at_tolerable"]) == SAMPLES
        assert n_tm > 1_500
        assert rows.loc[b, "risk_incorrect_acceptance"] <= 0.05 + 3 * math.sqrt(0.05 * 0.95 / n_tm), b
    # The normal limit is measured on every population, and misses badly here.
    assert rows.loc["normal", "replications_at_tolerable"] == SAMPLES
    assert rows.loc["normal", "risk_incorrect_acceptance"] > 0.05


def test_populations_outside_the_assumption_are_left_out_and_said_so():
    # Taints up to 100% scaled up by more than 1 at tolerable: no population stays within the bounds'
    # assumption, so their risk there is not measured, and a note says why and what would measure it.
    model = MisstatementModel(0.01, UniformTaint(0.05, 1.0))
    r = simulate_monetary_units(BOOK, 100, model, replications=200, seed=4, tolerable=0.05 * TOTAL,
                                expected=0.002 * TOTAL)
    rows = r.by_bound.set_index("bound")
    assert rows.loc["stringer", "replications_at_tolerable"] == 0
    assert math.isnan(rows.loc["stringer", "risk_incorrect_acceptance"])
    assert any("cannot be measured" in n for n in r.notes)
    assert "n/a" in r.summary()


# --------------------------------------------------------------------------- inputs and records


def test_bounds_are_refused_when_the_model_overstates_beyond_book_value():
    model = MisstatementModel(0.01, FixedTaint(1.5))
    with pytest.raises(ParameterError, match="bounds"):
        simulate_monetary_units(BOOK, 50, model, replications=10, seed=1, bounds=("stringer",))
    r = simulate_monetary_units(BOOK, 50, model, replications=10, seed=1)
    assert r.bounds == () and r.limits == ("normal",)
    assert any("were not simulated" in n for n in r.notes)


@pytest.mark.parametrize(
    "kwargs, name",
    [
        (dict(sample_size=0), "sample_size"),
        (dict(sample_size=10**12), "sample_size"),
        (dict(confidence=1.0), "confidence"),
        (dict(tolerable=-1.0), "tolerable"),
        (dict(tolerable=100.0, expected=100.0), "expected"),
        (dict(bounds=("stringer", "nope")), "bounds"),
        (dict(replications=0), "replications"),
        (dict(keep_samples=101), "keep_samples"),
        (dict(model=MisstatementModel({"a": 0.1}, FixedTaint(0.5))), "model"),
    ],
)
def test_bad_parameters_are_named(kwargs, name):
    args = dict(sample_size=50, model=MisstatementModel(0.01, FixedTaint(0.5)), replications=10, seed=1)
    args.update(kwargs)
    with pytest.raises(ParameterError) as info:
        simulate_monetary_units(BOOK, args.pop("sample_size"), args.pop("model"), **args)
    assert info.value.parameter == name


def test_a_population_without_positive_book_values_is_refused():
    with pytest.raises(InputError, match="positive book value"):
        simulate_monetary_units([-1.0, 0.0], 1, MisstatementModel(0.1, FixedTaint(0.5)), replications=5)


def test_batches_and_stopping_never_change_the_replications():
    model = MisstatementModel(0.05, UniformTaint(0.1, 0.6))
    long = simulate_monetary_units(BOOK, 80, model, replications=700, seed=9, tolerable=0.05 * TOTAL)
    short = simulate_monetary_units(BOOK, 80, model, replications=300, seed=9, tolerable=0.05 * TOTAL)
    assert np.array_equal(long.upper[:300], short.upper)
    assert np.array_equal(long.true_misstatements[:300], short.true_misstatements)
    # Batches of 4,096 samples of 80 draws (core.monetary_simulation's budget): stopped after the first.
    stopped = simulate_monetary_units(BOOK, 80, model, replications=5_000, seed=9,
                                      progress=lambda done, total: False)
    assert stopped.partial and stopped.replications == 4_096
    assert any("Stopped early" in n for n in stopped.notes)
    assert np.array_equal(stopped.upper[:700], long.upper)


def test_record_text_html_and_json():
    model = MisstatementModel(0.02, UniformTaint(0.1, 0.9))
    r = simulate_monetary_units(BOOK, 60, model, replications=200, seed=1, tolerable=0.05 * TOTAL,
                                expected=0.01 * TOTAL)
    assert isinstance(r, MonetaryUnitCoverage)
    text = r.summary()
    assert all(len(line) <= 100 for line in text.splitlines())
    for name in ("Stringer", "error count", "betting", "error count or betting", "normal limit (mean taint)"):
        assert name in text
    d = r.to_dict()
    json.dumps(d, allow_nan=False)
    assert d["kind"] == "monetary_unit_coverage_check" and d["schema_version"] == 1 and d["seed"] == "1"
    assert [row["bound"] for row in d["by_bound"]] == list(r.limits)
    assert MisstatementModel.from_dict(d["model"]) == model
    full = r.to_dict(include_replications=True)
    json.dumps(full, allow_nan=False)
    assert len(full["per_replication"]["upper"]["betting"]) == 200
    assert "<table" in r._repr_html_()
    with pytest.raises(ValueError):
        r.upper[0, 0] = 0.0  # read-only
    assert r.column("betting") == 2
    table = pd.DataFrame(d["by_bound"])
    assert set(table["guarantee"]) == {"no general proof", "finite-sample", "information only"}


def test_scaled_scenarios_conclude_as_the_bounds_values_do():
    # At tolerable and expected only "bound within tolerable?" is needed; for the betting bounds it is
    # read from the capital at that point (core.monetary_simulation._conclusions). Checked against
    # the bounds' own values (core.monetary.mean_taint_upper), also exactly at each row's bound.
    from auditmean.core import monetary as cm
    from auditmean.core import monetary_simulation as ms

    rng = np.random.default_rng(0)
    x = np.where(rng.random((3_000, 120)) < rng.uniform(0.01, 0.4, (3_000, 1)), rng.uniform(0, 1, (3_000, 120)), 0.0)
    x[rng.random(x.shape) < 0.05] = np.nan  # absorbed draws
    draws = np.sum(~np.isnan(x), axis=1)
    cache: dict = {}
    bounds = np.column_stack([cm.mean_taint_upper(x, 0.95, m) for m in cm.METHODS])
    for scale in (0.5, 1.0, 1.5):
        u_star = np.full(len(x), np.median(bounds) * scale)
        got = ms._conclusions(x, draws, u_star, cm.METHODS, 0.95, cache)
        assert np.array_equal(got, bounds <= u_star[:, None])
    for j in range(len(cm.METHODS)):
        assert ms._conclusions(x, draws, bounds[:, j], cm.METHODS, 0.95, cache)[:, j].all()
