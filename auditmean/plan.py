"""Sample-size planning: ``sample_size``, ``allocate`` and ``plan_sample``.

The names of these functions, their arguments and their return types are a
contract other parts of auditmean and outside scripts rely on.

``plan_sample`` reads only the per-stratum statistics of a
:class:`~auditmean.strata.Strata` record (or of an equivalent table), never
the items, so changing a planning parameter recomputes a plan in well under
a millisecond per stratum whatever the population's size. The formulas live
in :mod:`auditmean.core.sizing` and :mod:`auditmean.core.normality`.
"""

from __future__ import annotations

import html
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from numbers import Integral, Real
from typing import Any, ClassVar

import numpy as np
import pandas as pd

from auditmean._frames import (
    duplicated_rows,
    integer_column,
    label_column,
    numeric_column,
    require_columns,
)
from auditmean._records import SCHEMA_VERSION, RecordMixin, format_number, html_table, text_table
from auditmean.core import normality as nrm
from auditmean.core import sizing as sz
from auditmean.core.flags import Flag
from auditmean.errors import InputError, ParameterError, RecordError

__all__ = [
    "ESTIMATION_METHODS",
    "MisstatementPattern",
    "Plan",
    "allocate",
    "plan_sample",
    "sample_size",
]

#: Estimation methods a plan can be made for.
ESTIMATION_METHODS = ("mpu", "difference", "ratio")

PLAN_COLUMNS = ("stratum", "count", "book_total", "std_dev", "size", "take_all", "skewness", "minimum")

#: ``plan_sample(minimum=CHECKS_MINIMUM)``: each stratum's minimum is the smallest size that passes
#: the normal-approximation checks (:func:`auditmean.core.normality.size_passing_checks`).
CHECKS_MINIMUM = "checks"

_TOP_KIND = "top"

_SOURCE_RULE_OF_THUMB = "rule of thumb, common practice, no published source"
_SOURCE_COCHRAN = "Cochran 1977, Sampling Techniques, 3rd ed., section 2.15"
_SOURCE_SUGDEN = (
    "Sugden, Smith and Jones 2000, Journal of the Royal Statistical Society B 62(4), 787-793 "
    "(the constant 28 quoted from memory)"
)


# ---------------------------------------------------------------------------
# parameter checks
# ---------------------------------------------------------------------------


def _number(name: str, value: object) -> float:
    if isinstance(value, bool) or not isinstance(value, Real) or not math.isfinite(float(value)):
        raise ParameterError(name, f"must be a finite number, got {value!r}")
    return float(value)


def _risk(name: str, value: object) -> float:
    v = _number(name, value)
    if not 0.0 < v < 1.0:
        raise ParameterError(name, f"must be a probability strictly between 0 and 1, got {value!r}")
    return v


def _misstatements(tolerable: object, expected: object) -> tuple[float, float]:
    em = _number("expected", expected)
    if em < 0:
        raise ParameterError("expected", f"must not be negative, got {expected!r}")
    tm = _number("tolerable", tolerable)
    if not tm > em:
        raise ParameterError(
            "tolerable", f"must exceed the expected misstatement ({format_number(em)}), got {format_number(tm)}"
        )
    return tm, em


def _risks(ria: object, rir: object) -> tuple[float, float | None]:
    a = _risk("risk_incorrect_acceptance", ria)
    r = None if rir is None else _risk("risk_incorrect_rejection", rir)
    return a, r


def _whole(name: str, value: object, minimum: int = 0) -> int:
    if isinstance(value, bool) or not isinstance(value, Integral):
        if isinstance(value, Real) and not isinstance(value, bool) and float(value).is_integer():
            value = int(value)
        else:
            raise ParameterError(name, f"must be a whole number, got {value!r}")
    if int(value) < minimum:
        raise ParameterError(name, f"must be at least {minimum}, got {value!r}")
    return int(value)


# ---------------------------------------------------------------------------
# sample_size
# ---------------------------------------------------------------------------


def sample_size(
    std_dev: float,
    count: int,
    tolerable: float,
    expected: float = 0.0,
    risk_incorrect_acceptance: float = 0.10,
    risk_incorrect_rejection: float | None = None,
) -> int:
    """Items to examine for an unstratified population.

    Parameters
    ----------
    std_dev:
        Expected standard deviation of the values averaged (audited values
        for mean-per-unit; differences or ratio residuals otherwise); not
        negative.
    count:
        Number of items in the population (a whole number above 0).
    tolerable:
        Tolerable misstatement; must exceed ``expected``.
    expected:
        Expected misstatement (not negative).
    risk_incorrect_acceptance:
        Risk of incorrect acceptance, strictly between 0 and 1.
    risk_incorrect_rejection:
        Risk of incorrect rejection, strictly between 0 and 1, or ``None``
        to plan on the risk of incorrect acceptance alone.

    Returns
    -------
    int
        ``n = n0 / (1 + n0 / N)`` rounded up, with
        ``n0 = ((z_A + z_R) S N / (TM - EM))^2`` (``z_R = 0`` without a risk
        of incorrect rejection); never above ``count``. See
        :func:`auditmean.core.sizing.sample_size` for the sources.

    Raises
    ------
    ParameterError
        A value outside what is accepted (the message names it).

    Examples
    --------
    >>> sample_size(std_dev=50.0, count=2000, tolerable=10000.0, risk_incorrect_acceptance=0.05)
    239
    """
    s = _number("std_dev", std_dev)
    if s < 0:
        raise ParameterError("std_dev", f"must not be negative, got {std_dev!r}")
    n = _whole("count", count, 1)
    tm, em = _misstatements(tolerable, expected)
    ria, rir = _risks(risk_incorrect_acceptance, risk_incorrect_rejection)
    return sz.sample_size(s, n, tm, em, ria, rir).size


# ---------------------------------------------------------------------------
# allocate
# ---------------------------------------------------------------------------


def _strata_arrays(strata: object, table: str = "strata", need_std: bool = True):
    if not isinstance(strata, pd.DataFrame):
        raise InputError(f"expected a DataFrame, got {type(strata).__name__}", table=table)
    cols = ["stratum", "count"] + (["std_dev"] if need_std else [])
    require_columns(strata, cols, table)
    labels = label_column(strata, "stratum", table)
    dup = duplicated_rows(labels)
    if dup:
        raise InputError("each stratum must appear once", table=table, column="stratum", rows=dup)
    counts = integer_column(strata, "count", table, minimum=0)
    if not need_std:
        return labels, counts, np.zeros(counts.size)
    raw = pd.to_numeric(strata["std_dev"], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    # A stratum of at most one item has no spread: its standard deviation may be left blank.
    single = np.isnan(raw) & (counts <= 1) & strata["std_dev"].isna().to_numpy()
    raw = np.where(single, 0.0, raw)
    bad = ~np.isfinite(raw) | (raw < 0)
    if bad.any():
        h = int(np.flatnonzero(bad)[0])
        raise InputError(
            f"standard deviation must be a finite number not below 0, got {strata['std_dev'].iloc[h]!r}",
            table=table,
            column="std_dev",
            stratum=labels.iloc[h],
        )
    return labels, counts, raw


def allocate(strata: pd.DataFrame, total: int, rule: str = "neyman", minimum: int = 0) -> pd.Series:
    """Share a total sample size among strata.

    Parameters
    ----------
    strata:
        DataFrame with columns ``stratum`` (unique labels), ``count`` (whole
        numbers, not negative) and ``std_dev`` (not negative; needed by the
        Neyman rule, and may be blank for a stratum of at most one item).
    total:
        Items to share: a whole number from the sum of the per-stratum
        minimums to the sum of the counts.
    rule:
        ``"neyman"`` (``n_h`` proportional to ``N_h S_h``), ``"proportional"``
        (to ``N_h``) or ``"equal"``.
    minimum:
        Fewest items per stratum; a stratum with fewer items is examined in
        full.

    Returns
    -------
    pandas.Series
        Whole sizes (int64) indexed by stratum (labels as given), named
        ``size``, adding up exactly to ``total``; each between
        ``min(minimum, N_h)`` and ``N_h``.

    Notes
    -----
    ``n_h = clip(lambda w_h, m_h, N_h)`` at the level ``lambda`` that uses
    up ``total``: a stratum whose share exceeds its count is examined in
    full and the surplus goes to the others (Cochran 1977, section 5.8), a
    stratum below the minimum is raised to it; strata with ``S_h = 0`` get
    the minimum under the Neyman rule. Sizes are rounded by largest
    remainders. See :mod:`auditmean.core.sizing` for the details and sources.

    Examples
    --------
    >>> t = pd.DataFrame({"stratum": ["a", "b"], "count": [100, 300], "std_dev": [30.0, 10.0]})
    >>> allocate(t, 60).tolist()
    [30, 30]
    """
    rule = _rule(rule)
    labels, counts, std = _strata_arrays(strata, need_std=(rule == "neyman"))
    minimum = _whole("minimum", minimum, 0)
    total = _whole("total", total, 0)
    floor = int(np.minimum(minimum, counts).sum())
    if total > int(counts.sum()):
        raise ParameterError("total", f"{total:,} is more than the {int(counts.sum()):,} items in the strata")
    if total < floor:
        raise ParameterError(
            "total", f"{total:,} is less than the {floor:,} items the minimum of {minimum} per stratum needs"
        )
    sizes = sz.allocate(total, counts, std, rule, minimum)
    return pd.Series(sizes, index=pd.Index(labels.tolist(), name="stratum"), name="size", dtype=np.int64)


def _rule(rule: object) -> str:
    if rule not in sz.ALLOCATION_RULES:
        raise ParameterError(
            "rule",
            f"must be one of {', '.join(repr(r) for r in sz.ALLOCATION_RULES)}, got {rule!r}",
        )
    return str(rule)


# ---------------------------------------------------------------------------
# plan_sample
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class MisstatementPattern:
    """An assumed pattern of misstatement for planning difference, ratio or mean-per-unit estimation.

    Each item is taken to be misstated, independently of the others, with
    probability ``error_rate``, by the fraction ``typical_taint`` of its
    book value (audited = book x (1 - taint)); a positive taint is an
    overstatement. See :func:`plan_sample` for the standard deviations this
    implies.
    """

    error_rate: float
    typical_taint: float


def _pattern_std_devs(method: str, pattern: MisstatementPattern, N, mean, S) -> np.ndarray:
    r"""Expected standard deviation per stratum of what each method averages, under ``pattern``.

    With ``z_i = x_i (alpha + beta B_i)``, ``B_i`` independent Bernoulli(p),
    ``m = alpha + beta p`` and ``v = beta^2 p (1 - p)``, the expected
    finite-population variance (divisor ``N - 1``) of the ``z_i`` is

    .. math::  E[S_z^2] = v \overline{x^2} + m^2 S_x^2,
               \qquad \overline{x^2} = \frac{1}{N}\sum x_i^2
               = \frac{N-1}{N} S_x^2 + \bar x^2

    (derived here: expand ``sum (z_i - zbar)^2`` and take expectations
    term by term). With ``t`` the taint:

    * mean-per-unit, audited values ``y = x (1 - t B)``: ``alpha = 1``,
      ``beta = -t``;
    * difference ``d = y - x = -t x B``: ``alpha = 0``, ``beta = -t``;
    * ratio residual ``e = y - R x`` with the pattern's ratio
      ``R = 1 - p t``: ``alpha = p t``, ``beta = -t``, so ``m = 0`` and
      ``E[S_e^2] = t^2 p (1 - p) xbar2`` (the residual variance in the
      ratio estimator's variance, Cochran 1977, section 6.3).

    The pattern is the user's assumption; the formula only turns it into
    standard deviations from the known book values.
    """
    p, t = pattern.error_rate, pattern.typical_taint
    Nf = np.asarray(N, dtype=float)
    S2 = np.square(np.nan_to_num(np.asarray(S, dtype=float), nan=0.0))
    with np.errstate(invalid="ignore", divide="ignore"):
        x2 = np.where(Nf > 0, (Nf - 1.0) / np.maximum(Nf, 1.0) * S2 + np.square(mean), 0.0)
    beta = -t
    alpha = {"mpu": 1.0, "difference": 0.0, "ratio": p * t}[method]
    m = alpha + beta * p
    v = beta * beta * p * (1.0 - p)
    return np.sqrt(np.maximum(v * x2 + m * m * S2, 0.0))


@dataclass(frozen=True, eq=False)
class Plan(RecordMixin):
    """A sample-size plan for a stratified population.

    Attributes
    ----------
    method:
        Estimation method planned for: ``"mpu"``, ``"difference"`` or ``"ratio"``.
    allocation:
        ``"neyman"``, ``"proportional"`` or ``"equal"``.
    minimum:
        Fewest items per sampled stratum: a whole number, or ``"checks"``
        (each stratum's own minimum from the normal-approximation checks,
        in ``table["minimum"]``).
    tolerable, expected:
        Tolerable and expected misstatement.
    risk_incorrect_acceptance, risk_incorrect_rejection:
        The risks (``risk_incorrect_rejection`` may be ``None``).
    z_acceptance, z_rejection:
        One-sided and two-sided normal quantiles of the risks
        (``z_rejection`` is ``None`` without a risk of incorrect rejection).
    target_std_error:
        Standard error of the estimated total the plan aims at:
        ``(TM - EM) / (z_A + z_R)``.
    planned_allowance:
        Planned allowance for sampling risk (see
        :func:`auditmean.core.sizing.planned_allowance`).
    achieved_std_error:
        Standard error of the estimated total with the planned whole sizes,
        if the standard deviations are as assumed; never above the target.
    std_dev_source:
        ``"book"``, ``"pilot"`` or ``"pattern"``.
    pilot_std_devs:
        The pilot standard deviations given, by stratum, or ``None``.
    error_rate, typical_taint:
        The assumed misstatement pattern, or ``None``.
    table:
        One row per stratum: ``stratum``, ``count``, ``book_total``,
        ``std_dev`` (the one used for sizing), ``size``, ``take_all``
        (examined in full), ``skewness`` (of the book values), ``minimum``
        (the fewest items the stratum was allowed).
    total_size:
        Items to examine in all (the sum of ``table["size"]``).
    population_count, book_total:
        Items and book total of the population (``book_total`` is NaN when
        the strata table gave no book totals).
    checks:
        Planning-time checks of the normal approximation, as
        :class:`~auditmean.core.flags.Flag` records.
    notes:
        Plain sentences about choices the inputs forced.
    """

    record_kind: ClassVar[str] = "plan"

    method: str
    allocation: str
    minimum: int | str
    tolerable: float
    expected: float
    risk_incorrect_acceptance: float
    risk_incorrect_rejection: float | None
    z_acceptance: float
    z_rejection: float | None
    target_std_error: float
    planned_allowance: float
    achieved_std_error: float
    std_dev_source: str
    pilot_std_devs: dict[str, float] | None
    error_rate: float | None
    typical_taint: float | None
    table: pd.DataFrame
    total_size: int
    population_count: int
    book_total: float
    checks: tuple[Flag, ...] = ()
    notes: tuple[str, ...] = field(default=())

    @property
    def sizes(self) -> dict[str, int]:
        """Sample size per stratum, as :func:`auditmean.selection.select` takes it."""
        return {str(s): int(n) for s, n in zip(self.table["stratum"], self.table["size"])}

    # --- JSON ---------------------------------------------------------------
    @classmethod
    def from_dict(cls, d: Mapping[str, Any], source: str = "plan record") -> Plan:
        """Rebuild a plan from :meth:`to_dict` output (for example read back from JSON).

        Raises
        ------
        RecordError
            The mapping is not a plan of a schema version this release reads,
            or a field is missing (``source`` names where it came from).
        """
        if not isinstance(d, Mapping) or d.get("kind") != cls.record_kind:
            got = d.get("kind") if isinstance(d, Mapping) else type(d).__name__
            raise RecordError(source, f"not a plan record (kind {got!r})")
        if d.get("schema_version") != SCHEMA_VERSION:
            raise RecordError(
                source, f"schema version {d.get('schema_version')!r}; this release reads version {SCHEMA_VERSION}"
            )
        try:
            rows = list(d["table"])
            table = pd.DataFrame(rows, columns=list(PLAN_COLUMNS))
            table = pd.DataFrame(
                {
                    "stratum": pd.Series([str(s) for s in table["stratum"]], dtype=object),
                    "count": table["count"].astype(np.int64),
                    "book_total": _floats(table["book_total"]),
                    "std_dev": _floats(table["std_dev"]),
                    "size": table["size"].astype(np.int64),
                    "take_all": table["take_all"].astype(bool),
                    "skewness": _floats(table["skewness"]),
                    # plans saved before the per-stratum minimum was recorded
                    "minimum": _minimum_column(table["minimum"], d.get("minimum")),
                }
            )
            pilot = d["pilot_std_devs"]
            return cls(
                method=str(d["method"]),
                allocation=str(d["allocation"]),
                minimum=d["minimum"] if d["minimum"] == CHECKS_MINIMUM else int(d["minimum"]),
                tolerable=float(d["tolerable"]),
                expected=float(d["expected"]),
                risk_incorrect_acceptance=float(d["risk_incorrect_acceptance"]),
                risk_incorrect_rejection=_opt_float(d["risk_incorrect_rejection"]),
                z_acceptance=float(d["z_acceptance"]),
                z_rejection=_opt_float(d["z_rejection"]),
                target_std_error=float(d["target_std_error"]),
                planned_allowance=float(d["planned_allowance"]),
                achieved_std_error=_nan_if_none(d["achieved_std_error"]),
                std_dev_source=str(d["std_dev_source"]),
                pilot_std_devs=None if pilot is None else {str(k): float(v) for k, v in pilot.items()},
                error_rate=_opt_float(d["error_rate"]),
                typical_taint=_opt_float(d["typical_taint"]),
                table=table,
                total_size=int(d["total_size"]),
                population_count=int(d["population_count"]),
                book_total=_nan_if_none(d["book_total"]),
                checks=tuple(Flag.from_dict(f) for f in d["checks"]),
                notes=tuple(str(n) for n in d["notes"]),
            )
        except (KeyError, TypeError, ValueError) as exc:
            raise RecordError(source, f"incomplete or malformed plan record ({exc})") from None

    # --- display ------------------------------------------------------------
    _HEADER: ClassVar[tuple[str, ...]] = ("stratum", "items", "book total", "std dev", "sample", "examined in full")

    def _rows(self) -> list[list[str]]:
        return [
            [
                str(r.stratum),
                format_number(int(r.count)),
                format_number(r.book_total),
                format_number(r.std_dev),
                format_number(int(r.size)),
                "yes" if r.take_all else "",
            ]
            for r in self.table.itertuples(index=False)
        ]

    def _lines(self) -> list[str]:
        rir = (
            f", risk of incorrect rejection {self.risk_incorrect_rejection:g}"
            if self.risk_incorrect_rejection is not None
            else ""
        )
        source = {
            "book": "book values",
            "pilot": "pilot standard deviations",
            "pattern": f"assumed error rate {self.error_rate:g}, typical taint {self.typical_taint:g}"
            if self.error_rate is not None
            else "assumed pattern",
        }.get(self.std_dev_source, self.std_dev_source)
        return [
            f"Plan for {self.method} estimation, {self.allocation} allocation, {self._minimum_words()}",
            f"Tolerable misstatement {format_number(self.tolerable)}, expected {format_number(self.expected)}, "
            f"risk of incorrect acceptance {self.risk_incorrect_acceptance:g}{rir}",
            f"Standard deviations from {source}",
            f"Sample size {self.total_size:,} of {self.population_count:,} items; planned allowance for "
            f"sampling risk {format_number(self.planned_allowance)}; standard error aimed at "
            f"{format_number(self.target_std_error)}, reached with these sizes {format_number(self.achieved_std_error)}",
        ]

    def _minimum_words(self) -> str:
        if self.minimum == CHECKS_MINIMUM:
            return "each stratum at least the size its normal-approximation checks ask for"
        return f"minimum {self.minimum} per stratum"

    def summary(self) -> str:
        parts = self._lines() + ["", text_table(self._HEADER, self._rows())]
        if self.checks:
            parts += ["", "Checks of the normal approximation:"]
            parts += [f"- {f.message} {f.advice}" for f in self.checks]
        if self.notes:
            parts += [""] + [f"Note: {n}" for n in self.notes]
        return "\n".join(parts)

    def _html_body(self) -> str:
        esc = html.escape
        out = "".join(f"<p>{esc(line)}</p>" for line in self._lines())
        out += html_table(self._HEADER, self._rows(), caption="Sample sizes by stratum")
        if self.checks:
            out += "<ul>" + "".join(f"<li>{esc(f.message)} {esc(f.advice)}</li>" for f in self.checks) + "</ul>"
        out += "".join(f"<p>Note: {esc(n)}</p>" for n in self.notes)
        return out


def _minimum_column(col: pd.Series, minimum: object) -> np.ndarray:
    """The per-stratum minimum, or the plan's single minimum for plans that did not record one."""
    fill = int(minimum) if isinstance(minimum, (int, float)) and not isinstance(minimum, bool) else 0
    return np.array([fill if v is None or (isinstance(v, float) and math.isnan(v)) else int(v) for v in col],
                    dtype=np.int64)


def _floats(col: pd.Series) -> np.ndarray:
    return np.array([np.nan if v is None else float(v) for v in col], dtype=float)


def _nan_if_none(v: object) -> float:
    return math.nan if v is None else float(v)  # type: ignore[arg-type]


def _opt_float(v: object) -> float | None:
    return None if v is None else float(v)  # type: ignore[arg-type]


def _planning_table(strata_record: object) -> tuple[pd.DataFrame, str]:
    table = getattr(strata_record, "table", None)
    if isinstance(table, pd.DataFrame):
        return table, "strata"
    if isinstance(strata_record, pd.DataFrame):
        return strata_record, "strata"
    raise InputError(
        "expected a Strata record (from stratify) or a DataFrame with columns 'stratum', 'count', "
        f"'std_dev'; got {type(strata_record).__name__}",
        table="strata",
    )


def _std_dev_source(source: object) -> tuple[str, dict[str, float] | None, MisstatementPattern | None]:
    if isinstance(source, str):
        if source != "book":
            raise ParameterError(
                "std_dev_source",
                f"must be 'book', a mapping stratum -> pilot standard deviation, or a misstatement "
                f"pattern (error_rate, typical_taint); got {source!r}",
            )
        return "book", None, None
    if isinstance(source, MisstatementPattern) or (
        isinstance(source, tuple) and len(source) == 2 and not isinstance(source, str)
    ):
        p, t = (source.error_rate, source.typical_taint) if isinstance(source, MisstatementPattern) else source
        p = _number("std_dev_source", p)
        t = _number("std_dev_source", t)
        if not 0.0 <= p <= 1.0:
            raise ParameterError("std_dev_source", f"the error rate must be between 0 and 1, got {p!r}")
        return "pattern", None, MisstatementPattern(p, t)
    if isinstance(source, Mapping):
        pilot: dict[str, float] = {}
        for k, v in source.items():
            if isinstance(v, bool) or not isinstance(v, Real) or not math.isfinite(float(v)) or float(v) < 0:
                raise ParameterError(
                    "std_dev_source", f"pilot standard deviation of stratum {k!r} must be a number not below 0, got {v!r}"
                )
            pilot[str(k).strip()] = float(v)
        return "pilot", pilot, None
    raise ParameterError(
        "std_dev_source",
        "must be 'book', a mapping stratum -> pilot standard deviation, or a misstatement pattern "
        f"(error_rate, typical_taint); got {type(source).__name__}",
    )


def plan_sample(
    strata_record: object,
    *,
    tolerable: float,
    expected: float = 0.0,
    risk_incorrect_acceptance: float = 0.10,
    risk_incorrect_rejection: float | None = None,
    method: str = "mpu",
    std_dev_source: str | Mapping[str, float] | MisstatementPattern | tuple[float, float] = "book",
    allocation: str = "neyman",
    minimum: int | str = CHECKS_MINIMUM,
) -> Plan:
    r"""Plan the sample: per-stratum sizes that reach the precision the risks ask for.

    Parameters
    ----------
    strata_record:
        A :class:`~auditmean.strata.Strata` record, or a DataFrame with
        columns ``stratum``, ``count`` and ``std_dev`` and optionally
        ``book_total`` (needed by a misstatement pattern), ``skewness``
        (needed by the skewness checks), and ``kind`` (``"top"`` marks a
        stratum examined in full) or ``take_all`` (booleans).
    tolerable, expected:
        Tolerable misstatement and expected misstatement (``0 <= expected
        < tolerable``).
    risk_incorrect_acceptance, risk_incorrect_rejection:
        The risks, strictly between 0 and 1; ``risk_incorrect_rejection``
        may be ``None`` (plan on the risk of incorrect acceptance alone).
    method:
        ``"mpu"`` (mean-per-unit), ``"difference"`` or ``"ratio"``: what
        the standard deviations describe.
    std_dev_source:
        Where the standard deviation of each stratum comes from:

        ``"book"`` (mean-per-unit only)
            the book values' standard deviation stands in for the audited
            values'.
        a mapping stratum -> standard deviation
            pilot values for every stratum not examined in full (labels as
            in the strata table; no other keys).
        a :class:`MisstatementPattern` or a tuple ``(error_rate, typical_taint)``
            the expected standard deviation under that pattern, from the
            known book values of each stratum (see Notes).
    allocation:
        ``"neyman"`` (default), ``"proportional"`` or ``"equal"``.
    minimum:
        Fewest items per stratum. ``"checks"`` (the default): each stratum
        gets at least the size that passes the normal-approximation checks
        below for its book values' skewness,
        ``max(30, floor(28 + 25 G1^2) + 1)``
        (:func:`auditmean.core.normality.size_passing_checks`), so the plan
        raises none of them for the book values; a stratum that cannot
        reach it is examined in full. A whole number sets one minimum for
        every stratum (2 is the fewest from which a stratum's variance can
        be estimated). Strata with no more items than their minimum are
        examined in full.

    Returns
    -------
    Plan

    Raises
    ------
    InputError
        The strata table lacks a column, or a stratum has a count or
        standard deviation that is not accepted, or a pilot value is
        missing for a stratum (the message names it).
    ParameterError
        A parameter outside what is accepted (the message names it).

    Notes
    -----
    The target is a standard error of the estimated total of
    ``SE = (TM - EM) / (z_A + z_R)`` (``z_R = 0`` without a risk of
    incorrect rejection), i.e. a target variance ``V = SE^2``
    (:func:`auditmean.core.sizing.sample_size` gives the sources). The top
    stratum is examined in full and left out of the sums (Cochran 1977,
    section 5.8); the other strata get
    ``n_h = clip(lambda w_h, min(minimum, N_h), N_h)`` at the level that
    meets ``V`` exactly, with ``w_h`` from the allocation rule, rounded to
    whole sizes that still meet it
    (:func:`auditmean.core.sizing.sizes_for_precision`). With Neyman
    allocation and no binding bound this is Cochran's (1977, section 5.9)
    ``n = (sum N_h S_h)^2 / (V + sum N_h S_h^2)``.

    A stratum of one item has no standard deviation (NaN); it is taken as 0.

    Checks (planning time, from the skewness ``G1`` of each stratum's book
    values; a stratum examined in full raises nothing):

    * ``few-items``: fewer than 30 items planned (rule of thumb, common
      practice, no published source);
    * ``skew-cochran``: ``n_h <= 25 G1^2`` (Cochran 1977, section 2.15);
    * ``skew-studentized``: ``n_h <= 28 + 25 G1^2`` (Sugden, Smith and
      Jones 2000; the constant 28 quoted from memory).

    For difference and ratio estimation the book values' skewness stands in
    for that of the differences, which is not known before the audit.

    Misstatement pattern: see :func:`_pattern_std_devs` for the expected
    standard deviations it implies for each method.
    """
    tm, em = _misstatements(tolerable, expected)
    ria, rir = _risks(risk_incorrect_acceptance, risk_incorrect_rejection)
    if method not in ESTIMATION_METHODS:
        raise ParameterError(
            "method", f"must be one of {', '.join(repr(m) for m in ESTIMATION_METHODS)}, got {method!r}"
        )
    if allocation not in sz.ALLOCATION_RULES:
        raise ParameterError(
            "allocation", f"must be one of {', '.join(repr(r) for r in sz.ALLOCATION_RULES)}, got {allocation!r}"
        )
    if not (isinstance(minimum, str) and minimum == CHECKS_MINIMUM):
        if isinstance(minimum, str):
            raise ParameterError("minimum", f"must be a whole number or {CHECKS_MINIMUM!r}, got {minimum!r}")
        minimum = _whole("minimum", minimum, 0)
    kind, pilot, pattern = _std_dev_source(std_dev_source)
    if kind == "book" and method != "mpu":
        raise ParameterError(
            "std_dev_source",
            f"book values' standard deviations describe mean-per-unit estimation; for {method} estimation "
            "give pilot standard deviations per stratum or an assumed misstatement pattern (error_rate, typical_taint)",
        )

    df, table = _planning_table(strata_record)
    labels_s, counts, book_std = _strata_arrays(df, table)
    labels = [str(v).strip() for v in labels_s]
    take_all = np.zeros(counts.size, dtype=bool)
    if "kind" in df.columns:
        take_all |= df["kind"].astype(str).to_numpy() == _TOP_KIND
    if "take_all" in df.columns:
        take_all |= df["take_all"].fillna(False).astype(bool).to_numpy()
    book_total = (
        numeric_column(df, "book_total", table) if "book_total" in df.columns else np.full(counts.size, np.nan)
    )
    if "skewness" in df.columns:
        skew = pd.to_numeric(df["skewness"], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    else:
        skew = np.full(counts.size, np.nan)
    notes: list[str] = []

    if kind == "book":
        std = book_std
    elif kind == "pilot":
        assert pilot is not None
        need = [lab for lab, full in zip(labels, take_all) if not full]
        missing = [lab for lab in need if lab not in pilot]
        if missing:
            raise InputError(
                "no pilot standard deviation given for this stratum; give one for every stratum not examined in full",
                table=table,
                stratum=missing[0],
            )
        unknown = [k for k in pilot if k not in labels]
        if unknown:
            raise ParameterError(
                "std_dev_source", f"pilot standard deviations for strata not in the table: {', '.join(map(repr, unknown))}"
            )
        # strata examined in full need no pilot value; they add no variance
        std = np.array([pilot.get(lab, np.nan) for lab in labels], dtype=float)
    else:
        assert pattern is not None
        if np.any(np.isnan(book_total) & ~take_all & (counts > 0)):
            require_columns(df, ["book_total"], table, why="a misstatement pattern needs the strata's book totals")
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = np.where(counts > 0, book_total / np.maximum(counts, 1), 0.0)
        std = _pattern_std_devs(method, pattern, counts, mean, book_std)

    z_a = sz.z_acceptance(ria)
    z_r = sz.z_rejection(rir)
    se = sz.target_std_error(tm, em, z_a, z_r)
    if minimum == CHECKS_MINIMUM:
        minimums = nrm.size_passing_checks(skew)
    else:
        minimums = np.full(counts.size, int(minimum), dtype=np.int64)
    result = sz.sizes_for_precision(counts, std, se * se, allocation, minimums, take_all)
    sizes = result.sizes
    full = sizes >= counts
    plan_table = pd.DataFrame(
        {
            "stratum": pd.Series(labels, dtype=object),
            "count": counts.astype(np.int64),
            "book_total": book_total.astype(float),
            "std_dev": std.astype(float),
            "size": sizes.astype(np.int64),
            "take_all": full,
            "skewness": skew,
            "minimum": minimums,
        }
    )
    if np.any(~take_all & (counts > 0) & (counts <= minimums) & (minimums > 0)):
        small = [lab for lab, c, t, m in zip(labels, counts, take_all, minimums) if not t and 0 < c <= m]
        notes.append(
            f"{len(small)} strat{'um' if len(small) == 1 else 'a'} with no more items than the minimum "
            f"({', '.join(small[:5])}{' ...' if len(small) > 5 else ''}) will be examined in full"
        )
    checks = _normality_checks(labels, sizes, counts, skew, full)
    return Plan(
        method=method,
        allocation=allocation,
        minimum=minimum,
        tolerable=tm,
        expected=em,
        risk_incorrect_acceptance=ria,
        risk_incorrect_rejection=rir,
        z_acceptance=z_a,
        z_rejection=z_r if rir is not None else None,
        target_std_error=float(se),
        planned_allowance=float(sz.planned_allowance(tm, em, z_a, z_r)),
        achieved_std_error=float(math.sqrt(result.variance)),
        std_dev_source=kind,
        pilot_std_devs=pilot,
        error_rate=None if pattern is None else pattern.error_rate,
        typical_taint=None if pattern is None else pattern.typical_taint,
        table=plan_table,
        total_size=int(sizes.sum()),
        population_count=int(counts.sum()),
        book_total=math.fsum(book_total) if np.all(np.isfinite(book_total)) else math.nan,
        checks=checks,
        notes=tuple(notes),
    )


def _normality_checks(labels, sizes, counts, skew, full) -> tuple[Flag, ...]:
    """Flags from the rules of :mod:`auditmean.core.normality`, one per stratum and rule."""
    flags: list[Flag] = []
    few = nrm.fails_rule_of_thumb(sizes, census=full)
    coch = nrm.fails_cochran(sizes, skew, census=full)
    sug = nrm.fails_sugden(sizes, skew, census=full)
    need_c = nrm.smallest_size_above(nrm.cochran_minimum(skew))
    need_s = nrm.smallest_size_above(nrm.sugden_minimum(skew))

    def fix_skew(g1: float) -> str:
        if g1 > 0.5:
            return (
                ", or reduce the stratum's skewness: move its largest items into the top stratum "
                "(a lower top cutoff) or divide it into more strata with other boundaries"
            )
        if g1 < -0.5:
            return ", or divide it into more strata with other boundaries to reduce its skewness"
        return ""

    def at_least(need: int, N: int) -> str:
        if need >= N:
            return f"Examine all {N:,} items of this stratum"
        return f"Plan at least {need:,} items here"

    for h, lab in enumerate(labels):
        n, N = int(sizes[h]), int(counts[h])
        if few[h]:
            flags.append(
                Flag(
                    code="few-items",
                    message=f"Stratum {lab!r}: {n} of {N:,} items planned, fewer than 30.",
                    stratum=lab,
                    rule=f"at least {nrm.RULE_OF_THUMB_ITEMS} items sampled per stratum",
                    source=_SOURCE_RULE_OF_THUMB,
                    advice=(
                        f"Examine all {N} items of this stratum (minimum={N} or more), or merge it with a "
                        "neighbouring stratum."
                        if N <= nrm.RULE_OF_THUMB_ITEMS
                        else f"Plan at least {nrm.RULE_OF_THUMB_ITEMS} items here (for example minimum="
                        f"{nrm.RULE_OF_THUMB_ITEMS}), or merge the stratum with a neighbour into fewer strata."
                    ),
                )
            )
        if coch[h]:
            flags.append(
                Flag(
                    code="skew-cochran",
                    message=(
                        f"Stratum {lab!r}: {n} items planned but its book values' skewness G1 = {skew[h]:.2f} "
                        f"asks for more than 25 G1^2 = {25 * skew[h] ** 2:,.1f}."
                    ),
                    stratum=lab,
                    rule="n > 25 G1^2",
                    source=_SOURCE_COCHRAN,
                    advice=f"{at_least(int(need_c[h]), N)}{fix_skew(skew[h])}.",
                )
            )
        if sug[h]:
            flags.append(
                Flag(
                    code="skew-studentized",
                    message=(
                        f"Stratum {lab!r}: {n} items planned but its book values' skewness G1 = {skew[h]:.2f} "
                        f"asks for more than 28 + 25 G1^2 = {28 + 25 * skew[h] ** 2:,.1f} for the studentized mean."
                    ),
                    stratum=lab,
                    rule="n > 28 + 25 G1^2",
                    source=_SOURCE_SUGDEN,
                    advice=f"{at_least(int(need_s[h]), N)}{fix_skew(skew[h])}.",
                )
            )
    return tuple(flags)
