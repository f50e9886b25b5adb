"""auditmean: classical variables sampling for audit.

Plan how many items to examine, stratify skewed book values, draw a
selection a reviewer can re-perform, project the misstatement with
mean-per-unit, difference, ratio or regression estimation and confidence
limits that use the finite-population correction, and flag every stratum
where the normal approximation behind those limits cannot be trusted.

A statistical result supports, and never replaces, the auditor's
professional judgement; apply the auditing standards and the firm's
methodology that govern the engagement.
"""

from auditmean._version import __version__
from auditmean.errors import (
    AuditMeanError,
    InputError,
    MethodNotApplicable,
    ParameterError,
    RecordError,
)
from auditmean.evaluation import Estimate, Evaluation, estimate_total, evaluate, second_opinion

__all__ = [
    "__version__",
    "AuditMeanError",
    "InputError",
    "MethodNotApplicable",
    "ParameterError",
    "RecordError",
    "Estimate",
    "estimate_total",
    "Evaluation",
    "evaluate",
    "second_opinion",
]
