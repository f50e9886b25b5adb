"""``auditmean.overstatement_bound``: the finite-sample bound for stratified samples.

Checked against things outside the project:

* the capital process of one stratum against confseq's ``betting_mart``
  (PyPI confseq 0.0.11, by authors of the method: values recorded here, and
  live where confseq imports) and against a plain-Python re-implementation of
  the formula of Waudby-Smith and Ramdas (2020, NeurIPS, section 3);
* hand-worked cases with the arithmetic in the test (quadratic equations
  solved with the quadratic formula);
* the monetary-unit comparison against scipy.stats' gamma quantile;
* properties with hypothesis: higher confidence, or a larger overstatement
  found, never gives a smaller bound; an understatement found never lowers it.

confseq does not install cleanly here: pip builds it from source (pybind11,
cmake), the first attempt failed, and with numpy 2 its import fails because
its type annotations use ``np.float_`` (removed in numpy 2). It is therefore
not a test dependency; the recorded values were produced by confseq 0.0.11
imported with ``np.float_ = np.float64`` set for the import only (the name
appears only in its annotations).
"""

from __future__ import annotations

import itertools
import json
import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

import auditmean
from auditmean.core import finite_bounds as fb
from auditmean.errors import InputError, ParameterError

C = fb.DEFAULT_BET  # 0.9: every hand-worked case below uses this constant bet

# --------------------------------------------------------------------------------------
# The capital process of one stratum
# --------------------------------------------------------------------------------------

CS_X = np.array([0.0, 0.3, 0.0, 0.0, 1.0, 0.0, 0.1, 0.0, 0.0, 0.25, 0.0, 0.0])
CS_N = 40
CS_VARYING_BETS = np.array([0.5, 0.6, 0.7, 0.8, 0.9, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9])
# confseq 0.0.11: betting.betting_mart(CS_X, m, lambdas_fn_negative=lambda x, m: bets, N=40,
# theta=0.0, trunc_scale=1.0, m_trunc=False), bets 0.9 throughout (key (m, "constant")) or
# CS_VARYING_BETS (key (m, "varying")); printed to 12 significant digits.
CONFSEQ_CAPITAL = {
    (0.05, "constant"): [1.045, 0.811080769231, 0.843737442308, 0.878627125733, 0.125204365417,
                         0.127458043994, 0.118348542615, 0.12028515513, 0.122314967123,
                         0.0969247473349, 0.0979424571819, 0.0990063149064],
    (0.15, "constant"): [1.135, 0.985703846154, 1.11877386538, 1.27389034996, 0.308918409866,
                         0.346253406259, 0.358168597003, 0.403102475537, 0.455253858309,
                         0.413620158686, 0.467597589395, 0.530723263963],
    (0.4, "constant"): [1.36, 1.49495384615, 2.05084063158, 2.83404004034, 1.39576471987,
                        1.92336378398, 2.49867583348, 3.4936031199, 4.92816390101, 5.9082326252,
                        8.45172677034, 12.2156595717],
    (0.15, "varying"): [1.075, 0.980730769231, 1.0837075, 1.21726712703, 0.295187278304,
                        0.307079108659, 0.311775612673, 0.333505428102, 0.362270271276,
                        0.336502337464, 0.37553660861, 0.426234050772],
}


def _bets(kind: str):
    return 0.9 if kind == "constant" else CS_VARYING_BETS[None, :]


@pytest.mark.parametrize(("m", "kind"), list(CONFSEQ_CAPITAL))
def test_capital_matches_confseq_recorded(m, kind):
    # confseq 0.0.11 betting_mart, recorded (see CONFSEQ_CAPITAL).
    ours = fb.capital_process(CS_X, _bets(kind), CS_N, m)[0]
    np.testing.assert_allclose(ours, CONFSEQ_CAPITAL[(m, kind)], rtol=1e-11)


def _import_confseq_betting():
    """confseq.betting, importable under numpy 2 by lending it ``np.float_`` for the import."""
    name = "float_"  # np.float_ left numpy in 2.0; confseq names it in its type annotations only
    added = not hasattr(np, name)
    if added:
        setattr(np, name, np.float64)
    try:
        from confseq import betting
    finally:
        if added:
            delattr(np, name)
    return betting


def test_capital_matches_confseq_live():
    try:
        betting = _import_confseq_betting()
    except ImportError as exc:
        pytest.skip(f"confseq is not installed here: {exc}")
    rng = np.random.default_rng(4)
    for N, n in ((40, 12), (25, 24), (500, 60)):
        x = np.where(rng.random(n) < 0.3, rng.random(n), 0.0)
        bets = rng.uniform(0.0, 0.95, n)
        for m in (x.sum() / N + 0.01, 0.2, 0.5):
            theirs = betting.betting_mart(x, m, lambdas_fn_negative=lambda xx, mm, b=bets: b.copy(), N=N,
                                          theta=0.0, trunc_scale=1.0, m_trunc=False)
            ours = fb.capital_process(x, bets[None, :], N, m)[0]
            finite = np.isfinite(ours)
            # confseq marks a null impossible from the draws so far; the whole sample can rule out more
            np.testing.assert_allclose(ours[finite], theirs[finite], rtol=1e-12)


def _plain_capital(x, bets, N, m):
    """Waudby-Smith and Ramdas (2020, section 3), written out independently: K_t = prod (1 + l_i (mu_i - x_i))."""
    path, capital, before = [], 1.0, 0.0
    for t, (xt, lt) in enumerate(zip(x, bets), start=1):
        mu = (N * m - before) / (N - t + 1)  # the mean of the items not yet drawn
        capital *= 1.0 + lt * (mu - xt)
        path.append(capital)
        before += xt
    return path


def test_capital_matches_a_plain_python_reimplementation():
    rng = np.random.default_rng(11)
    for _ in range(30):
        N = int(rng.integers(3, 300))
        n = int(rng.integers(1, N))
        x = np.where(rng.random(n) < 0.4, rng.random(n), 0.0)
        bets = rng.uniform(0.0, 0.95, n)
        lo, hi = x.sum() / N, (x.sum() + N - n) / N
        m = float(rng.uniform(lo, hi))
        np.testing.assert_allclose(fb.capital_process(x, bets[None, :], N, m)[0],
                                   _plain_capital(x.tolist(), bets.tolist(), N, m), rtol=1e-12)


def test_the_bound_uses_a_capital_never_above_the_true_one():
    # log L(e) <= log K(lo + e) (the module's inequality), equal when nothing was found.
    rng = np.random.default_rng(12)
    for _ in range(30):
        N = int(rng.integers(3, 300))
        n = int(rng.integers(1, N))
        x = np.where(rng.random(n) < 0.4, rng.random(n), 0.0)
        e = float(rng.uniform(0, (N - n) / N))
        k = math.log(_plain_capital(x.tolist(), [C] * n, N, x.sum() / N + e)[-1])
        assert fb.log_capital_bound(x, C, N, e)[0] <= k + 1e-12
        k0 = math.log(_plain_capital([0.0] * n, [C] * n, N, e)[-1])
        assert fb.log_capital_bound(np.zeros(n), C, N, e)[0] == pytest.approx(k0, rel=1e-12)


# --------------------------------------------------------------------------------------
# Hand-worked cases
# --------------------------------------------------------------------------------------


def _quadratic_root(a: float, b: float, c: float) -> float:
    """The positive root of a e^2 + b e + c = 0 (a > 0, c < 0)."""
    return (-b + math.sqrt(b * b - 4 * a * c)) / (2 * a)


def _one_stratum(book, audited, count=50, book_total=3_000.0, largest=100.0, label="a"):
    sample = pd.DataFrame({"stratum": label, "book_value": book, "audited_value": audited})
    strata = pd.DataFrame({"stratum": [label], "count": [count], "book_total": [book_total],
                           "largest_book_value": [largest]})
    return sample, strata


def test_one_stratum_no_misstatement_solves_a_quadratic():
    # N = 50, n = 2, u = 100, nothing found, confidence 0.5 (level 1/alpha = 2). The capital at a
    # stratum total of 5,000 e is (1 + 0.9 e)(1 + 0.9 * 50/49 e) = 2:
    #   0.81 * 50/49 e^2 + (0.9 + 0.9 * 50/49) e - 1 = 0.
    e = _quadratic_root(0.81 * 50 / 49, 0.9 + 0.9 * 50 / 49, -1.0)
    assert 0 < e < 48 / 50  # inside the range: not every item not drawn at 100
    sample, strata = _one_stratum([60.0, 40.0], [60.0, 40.0])
    r = auditmean.overstatement_bound(sample, strata, confidence=0.5)
    assert r.upper == pytest.approx(50 * 100 * e, rel=1e-9)
    assert r.zero_error_upper == pytest.approx(r.upper, rel=1e-12)
    assert r.method == "stratified_betting" and r.confidence == 0.5


def test_one_stratum_one_overstatement_found():
    # The first item drawn (book 80) is audited at 30: overstated by 50, x = 50/100 = 0.5.
    # Bound = 50 found + 5,000 e with (1 - 0.9 * 0.5 + 0.9 e)(1 + 0.9 * 50/49 e) = 2:
    #   0.81 * 50/49 e^2 + (0.9 + 0.55 * 0.9 * 50/49) e + (0.55 - 2) = 0.
    e = _quadratic_root(0.81 * 50 / 49, 0.9 + 0.55 * 0.9 * 50 / 49, 0.55 - 2.0)
    sample, strata = _one_stratum([80.0, 40.0], [30.0, 40.0])
    r = auditmean.overstatement_bound(sample, strata, confidence=0.5)
    assert r.upper == pytest.approx(50 + 50 * 100 * e, rel=1e-9)
    assert r.by_stratum["observed_overstatement"].iloc[0] == 50.0
    # projected by difference estimation: 50 items x (50 + 0) / 2 = 1,250
    assert r.projected == pytest.approx(1_250.0)


def test_two_items_at_95_percent_cannot_rule_out_the_largest_possible():
    # At confidence 0.95 even e = 48/50 is not rejected: (1 + 0.9 * 0.96)(1 + 0.9 * 50/49 * 0.96)
    # = 1.864 * 1.8816... = 3.51 < 20, so the bound is every item not drawn overstated by 100.
    assert (1 + 0.9 * 0.96) * (1 + 0.9 * 50 / 49 * 0.96) < 20
    sample, strata = _one_stratum([60.0, 40.0], [60.0, 40.0])
    r = auditmean.overstatement_bound(sample, strata, confidence=0.95)
    assert r.upper == pytest.approx(48 * 100.0, rel=1e-12)
    assert r.by_stratum["largest_possible_overstatement"].iloc[0] == pytest.approx(4_800.0)


def _two_strata(extra_sample=None, extra_strata=None):
    sample = pd.DataFrame({
        "stratum": ["a", "a", "b", "b"],
        "book_value": [60.0, 40.0, 300.0, 250.0],
        "audited_value": [60.0, 40.0, 300.0, 250.0],
    })
    strata = pd.DataFrame({"stratum": ["a", "b"], "count": [50, 30], "book_total": [3_000.0, 7_000.0],
                           "largest_book_value": [100.0, 400.0]})
    if extra_sample is not None:
        sample = pd.concat([sample, extra_sample], ignore_index=True)
        strata = pd.concat([strata, extra_strata], ignore_index=True)
    return sample, strata


def test_strata_are_not_added_the_larger_bound_holds_it_all():
    # Nothing found in either stratum (n = 2 each), confidence 0.5. Every split of a total puts the
    # capitals' product at K_a(share_a) K_b(share_b) with K = 1 at share 0, so a total is left
    # unrejected while either stratum alone could hold it: the bound is the larger of the two
    # strata's own bounds, not their sum (Spertus and Stark 2022's union-intersection test).
    e_a = _quadratic_root(0.81 * 50 / 49, 0.9 + 0.9 * 50 / 49, -1.0)  # stratum a: 50 x 100 per unit
    e_b = _quadratic_root(0.81 * 30 / 29, 0.9 + 0.9 * 30 / 29, -1.0)  # stratum b: 30 x 400 per unit
    # Neither stratum's largest possible share is left unrejected by itself (capital above 2 there),
    # so no split with a stratum at its largest possible share enters:
    assert (1 + 0.9 * 48 / 50) * (1 + 0.9 * 50 / 49 * 48 / 50) > 2
    assert (1 + 0.9 * 28 / 30) * (1 + 0.9 * 30 / 29 * 28 / 30) > 2
    sample, strata = _two_strata()
    r = auditmean.overstatement_bound(sample, strata, confidence=0.5)
    assert r.upper == pytest.approx(max(5_000 * e_a, 12_000 * e_b), rel=1e-9)
    at = dict(zip(r.by_stratum["stratum"], r.by_stratum["overstatement_at_bound"]))
    assert at["b"] == pytest.approx(12_000 * e_b, rel=1e-9) and at["a"] == 0.0  # 12,000 e_b is larger


def test_a_stratum_examined_in_full_adds_its_exact_misstatement():
    # Stratum "top": both items examined; net misstatement (900 - 850) + (1,200 - 1,230) = 20.
    top_sample = pd.DataFrame({"stratum": ["top", "top"], "book_value": [900.0, 1_200.0],
                               "audited_value": [850.0, 1_230.0]})
    top_strata = pd.DataFrame({"stratum": ["top"], "count": [2], "book_total": [2_100.0],
                               "largest_book_value": [np.nan]})  # may be blank when examined in full
    base = auditmean.overstatement_bound(*_two_strata(), confidence=0.5)
    r = auditmean.overstatement_bound(*_two_strata(top_sample, top_strata), confidence=0.5)
    assert r.upper == pytest.approx(base.upper + 20.0, rel=1e-12)
    row = r.by_stratum.set_index("stratum").loc["top"]
    assert bool(row["examined_in_full"]) and row["overstatement_at_bound"] == pytest.approx(20.0)


def test_monetary_unit_comparison_is_the_zero_error_poisson_bound():
    # book x F0 / n with F0 the 95% quantile of the gamma(1) distribution (scipy), = -ln(0.05).
    sample, strata = _two_strata()
    r = auditmean.overstatement_bound(sample, strata, confidence=0.95)
    f0 = stats.gamma.ppf(0.95, 1)
    assert f0 == pytest.approx(-math.log(0.05), rel=1e-12)
    assert r.monetary_unit_zero_error_upper == pytest.approx(10_000.0 * f0 / 4, rel=1e-9)
    assert "monetary-unit" in r.summary() and "miss the few large items" in r.summary()


# --------------------------------------------------------------------------------------
# Order of the draws
# --------------------------------------------------------------------------------------


def _ordered_sample():
    rng = np.random.default_rng(3)
    n = 25
    book = np.round(rng.uniform(10, 100, n), 2)
    audited = book.copy()
    audited[[2, 9, 17]] = [0.0, book[9] * 0.5, book[17] * 0.9]
    sample = pd.DataFrame({"stratum": "s", "item_id": [f"i{k}" for k in range(n)], "book_value": book,
                           "audited_value": audited, "order": np.arange(1, n + 1)})
    strata = pd.DataFrame({"stratum": ["s"], "count": [60], "book_total": [3_300.0],
                           "largest_book_value": [100.0]})
    return sample, strata


def test_the_order_of_the_rows_does_not_matter():
    sample, strata = _ordered_sample()
    base = auditmean.overstatement_bound(sample, strata)
    for seed in range(3):
        shuffled = sample.sample(frac=1.0, random_state=seed).reset_index(drop=True)
        assert auditmean.overstatement_bound(shuffled, strata).upper == base.upper
    assert auditmean.overstatement_bound(sample.drop(columns="order"), strata).upper == base.upper


def test_the_least_favourable_order_gives_the_smallest_capital():
    # Every one of the 5! = 120 orders of five overstatements, capital by plain arithmetic:
    # prod_t (1 - c x_t + c N/(N - t + 1) e). Largest overstatement first gives the smallest.
    x = [0.0, 0.7, 0.2, 0.0, 1.0]
    N, e = 12, 0.3

    def capital(seq):
        return math.prod(1 - C * xt + C * N / (N - t + 1) * e for t, xt in enumerate(seq, start=1))

    smallest = min(capital(p) for p in itertools.permutations(x))
    assert capital(sorted(x, reverse=True)) == pytest.approx(smallest, rel=1e-14)
    ours = fb.log_capital_bound(np.array([sorted(x, reverse=True)]), C, N, e)[0]
    assert math.exp(ours) == pytest.approx(smallest, rel=1e-12)


def test_the_least_favourable_order_is_never_below_the_order_drawn():
    rng = np.random.default_rng(8)
    for _ in range(20):
        counts = rng.integers(5, 200, 3)
        sizes = [int(rng.integers(1, c)) for c in counts]
        largest = rng.uniform(10, 100, 3)
        blocks = [np.where(rng.random((4, n)) < 0.3, rng.random((4, n)) * u, 0.0) for n, u in zip(sizes, largest)]
        drawn = fb.stratified_overstatement_bound(blocks, counts, largest, 0.9, order="as_drawn").upper
        worst = fb.stratified_overstatement_bound(blocks, counts, largest, 0.9).upper
        assert np.all(worst >= drawn * (1 - 1e-12))


# --------------------------------------------------------------------------------------
# Properties
# --------------------------------------------------------------------------------------


@st.composite
def designs(draw):
    """One to three sampled strata: counts, sizes, largest book values and overstatements found."""
    H = draw(st.integers(1, 3))
    counts, blocks, largest = [], [], []
    for _ in range(H):
        N = draw(st.integers(2, 60))
        n = draw(st.integers(1, N - 1))
        u = draw(st.floats(1.0, 1_000.0))
        shares = draw(st.lists(st.one_of(st.just(0.0), st.floats(0.0, 1.0)), min_size=n, max_size=n))
        counts.append(N)
        largest.append(u)
        blocks.append(np.array(shares)[None, :] * u)
    return blocks, np.array(counts), np.array(largest)


@settings(max_examples=150, deadline=None)
@given(designs(), st.floats(0.05, 0.98), st.floats(0.001, 0.019))
def test_more_confidence_never_gives_a_smaller_bound(design, confidence, more):
    blocks, counts, largest = design
    low = fb.stratified_overstatement_bound(blocks, counts, largest, confidence).upper[0]
    high = fb.stratified_overstatement_bound(blocks, counts, largest, confidence + more).upper[0]
    assert high >= low * (1 - 1e-12)


@settings(max_examples=150, deadline=None)
@given(designs(), st.floats(0.05, 0.99), st.data())
def test_a_larger_overstatement_found_never_gives_a_smaller_bound(design, confidence, data):
    blocks, counts, largest = design
    h = data.draw(st.integers(0, len(blocks) - 1))
    i = data.draw(st.integers(0, blocks[h].shape[1] - 1))
    grown = [b.copy() for b in blocks]
    grown[h][0, i] = data.draw(st.floats(float(blocks[h][0, i]), float(largest[h])))
    before = fb.stratified_overstatement_bound(blocks, counts, largest, confidence).upper[0]
    after = fb.stratified_overstatement_bound(grown, counts, largest, confidence).upper[0]
    assert after >= before * (1 - 1e-12)


@settings(max_examples=60, deadline=None)
@given(designs(), st.data())
def test_an_understatement_found_does_not_lower_the_bound(design, data):
    blocks, counts, largest = design
    h = data.draw(st.integers(0, len(blocks) - 1))
    i = data.draw(st.integers(0, blocks[h].shape[1] - 1))
    under = [b.copy() for b in blocks]
    under[h][0, i] = -data.draw(st.floats(0.0, 1e6))  # audited above book: counted as zero
    zero = [b.copy() for b in blocks]
    zero[h][0, i] = 0.0
    assert (fb.stratified_overstatement_bound(under, counts, largest, 0.9).upper[0]
            == fb.stratified_overstatement_bound(zero, counts, largest, 0.9).upper[0])


def test_the_minimum_over_splits_matches_a_grid_search():
    # The vertex search (module docstring, our own derivation) against a brute-force search over a
    # grid of splits of two strata: the grid can only miss the exact bound from below, by at most
    # one grid step per stratum.
    rng = np.random.default_rng(21)
    grid = 1_500
    for _ in range(12):
        counts = rng.integers(5, 300, 2)
        sizes = [int(rng.integers(1, min(c, 60))) for c in counts]
        largest = rng.uniform(50, 150, 2)
        p = rng.choice([0.0, 0.05, 0.3, 0.8])
        blocks = [np.where(rng.random((1, n)) < p, rng.random((1, n)) * u, 0.0) for n, u in zip(sizes, largest)]
        confidence = float(rng.choice([0.8, 0.95, 0.99]))
        curves = []
        for b, N, u in zip(blocks, counts, largest):
            x = -np.sort(-fb.scaled_overstatement(b, u), axis=1)  # the least favourable order
            e = np.linspace(0, (N - b.shape[1]) / N, grid)
            curves.append((b.sum() + e * N * u, fb.log_capital_bound(np.repeat(x, grid, 0), C, int(N), e),
                           (N - b.shape[1]) * u / (grid - 1)))
        total = curves[0][0][:, None] + curves[1][0][None, :]
        log_k = curves[0][1][:, None] + curves[1][1][None, :]
        kept = log_k < -math.log(1 - confidence)
        brute = total[kept].max() if kept.any() else total[0, 0]
        exact = fb.stratified_overstatement_bound(blocks, counts, largest, confidence).upper[0]
        assert brute - 1e-9 <= exact <= brute + curves[0][2] + curves[1][2] + 1e-9


# --------------------------------------------------------------------------------------
# The record
# --------------------------------------------------------------------------------------


def test_record_reports_and_escapes():
    sample, strata = _two_strata()
    sample["stratum"] = sample["stratum"].replace({"a": "<b>a&b</b>"})
    strata["stratum"] = strata["stratum"].replace({"a": "<b>a&b</b>"})
    r = auditmean.overstatement_bound(sample, strata)
    assert isinstance(r, auditmean.OverstatementBound)
    d = json.loads(json.dumps(r.to_dict()))
    assert d["kind"] == "overstatement_bound" and d["upper"] == pytest.approx(r.upper)
    assert [row["stratum"] for row in d["by_stratum"]] == ["<b>a&b</b>", "b"]
    assert list(r.by_stratum.columns) == [
        "stratum", "count", "sampled", "book_total", "largest_book_value", "observed_overstatement",
        "observed_understatement", "largest_possible_overstatement", "overstatement_at_bound",
        "examined_in_full",
    ]
    html = r._repr_html_()
    assert "<b>a&b</b>" not in html and "&lt;b&gt;a&amp;b&lt;/b&gt;" in html
    assert len(r.assumptions) >= 3 and "book value" in r.assumptions[0]
    assert "at most 5%" in r.guarantee


# --------------------------------------------------------------------------------------
# Bad input
# --------------------------------------------------------------------------------------


@pytest.mark.parametrize("confidence", [0.0, 1.0, 1.5, -0.2, "high", None])
def test_confidence_outside_zero_one(confidence):
    with pytest.raises(ParameterError) as info:
        auditmean.overstatement_bound(*_two_strata(), confidence=confidence)
    assert info.value.parameter == "confidence"


def test_missing_largest_book_value_column():
    sample, strata = _two_strata()
    with pytest.raises(InputError) as info:
        auditmean.overstatement_bound(sample, strata.drop(columns="largest_book_value"))
    assert info.value.column == "largest_book_value" and info.value.table == "strata"


def test_blank_largest_book_value_of_a_sampled_stratum():
    sample, strata = _two_strata()
    strata.loc[1, "largest_book_value"] = np.nan
    with pytest.raises(InputError) as info:
        auditmean.overstatement_bound(sample, strata)
    assert info.value.column == "largest_book_value" and info.value.rows == (3,)


def test_largest_book_value_below_a_sampled_book_value():
    sample, strata = _two_strata()
    strata.loc[1, "largest_book_value"] = 280.0  # stratum b holds a sampled item of 300
    with pytest.raises(InputError) as info:
        auditmean.overstatement_bound(sample, strata, strata_file="strata.csv")
    err = info.value
    assert err.stratum == "b" and err.rows == (4,) and err.column == "book_value"
    assert "280.00" in str(err)


def test_book_total_above_count_times_largest_book_value():
    sample, strata = _two_strata()
    strata.loc[0, "largest_book_value"] = 59.0 + 1.0  # 50 x 60 = 3,000: just allowed
    auditmean.overstatement_bound(sample, strata)
    strata.loc[0, "book_total"] = 3_000.5
    with pytest.raises(InputError) as info:
        auditmean.overstatement_bound(sample, strata)
    assert info.value.stratum == "a" and info.value.column == "largest_book_value"


def test_audited_value_below_zero():
    sample, strata = _two_strata()
    sample.loc[[1, 3], "audited_value"] = [-5.0, -0.01]
    with pytest.raises(InputError) as info:
        auditmean.overstatement_bound(sample, strata, sample_file="results.csv")
    err = info.value
    assert err.rows == (3, 5) and err.column == "audited_value" and err.file == "results.csv"
    assert "overstated by more than its book value" in str(err)


def test_a_stratum_with_items_but_no_sample():
    sample, strata = _two_strata()
    with pytest.raises(InputError) as info:
        auditmean.overstatement_bound(sample[sample["stratum"] == "a"], strata)
    assert info.value.stratum == "b"


def test_the_estimators_checks_apply():
    # the same validation as estimate_total: an unknown stratum in the sample
    sample, strata = _two_strata()
    sample.loc[2, "stratum"] = "z"
    with pytest.raises(InputError) as info:
        auditmean.overstatement_bound(sample, strata)
    assert info.value.rows == (4,) and info.value.column == "stratum"
