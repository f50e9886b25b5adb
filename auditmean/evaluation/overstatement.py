"""``overstatement_bound``: an upper bound on overstatement that holds in finite samples.

For stratified simple random samples already drawn. It takes the tables
:func:`auditmean.estimate_total` takes, validated by the same code
(:func:`auditmean.evaluation.estimate.prepare_design`), plus each stratum's
largest book value; the arithmetic is in :mod:`auditmean.core.finite_bounds`
(stratum-wise betting tests for sampling without replacement, combined by a
union-intersection test, no normal approximation).
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from auditmean._frames import require_columns
from auditmean._records import RecordMixin, format_number, html_table, text_table
from auditmean.core.finite_bounds import DEFAULT_BET, stratified_overstatement_bound
from auditmean.core.monetary import zero_error_bound
from auditmean.errors import InputError, ParameterError, spreadsheet_row
from auditmean.evaluation.estimate import prepare_design

__all__ = ["OverstatementBound", "overstatement_bound", "METHOD"]

METHOD = "stratified_betting"

# A stratum's book total cannot exceed count x largest book value; allow half a
# cent, or rounding of the sum's own size (as estimate.py does for full strata).
_ATOL = 0.005
_RTOL = 1e-9


@dataclass(frozen=True)
class OverstatementBound(RecordMixin):
    """An upper confidence bound on total overstatement that holds in finite samples.

    Money amounts are in the currency of the input; overstatement is book
    total minus audited total (positive: the book value is overstated).

    Attributes
    ----------
    upper:
        The upper confidence bound on overstatement at ``confidence``.
    projected:
        The projected misstatement by difference estimation (book total
        minus the estimated audited total, ``sum_h N_h * mean(book - audited)``
        over the sampled strata, plus the exact misstatement of the strata
        examined in full): a point estimate shown for orientation; the bound
        does not rest on it.
    method:
        ``"stratified_betting"``.
    confidence:
        The confidence level (one minus the risk of incorrect acceptance).
    book_total, sample_size, population_count:
        Sum of the strata's book totals; items examined; items in the strata.
    bet:
        The constant fraction of capital bet on each draw
        (:data:`auditmean.core.finite_bounds.DEFAULT_BET`).
    zero_error_upper:
        The bound this design would give had no overstatement been found in
        the sampled strata (the strata examined in full left out).
    monetary_unit_zero_error_upper:
        What a monetary-unit sample of the same number of items, drawn from
        the positive book value of the sampled strata, would give with no
        misstatement found (``book * F0 / n``, ``F0`` the Poisson factor for
        no errors, :func:`auditmean.core.monetary.zero_error_bound`).
    by_stratum:
        One row per stratum: ``stratum``, ``count``, ``sampled``,
        ``book_total``, ``largest_book_value``, ``observed_overstatement``
        (sum of the overstatements found; for a stratum examined in full its
        exact net misstatement), ``observed_understatement`` (sum of the
        understatements found, counted as zero in sampled strata),
        ``largest_possible_overstatement`` (every item not drawn overstated
        by the largest book value), ``overstatement_at_bound`` (the
        stratum's share of the bound: the split of the bound among the strata
        at which the test was hardest to pass) and ``examined_in_full``.
    assumptions:
        The assumptions the guarantee rests on, in plain sentences.
    guarantee:
        What holds if they do, in plain words.
    notes:
        Why the bound is often wide, and the monetary-unit comparison.
    """

    record_kind = "overstatement_bound"

    upper: float
    projected: float
    method: str
    confidence: float
    book_total: float
    sample_size: int
    population_count: int
    bet: float
    zero_error_upper: float
    monetary_unit_zero_error_upper: float
    by_stratum: pd.DataFrame = field(repr=False)
    assumptions: tuple[str, ...] = ()
    guarantee: str = ""
    notes: tuple[str, ...] = ()

    def _headline(self) -> str:
        return (
            f"Upper bound on overstatement that holds in finite samples (stratified betting): "
            f"{self.confidence:.0%} confidence; {self.sample_size:,} of {self.population_count:,} items "
            f"examined in {len(self.by_stratum)} {'stratum' if len(self.by_stratum) == 1 else 'strata'}"
        )

    def _rows(self) -> list[tuple[str, str]]:
        return [
            ("book total", format_number(self.book_total)),
            ("projected misstatement (difference estimation)", format_number(self.projected)),
            ("upper bound on overstatement", format_number(self.upper)),
            ("this design's sampled strata, had no overstatement been found", format_number(self.zero_error_upper)),
            ("a monetary-unit sample of as many items, no misstatement found",
             format_number(self.monetary_unit_zero_error_upper)),
        ]

    _STRATUM_HEADER = ("stratum", "items", "sampled", "book total", "largest book value",
                       "overstatement found", "share of the bound", "examined in full")

    def _stratum_rows(self) -> list[tuple[str, ...]]:
        b = self.by_stratum
        return [
            (str(r.stratum), format_number(int(r.count)), format_number(int(r.sampled)),
             format_number(r.book_total), format_number(r.largest_book_value),
             format_number(r.observed_overstatement), format_number(r.overstatement_at_bound),
             "yes" if r.examined_in_full else "no")
            for r in b.itertuples(index=False)
        ]

    def summary(self) -> str:
        lines = [self._headline(), "", text_table(("", "amount"), self._rows()), "",
                 text_table(self._STRATUM_HEADER, self._stratum_rows()), "",
                 f"What it guarantees: {self.guarantee}", "", "Assumptions:"]
        lines += [f"  - {a}" for a in self.assumptions]
        lines += [""] + list(self.notes)
        return "\n".join(lines)

    def _html_body(self) -> str:
        esc = html.escape
        parts = [f"<p><strong>{esc(self._headline())}</strong></p>",
                 html_table(("", "amount"), self._rows()),
                 html_table(self._STRATUM_HEADER, self._stratum_rows(), caption="By stratum"),
                 f"<p>What it guarantees: {esc(self.guarantee)}</p>",
                 "<p>Assumptions:</p><ul>" + "".join(f"<li>{esc(a)}</li>" for a in self.assumptions) + "</ul>"]
        parts += [f"<p>{esc(n)}</p>" for n in self.notes]
        return "".join(parts)


def _confidence(confidence) -> float:
    try:
        c = float(confidence)
    except (TypeError, ValueError):
        raise ParameterError("confidence", f"got {confidence!r}; give a probability such as 0.95") from None
    if not (0.0 < c < 1.0):
        raise ParameterError("confidence", f"got {confidence!r}; it must lie strictly between 0 and 1 (e.g. 0.95)")
    return c


def _largest_values(strata: pd.DataFrame, full: np.ndarray, strata_file: str | None) -> np.ndarray:
    """``largest_book_value`` per stratum: required where sampled, may be blank where examined in full."""
    where = {"file": strata_file} if strata_file else {"table": "strata"}
    require_columns(strata, ["largest_book_value"], "strata", strata_file,
                    why="the bound needs the largest book value in each stratum")
    raw = strata["largest_book_value"].reset_index(drop=True)
    values = pd.to_numeric(raw, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    blank = (raw.isna() | (raw.astype(str).str.strip() == "")).to_numpy()
    bad = ~np.isfinite(values) & (~full | ~blank)
    if bad.any():
        examples = [repr(v) for v in raw[bad & ~blank].head(3).tolist()]
        detail = f" (for example {', '.join(examples)})" if examples else ""
        raise InputError(
            f"missing or non-numeric values{detail}; every sampled stratum needs its largest book value",
            rows=[spreadsheet_row(i) for i in np.flatnonzero(bad)],
            column="largest_book_value",
            **where,
        )
    return values


def overstatement_bound(
    sample: pd.DataFrame,
    strata: pd.DataFrame,
    confidence: float = 0.95,
    *,
    sample_file: str | None = None,
    strata_file: str | None = None,
) -> OverstatementBound:
    """An upper bound on total overstatement that holds in finite samples, for a stratified sample.

    Under the stated assumption that no item is overstated by more than its
    book value, the probability that the bound lies below the true
    overstatement (book total minus audited total) is at most
    ``1 - confidence``, whatever the sample size and the pattern of
    misstatement: no normal approximation is used. It is often much wider
    than the normal limit, because a simple random sample of items can miss
    the few large misstated items; the record's notes say what a
    monetary-unit sample of the same size would give.

    Parameters
    ----------
    sample:
        One row per examined item: ``stratum``, ``book_value``,
        ``audited_value``; optionally ``item_id`` (checked for duplicates).
        The order of the rows does not matter: the betting test would need
        each stratum's items in the order they were drawn, and instead takes
        the order least favourable to the conclusion (largest overstatement
        first), which holds whatever the order of the rows, at a small cost
        in width (:mod:`auditmean.core.finite_bounds`, "The order of the
        draws"). Other columns, such as a selection's ``order``, are ignored.
    strata:
        One row per stratum: ``stratum``, ``count``, ``book_total`` and
        ``largest_book_value`` (the largest book value in the stratum; it may
        be blank for a stratum examined in full). A stratum all of whose
        items are in the sample is examined in full and adds its exact
        misstatement.
    confidence:
        Strictly between 0 and 1 (one minus the risk of incorrect acceptance).
    sample_file, strata_file:
        The files the tables came from, so that errors can name them.

    Returns
    -------
    OverstatementBound

    Raises
    ------
    ParameterError
        ``confidence`` outside (0, 1).
    InputError
        The checks of :func:`auditmean.estimate_total` for difference
        estimation; a stratum with items but none sampled; a missing
        ``largest_book_value``; a sampled book value above its stratum's
        largest book value, or a book total above count times it; an audited
        value below zero in a sampled stratum (the assumption).

    Notes
    -----
    In each sampled stratum an item's overstatement ``max(book - audited,
    0)`` lies in ``[0, largest_book_value]`` under the assumption;
    understatements count as zero, so one found never lowers the bound. Each
    stratum is tested by a betting test for sampling without replacement
    (Waudby-Smith and Ramdas 2020, 2024) with a constant bet fixed before
    sampling, the items taken in the least favourable order, and the strata
    are combined without a Bonferroni split by the
    union-intersection test of Spertus and Stark (2022): a total is rejected
    when the product of the strata's capitals, minimised over every split of
    the total among them, reaches ``1 / (1 - confidence)``. The bound is the
    smallest total such that every larger total is rejected. Formulas and
    derivation: :mod:`auditmean.core.finite_bounds`.

    Examples
    --------
    Sixty items drawn from a stratum of 1,000 whose largest book value is
    200, none misstated:

    >>> import pandas as pd
    >>> sample = pd.DataFrame({"stratum": "a", "book_value": [50.0] * 60, "audited_value": [50.0] * 60})
    >>> strata = pd.DataFrame({"stratum": ["a"], "count": [1000], "book_total": [60_000.0],
    ...                        "largest_book_value": [200.0]})
    >>> r = overstatement_bound(sample, strata, confidence=0.95)
    >>> round(r.upper, 2), round(r.monetary_unit_zero_error_upper, 2)
    (11037.91, 2995.73)

    The first is the total ``200 * 1000 * m`` at which
    ``prod_t (1 + 0.9 * 1000 m / (1000 - t + 1)) = 20`` over the 60 draws;
    the second is what a monetary-unit sample of 60 items would give,
    ``60,000 * 2.996 / 60``.
    """
    conf = _confidence(confidence)
    design = prepare_design(sample, strata, "difference", "zero", "book_value", sample_file, strata_file)
    labels, counts, book_totals = design.labels, design.counts, design.book_totals
    codes, book, audited = design.codes, design.book, design.audited
    H = len(labels)
    where_sample = {"file": sample_file} if sample_file else {"table": "sample"}
    where_strata = {"file": strata_file} if strata_file else {"table": "strata"}

    n = np.bincount(codes, minlength=H)
    full = n >= counts  # includes empty strata (count 0)
    unsampled = np.flatnonzero((n == 0) & (counts > 0))
    if unsampled.size:
        names = ", ".join(repr(labels[h]) for h in unsampled[:10])
        raise InputError(
            f"no item was sampled from stratum {names}; a bound that holds needs a sample from every "
            f"stratum not examined in full (or remove the stratum from the strata table if it is tested "
            f"another way, and say so)",
            stratum=labels[unsampled[0]],
            column="count",
            **where_strata,
        )
    largest = _largest_values(strata, full, strata_file)

    sampled_row = ~full[codes]
    above = sampled_row & (book > largest[codes])
    if above.any():
        h = int(codes[np.flatnonzero(above)[0]])
        raise InputError(
            f"book value above the stratum's largest_book_value {largest[h]:,.2f} in the strata table; "
            f"correct largest_book_value (the largest book value of all the stratum's items)",
            rows=[spreadsheet_row(i) for i in np.flatnonzero(above & (codes == h))],
            column="book_value",
            stratum=labels[h],
            **where_sample,
        )
    too_big = ~full & (book_totals > counts * largest + np.maximum(_ATOL, _RTOL * np.abs(book_totals)))
    if too_big.any():
        h = int(np.flatnonzero(too_big)[0])
        raise InputError(
            f"book_total {book_totals[h]:,.2f} is more than count x largest_book_value "
            f"({counts[h]:,} x {largest[h]:,.2f}); one of the three is wrong",
            rows=[spreadsheet_row(h)],
            column="largest_book_value",
            stratum=labels[h],
            **where_strata,
        )
    negative = sampled_row & (audited < 0)
    if negative.any():
        raise InputError(
            "audited values below zero in a sampled stratum; the bound assumes that no item is overstated by "
            "more than its book value, so audited values must be at or above zero (examine such items, "
            "credit balances for instance, in full or evaluate them separately)",
            rows=[spreadsheet_row(i) for i in np.flatnonzero(negative)],
            column="audited_value",
            **where_sample,
        )

    perm = np.argsort(codes, kind="stable")  # rows by stratum; the order within does not matter
    diff = book - audited  # misstatement of each item, positive = overstated
    ordered = diff[perm]
    starts = np.concatenate([[0], np.cumsum(n)])
    census = np.zeros(H)
    blocks: list[np.ndarray | None] = []
    zero_blocks: list[np.ndarray | None] = []
    for h in range(H):
        part = ordered[starts[h]:starts[h + 1]]
        if full[h]:
            census[h] = float(part.sum())
            blocks.append(None)
            zero_blocks.append(None)
        else:
            blocks.append(part)
            zero_blocks.append(np.zeros(part.size))
    # Row 0: the sample; row 1: the same design with no overstatement found and nothing examined in full.
    both = [None if b is None else np.vstack([b, z]) for b, z in zip(blocks, zero_blocks)]
    result = stratified_overstatement_bound(
        both, counts, np.where(np.isfinite(largest), largest, 0.0), conf,
        census=np.vstack([census, np.zeros(H)]),
    )
    upper = float(result.upper[0])
    zero_upper = float(result.upper[1])

    mean_diff = np.bincount(codes, weights=diff, minlength=H) / np.maximum(n, 1)
    projected = float(np.sum(np.where(full, census, counts * mean_diff)))
    under = np.bincount(codes, weights=np.maximum(-diff, 0.0), minlength=H)
    n_sampled = int(n[~full].sum())
    positive_book = float(np.sum(np.maximum(book_totals[~full], 0.0)))
    mu_zero = zero_error_bound(positive_book, n_sampled, conf) if n_sampled else 0.0

    by_stratum = pd.DataFrame({
        "stratum": labels,
        "count": counts,
        "sampled": n,
        "book_total": book_totals,
        "largest_book_value": largest,
        "observed_overstatement": result.observed[0],
        "observed_understatement": np.where(full, 0.0, under),
        "largest_possible_overstatement": result.largest_possible[0],
        "overstatement_at_bound": result.allocation[0],
        "examined_in_full": full,
    })
    assumptions = (
        "No item is overstated by more than its book value: no audited value in a sampled stratum is below zero.",
        "Each stratum not examined in full was sampled by simple random sampling without replacement, "
        "independently of the other strata, and the strata table gives each stratum's item count, book total "
        "and largest book value for the whole population.",
        "Understatements found in sampled strata are counted as zero, so they never lower the bound; strata "
        "examined in full add their exact net misstatement.",
    )
    guarantee = (
        f"If the assumptions hold, the chance that the true overstatement (book total minus audited total) "
        f"exceeds the bound is at most {(1 - conf) * 100:.6g}%, for any sample size and any pattern of "
        f"misstatement; no normal approximation is used. Whether the bound supports a conclusion is a matter "
        f"for the auditor's professional judgement under the applicable auditing standards."
    )
    notes = (
        "The bound does not depend on the order of the sample's rows: each stratum's items are taken in the "
        "order least favourable to the conclusion (largest overstatement first), so no record of the order "
        "in which they were drawn is needed.",
        "Why the bound is often wide: a simple random sample gives every item in a stratum the same chance, "
        "so it can easily miss the few large items that carry most of a rare misstatement. The bound must "
        "therefore allow for the items not examined being overstated by up to the largest book value of "
        "their stratum, as far as the sample cannot rule it out.",
        f"For comparison, had no overstatement been found, this design would give an upper bound of "
        f"{format_number(zero_upper)} for its {n_sampled:,} sampled items; a monetary-unit sample of the same "
        f"number of items from the same {format_number(positive_book)} of book value, finding no misstatement, "
        f"would give {format_number(mu_zero)} (book value x {-math.log1p(-conf):.2f} / {n_sampled:,}), because "
        f"it gives large items a chance in proportion to their size. Strata examined in full would add their "
        f"exact misstatement in both.",
    )
    return OverstatementBound(
        upper=upper,
        projected=projected,
        method=METHOD,
        confidence=conf,
        book_total=float(book_totals.sum()),
        sample_size=int(n.sum()),
        population_count=int(counts.sum()),
        bet=DEFAULT_BET,
        zero_error_upper=zero_upper,
        monetary_unit_zero_error_upper=float(mu_zero),
        by_stratum=by_stratum,
        assumptions=assumptions,
        guarantee=guarantee,
        notes=notes,
    )
