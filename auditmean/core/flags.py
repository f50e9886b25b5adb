"""Warnings about a design or an estimate, as small immutable records.

A :class:`Flag` is a warning only: it never changes a number. It carries a
short ``code`` for programs, a ``message`` for people, the ``rule`` that was
tested, the ``source`` of that rule (or "common practice, no published
source"), and the ``advice`` that would fix the problem. Informational notes
are not flags. A stratum examined in full raises no flag about sampling.

The codes are auditmean's own words; they are stable, and scripts may test
for them.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Flag", "FLAG_CODES"]


@dataclass(frozen=True)
class Flag:
    """One warning about a stratum or about the whole estimate.

    Attributes
    ----------
    code:
        Short, stable identifier for programs (see :data:`FLAG_CODES`).
    message:
        A sentence for people, naming the stratum and the numbers involved.
    stratum:
        The stratum concerned, or ``None`` when the flag is about the whole
        estimate or design.
    rule:
        The rule that was tested, in words.
    source:
        Where the rule comes from.
    advice:
        What would remove the problem.
    """

    code: str
    message: str
    stratum: object | None
    rule: str
    source: str
    advice: str

    def to_dict(self) -> dict[str, object]:
        stratum = self.stratum
        if stratum is not None and not isinstance(stratum, (str, int, float, bool)):
            stratum = str(stratum)
        return {
            "code": self.code,
            "message": self.message,
            "stratum": stratum,
            "rule": self.rule,
            "source": self.source,
            "advice": self.advice,
        }

    @classmethod
    def from_dict(cls, d: dict[str, object]) -> Flag:
        return cls(
            code=str(d["code"]),
            message=str(d["message"]),
            stratum=d.get("stratum"),
            rule=str(d["rule"]),
            source=str(d["source"]),
            advice=str(d["advice"]),
        )


#: Every flag code auditmean can raise, with a one-line meaning.
FLAG_CODES: dict[str, str] = {
    "few-items": "fewer than 30 items sampled in a stratum (rule of thumb)",
    "skew-cochran": "sample smaller than Cochran's minimum 25 G1^2 for the stratum's skewness",
    "skew-studentized": "sample smaller than the studentized-mean minimum 28 + 25 G1^2",
    "skew-overall": "the stratified estimator as a whole is too skewed for its sample size",
    "no-differences": "no non-zero differences between audited and book values in a sampled stratum",
    "few-differences": "fewer non-zero differences than the normal approximation needs",
    "interval-unusable": "the interval has zero width although the population was not examined in full",
    "single-item": "one item sampled from a stratum of more: its variance cannot be estimated",
    "variance-not-estimable": "too few items in a stratum to estimate the estimator's variance",
    "unsampled-stratum": "a stratum with items but none sampled",
    "slope-undefined": "all sampled book values in a stratum are equal: the regression slope is undefined",
    "ratio-undefined": "a stratum's sampled book values add up to zero: no ratio, difference estimation used",
    "df-undefined": "Satterthwaite's effective degrees of freedom cannot be computed",
}
