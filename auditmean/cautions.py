"""The cautions shown wherever auditmean reports a result.

One text, used by the command line, the widgets, the app and the
workpaper, so that every surface says the same thing.
"""

from __future__ import annotations

__all__ = ["CAUTIONS", "cautions_text"]

CAUTIONS: tuple[str, ...] = (
    "A statistical result supports, and never replaces, the auditor's professional judgement.",
    "Apply the auditing standards and the firm's methodology that govern the engagement; "
    "where they differ from what auditmean does, they prevail.",
    "The classical confidence limits rest on the normal approximation, which needs samples large "
    "enough for the skewness of what each stratum averages. Accounting populations with few, large "
    "misstatements are where it fails: where its warnings fire, auditmean rests the verdict on a "
    "finite-sample bound that holds under a stated assumption, and shows the normal limits for "
    "information only. Read every warning and every stated assumption.",
)


def cautions_text(prefix: str = "Caution: ") -> str:
    """The cautions as one paragraph per line."""
    return "\n".join(prefix + c for c in CAUTIONS)
