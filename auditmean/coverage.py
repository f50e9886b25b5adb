"""The coverage check: how often would this design's limits really hold, on this population?

An auditor knows every book value before examining a single item. Given a
stratification, the planned sample sizes and a model of how items might be
misstated (:class:`MisstatementModel`), :func:`simulate_coverage` repeats
the planned sample many times on the user's own book values and reports,
for each estimator, how often the two-sided interval and the one-sided
bound contained the true audited total, the bias, the actual risk of
incorrect acceptance at a population misstated by exactly the tolerable
misstatement, the actual risk of incorrect rejection at the expected
misstatement, and how often each warning would have been raised.

Nominal 95% intervals can cover the truth far less often when misstatements
are rare and large (Neter and Loebbecke 1975); this is the way to see it for
a given design before the sample is drawn.

The numbers are computed by :mod:`auditmean.core.simulation` (formulas and
sources there) and the model is drawn by :mod:`auditmean.core.misstatement`.
This module validates the inputs once and wraps the answer in a
:class:`CoverageResult`.

References
----------
Neter, J. and Loebbecke, J. K. (1975). *Behavior of Major Statistical
Estimators in Sampling Accounting Populations: An Empirical Study*. AICPA,
New York.
"""

from __future__ import annotations

import html
import math
import numbers
import secrets
import textwrap
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np
import pandas as pd

from auditmean._records import (
    SCHEMA_VERSION,
    RecordMixin,
    format_number,
    html_table,
    json_safe,
    text_table,
)
from auditmean.amounts import parse_amounts
from auditmean.core import bound_simulation as core_bound
from auditmean.core import misstatement as core_ms
from auditmean.core import simulation as core_sim
from auditmean.core.choices import MAX_REPLICATIONS  # most replications one call accepts
from auditmean.core.estimators import METHOD_NAMES, METHODS, minimum_items_for_variance
from auditmean.core.flags import FLAG_CODES
from auditmean.errors import InputError, MethodNotApplicable, ParameterError, spreadsheet_row
from auditmean.plan import Plan

__all__ = [
    "FixedTaint",
    "UniformTaint",
    "BetaTaint",
    "ObservedTaints",
    "MisstatementModel",
    "CoverageResult",
    "simulate_coverage",
    "MAX_REPLICATIONS",
    "BOUND_NAMES",
]

# Rounding allowance when totals are compared, relative to the sum of the
# absolute book values: sums of a million values agree to about 1e-14.
_ROUNDING_RTOL = 1e-12


# --------------------------------------------------------------------------- taints


def _finite(name: str, value: object) -> float:
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise ParameterError(name, f"got {value!r}; give a number")
    v = float(value)
    if not math.isfinite(v):
        raise ParameterError(name, f"got {value!r}; give a finite number")
    return v


def _probability(name: str, value: object, *, open_low: bool = False) -> float:
    v = _finite(name, value)
    if not (0.0 <= v <= 1.0) or (open_low and v == 0.0):
        low = "above 0" if open_low else "at least 0"
        raise ParameterError(name, f"got {value!r}; a probability {low} and at most 1 (e.g. 0.05 for 5%)")
    return v


@dataclass(frozen=True)
class FixedTaint:
    """Every misstated item is misstated by the same share ``value`` of its book value.

    ``value = 1`` is an item wholly overstated (audited value 0); a value
    above 1 makes an overstated item's audited value negative.
    """

    value: float
    kind: ClassVar[str] = "fixed"

    def __post_init__(self) -> None:
        v = _finite("taint.value", self.value)
        if v <= 0:
            raise ParameterError("taint.value", f"got {self.value!r}; the share misstated must be above 0")
        object.__setattr__(self, "value", v)

    def params(self) -> np.ndarray:
        return np.array([self.value])

    def describe(self) -> str:
        return f"{self.value:.0%} of book value"

    def to_dict(self) -> dict[str, Any]:
        return {"kind": self.kind, "value": self.value}


@dataclass(frozen=True)
class UniformTaint:
    """The share misstated is uniform between ``low`` and ``high`` (``0 <= low < high``)."""

    low: float
    high: float
    kind: ClassVar[str] = "uniform"

    def __post_init__(self) -> None:
        lo = _finite("taint.low", self.low)
        hi = _finite("taint.high", self.high)
        if lo < 0:
            raise ParameterError("taint.low", f"got {self.low!r}; the smallest share misstated must be at least 0")
        if not hi > lo:
            raise ParameterError("taint.high", f"got {self.high!r}; it must be above taint.low ({lo!r})")
        object.__setattr__(self, "low", lo)
        object.__setattr__(self, "high", hi)

    def params(self) -> np.ndarray:
        return np.array([self.low, self.high])

    def describe(self) -> str:
        return f"uniform between {self.low:.0%} and {self.high:.0%} of book value"

    def to_dict(self) -> dict[str, Any]:
        return {"kind": self.kind, "low": self.low, "high": self.high}


@dataclass(frozen=True)
class BetaTaint:
    """The share misstated follows a beta distribution with mean ``mean``.

    ``concentration`` (kappa) sets the spread: shape parameters
    ``mean * kappa`` and ``(1 - mean) * kappa``, variance
    ``mean (1 - mean) / (1 + kappa)`` (Ferrari and Cribari-Neto 2004,
    Journal of Applied Statistics 31, 799-815). The default 2 is our own
    choice: with a mean of 0.5 it is the uniform distribution on (0, 1);
    larger values gather the taints around the mean, smaller ones push them
    toward 0 and 1.
    """

    mean: float
    concentration: float = 2.0
    kind: ClassVar[str] = "beta"

    def __post_init__(self) -> None:
        m = _finite("taint.mean", self.mean)
        c = _finite("taint.concentration", self.concentration)
        if not (0.0 < m < 1.0):
            raise ParameterError("taint.mean", f"got {self.mean!r}; a beta mean lies strictly between 0 and 1")
        if not c > 0:
            raise ParameterError("taint.concentration", f"got {self.concentration!r}; it must be above 0")
        object.__setattr__(self, "mean", m)
        object.__setattr__(self, "concentration", c)

    def params(self) -> np.ndarray:
        return np.array([self.mean, self.concentration])

    def describe(self) -> str:
        return f"beta with mean {self.mean:.0%} (concentration {self.concentration:g})"

    def to_dict(self) -> dict[str, Any]:
        return {"kind": self.kind, "mean": self.mean, "concentration": self.concentration}


@dataclass(frozen=True)
class ObservedTaints:
    """Taints drawn with replacement from a list seen before, signs kept.

    Negative taints in the list are understatements. A taint of 0 is not a
    misstatement and is refused: leave such items out of the list and lower
    the error rate instead.
    """

    values: tuple[float, ...]
    kind: ClassVar[str] = "observed"

    def __post_init__(self) -> None:
        try:
            arr = np.asarray(self.values, dtype=float).ravel()
        except (TypeError, ValueError):
            raise ParameterError("taint.values", "give a list of numbers (shares of book value)") from None
        if arr.size == 0:
            raise ParameterError("taint.values", "the list of observed taints is empty")
        bad = np.flatnonzero(~np.isfinite(arr) | (arr == 0))
        if bad.size:
            shown = ", ".join(f"{i + 1} ({arr[i]!r})" for i in bad[:5])
            raise ParameterError(
                "taint.values",
                f"entries {shown} are zero or not finite; every observed taint must be a non-zero number",
            )
        object.__setattr__(self, "values", tuple(float(v) for v in arr))

    def params(self) -> np.ndarray:
        return np.asarray(self.values, dtype=float)

    def describe(self) -> str:
        arr = self.params()
        under = int(np.sum(arr < 0))
        extra = f", {under} of them understatements" if under else ""
        return f"drawn from {arr.size} observed taints (mean {arr.mean():.1%}{extra})"

    def to_dict(self) -> dict[str, Any]:
        return {"kind": self.kind, "values": list(self.values)}


Taint = FixedTaint | UniformTaint | BetaTaint | ObservedTaints
_TAINT_TYPES = (FixedTaint, UniformTaint, BetaTaint, ObservedTaints)


def _taint_from_dict(d: Mapping[str, Any]) -> Taint:
    kind = d.get("kind")
    if kind == "fixed":
        return FixedTaint(d["value"])
    if kind == "uniform":
        return UniformTaint(d["low"], d["high"])
    if kind == "beta":
        return BetaTaint(d["mean"], d.get("concentration", 2.0))
    if kind == "observed":
        return ObservedTaints(tuple(d["values"]))
    raise ParameterError("taint.kind", f"got {kind!r}; use one of {', '.join(repr(k) for k in core_ms.TAINT_KINDS)}")


# --------------------------------------------------------------------------- the model


def _clean_label(value: object) -> str:
    return str(value).strip()


@dataclass(frozen=True)
class MisstatementModel(RecordMixin):
    """How items might be misstated, in the trade's terms.

    Parameters
    ----------
    error_rate:
        Probability that an item is misstated: one number for the whole
        population, or a mapping ``{stratum: rate}`` with a rate for every
        stratum (labels compared as text, surrounding spaces removed).
    taint:
        How much a misstated item is misstated, as a share of its book value
        (its *taint*; audited value = book value x (1 - taint)):
        :class:`FixedTaint`, :class:`UniformTaint`, :class:`BetaTaint` or
        :class:`ObservedTaints`.
    understatement_share:
        Probability that a misstated item is understated (its taint
        negated). Not used with :class:`ObservedTaints`, whose list carries
        its own signs (must then be 0).
    large_items, large_item_taint, large_item_probability:
        A few large errors: the ``large_items`` items with the largest book
        values (absolute value) follow their own rule instead of the one
        above: each is misstated with probability ``large_item_probability``
        and then by the share ``large_item_taint``. Our own simple device,
        without a published source (see :mod:`auditmean.core.misstatement`).

    Examples
    --------
    >>> m = MisstatementModel(error_rate=0.02, taint=UniformTaint(0.1, 0.6))
    >>> print(m.summary())
    Misstatement model: 2% of items misstated; taint uniform between 10% and 60% of book value; all overstatements
    """

    record_kind = "misstatement_model"

    error_rate: float | Mapping[str, float]
    taint: Taint
    understatement_share: float = 0.0
    large_items: int = 0
    large_item_taint: float = 1.0
    large_item_probability: float = 0.0

    def __post_init__(self) -> None:
        rate = self.error_rate
        if isinstance(rate, Mapping):
            if not rate:
                raise ParameterError("error_rate", "the mapping of rates per stratum is empty")
            clean: dict[str, float] = {}
            for k, v in rate.items():
                label = _clean_label(k)
                if label in clean:
                    raise ParameterError("error_rate", f"stratum {label!r} is given twice")
                clean[label] = _probability(f"error_rate[{label!r}]", v)
            object.__setattr__(self, "error_rate", clean)
        else:
            object.__setattr__(self, "error_rate", _probability("error_rate", rate))
        if not isinstance(self.taint, _TAINT_TYPES):
            raise ParameterError(
                "taint",
                f"got {type(self.taint).__name__}; use FixedTaint, UniformTaint, BetaTaint or ObservedTaints",
            )
        u = _probability("understatement_share", self.understatement_share)
        if isinstance(self.taint, ObservedTaints) and u != 0:
            raise ParameterError(
                "understatement_share",
                "observed taints keep the signs of the list; put understatements in the list as "
                "negative taints and leave understatement_share at 0",
            )
        object.__setattr__(self, "understatement_share", u)
        k = self.large_items
        if isinstance(k, bool) or not isinstance(k, numbers.Integral) or k < 0:
            raise ParameterError("large_items", f"got {k!r}; give a whole number of items, 0 or more")
        object.__setattr__(self, "large_items", int(k))
        t = _finite("large_item_taint", self.large_item_taint)
        if t == 0:
            raise ParameterError("large_item_taint", "a taint of 0 is not a misstatement; give the share misstated")
        object.__setattr__(self, "large_item_taint", t)
        object.__setattr__(self, "large_item_probability", _probability("large_item_probability", self.large_item_probability))

    # -- plain-words description

    def _rate_words(self) -> str:
        if isinstance(self.error_rate, dict):
            parts = ", ".join(f"{k}: {_percent(v)}" for k, v in self.error_rate.items())
            return f"items misstated at rates per stratum ({parts})"
        return f"{_percent(self.error_rate)} of items misstated"

    def summary(self) -> str:
        parts = [self._rate_words(), f"taint {self.taint.describe()}"]
        if not isinstance(self.taint, ObservedTaints):
            u = self.understatement_share
            parts.append("all overstatements" if u == 0 else f"{_percent(u)} of them understatements")
        if self.large_items:
            parts.append(
                f"the {self.large_items:,} largest items each misstated with probability "
                f"{_percent(self.large_item_probability)} by {_percent(self.large_item_taint)} of book value"
            )
        return "Misstatement model: " + "; ".join(parts)

    # -- arrays for the core

    def stratum_rates(self, labels: Sequence[str]) -> np.ndarray:
        """The error rate of each stratum in ``labels`` (raises when the mapping misses one)."""
        if not isinstance(self.error_rate, dict):
            return np.full(len(labels), float(self.error_rate))
        known = set(labels)
        unknown = [k for k in self.error_rate if k not in known]
        if unknown:
            raise ParameterError(
                "error_rate",
                f"stratum {', '.join(repr(u) for u in unknown[:5])} is not in the population "
                f"(its strata are {', '.join(repr(x) for x in list(labels)[:10])})",
            )
        missing = [lab for lab in labels if lab not in self.error_rate]
        if missing:
            raise ParameterError(
                "error_rate",
                f"no rate for stratum {', '.join(repr(m) for m in missing[:5])}; give a rate for every "
                f"stratum (0 where no misstatement is modelled)",
            )
        return np.array([self.error_rate[lab] for lab in labels])

    def _process(self, rates: np.ndarray) -> core_sim.ErrorProcess:
        return core_sim.ErrorProcess(
            rates=rates,
            kind=self.taint.kind,
            params=self.taint.params(),
            understatement_share=self.understatement_share,
            large_taint=self.large_item_taint,
            large_probability=self.large_item_probability,
        )

    def _mean_taint(self) -> float:
        return core_ms.mean_taint(self.taint.kind, self.taint.params(), self.understatement_share)

    def audited_values(self, book_values: object, strata: object = None, seed: int | None = None) -> np.ndarray:
        """One misstated population: an audited value for every item, drawn from ``seed``.

        ``strata`` (one label per item) is needed only with rates per
        stratum. The draws are made by
        :func:`auditmean.core.misstatement.draw_population_taints` with
        ``numpy.random.default_rng(seed)``; the audited value is
        ``book - book * taint``. With ``fixed_population=True``,
        :func:`simulate_coverage` uses exactly this population.
        """
        book = _book_array(book_values)
        item_rates = self._item_rates(book.shape[0], strata)
        tau = self._draw_taints(np.random.default_rng(_seed_value(seed)), book, item_rates)
        return book - book * tau

    def expected_misstatement(self, book_values: object, strata: object = None) -> float:
        """The misstatement the model expects, ``E[sum book * taint]`` (overstatement positive)."""
        book = _book_array(book_values)
        item_rates = self._item_rates(book.shape[0], strata)
        large = core_ms.largest_items(book, self.large_items)
        return core_ms.expected_misstatement(
            book, item_rates, self._mean_taint(), large, self.large_item_taint, self.large_item_probability
        )

    def _item_rates(self, size: int, strata: object) -> np.ndarray:
        if not isinstance(self.error_rate, dict):
            return np.full(size, float(self.error_rate))
        if strata is None:
            raise ParameterError("strata", "the model has error rates per stratum: give each item's stratum")
        codes, labels = _stratum_codes(strata, size)
        return self.stratum_rates(labels)[codes]

    def _draw_taints(self, rng: np.random.Generator, book: np.ndarray, item_rates: np.ndarray) -> np.ndarray:
        large = core_ms.largest_items(book, self.large_items)
        return core_ms.draw_population_taints(
            rng,
            item_rates,
            self.taint.kind,
            self.taint.params(),
            self.understatement_share,
            large,
            self.large_item_taint,
            self.large_item_probability,
        )

    def to_dict(self) -> dict[str, Any]:
        return {
            "schema_version": SCHEMA_VERSION,
            "kind": self.record_kind,
            "error_rate": dict(self.error_rate) if isinstance(self.error_rate, dict) else self.error_rate,
            "taint": self.taint.to_dict(),
            "understatement_share": self.understatement_share,
            "large_items": self.large_items,
            "large_item_taint": self.large_item_taint,
            "large_item_probability": self.large_item_probability,
        }

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> MisstatementModel:
        """Rebuild a model from :meth:`to_dict`."""
        return cls(
            error_rate=d["error_rate"],
            taint=_taint_from_dict(d["taint"]),
            understatement_share=d.get("understatement_share", 0.0),
            large_items=d.get("large_items", 0),
            large_item_taint=d.get("large_item_taint", 1.0),
            large_item_probability=d.get("large_item_probability", 0.0),
        )


def _percent(p: float) -> str:
    """``0.05 -> '5%'``, ``0.025 -> '2.5%'``, ``0.0012 -> '0.12%'``."""
    text = f"{100 * p:.4f}".rstrip("0").rstrip(".")
    return f"{text}%"


# --------------------------------------------------------------------------- input checks


def _book_array(book_values: object) -> np.ndarray:
    if isinstance(book_values, (str, bytes)) or book_values is None:
        raise ParameterError("book_values", "give one book value per item (a sequence, array or Series)")
    book = parse_amounts(book_values, column="book_values", table="population")
    if book.shape[0] == 0:
        raise ParameterError("book_values", "the population has no items")
    return book


def _stratum_codes(strata: object, size: int) -> tuple[np.ndarray, list[str]]:
    """Each item's stratum as a code into a list of labels (text, surrounding spaces removed).

    The labels are cleaned once per distinct value, not once per item.
    """
    if isinstance(strata, (str, bytes)) or strata is None:
        raise ParameterError("strata", "give one stratum label per item (a sequence, array or Series)")
    raw = strata.to_numpy(dtype=object) if isinstance(strata, pd.Series) else np.asarray(strata, dtype=object)
    if raw.ndim != 1 or raw.shape[0] != size:
        raise ParameterError("strata", f"got {raw.size:,} labels for {size:,} book values; give one label per item")
    codes, uniques = pd.factorize(raw, use_na_sentinel=True)
    cleaned = [_clean_label(u) for u in uniques]
    labels: list[str] = []
    where: dict[str, int] = {}
    remap = np.empty(len(cleaned) + 1, dtype=np.intp)
    remap[-1] = -1  # missing values keep the sentinel
    for i, lab in enumerate(cleaned):
        if lab == "":
            remap[i] = -1
            continue
        if lab not in where:
            where[lab] = len(labels)
            labels.append(lab)
        remap[i] = where[lab]
    codes = remap[codes]
    blank = codes < 0
    if blank.any():
        raise InputError(
            "blank stratum labels", table="population", column="strata",
            rows=[spreadsheet_row(i) for i in np.flatnonzero(blank)],
        )
    return codes, labels


def _sizes_table(sizes: object) -> tuple[list[str], np.ndarray]:
    """Stratum labels (in the order given) and planned sizes."""
    plan_sizes = _plan_sizes(sizes)
    if plan_sizes is not None:
        sizes = plan_sizes
    if isinstance(sizes, pd.DataFrame):
        missing = [c for c in ("stratum", "size") if c not in sizes.columns]
        if missing:
            raise InputError(
                f"missing column {', '.join(repr(m) for m in missing)}; the sizes table needs "
                f"'stratum' and 'size' (it has {', '.join(repr(str(c)) for c in sizes.columns)})",
                table="sizes", column=missing[0],
            )
        labels = [_clean_label(v) for v in sizes["stratum"].tolist()]
        raw = sizes["size"].tolist()
        where_rows = True
    elif isinstance(sizes, pd.Series):
        labels = [_clean_label(v) for v in sizes.index.tolist()]
        raw = sizes.tolist()
        where_rows = False
    elif isinstance(sizes, Mapping):
        labels = [_clean_label(k) for k in sizes.keys()]
        raw = list(sizes.values())
        where_rows = False
    else:
        raise ParameterError(
            "sizes",
            f"got {type(sizes).__name__}; give a mapping {{stratum: size}}, a Series indexed by stratum, "
            f"a table with columns 'stratum' and 'size', or a Plan",
        )
    if not labels:
        raise ParameterError("sizes", "no stratum has a planned size")
    seen: dict[str, int] = {}
    for i, lab in enumerate(labels):
        if lab in seen:
            rows = [spreadsheet_row(seen[lab]), spreadsheet_row(i)] if where_rows else None
            raise InputError("each stratum must appear once", table="sizes", stratum=lab, rows=rows, column="stratum")
        seen[lab] = i
    out = np.zeros(len(raw), dtype=np.int64)
    for i, (lab, v) in enumerate(zip(labels, raw)):
        ok = isinstance(v, numbers.Real) and not isinstance(v, bool) and math.isfinite(float(v)) and float(v) == round(float(v))
        if not ok:
            raise InputError(
                f"the planned size {v!r} is not a whole number of items", table="sizes", stratum=lab,
                column="size", rows=[spreadsheet_row(i)] if where_rows else None,
            )
        out[i] = int(v)
    return labels, out


def _plan_sizes(obj: object) -> dict[str, int] | None:
    """The sizes of a :class:`auditmean.plan.Plan`, or ``None`` when ``obj`` is not one."""
    return obj.sizes if isinstance(obj, Plan) else None


def _seed_value(seed: object) -> int:
    if seed is None:
        return secrets.randbits(64)
    if isinstance(seed, bool) or not isinstance(seed, numbers.Integral) or int(seed) < 0:
        raise ParameterError("seed", f"got {seed!r}; give a whole number 0 or more, or None for a new one")
    return int(seed)


def _check_run(
    confidence: object,
    tolerable: object,
    expected: object,
    seed: object,
    fixed_population: object,
    progress: object,
) -> tuple[float, float | None, float | None, int]:
    """Check the parameters every coverage check shares (either design), in this order.

    Returns
    -------
    tuple
        The confidence, the tolerable and expected misstatement (``None`` where not given) and
        the seed (a new one where ``seed`` is ``None``).
    """
    conf = _finite("confidence", confidence)
    if not (0.0 < conf < 1.0):
        raise ParameterError("confidence", f"got {confidence!r}; it must lie strictly between 0 and 1 (e.g. 0.95)")
    TM = None if tolerable is None else _finite("tolerable", tolerable)
    if TM is not None and TM <= 0:
        raise ParameterError("tolerable", f"got {tolerable!r}; the tolerable misstatement must be above 0")
    EM = None if expected is None else _finite("expected", expected)
    if EM is not None:
        if TM is None:
            raise ParameterError("expected", "the risk of incorrect rejection needs the tolerable misstatement too")
        if not (0 <= EM < TM):
            raise ParameterError("expected", f"got {expected!r}; it must be at least 0 and below tolerable ({TM:,.2f})")
    seed_value = _seed_value(seed)
    if not isinstance(fixed_population, bool):
        raise ParameterError("fixed_population", f"got {fixed_population!r}; give True or False")
    if progress is not None and not callable(progress):
        raise ParameterError("progress", "give a function progress(done, total), or None")
    return conf, TM, EM, seed_value


def _choice(name: str, value: object, allowed: Sequence[str]) -> str:
    if not isinstance(value, str) or value not in allowed:
        raise ParameterError(name, f"got {value!r}; use one of {', '.join(repr(a) for a in allowed)}")
    return value


def _estimators(value: object) -> tuple[str, ...]:
    items = [value] if isinstance(value, str) else list(value) if isinstance(value, Sequence) else None
    if not items:
        raise ParameterError("estimators", f"give one or more of {', '.join(repr(m) for m in METHODS)}")
    for m in items:
        _choice("estimators", m, METHODS)
    if len(set(items)) != len(items):
        raise ParameterError("estimators", "an estimator is listed twice")
    return tuple(items)


# --------------------------------------------------------------------------- the result


@dataclass(frozen=True, eq=False)
class CoverageResult(RecordMixin):
    """What the coverage check found.

    Attributes
    ----------
    estimators:
        The methods simulated, in the order of the per-replication columns.
    model:
        The misstatement model.
    strata:
        One row per stratum: ``stratum``, ``count``, ``book_total``,
        ``size`` (planned), ``examined_in_full``, ``error_rate`` and
        ``large_items`` (items under the large-error rule). Its first three
        columns are a strata table for :func:`auditmean.estimate_total`.
    replications_requested, replications:
        Replications asked for and completed.
    partial:
        The run was stopped early; the results cover the completed
        replications only.
    fixed_population:
        One misstated population sampled again and again (``True``), or a
        new population drawn from the model for every replication.
    book_total, true_total:
        The population's book total; its audited total (with fresh
        populations: the average over the replications).
    expected_model_misstatement:
        The misstatement the model expects (see
        :meth:`MisstatementModel.expected_misstatement`).
    by_estimator:
        One row per estimator: ``coverage`` (two-sided) and
        ``coverage_mc_se``; ``one_sided_coverage`` and its s.e.;
        ``bias`` (mean estimate minus true total) and ``bias_mc_se``;
        ``mean_std_error`` (the average standard error the intervals used)
        and ``error_sd`` (the standard deviation of estimate minus true
        total across replications, what the standard error should be);
        ``acceptance_rate`` (as modelled), ``risk_incorrect_acceptance``
        (at tolerable) and ``risk_incorrect_rejection`` (at expected), each
        with its Monte Carlo s.e. and the number of replications used.
        Monte Carlo standard errors are ``sqrt(p (1 - p) / R)`` for a
        proportion and ``sd / sqrt(R)`` for the bias.
    flag_rates:
        One row per estimator and warning: replications in which it was
        raised for at least one stratum, and their share.
    flag_rates_by_stratum:
        The same per stratum (stratum warnings only).
    notes:
        Everything a reader must know to read the numbers (replications
        left out and why, scaling of the populations, a stopped run).
    true_totals, estimates, std_errors, lower, upper, lower_bound, covers, covers_one_sided, accepts:
        Per replication (rows) and estimator (columns, as ``estimators``).
    second_opinion_replicates, second_opinion:
        With the second opinion: its bootstrap replicates per replication,
        and ``{"lower", "upper", "lower_bound", "covers",
        "covers_one_sided"[, "accepts"]}`` per-replication arrays of its
        percentile limits, with ``"seed"``, the bootstrap seed of each
        replication (:func:`auditmean.evaluation.second_opinion` with that
        seed on the replication's sample gives the same limits);
        ``by_estimator`` then has ``second_opinion_*`` columns. Otherwise 0
        and ``None``.
    kept_samples:
        The examined items of the first replications when
        ``keep_samples`` was asked for (``replication``, ``item`` = 0-based
        position in the population, ``stratum``, ``book_value``,
        ``audited_value``), else ``None``.
    bounds:
        The finite-sample bounds simulated (``"stratified_betting"``: the
        bound of :func:`auditmean.overstatement_bound`), or ``()``.
    by_bound:
        One row per bound simulated (an empty table when none): ``bound``,
        ``name``, ``replications``, ``coverage`` (one-sided: the upper bound
        on overstatement is not below the population's true misstatement,
        book total minus audited total) and ``coverage_mc_se``,
        ``mean_upper`` (the average upper bound), ``acceptance_rate``,
        ``risk_incorrect_acceptance`` (share of the populations scaled to
        exactly tolerable whose bound is not above tolerable),
        ``replications_at_tolerable``, ``outside_assumption_at_tolerable``
        (populations left out of that risk because the scaling made an item
        of a sampled stratum overstated by more than the stratum's largest
        book value, outside the condition of the bound's guarantee),
        ``risk_incorrect_rejection`` (share of the populations scaled to
        expected whose bound is above tolerable),
        ``replications_at_expected``, ``outside_assumption_at_expected``;
        each rate with its Monte Carlo s.e. (``_mc_se``).
    bound_upper, bound_covers, bound_accepts:
        Per replication (rows) and bound (columns, as ``bounds``): the upper
        bound on overstatement, whether it is not below the true
        misstatement, and whether it is not above tolerable (``None``
        without bounds; ``bound_accepts`` also without tolerable).
    """

    record_kind = "coverage_check"

    estimators: tuple[str, ...]
    model: MisstatementModel
    strata: pd.DataFrame = field(repr=False)
    replications_requested: int
    replications: int
    partial: bool
    confidence: float
    distribution: str
    ratio_variance: str
    single_item: str
    fixed_population: bool
    seed: int
    tolerable: float | None
    expected: float | None
    book_total: float
    true_total: float
    expected_model_misstatement: float
    by_estimator: pd.DataFrame = field(repr=False)
    flag_rates: pd.DataFrame = field(repr=False)
    flag_rates_by_stratum: pd.DataFrame = field(repr=False)
    notes: tuple[str, ...]
    true_totals: np.ndarray = field(repr=False)
    estimates: np.ndarray = field(repr=False)
    std_errors: np.ndarray = field(repr=False)
    lower: np.ndarray = field(repr=False)
    upper: np.ndarray = field(repr=False)
    lower_bound: np.ndarray = field(repr=False)
    covers: np.ndarray = field(repr=False)
    covers_one_sided: np.ndarray = field(repr=False)
    accepts: np.ndarray | None = field(repr=False, default=None)
    second_opinion_replicates: int = 0
    second_opinion: Mapping[str, np.ndarray] | None = field(repr=False, default=None)
    kept_samples: pd.DataFrame | None = field(repr=False, default=None)
    bounds: tuple[str, ...] = ()
    by_bound: pd.DataFrame | None = field(repr=False, default=None)
    bound_upper: np.ndarray | None = field(repr=False, default=None)
    bound_covers: np.ndarray | None = field(repr=False, default=None)
    bound_accepts: np.ndarray | None = field(repr=False, default=None)

    # -- for programs

    def column(self, estimator: str) -> int:
        """Column of ``estimator`` in the per-replication arrays."""
        if estimator not in self.estimators:
            raise ParameterError("estimator", f"got {estimator!r}; this check simulated {', '.join(self.estimators)}")
        return self.estimators.index(estimator)

    def per_replication(self) -> pd.DataFrame:
        """Every replication and estimator as rows of a table."""
        R, M = self.estimates.shape
        data = {
            "replication": np.repeat(np.arange(R), M),
            "estimator": np.tile(np.array(self.estimators, dtype=object), R),
            "true_total": np.repeat(self.true_totals, M),
            "estimate": self.estimates.ravel(),
            "std_error": self.std_errors.ravel(),
            "lower": self.lower.ravel(),
            "upper": self.upper.ravel(),
            "lower_bound": self.lower_bound.ravel(),
            "covers": self.covers.ravel(),
            "covers_one_sided": self.covers_one_sided.ravel(),
        }
        if self.accepts is not None:
            data["accepts"] = self.accepts.ravel()
        return pd.DataFrame(data)

    # -- for people

    def _headline(self) -> str:
        how, done = _how_and_done(self)
        n = int(self.strata["size"].sum())
        N = int(self.strata["count"].sum())
        return (
            f"Coverage check: {done} simulated samples of {n:,} of {N:,} items in {len(self.strata)} strata "
            f"({how}); nominal {self.confidence:.0%}, {self.distribution} limits"
            + (" - STOPPED EARLY, partial results" if self.partial else "")
        )

    def _rows(self) -> tuple[list[str], list[list[str]]]:
        header = [
            "estimator", "two-sided coverage", "one-sided coverage", "bias", "average standard error",
            "actual standard deviation",
        ]
        has_tm = self.tolerable is not None
        has_em = self.expected is not None
        if has_tm:
            header.append("risk of incorrect acceptance")
        if has_em:
            header.append("risk of incorrect rejection")
        rows = []
        for r in self.by_estimator.itertuples(index=False):
            row = [
                METHOD_NAMES[r.estimator],
                _pct_se(r.coverage, r.coverage_mc_se),
                _pct_se(r.one_sided_coverage, r.one_sided_coverage_mc_se),
                format_number(r.bias, 0),
                format_number(r.mean_std_error, 0),
                format_number(r.error_sd, 0),
            ]
            rows.append(row + _risk_cells(r, has_tm, has_em))
        return header, rows

    def _second_opinion_rows(self) -> tuple[list[str], list[list[str]]]:
        header = ["estimator", "two-sided coverage", "one-sided coverage"]
        b = self.by_estimator
        has_tm = "second_opinion_risk_incorrect_acceptance" in b
        has_em = "second_opinion_risk_incorrect_rejection" in b
        if has_tm:
            header.append("risk of incorrect acceptance")
        if has_em:
            header.append("risk of incorrect rejection")
        rows = []
        for r in b.itertuples(index=False):
            row = [
                METHOD_NAMES[r.estimator],
                _pct_se(r.second_opinion_coverage, r.second_opinion_coverage_mc_se),
                _pct_se(r.second_opinion_one_sided_coverage, r.second_opinion_one_sided_coverage_mc_se),
            ]
            if has_tm:
                row.append(_pct_se(r.second_opinion_risk_incorrect_acceptance,
                                   r.second_opinion_risk_incorrect_acceptance_mc_se))
            if has_em:
                row.append(_pct_se(r.second_opinion_risk_incorrect_rejection,
                                   r.second_opinion_risk_incorrect_rejection_mc_se))
            rows.append(row)
        return header, rows

    def _second_opinion_caption(self) -> str:
        return (
            f"Second opinion (rescaling bootstrap, percentile limits, {self.second_opinion_replicates:,} "
            f"replicates per sample):"
        )

    def _strata_rows(self) -> tuple[list[str], list[list[str]]]:
        header = ["stratum", "items", "book total", "planned sample", "examined in full", "error rate"]
        rows = [
            [
                str(r.stratum),
                format_number(int(r.count)),
                format_number(r.book_total),
                format_number(int(r.size)),
                "yes" if r.examined_in_full else "",
                _percent(r.error_rate),
            ]
            for r in self.strata.itertuples(index=False)
        ]
        return header, rows

    def _flag_rows(self) -> tuple[list[str], list[list[str]]]:
        fired = self.flag_rates[self.flag_rates["replications_flagged"] > 0]
        codes = [c for c in FLAG_CODES if c in set(fired["flag"])]
        header = ["estimator", *codes]
        rows = []
        for m in self.estimators:
            sub = self.flag_rates[self.flag_rates["estimator"] == m].set_index("flag")["rate"]
            rows.append([METHOD_NAMES[m], *[(_percent1(sub[c]) if c in sub.index else "") for c in codes]])
        return header, rows

    def _context(self) -> list[str]:
        lines = [
            self.model.summary(),
            f"Book total {format_number(self.book_total)}; model's expected misstatement "
            f"{format_number(self.expected_model_misstatement)}; "
            + (
                f"this population's misstatement {format_number(self.book_total - self.true_total)}"
                if self.fixed_population
                else f"average misstatement of the populations {format_number(self.book_total - self.true_total)}"
            ),
        ]
        if self.tolerable is not None:
            lines.append(
                f"Tolerable misstatement {format_number(self.tolerable)}"
                + (f", expected misstatement {format_number(self.expected)}" if self.expected is not None else "")
                + f"; nominal risk of incorrect acceptance {1 - self.confidence:.0%} (one-sided bound)"
            )
        return lines

    def _coverage_rows(self) -> tuple[list[str], list[list[str]]]:
        """The estimators' coverage, narrow enough for 100 columns (the risks are in :meth:`_limit_rows`)."""
        header = ["estimator", "two-sided", "one-sided", "bias", "average s.e.", "actual s.d."]
        rows = [
            [
                METHOD_NAMES[r.estimator],
                _pct_se(r.coverage, r.coverage_mc_se),
                _pct_se(r.one_sided_coverage, r.one_sided_coverage_mc_se),
                format_number(r.bias, 0),
                format_number(r.mean_std_error, 0),
                format_number(r.error_sd, 0),
            ]
            for r in self.by_estimator.itertuples(index=False)
        ]
        return header, rows

    def _limit_rows(self) -> tuple[list[str], list[list[str]]]:
        """Every upper limit of misstatement side by side: the estimators' normal limits, then the bounds.

        Columns: how often it holds (one-sided coverage of the true
        misstatement), its average, and the risks of incorrect acceptance and
        rejection where tolerable and expected were given.
        """
        has_tm = self.tolerable is not None
        has_em = self.expected is not None
        header = ["upper limit of misstatement", "holds", "average"]
        header += ["acceptance"] if has_tm else []
        header += ["rejection"] if has_em else []
        rows = []
        for j, r in enumerate(self.by_estimator.itertuples(index=False)):
            with np.errstate(invalid="ignore"):
                limits = self.book_total - self.lower_bound[:, j]
            finite = limits[np.isfinite(limits)]
            row = [
                METHOD_NAMES[r.estimator],
                _pct_se(r.one_sided_coverage, r.one_sided_coverage_mc_se),
                format_number(float(finite.mean()) if finite.size else math.nan, 0),
            ]
            rows.append(row + _risk_cells(r, has_tm, has_em))
        if self.by_bound is not None:
            for r in self.by_bound.itertuples(index=False):
                row = [r.name, _pct_se(r.coverage, r.coverage_mc_se), format_number(r.mean_upper, 0)]
                rows.append(row + _risk_cells(r, has_tm, has_em))
        return header, rows

    def _limit_caption(self) -> str:
        nominal = f"{self.confidence:.0%}"
        text = (
            "Upper limit of misstatement, side by side: each estimator's normal limit"
            + (", then the bound that holds in finite samples" if self.bounds else "")
            + f". holds: share of samples in which it was not below the true misstatement (nominal {nominal}); "
            "average: its average"
        )
        if self.tolerable is not None:
            text += (
                f"; acceptance: risk of incorrect acceptance, the share accepted among populations misstated by "
                f"exactly tolerable (nominal {1 - self.confidence:.0%})"
            )
        if self.expected is not None:
            text += "; rejection: risk of incorrect rejection, the share rejected at the expected misstatement"
        return text + "; +/- one Monte Carlo standard error."

    def _flag_rows_by_warning(self) -> tuple[list[str], list[list[str]]]:
        """The warnings' rates with one row per warning and one column per estimator (narrow)."""
        fired = self.flag_rates[self.flag_rates["replications_flagged"] > 0]
        codes = [c for c in FLAG_CODES if c in set(fired["flag"])]
        header = ["warning", *self.estimators]
        rows = []
        for c in codes:
            sub = self.flag_rates[self.flag_rates["flag"] == c].set_index("estimator")["rate"]
            rows.append([c, *[(_percent1(sub[m]) if m in sub.index else "") for m in self.estimators]])
        return header, rows

    def _second_opinion_rows_narrow(self) -> tuple[list[str], list[list[str]]]:
        header, rows = self._second_opinion_rows()
        short = {"two-sided coverage": "two-sided", "one-sided coverage": "one-sided",
                 "risk of incorrect acceptance": "acceptance", "risk of incorrect rejection": "rejection"}
        return [short.get(h, h) for h in header], rows

    def summary(self) -> str:
        """The check in plain text, every line within 100 columns."""
        def wrap(text: str, indent: str = "") -> list[str]:
            # Never break right after a colon, so that "stratum: rate" pairs stay on one line.
            lines = textwrap.wrap(text.replace(": ", ":\xa0"), width=_WIDTH, initial_indent=indent,
                                  subsequent_indent=" " * len(indent) + "  ")
            return [line.replace(":\xa0", ": ") for line in lines]

        out = wrap(self._headline()) + _clause_lines(self._context(), wrap)
        out += ["", text_table(*self._strata_rows()), ""]
        out += wrap("Coverage of each estimator's limits, " + _TABLE_NOTE[0].lower() + _TABLE_NOTE[1:])
        out.append(text_table(*self._coverage_rows()))
        out += [""] + wrap(self._limit_caption()) + [text_table(*self._limit_rows())]
        if self.second_opinion is not None:
            out += [""] + wrap(self._second_opinion_caption()) + [text_table(*self._second_opinion_rows_narrow())]
        fh, fr = self._flag_rows_by_warning()
        if fr:
            out += ["", "Share of replications in which each warning was raised:", text_table(fh, fr)]
        out += _notes_lines(self.notes, wrap)
        return "\n".join(out)

    def _html_body(self) -> str:
        esc = html.escape
        header, rows = self._rows()
        parts = _html_opening(self)
        parts.append(html_table(*self._strata_rows(), caption="The design"))
        parts.append(html_table(header, rows, caption="Coverage and risks by estimator"))
        parts.append(f"<p>{esc(_TABLE_NOTE)}</p>")
        parts.append(html_table(*self._limit_rows(), caption="Upper limit of misstatement, side by side"))
        parts.append(f"<p>{esc(self._limit_caption())}</p>")
        if self.second_opinion is not None:
            sh, sr = self._second_opinion_rows()
            parts.append(html_table(sh, sr, caption=self._second_opinion_caption()))
        fh, fr = self._flag_rows()
        if len(fh) > 1:
            parts.append(html_table(fh, fr, caption="Share of replications in which each warning was raised"))
        if self.notes:
            parts.append("<ul>" + "".join(f"<li>{esc(n)}</li>" for n in self.notes) + "</ul>")
        return "".join(parts)

    def to_dict(self, include_replications: bool = False) -> dict[str, Any]:
        """JSON-ready record; per-replication arrays only with ``include_replications``."""
        out: dict[str, Any] = {
            "schema_version": SCHEMA_VERSION,
            "kind": self.record_kind,
            "estimators": list(self.estimators),
            "model": self.model.to_dict(),
            "strata": json_safe(self.strata),
            "replications_requested": self.replications_requested,
            "replications": self.replications,
            "partial": self.partial,
            "confidence": self.confidence,
            "distribution": self.distribution,
            "ratio_variance": self.ratio_variance,
            "single_item": self.single_item,
            "fixed_population": self.fixed_population,
            "seed": str(self.seed),
            "tolerable": json_safe(self.tolerable),
            "expected": json_safe(self.expected),
            "book_total": json_safe(self.book_total),
            "true_total": json_safe(self.true_total),
            "expected_model_misstatement": json_safe(self.expected_model_misstatement),
            "by_estimator": json_safe(self.by_estimator),
            "flag_rates": json_safe(self.flag_rates),
            "flag_rates_by_stratum": json_safe(self.flag_rates_by_stratum),
            "notes": list(self.notes),
            "second_opinion_replicates": self.second_opinion_replicates,
            "bounds": list(self.bounds),
            "by_bound": json_safe(self.by_bound) if self.by_bound is not None else [],
        }
        if include_replications:
            out["per_replication"] = {
                "true_totals": json_safe(self.true_totals),
                **{
                    name: {m: json_safe(arr[:, j]) for j, m in enumerate(self.estimators)}
                    for name, arr in (
                        ("estimates", self.estimates),
                        ("std_errors", self.std_errors),
                        ("lower", self.lower),
                        ("upper", self.upper),
                        ("lower_bound", self.lower_bound),
                        ("covers", self.covers),
                        ("covers_one_sided", self.covers_one_sided),
                        *((("accepts", self.accepts),) if self.accepts is not None else ()),
                    )
                },
            }
            if self.second_opinion is not None:
                out["per_replication"]["second_opinion"] = {
                    name: (
                        [str(v) for v in arr]
                        if arr.ndim == 1
                        else {m: json_safe(arr[:, j]) for j, m in enumerate(self.estimators)}
                    )
                    for name, arr in self.second_opinion.items()
                }
            if self.bounds and self.bound_upper is not None:
                out["per_replication"]["bounds"] = {
                    name: {b: json_safe(arr[:, j]) for j, b in enumerate(self.bounds)}
                    for name, arr in (
                        ("upper", self.bound_upper),
                        ("covers", self.bound_covers),
                        *((("accepts", self.bound_accepts),) if self.bound_accepts is not None else ()),
                    )
                }
        return out


# Every line of the text summary fits in this many columns (the command line prints it).
_WIDTH = 100

_TABLE_NOTE = (
    "Shares of simulated samples, +/- one Monte Carlo standard error; the actual standard deviation is that "
    "of the estimates around the true total, which the average standard error should match."
)


def _how_and_done(check: Any) -> tuple[str, str]:
    """How a coverage check (either design) drew its populations, and how many replications it ran."""
    how = "one misstated population sampled again and again" if check.fixed_population else (
        "a new misstated population for every replication"
    )
    done = f"{check.replications:,} of {check.replications_requested:,}" if check.partial else f"{check.replications:,}"
    return how, done


def _clause_lines(lines: Sequence[str], wrap: Callable[..., list[str]]) -> list[str]:
    """``lines`` wrapped one clause a line (clauses are separated by "; "), so that no phrase is cut;
    a line's later clauses are indented."""
    out: list[str] = []
    for line in lines:
        clauses = line.split("; ")
        out += wrap(clauses[0] + (";" if len(clauses) > 1 else ""))
        for i, clause in enumerate(clauses[1:], start=2):
            out += wrap(clause + (";" if i < len(clauses) else ""), "  ")
    return out


def _risk_cells(r: Any, has_tm: bool, has_em: bool) -> list[str]:
    """A coverage table row's risks of incorrect acceptance (``has_tm``) and rejection (``has_em``),
    either design, each +/- one Monte Carlo standard error."""
    cells = []
    if has_tm:
        cells.append(_pct_se(r.risk_incorrect_acceptance, r.risk_incorrect_acceptance_mc_se))
    if has_em:
        cells.append(_pct_se(r.risk_incorrect_rejection, r.risk_incorrect_rejection_mc_se))
    return cells


def _notes_lines(notes: Sequence[str], wrap: Callable[..., list[str]]) -> list[str]:
    """The notes of a coverage check (either design) in its plain-text summary; none, no lines."""
    out = ["", "Notes:"] if notes else []
    for n in notes:
        out += wrap(n, "  - ")
    return out


def _html_opening(check: Any) -> list[str]:
    """The headline and context paragraphs that open a coverage check's HTML (either design)."""
    parts = [f"<p><strong>{html.escape(check._headline())}</strong></p>"]
    parts += [f"<p>{html.escape(line)}</p>" for line in check._context()]
    return parts


def _pct_se(p: float, se: float) -> str:
    if p is None or not math.isfinite(p):
        return "n/a"
    return f"{100 * p:.1f}% ± {100 * se:.1f}"


def _percent1(p: float) -> str:
    return f"{100 * p:.1f}%"


# --------------------------------------------------------------------------- the finite-sample bound

#: Plain names of the bounds the coverage check can simulate for a stratified design.
BOUND_NAMES = {"stratified_betting": "stratified betting bound"}


def _bounds_choice(value: object) -> tuple[str, ...] | None:
    """``bounds=`` as a tuple of names (``None``: every bound offered that applies)."""
    if value is None:
        return None
    items = [value] if isinstance(value, str) else list(value) if isinstance(value, Sequence) else None
    if items is None:
        raise ParameterError(
            "bounds", f"got {value!r}; give a bound's name, a list of names, () for none, or None for every "
            f"bound offered ({', '.join(repr(b) for b in core_bound.BOUNDS)})",
        )
    for b in items:
        _choice("bounds", b, core_bound.BOUNDS)
    if len(set(items)) != len(items):
        raise ParameterError("bounds", "a bound is listed twice")
    return tuple(items)


def _overstatement_taint_sup(model: MisstatementModel) -> tuple[float, float]:
    """The largest overstatement taint the model can give an ordinary item, and a large item (0: none).

    The supremum of the taint distribution: the fixed value, the upper end
    of the uniform, 1 for the beta (whose draws lie below 1), the largest
    observed taint; 0 when every misstated item is understated.
    """
    t = model.taint
    if isinstance(t, ObservedTaints):
        ordinary = max(max(t.values), 0.0)
    elif model.understatement_share >= 1.0:
        ordinary = 0.0
    elif isinstance(t, FixedTaint):
        ordinary = t.value
    elif isinstance(t, UniformTaint):
        ordinary = t.high
    else:
        ordinary = 1.0
    large = 0.0
    if model.large_items and model.large_item_probability > 0:
        large = max(model.large_item_taint, 0.0)
    return ordinary, large


#: How the note begins that says why the default left the finite-sample bound out.
BOUND_LEFT_OUT = "The finite-sample bound (stratified betting) was not simulated"


def _choose_bounds(value, design, rates, model, labels) -> tuple[tuple[str, ...], str | None]:
    """The bounds to simulate, and the note saying why the default left one out.

    A bound is refused (named) or left out (default) when a sampled stratum
    holds negative book values, or when the model can overstate an item of
    a sampled stratum by more than its book value (the largest taint of
    :func:`_overstatement_taint_sup`).
    """
    requested = _bounds_choice(value)
    sampled = ~design.full
    ordinary_sup, large_sup = _overstatement_taint_sup(model)
    sup = 0.0
    for h in np.flatnonzero(sampled):
        if rates[h] > 0 and design.counts[h] > design.n_large[h]:
            sup = max(sup, ordinary_sup)
        if design.n_large[h] > 0:
            sup = max(sup, large_sup)
    reason = remedy = None
    for h in np.flatnonzero(sampled):
        negative = int(np.sum(design.book[h] < 0))
        if negative:
            reason = (
                f"stratum {labels[h]!r} is sampled and holds {negative:,} items with a book value below zero "
                "(credit balances), whose audited values are below zero too; the bound assumes audited values "
                "of at least zero"
            )
            remedy = "examine such a stratum in full (or put the credit balances in a stratum examined in full)"
            break
    if reason is None and sup > 1.0:
        reason = (
            f"the misstatement model can overstate an item of a sampled stratum by more than its book value "
            f"(a taint of up to {_percent(sup)}); the bound assumes no item is overstated by more than its book "
            "value (taint at most 100%, audited value at least zero)"
        )
        remedy = "model taints of at most 100%"
    if requested is None:
        if reason is not None:
            return (), (
                f"{BOUND_LEFT_OUT}: {reason}. To simulate it, "
                f"{remedy}."
            )
        return core_bound.BOUNDS, None
    if requested and reason is not None:
        raise ParameterError(
            "bounds", f"the stratified betting bound cannot be simulated here: {reason}. {remedy.capitalize()}, "
            "or leave the bound out (bounds=())",
        )
    return requested, None


def _with_bounds(result: CoverageResult, out, settings, design, note: str | None) -> CoverageResult:
    """``result`` with the bounds' table, per-replication arrays and notes."""
    from dataclasses import replace

    names = settings.bounds
    notes = list(result.notes)
    if note:
        notes.append(note)
    columns = ["bound", "name", "replications", "coverage", "coverage_mc_se", "mean_upper"]
    if settings.tolerable is not None:
        columns += ["acceptance_rate", "acceptance_rate_mc_se", "risk_incorrect_acceptance",
                    "risk_incorrect_acceptance_mc_se", "replications_at_tolerable", "outside_assumption_at_tolerable"]
    if settings.expected is not None:
        columns += ["risk_incorrect_rejection", "risk_incorrect_rejection_mc_se", "replications_at_expected",
                    "outside_assumption_at_expected"]
    if not names or out.bounds is None:
        return replace(result, notes=tuple(notes), by_bound=pd.DataFrame(columns=columns))
    b = out.bounds
    R = out.completed
    rows = []
    inside, outside = {}, {}
    for name, usable in (("tolerable", out.usable_at_tolerable), ("expected", out.usable_at_expected)):
        if usable is not None:
            inside[name] = usable & b["within_at_" + name]
            outside[name] = int(np.sum(usable & ~b["within_at_" + name]))
    for j, name in enumerate(names):
        cov, cov_se, n = _rate(b["covers"][:, j])
        row = {"bound": name, "name": BOUND_NAMES[name], "replications": n, "coverage": cov,
               "coverage_mc_se": cov_se, "mean_upper": float(b["upper"][:, j].mean()) if R else math.nan}
        if "accepts" in b:
            acc, acc_se, _ = _rate(b["accepts"][:, j])
            ria, ria_se, n_tm = _rate(b["accepts_at_tolerable"][inside["tolerable"], j])
            row.update(acceptance_rate=acc, acceptance_rate_mc_se=acc_se, risk_incorrect_acceptance=ria,
                       risk_incorrect_acceptance_mc_se=ria_se, replications_at_tolerable=n_tm,
                       outside_assumption_at_tolerable=outside["tolerable"])
        if "accepts_at_expected" in b:
            rir, rir_se, n_em = _rate(~b["accepts_at_expected"][inside["expected"], j])
            row.update(risk_incorrect_rejection=rir, risk_incorrect_rejection_mc_se=rir_se,
                       replications_at_expected=n_em, outside_assumption_at_expected=outside["expected"])
        rows.append(row)
    for name, k in outside.items():
        if k:
            rest = int(np.sum(getattr(out, "usable_at_" + name))) - k
            notes.append(
                f"At {name} misstatement {k:,} of {R:,} scaled populations had an item of a sampled stratum "
                "overstated by more than the stratum's largest book value (taints multiplied by the scaling "
                "factor), outside the condition the finite-sample bound's guarantee needs (audited values of at "
                f"least zero ensure it); they are left out of the bound's risk at {name}"
                + (f", which rests on the other {rest:,}," if rest else "")
                + " and kept in the estimators'."
                + (
                    f" No population misstated by exactly {name} in this pattern stays within that condition, "
                    "so the bound's risk cannot be measured there (within it, its guarantee keeps the risk of "
                    f"incorrect acceptance at most {_percent(1 - settings.confidence)}); model more misstated "
                    "items with smaller taints to measure it."
                    if not rest and name == "tolerable" else ""
                )
            )
    notes.append(
        "The finite-sample bound was computed on every simulated sample as auditmean.overstatement_bound "
        "computes it, each stratum's largest book value taken from the population; it bounds the "
        "overstatement (understatements count as zero in sampled strata), and is compared here with the net "
        "misstatement, book total minus audited total."
    )

    def frozen(a):
        a = np.array(a)
        a.setflags(write=False)
        return a

    return replace(
        result,
        notes=tuple(notes),
        bounds=tuple(names),
        by_bound=pd.DataFrame(rows, columns=columns),
        bound_upper=frozen(b["upper"]),
        bound_covers=frozen(b["covers"]),
        bound_accepts=frozen(b["accepts"]) if "accepts" in b else None,
    )


# --------------------------------------------------------------------------- the entry point


def simulate_coverage(
    book_values: object,
    strata: object,
    sizes: object,
    model: MisstatementModel,
    *,
    estimators: str | Sequence[str] = METHODS,
    replications: int = 2000,
    confidence: float = 0.95,
    tolerable: float | None = None,
    expected: float | None = None,
    seed: int | None = None,
    fixed_population: bool = False,
    progress: Callable[[int, int], bool | None] | None = None,
    distribution: str = "normal",
    ratio_variance: str = "sample_book_mean",
    single_item: str = "average",
    keep_samples: int = 0,
    second_opinion: bool = False,
    second_opinion_replicates: int = 2000,
    bounds: str | Sequence[str] | None = None,
) -> CoverageResult:
    """Simulate the planned stratified sample on the population's own book values.

    Parameters
    ----------
    book_values:
        One book value per item of the population (numbers, or amounts as
        text read by :func:`auditmean.amounts.parse_amounts`).
    strata:
        One stratum label per item (compared as text, surrounding spaces
        removed).
    sizes:
        The planned sample size of every stratum: a mapping
        ``{stratum: size}``, a Series indexed by stratum, or a table with
        columns ``stratum`` and ``size``. A size equal to the stratum's
        count means the stratum is examined in full. Every stratum needs at
        least one sampled item.
    model:
        The :class:`MisstatementModel`.
    estimators:
        Any of ``"mpu"``, ``"difference"``, ``"ratio"``,
        ``"combined_ratio"``, ``"regression"`` (default: all five).
    replications:
        Number of simulated samples, 1 to 100,000 (default 2,000: a
        coverage near 95% is then known to about +/- 0.5 percentage point).
    confidence:
        Confidence level of the two-sided interval and of the one-sided
        lower bound on the audited total.
    tolerable, expected:
        Tolerable and expected misstatement (money, overstatement
        positive). With ``tolerable``, each replication's conclusion is
        recorded and the actual risk of incorrect acceptance is measured on
        populations scaled to be misstated by exactly ``tolerable``; with
        ``expected`` too (``0 <= expected < tolerable``), the actual risk of
        incorrect rejection at populations scaled to ``expected``. See
        :mod:`auditmean.core.simulation` for the scaling.
    seed:
        A whole number; ``None`` draws a new one, recorded in the result
        so that the run can be repeated.
    fixed_population:
        ``False`` (default): every replication draws a new misstated
        population from the model, then its sample; the true total changes
        from one replication to the next. ``True``: one population is drawn
        (:meth:`MisstatementModel.audited_values` with the same seed) and
        sampled again and again, which answers the question for that one
        population and is faster on large populations.
    progress:
        ``progress(done, total)`` is called after each batch of
        replications; returning ``False`` stops the run, keeping what was
        completed (the result is then marked partial).
    distribution, ratio_variance, single_item:
        As in :func:`auditmean.estimate_total` (``"normal"`` or ``"t"``;
        ``"sample_book_mean"`` or ``"population_book_mean"``; ``"average"``,
        ``"zero"`` or ``"error"``).
    keep_samples:
        Keep the examined items of the first ``keep_samples`` replications
        (at most 100) in ``kept_samples``.
    second_opinion:
        Also measure the second-opinion interval: the rescaling bootstrap
        with percentile limits, as :func:`auditmean.evaluation.second_opinion`
        computes it (:mod:`auditmean.core.bootstrap`), on every
        replication's sample, with ``second_opinion_replicates`` bootstrap
        replicates (at least 200; default 2,000 as there). Slow: the
        bootstrap is run once per replication, estimator and scenario
        (about 20 ms each with 1,000 replicates on a sample of 400 items),
        so use few replications and estimators.
    bounds:
        The bounds that hold in finite samples to simulate beside the
        estimators' normal limits: ``"stratified_betting"``, the bound of
        :func:`auditmean.overstatement_bound` (stratum-wise betting tests for
        sampling without replacement combined by a union-intersection test),
        computed on every simulated sample. ``None`` (default): every bound
        offered whose assumption the
        model and the population meet (a note says why one is left out);
        ``()``: none. The bound assumes that no item of a sampled stratum is
        overstated by more than its book value, so a named bound is refused
        (ParameterError) when a sampled stratum holds book values below zero
        (credit balances: their audited values are below zero too) or when
        the model can overstate an item of a sampled stratum by more than its
        book value (a taint above 100%). Understatements are allowed. Each
        stratum's largest book value, which the bound needs, is taken from
        the population. See :mod:`auditmean.core.bound_simulation`; the
        results are in ``CoverageResult.by_bound``.

    Returns
    -------
    CoverageResult

    Examples
    --------
    >>> import numpy as np
    >>> book = np.random.default_rng(1).lognormal(6, 1, 5_000)
    >>> strata = np.where(book > 2_000, "top", "rest")
    >>> model = MisstatementModel(error_rate=0.05, taint=FixedTaint(0.5))
    >>> r = simulate_coverage(book, strata, {"top": int((book > 2_000).sum()), "rest": 80},
    ...                       model, estimators=["mpu", "difference"], replications=500, seed=7)
    >>> r.replications, r.by_estimator["coverage"].between(0, 1).all()
    (500, np.True_)
    """
    # ---- parameters
    if not isinstance(model, MisstatementModel):
        raise ParameterError("model", f"got {type(model).__name__}; build a MisstatementModel")
    methods = _estimators(estimators)
    if isinstance(replications, bool) or not isinstance(replications, numbers.Integral) or not (
        1 <= int(replications) <= MAX_REPLICATIONS
    ):
        raise ParameterError("replications", f"got {replications!r}; give a whole number from 1 to {MAX_REPLICATIONS:,}")
    R = int(replications)
    conf, TM, EM, seed_value = _check_run(confidence, tolerable, expected, seed, fixed_population, progress)
    _choice("distribution", distribution, ("normal", "t"))
    _choice("ratio_variance", ratio_variance, ("sample_book_mean", "population_book_mean"))
    _choice("single_item", single_item, ("average", "zero", "error"))
    if isinstance(keep_samples, bool) or not isinstance(keep_samples, numbers.Integral) or not (0 <= keep_samples <= 100):
        raise ParameterError("keep_samples", f"got {keep_samples!r}; give a whole number from 0 to 100")
    keep = min(int(keep_samples), R)
    if not isinstance(second_opinion, bool):
        raise ParameterError("second_opinion", f"got {second_opinion!r}; give True or False")
    boot = 0
    if second_opinion:
        if (
            isinstance(second_opinion_replicates, bool)
            or not isinstance(second_opinion_replicates, numbers.Integral)
            or second_opinion_replicates < 200
        ):
            raise ParameterError(
                "second_opinion_replicates",
                f"got {second_opinion_replicates!r}; use a whole number of at least 200 (e.g. 2000)",
            )
        boot = int(second_opinion_replicates)

    # ---- population and design
    book = _book_array(book_values)
    item_codes, item_labels = _stratum_codes(strata, book.shape[0])
    order_labels, planned = _sizes_table(sizes)
    index = {lab: h for h, lab in enumerate(order_labels)}
    names = [lab for lab in item_labels if lab not in index]
    if names:
        raise InputError(
            f"stratum {', '.join(repr(x) for x in names[:5])} of the population has no planned size "
            f"(the sizes give {', '.join(repr(x) for x in order_labels[:10])})",
            table="sizes", stratum=names[0],
        )
    codes = np.array([index[lab] for lab in item_labels], dtype=np.intp)[item_codes]
    H = len(order_labels)
    counts = np.bincount(codes, minlength=H).astype(np.int64)
    for h in range(H):
        if counts[h] == 0:
            raise InputError("a size is planned for this stratum but the population has no item in it",
                             table="sizes", stratum=order_labels[h])
        if planned[h] < 1:
            raise InputError(
                f"planned size {planned[h]}; every stratum needs at least one sampled item "
                f"(or its count, {counts[h]:,}, to examine it in full)",
                table="sizes", stratum=order_labels[h], column="size",
            )
        if planned[h] > counts[h]:
            raise InputError(
                f"planned size {planned[h]:,} but the stratum holds only {counts[h]:,} items",
                table="sizes", stratum=order_labels[h], column="size",
            )
    full = planned >= counts
    for m in methods:
        need = minimum_items_for_variance(m)
        thin = ~full & (planned < need)
        if thin.any():
            names = ", ".join(repr(order_labels[h]) for h in np.flatnonzero(thin)[:10])
            if single_item == "error":
                raise MethodNotApplicable(
                    m, f"stratum {names} has fewer than {need} planned items, so its variance cannot be "
                    f"estimated; plan more items, or choose single_item='average'",
                    stratum=order_labels[int(np.flatnonzero(thin)[0])],
                )
            if single_item == "average" and not np.any(~full & (planned >= need)):
                raise MethodNotApplicable(
                    m, f"no stratum has the {need} or more planned items needed to estimate a variance, "
                    f"so there is nothing to average for stratum {names}; plan more items",
                )
    if model.large_items > book.shape[0]:
        raise ParameterError(
            "model.large_items", f"got {model.large_items:,}; the population has only {book.shape[0]:,} items"
        )
    rates = model.stratum_rates(order_labels)
    large = core_ms.largest_items(book, model.large_items)
    is_large = np.zeros(book.shape[0], dtype=bool)
    is_large[large] = True
    large_rank = np.full(book.shape[0], -1, dtype=np.int64)
    large_rank[large] = np.arange(large.size)

    items_h, book_h, n_large = [], [], np.zeros(H, dtype=np.int64)
    by_code = np.argsort(codes, kind="stable")
    edges = np.concatenate([[0], np.cumsum(counts)])
    for h in range(H):
        members = by_code[edges[h]: edges[h + 1]]
        ordinary = members[~is_large[members]]
        big = members[is_large[members]]
        big = big[np.argsort(large_rank[big])]
        order = np.concatenate([ordinary, big])
        items_h.append(order)
        book_h.append(book[order])
        n_large[h] = big.size
    book_totals = np.array([float(np.sum(b)) for b in book_h])
    design = core_sim.Design(
        counts=counts,
        sizes=planned,
        book_totals=book_totals,
        book=tuple(book_h),
        items=tuple(items_h),
        n_large=n_large,
        rounding=_ROUNDING_RTOL * float(np.sum(np.abs(book))),
        largest=np.array([float(np.max(b)) if b.size else 0.0 for b in book_h]),
    )
    chosen, bound_note = _choose_bounds(bounds, design, rates, model, order_labels)
    settings = core_sim.Settings(
        methods=methods,
        confidence=conf,
        distribution=distribution,
        ratio_variance=ratio_variance,
        single_item=single_item,
        tolerable=TM,
        expected=EM,
        second_opinion_replicates=boot,
        bounds=chosen,
    )
    item_rates = rates[codes]
    expected_mis = core_ms.expected_misstatement(
        book, item_rates, model._mean_taint(), large, model.large_item_taint, model.large_item_probability
    )

    # ---- run
    if fixed_population:
        tau = model._draw_taints(np.random.default_rng(seed_value), book, item_rates)
        amounts = book * tau
        fixed = [amounts[order] for order in items_h]
        out = core_sim.run_simulation(design, settings, R, seed_value, misstatement=fixed, progress=progress, keep=keep)
    else:
        out = core_sim.run_simulation(
            design, settings, R, seed_value, process=model._process(rates), progress=progress, keep=keep
        )

    result = _result(out, design, settings, model, order_labels, rates, seed_value, fixed_population, expected_mis)
    return _with_bounds(result, out, settings, design, bound_note)


def _rate(flags: np.ndarray) -> tuple[float, float, int]:
    n = int(flags.size)
    if n == 0:
        return math.nan, math.nan, 0
    p = float(flags.mean())
    return p, math.sqrt(p * (1.0 - p) / n), n


def _result(out, design, settings, model, labels, rates, seed, fixed, expected_mis) -> CoverageResult:
    R = out.completed
    notes: list[str] = []
    rows = []
    for j, m in enumerate(out.methods):
        ok = np.isfinite(out.total[:, j]) & np.isfinite(out.std_error[:, j])
        lost = int(R - ok.sum())
        if lost:
            notes.append(
                f"{METHOD_NAMES[m]}: {lost:,} of {R:,} replications could not be estimated (for example "
                f"a ratio over sampled book values adding up to zero) and are left out of its figures."
            )
        cov, cov_se, n_ok = _rate(out.covers[ok, j])
        cov1, cov1_se, _ = _rate(out.covers_one_sided[ok, j])
        err = out.total[ok, j] - out.true_totals[ok]
        bias = float(err.mean()) if n_ok else math.nan
        sd = float(err.std(ddof=1)) if n_ok > 1 else math.nan
        row = {
            "estimator": m,
            "name": METHOD_NAMES[m],
            "replications": n_ok,
            "coverage": cov,
            "coverage_mc_se": cov_se,
            "one_sided_coverage": cov1,
            "one_sided_coverage_mc_se": cov1_se,
            "bias": bias,
            "bias_mc_se": sd / math.sqrt(n_ok) if n_ok > 1 else math.nan,
            "mean_std_error": float(out.std_error[ok, j].mean()) if n_ok else math.nan,
            "error_sd": sd,
        }
        if out.accepts is not None:
            acc, acc_se, _ = _rate(out.accepts[ok, j])
            use = ok & out.usable_at_tolerable
            ria, ria_se, n_tm = _rate(out.accepts_at_tolerable[use, j])
            row.update(
                acceptance_rate=acc,
                acceptance_rate_mc_se=acc_se,
                risk_incorrect_acceptance=ria,
                risk_incorrect_acceptance_mc_se=ria_se,
                replications_at_tolerable=n_tm,
            )
        if out.accepts_at_expected is not None:
            use = ok & out.usable_at_expected
            rir, rir_se, n_em = _rate(~out.accepts_at_expected[use, j])
            row.update(
                risk_incorrect_rejection=rir,
                risk_incorrect_rejection_mc_se=rir_se,
                replications_at_expected=n_em,
            )
        if out.second_opinion is not None:
            so = out.second_opinion
            p, se, _ = _rate(so["covers"][ok, j])
            p1, se1, _ = _rate(so["covers_one_sided"][ok, j])
            row.update(
                second_opinion_coverage=p,
                second_opinion_coverage_mc_se=se,
                second_opinion_one_sided_coverage=p1,
                second_opinion_one_sided_coverage_mc_se=se1,
            )
            if "accepts_at_tolerable" in so:
                ria, ria_se, _ = _rate(so["accepts_at_tolerable"][ok & out.usable_at_tolerable, j])
                row.update(
                    second_opinion_risk_incorrect_acceptance=ria,
                    second_opinion_risk_incorrect_acceptance_mc_se=ria_se,
                )
            if "accepts_at_expected" in so:
                rir, rir_se, _ = _rate(~so["accepts_at_expected"][ok & out.usable_at_expected, j])
                row.update(
                    second_opinion_risk_incorrect_rejection=rir,
                    second_opinion_risk_incorrect_rejection_mc_se=rir_se,
                )
        rows.append(row)
    by_estimator = pd.DataFrame(rows)

    if out.stopped_early:
        notes.insert(0, f"Stopped early after {R:,} of {out.requested:,} replications: the figures cover those only.")
    for name, target, usable, scale in (
        ("tolerable", settings.tolerable, out.usable_at_tolerable, out.scale_at_tolerable),
        ("expected", settings.expected, out.usable_at_expected, out.scale_at_expected),
    ):
        if target is None or usable is None:
            continue
        bad = int((~usable).sum())
        good = scale[usable]
        if target == 0:
            notes.append("At expected misstatement 0 the populations were taken without any misstatement.")
            continue
        if bad:
            notes.append(
                f"{bad:,} of {R:,} populations had no net overstatement, so they could not be scaled to "
                f"the {name} misstatement and are left out of that risk."
            )
        if good.size:
            if fixed:
                notes.append(
                    f"At {name} misstatement every taint of the population was multiplied by {good[0]:.4g}."
                )
            else:
                notes.append(
                    f"At {name} misstatement each population's taints were multiplied by a factor making its "
                    f"misstatement exactly {format_number(target)} (median factor {float(np.median(good)):.4g})."
                )
    thin_note = [h for h in range(len(labels)) if not design.full[h] and design.sizes[h] < 2]
    if thin_note and settings.single_item == "average":
        notes.append(
            "Strata with one planned item get the average variance term of the others "
            f"({', '.join(repr(labels[h]) for h in thin_note[:10])})."
        )

    flag_rows, stratum_rows = [], []
    for m in out.methods:
        for code in (*core_sim.STRATUM_FLAGS, *core_sim.ESTIMATE_FLAGS):
            if code in ("no-differences", "few-differences") and m == "mpu":
                continue
            if code == "slope-undefined" and m != "regression":
                continue
            if code == "ratio-undefined" and m not in ("ratio", "combined_ratio"):
                continue
            k = out.flag_any[m][code]
            flag_rows.append({"estimator": m, "flag": code, "replications_flagged": k, "rate": k / R if R else math.nan,
                              "meaning": FLAG_CODES[code]})
            if code in core_sim.STRATUM_FLAGS:
                for h, lab in enumerate(labels):
                    kh = int(out.flag_counts[m][code][h])
                    stratum_rows.append({"estimator": m, "flag": code, "stratum": lab, "replications_flagged": kh,
                                         "rate": kh / R if R else math.nan})
    strata = pd.DataFrame(
        {
            "stratum": labels,
            "count": design.counts,
            "book_total": design.book_totals,
            "size": design.sizes,
            "examined_in_full": design.full,
            "error_rate": rates,
            "large_items": design.n_large,
        }
    )
    kept = None
    if out.kept is not None:
        rep, item, code, bk, aud = out.kept
        kept = pd.DataFrame(
            {
                "replication": rep.astype(np.int64),
                "item": item.astype(np.int64),
                "stratum": np.asarray(labels, dtype=object)[code],
                "book_value": bk,
                "audited_value": aud,
            }
        )
    book_total = float(np.sum(design.book_totals))
    arrays = {}
    for name, arr in (
        ("true_totals", out.true_totals),
        ("estimates", out.total),
        ("std_errors", out.std_error),
        ("lower", out.lower),
        ("upper", out.upper),
        ("lower_bound", out.lower_bound),
        ("covers", out.covers),
        ("covers_one_sided", out.covers_one_sided),
        ("accepts", out.accepts),
    ):
        if arr is not None:
            arr = np.array(arr)
            arr.setflags(write=False)
        arrays[name] = arr
    second = None
    if out.second_opinion is not None:
        second = {}
        for key in ("lower", "upper", "lower_bound", "covers", "covers_one_sided", "accepts", "seed"):
            if key in out.second_opinion:
                a = np.array(out.second_opinion[key])
                a.setflags(write=False)
                second[key] = a
    return CoverageResult(
        estimators=out.methods,
        model=model,
        strata=strata,
        replications_requested=out.requested,
        replications=R,
        partial=out.stopped_early,
        confidence=settings.confidence,
        distribution=settings.distribution,
        ratio_variance=settings.ratio_variance,
        single_item=settings.single_item,
        fixed_population=fixed,
        seed=seed,
        tolerable=settings.tolerable,
        expected=settings.expected,
        book_total=book_total,
        true_total=float(np.mean(out.true_totals)) if R else math.nan,
        expected_model_misstatement=expected_mis,
        by_estimator=by_estimator,
        flag_rates=pd.DataFrame(flag_rows),
        flag_rates_by_stratum=pd.DataFrame(stratum_rows),
        notes=tuple(notes),
        kept_samples=kept,
        second_opinion_replicates=settings.second_opinion_replicates,
        second_opinion=second,
        **arrays,
    )
