"""``estimate_total``: the audited total, its limits and the projected misstatement.

This is the public entry on pandas frames. It validates the sample and the
strata once, turns them into arrays, calls :mod:`auditmean.core.estimators`
and wraps the answer in an :class:`Estimate` record. The names of the
function, its arguments and the record's attributes are a contract that
other parts of auditmean and outside scripts rely on.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from auditmean._frames import (
    duplicated_rows,
    integer_column,
    label_column,
    numeric_column,
    require_columns,
    require_frame,
)
from auditmean._records import RecordMixin, format_number, html_table, text_table
from auditmean.core import estimators as est
from auditmean.core.flags import Flag
from auditmean.core.intervals import DISTRIBUTIONS, SIDES, confidence_limits, critical_value
from auditmean.errors import InputError, MethodNotApplicable, ParameterError, spreadsheet_row
from auditmean.evaluation.flags import normality_flags, structural_flags

__all__ = ["Estimate", "estimate_total", "METHOD_NAMES"]

METHOD_NAMES = est.METHOD_NAMES

# Book totals of a stratum examined in full must equal its sampled book
# values: half a cent absolute, or rounding of the sum's own size.
_FULL_STRATUM_ATOL = 0.005
_FULL_STRATUM_RTOL = 1e-9


@dataclass(frozen=True)
class Estimate(RecordMixin):
    """The estimate of a population's audited total by one method.

    Money amounts are in the currency of the input. ``misstatement`` is the
    book total minus the estimated audited total: positive means the book
    value is overstated. Its limits come from the audited total's limits
    (``misstatement_lower = book_total - upper`` and
    ``misstatement_upper = book_total - lower``).

    Attributes
    ----------
    total, std_error, lower, upper:
        Estimated audited total, its standard error and confidence limits
        (``-inf``/``+inf`` on the open side of a one-sided bound).
    df:
        Satterthwaite's effective degrees of freedom of the variance (always
        computed; used for the limits only when ``distribution == "t"``).
        NaN when the variance is zero.
    allowance:
        The achieved precision: critical value times standard error (the
        half-width of a two-sided interval; the distance to the bound of a
        one-sided one). Audit texts call it the achieved allowance for
        sampling risk.
    book_total:
        Sum of the strata's book totals (NaN when they were not given).
    by_stratum:
        One row per stratum: its status, counts, totals, variance term and
        treatment.
    flags:
        Warnings (:class:`~auditmean.core.flags.Flag`); numbers are never
        changed by them.
    skewness:
        Skewness of the whole stratified estimator, from the strata's third
        moments (NaN where no stratum is sampled with a variance); above
        0.2 in size its normal-theory limits are flagged.
    """

    record_kind = "estimate"

    method: str
    confidence: float
    sides: str
    distribution: str
    total: float
    std_error: float
    lower: float
    upper: float
    df: float
    critical_value: float
    allowance: float
    book_total: float
    misstatement: float
    misstatement_lower: float
    misstatement_upper: float
    sample_size: int
    population_count: int
    ratio_variance: str
    single_item: str
    unsampled: str
    by_stratum: pd.DataFrame = field(repr=False)
    flags: tuple[Flag, ...] = ()
    skewness: float = math.nan

    @property
    def method_name(self) -> str:
        return METHOD_NAMES[self.method]

    def _headline(self) -> str:
        side = {"two-sided": "two-sided", "lower": "lower bound", "upper": "upper bound"}[self.sides]
        dist = "normal" if self.distribution == "normal" else f"Student t, {self.df:.1f} df"
        return (
            f"Audited total by {self.method_name}: {self.confidence:.0%} {side} limits "
            f"({dist}); {self.sample_size:,} of {self.population_count:,} items examined "
            f"in {len(self.by_stratum)} strata"
        )

    def _rows(self) -> list[tuple[str, str]]:
        rows = [
            ("book total", format_number(self.book_total)),
            ("estimated audited total", format_number(self.total)),
            ("standard error", format_number(self.std_error)),
            ("lower limit", format_number(self.lower)),
            ("upper limit", format_number(self.upper)),
            ("achieved allowance for sampling risk", format_number(self.allowance)),
        ]
        if math.isfinite(self.book_total):
            rows += [
                ("projected misstatement", format_number(self.misstatement)),
                ("misstatement, lower limit", format_number(self.misstatement_lower)),
                ("misstatement, upper limit", format_number(self.misstatement_upper)),
            ]
        return rows

    def summary(self) -> str:
        lines = [self._headline(), "", text_table(("", "amount"), self._rows())]
        if self.flags:
            lines += ["", f"Warnings ({len(self.flags)}):"]
            lines += [f"  [{f.code}] {f.message}" for f in self.flags]
        return "\n".join(lines)

    def _html_body(self) -> str:
        parts = [f"<p><strong>{html.escape(self._headline())}</strong></p>"]
        parts.append(html_table(("", "amount"), self._rows()))
        if self.flags:
            items = "".join(
                f"<li><code>{html.escape(f.code)}</code> {html.escape(f.message)}</li>" for f in self.flags
            )
            parts.append(f"<p>Warnings:</p><ul>{items}</ul>")
        return "".join(parts)


def _check_choice(name: str, value: object, allowed: tuple[str, ...]) -> str:
    if not isinstance(value, str) or value not in allowed:
        raise ParameterError(name, f"got {value!r}; use one of {', '.join(repr(a) for a in allowed)}")
    return value


def _validate_parameters(method, confidence, sides, distribution, ratio_variance, single_item, unsampled):
    _check_choice("method", method, est.METHODS)
    _check_choice("sides", sides, SIDES)
    _check_choice("distribution", distribution, DISTRIBUTIONS)
    _check_choice("ratio_variance", ratio_variance, est.RATIO_VARIANCES)
    _check_choice("single_item", single_item, est.SINGLE_ITEM_TREATMENTS)
    _check_choice("unsampled", unsampled, est.UNSAMPLED_TREATMENTS)
    try:
        c = float(confidence)
    except (TypeError, ValueError):
        raise ParameterError("confidence", f"got {confidence!r}; give a probability such as 0.95") from None
    if not (0.0 < c < 1.0):
        raise ParameterError("confidence", f"got {confidence!r}; it must lie strictly between 0 and 1 (e.g. 0.95)")
    return c


@dataclass(frozen=True)
class _Design:
    labels: list[str]
    counts: np.ndarray
    book_totals: np.ndarray | None
    codes: np.ndarray
    audited: np.ndarray
    book: np.ndarray | None


def _prepare(sample, strata, method, unsampled, sample_file=None, strata_file=None) -> _Design:
    """Validate both tables and return the arrays the core needs."""
    needs_book = method in est.BOOK_VALUE_METHODS
    sample = require_frame(sample, "sample", sample_file)
    strata = require_frame(strata, "strata", strata_file)
    why = f"method {method!r} needs book values"
    require_columns(sample, ["stratum", "audited_value"], "sample", sample_file)
    if needs_book:
        require_columns(sample, ["book_value"], "sample", sample_file, why=why)
    require_columns(strata, ["stratum", "count"], "strata", strata_file)
    has_book_totals = "book_total" in strata.columns
    if needs_book and not has_book_totals:
        require_columns(strata, ["book_total"], "strata", strata_file, why=why)
    if unsampled == "book_value" and not has_book_totals:
        require_columns(strata, ["book_total"], "strata", strata_file, why="unsampled='book_value' needs book totals")

    where_strata = {"file": strata_file} if strata_file else {"table": "strata"}
    where_sample = {"file": sample_file} if sample_file else {"table": "sample"}

    labels = label_column(strata, "stratum", "strata", strata_file).astype(str).str.strip()
    dup = duplicated_rows(labels)
    if dup:
        raise InputError("each stratum must appear once", rows=dup, column="stratum", **where_strata)
    counts = integer_column(strata, "count", "strata", strata_file, minimum=0)
    book_totals = numeric_column(strata, "book_total", "strata", strata_file) if has_book_totals else None

    s_labels = label_column(sample, "stratum", "sample", sample_file).astype(str).str.strip()
    index = {lab: i for i, lab in enumerate(labels)}
    codes = s_labels.map(index)
    unknown = codes.isna().to_numpy()
    if unknown.any():
        names = sorted(set(s_labels[unknown]))
        raise InputError(
            f"stratum {', '.join(repr(n) for n in names[:5])} is not in the strata table "
            f"(known strata: {', '.join(repr(lab) for lab in labels[:10])})",
            rows=[spreadsheet_row(i) for i in np.flatnonzero(unknown)],
            column="stratum",
            **where_sample,
        )
    codes = codes.to_numpy(dtype=np.intp)
    if "item_id" in sample.columns:
        ids = label_column(sample, "item_id", "sample", sample_file).astype(str)
        dup = duplicated_rows(ids)
        if dup:
            raise InputError("an item may be examined only once", rows=dup, column="item_id", **where_sample)
    audited = numeric_column(sample, "audited_value", "sample", sample_file)
    book = numeric_column(sample, "book_value", "sample", sample_file) if needs_book else None

    n = np.bincount(codes, minlength=len(labels))
    over = np.flatnonzero(n > counts)
    if over.size:
        h = over[0]
        raise InputError(
            f"{n[h]} items sampled but the stratum holds only {counts[h]}",
            stratum=labels[h],
            column="count",
            **where_strata,
        )
    if needs_book and book_totals is not None and book is not None:
        sampled_book = np.bincount(codes, weights=book, minlength=len(labels))
        full = (n == counts) & (counts > 0)
        off = full & ~np.isclose(sampled_book, book_totals, rtol=_FULL_STRATUM_RTOL, atol=_FULL_STRATUM_ATOL)
        if off.any():
            h = np.flatnonzero(off)[0]
            raise InputError(
                f"every item of this stratum was examined, but their book values add up to "
                f"{sampled_book[h]:,.2f}, not the stratum's book_total {book_totals[h]:,.2f}",
                stratum=labels[h],
                column="book_total",
                **where_strata,
            )
    return _Design(list(labels), counts, book_totals, codes, audited, book)


def _check_applicable(method, design: _Design, single_item, unsampled):
    n = np.bincount(design.codes, minlength=len(design.labels))
    status = est.stratum_status(method, n, design.counts)
    labels = design.labels
    unsampled_h = np.flatnonzero(status == est.STATUS_UNSAMPLED)
    if unsampled_h.size and unsampled == "error":
        names = ", ".join(repr(labels[h]) for h in unsampled_h[:10])
        raise InputError(
            f"no item was sampled from stratum {names}; sample it, remove it from the strata "
            f"table if it is tested another way, or pass unsampled='book_value' to take its "
            f"book total as audited (the result will say so)",
            table="strata",
            stratum=labels[unsampled_h[0]],
        )
    thin = np.flatnonzero(status == est.STATUS_THIN)
    need = est.minimum_items_for_variance(method)
    if thin.size:
        if single_item == "error":
            names = ", ".join(repr(labels[h]) for h in thin[:10])
            raise MethodNotApplicable(
                method,
                f"stratum {names} has fewer than {need} sampled items, so its variance cannot be "
                f"estimated; sample more items, or choose single_item='average'",
                stratum=labels[thin[0]],
            )
        if single_item == "average" and not np.any(status == est.STATUS_SAMPLED):
            raise MethodNotApplicable(
                method,
                f"no stratum has the {need} or more sampled items needed to estimate a variance, "
                f"so there is nothing to average for the thin strata; sample more items",
            )


def prepare_design(sample, strata, method, single_item="average", unsampled="error", sample_file=None, strata_file=None) -> _Design:
    """Validate the two tables for ``method`` and return the arrays the core needs.

    Used by every evaluation function, so all of them refuse the same bad
    input with the same messages.
    """
    design = _prepare(sample, strata, method, unsampled, sample_file, strata_file)
    _check_applicable(method, design, single_item, unsampled)
    return design


def estimate_total(
    sample: pd.DataFrame,
    strata: pd.DataFrame,
    method: str = "mpu",
    confidence: float = 0.95,
    sides: str = "two-sided",
    distribution: str = "normal",
    *,
    ratio_variance: str = "sample_book_mean",
    single_item: str = "average",
    unsampled: str = "error",
    sample_file: str | None = None,
    strata_file: str | None = None,
) -> Estimate:
    """Estimate the audited total of a stratified population and the misstatement.

    Parameters
    ----------
    sample:
        One row per examined item, with columns ``stratum``,
        ``audited_value`` and, for every method but ``"mpu"``,
        ``book_value``. An ``item_id`` column, if present, is checked for
        duplicates.
    strata:
        One row per population stratum, with ``stratum``, ``count`` (items in
        the stratum) and, for every method but ``"mpu"``, ``book_total``.
        Stratum labels are compared as text, with surrounding spaces removed.
    method:
        ``"mpu"`` (mean-per-unit; needs no book values), ``"difference"``,
        ``"ratio"`` (separate ratio), ``"combined_ratio"`` or
        ``"regression"`` (separate regression). Formulas and sources in
        :mod:`auditmean.core.estimators`.
    confidence:
        Confidence level of the limits, strictly between 0 and 1.
    sides:
        ``"two-sided"``, ``"lower"`` (a lower bound on the audited total,
        which is an upper bound on overstatement) or ``"upper"``.
    distribution:
        ``"normal"``, or ``"t"`` for Student's t with Satterthwaite's
        effective degrees of freedom.
    ratio_variance:
        ``"sample_book_mean"`` (default) or ``"population_book_mean"``: the
        two published variance estimators of ratio estimation (see
        :mod:`auditmean.core.estimators` for the choice).
    single_item:
        Treatment of a stratum whose variance cannot be estimated (one item
        sampled out of more; two for regression): ``"average"``, ``"zero"``
        or ``"error"``. Always flagged.
    unsampled:
        Treatment of a stratum with items but no sampled item: ``"error"``
        or ``"book_value"``. Always flagged.
    sample_file, strata_file:
        The files the tables came from, so that errors can name them.

    Returns
    -------
    Estimate
        See :class:`Estimate`.

    Examples
    --------
    >>> import pandas as pd
    >>> sample = pd.DataFrame({"stratum": ["a"] * 3, "audited_value": [10.0, 12.0, 14.0]})
    >>> strata = pd.DataFrame({"stratum": ["a"], "count": [10]})
    >>> r = estimate_total(sample, strata, method="mpu")
    >>> round(r.total, 6), round(r.std_error, 6)   # 10 * 12; sqrt(100 * 0.7 / 3 * 4)
    (120.0, 9.660918)
    """
    conf = _validate_parameters(method, confidence, sides, distribution, ratio_variance, single_item, unsampled)
    design = prepare_design(sample, strata, method, single_item, unsampled, sample_file, strata_file)

    core = est.estimate_strata(
        method,
        design.codes,
        design.counts,
        design.audited,
        design.book,
        design.book_totals,
        ratio_variance=ratio_variance,
        single_item=single_item,
        unsampled=unsampled,
    )
    se = core.std_error
    lower, upper = confidence_limits(core.total, se, conf, sides, distribution, core.df)
    crit = critical_value(conf, sides, distribution, core.df)
    book_total = float(design.book_totals.sum()) if design.book_totals is not None else math.nan
    by_stratum = _by_stratum(method, design, core, single_item, unsampled)
    flags = structural_flags(method, design.labels, by_stratum, core, single_item, unsampled)
    skew_flags, g1, skewness = normality_flags(method, design.labels, by_stratum, core, design.codes)
    flags = flags + skew_flags
    by_stratum["skewness"] = g1
    return Estimate(
        method=method,
        confidence=conf,
        sides=sides,
        distribution=distribution,
        total=core.total,
        std_error=se,
        lower=lower,
        upper=upper,
        df=core.df,
        critical_value=crit,
        allowance=crit * se,
        book_total=book_total,
        misstatement=book_total - core.total,
        misstatement_lower=book_total - upper,
        misstatement_upper=book_total - lower,
        sample_size=int(len(design.codes)),
        population_count=int(design.counts.sum()),
        ratio_variance=ratio_variance,
        single_item=single_item,
        unsampled=unsampled,
        by_stratum=by_stratum,
        flags=flags,
        skewness=skewness,
    )


def _by_stratum(method, design: _Design, core: est.CoreEstimate, single_item, unsampled) -> pd.DataFrame:
    H = len(design.labels)
    n = np.bincount(design.codes, minlength=H)
    treatment = np.full(H, "", dtype=object)
    treatment[core.status == est.STATUS_FULL] = "exact total, no variance"
    thin = core.status == est.STATUS_THIN
    treatment[thin] = {
        "average": "variance term set to the average of the other strata's",
        "zero": "no variance term (treated as if examined in full)",
        "error": "",
    }[single_item]
    if unsampled == "book_value":
        treatment[core.status == est.STATUS_UNSAMPLED] = "book total taken as audited, no variance"
    if method == "regression":
        treatment[core.fallback & ~thin] = "slope fixed at 1 (sampled book values all equal)"
    elif method in ("ratio", "combined_ratio"):
        treatment[core.fallback] = "difference estimation (sampled book values add up to zero)"
    data = {
        "stratum": design.labels,
        "status": core.status.astype(str),
        "count": design.counts,
        "sampled": n,
    }
    if design.book_totals is not None:
        data["book_total"] = design.book_totals
    data["sampled_audited"] = np.bincount(design.codes, weights=design.audited, minlength=H)
    if design.book is not None:
        data["sampled_book"] = np.bincount(design.codes, weights=design.book, minlength=H)
        nonzero = (design.audited != design.book).astype(float)
        data["nonzero_differences"] = np.bincount(design.codes, weights=nonzero, minlength=H).astype(np.int64)
    data["total"] = core.stratum_total
    data["variance"] = core.stratum_variance
    data["std_error"] = np.sqrt(np.maximum(core.stratum_variance, 0.0))
    data["df"] = core.stratum_df
    data["coefficient"] = core.coefficient
    data["treatment"] = treatment
    if design.book_totals is not None:
        data["misstatement"] = design.book_totals - core.stratum_total
    return pd.DataFrame(data)
