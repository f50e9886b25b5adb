"""Second-opinion intervals, for estimates whose normal-theory limits are in doubt.

Two intervals that do not lean on the normal approximation in the same way:

* the rescaling bootstrap for stratified sampling without replacement
  (Rao and Wu 1988; :mod:`auditmean.core.bootstrap`), percentile limits,
  reproducible from the recorded seed;
* Johnson's (1978) skewness-adjusted t interval (:mod:`auditmean.core.johnson`),
  for a design in which one stratum is sampled (the others examined in
  full or empty), and per stratum in ``by_stratum``.

Neither is a cure: with no misstatement in the sample, both are as narrow as
the normal interval, and the warnings stand.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from auditmean._records import RecordMixin, format_number, html_table, text_table
from auditmean.core import estimators as est
from auditmean.core.bootstrap import percentile_limits, rescaling_bootstrap, seed_to_int
from auditmean.core.johnson import johnson_limits
from auditmean.errors import ParameterError
from auditmean.evaluation.estimate import _validate_parameters, prepare_design
from auditmean.evaluation.flags import averaged_moments

__all__ = ["SecondOpinion", "second_opinion"]


@dataclass(frozen=True)
class SecondOpinion(RecordMixin):
    """Limits for the audited total (and the misstatement) from the second-opinion methods.

    ``johnson_lower``/``johnson_upper`` are NaN when more than one stratum
    is sampled: the per-stratum Johnson limits are then in ``by_stratum``.
    """

    record_kind = "second_opinion"

    method: str
    confidence: float
    sides: str
    book_total: float
    bootstrap_lower: float
    bootstrap_upper: float
    bootstrap_std_error: float
    replicates: int
    seed: int
    johnson_lower: float
    johnson_upper: float
    johnson_linearised: bool
    by_stratum: pd.DataFrame = field(repr=False)

    @property
    def bootstrap_misstatement_upper(self) -> float:
        return self.book_total - self.bootstrap_lower

    @property
    def bootstrap_misstatement_lower(self) -> float:
        return self.book_total - self.bootstrap_upper

    @property
    def johnson_misstatement_upper(self) -> float:
        return self.book_total - self.johnson_lower

    @property
    def johnson_misstatement_lower(self) -> float:
        return self.book_total - self.johnson_upper

    def to_dict(self):
        d = super().to_dict()
        d["bootstrap_misstatement_upper"] = _finite(self.bootstrap_misstatement_upper)
        d["bootstrap_misstatement_lower"] = _finite(self.bootstrap_misstatement_lower)
        d["johnson_misstatement_upper"] = _finite(self.johnson_misstatement_upper)
        d["johnson_misstatement_lower"] = _finite(self.johnson_misstatement_lower)
        return d

    def _rows(self):
        return [
            ("rescaling bootstrap", format_number(self.bootstrap_lower), format_number(self.bootstrap_upper)),
            ("Johnson's skewness-adjusted t", format_number(self.johnson_lower), format_number(self.johnson_upper)),
        ]

    def _headline(self) -> str:
        return (
            f"Second opinion for {est.METHOD_NAMES[self.method]}: {self.confidence:.0%} limits of the audited "
            f"total ({self.replicates:,} bootstrap replicates, seed {self.seed})"
        )

    def summary(self) -> str:
        return self._headline() + "\n\n" + text_table(("", "lower limit", "upper limit"), self._rows())

    def _html_body(self) -> str:
        return f"<p>{html.escape(self._headline())}</p>" + html_table(("", "lower limit", "upper limit"), self._rows())


def _finite(v: float):
    return v if math.isfinite(v) else None


def second_opinion(
    sample: pd.DataFrame,
    strata: pd.DataFrame,
    method: str = "mpu",
    confidence: float = 0.95,
    sides: str = "two-sided",
    *,
    replicates: int = 2000,
    seed: int | str = 0,
    single_item: str = "average",
    unsampled: str = "error",
    sample_file: str | None = None,
    strata_file: str | None = None,
) -> SecondOpinion:
    """Bootstrap and Johnson limits for one method, on the tables ``estimate_total`` takes.

    ``replicates`` bootstrap replicates (at least 200) are drawn from
    ``numpy.random.default_rng(seed)``; a text seed is turned into an
    integer by :func:`auditmean.core.bootstrap.seed_to_int`, and the record
    keeps the integer so the limits can be re-performed.
    """
    conf = _validate_parameters(method, confidence, sides, "normal", "sample_book_mean", single_item, unsampled)
    if not isinstance(replicates, (int, np.integer)) or isinstance(replicates, bool) or replicates < 200:
        raise ParameterError("replicates", f"got {replicates!r}; use a whole number of at least 200 (e.g. 2000)")
    try:
        seed_int = seed_to_int(seed)
    except ValueError:
        raise ParameterError("seed", f"got {seed!r}; use a non-negative whole number or a text") from None
    design = prepare_design(sample, strata, method, single_item, unsampled, sample_file, strata_file)
    core = est.estimate_strata(
        method, design.codes, design.counts, design.audited, design.book, design.book_totals,
        single_item=single_item, unsampled=unsampled,
    )
    boot = rescaling_bootstrap(
        method, design.codes, design.counts, design.audited, design.book, design.book_totals,
        replicates=int(replicates), seed=seed_int, unsampled=unsampled,
    )
    b_lo, b_hi = percentile_limits(boot.replicates, conf, sides)

    H = len(design.labels)
    n = np.bincount(design.codes, minlength=H)
    N = design.counts.astype(float)
    _g1, s2, k3 = averaged_moments(design.codes, H, core.item_values)
    with np.errstate(invalid="ignore", divide="ignore"):
        base = N**2 * (1 - n / np.maximum(N, 1)) / np.maximum(n, 1) * s2
        adjustment = np.where(base > 0, core.stratum_variance / base, 1.0)
    j_lo = np.full(H, np.nan)
    j_hi = np.full(H, np.nan)
    lin = np.zeros(H, dtype=bool)
    sampled = core.status == est.STATUS_SAMPLED
    for h in np.flatnonzero(sampled):
        se_mean = math.sqrt(core.stratum_variance[h]) / N[h]
        jl = johnson_limits(
            core.stratum_total[h] / N[h], se_mean, s2[h] * adjustment[h], k3[h] * adjustment[h] ** 1.5, int(n[h]), conf, sides
        )
        j_lo[h], j_hi[h], lin[h] = N[h] * jl.lower, N[h] * jl.upper, jl.linearised
    only_one = sampled.sum() == 1 and not np.any(core.status == est.STATUS_THIN)
    if only_one:
        h = int(np.flatnonzero(sampled)[0])
        rest = core.total - core.stratum_total[h]
        johnson_lower, johnson_upper, linearised = rest + j_lo[h], rest + j_hi[h], bool(lin[h])
    else:
        johnson_lower = johnson_upper = math.nan
        linearised = False
    by = pd.DataFrame(
        {
            "stratum": design.labels,
            "status": core.status.astype(str),
            "total": core.stratum_total,
            "johnson_lower": j_lo,
            "johnson_upper": j_hi,
            "johnson_linearised": lin,
        }
    )
    book_total = float(design.book_totals.sum()) if design.book_totals is not None else math.nan
    return SecondOpinion(
        method=method,
        confidence=conf,
        sides=sides,
        book_total=book_total,
        bootstrap_lower=b_lo,
        bootstrap_upper=b_hi,
        bootstrap_std_error=boot.std_error,
        replicates=int(replicates),
        seed=boot.seed,
        johnson_lower=johnson_lower,
        johnson_upper=johnson_upper,
        johnson_linearised=linearised,
        by_stratum=by,
    )
