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
from auditmean.coverage import (
    BetaTaint,
    CoverageResult,
    FixedTaint,
    MisstatementModel,
    ObservedTaints,
    UniformTaint,
    simulate_coverage,
)
from auditmean.engagement import Engagement
from auditmean.errors import (
    AuditMeanError,
    InputError,
    MethodNotApplicable,
    ParameterError,
    RecordError,
)
from auditmean.evaluation import Estimate, Evaluation, estimate_total, evaluate, second_opinion
from auditmean.plan import MisstatementPattern, Plan, allocate, plan_sample, sample_size
from auditmean.population import Population, Profile, load_population, profile
from auditmean.selection import extend_selection, propose_seed, select, verify_selection
from auditmean.strata import Strata, stratify

__all__ = [
    "__version__",
    "AuditMeanError",
    "InputError",
    "MethodNotApplicable",
    "ParameterError",
    "RecordError",
    "load_population",
    "profile",
    "Population",
    "Profile",
    "stratify",
    "Strata",
    "plan_sample",
    "sample_size",
    "allocate",
    "Plan",
    "MisstatementPattern",
    "select",
    "extend_selection",
    "verify_selection",
    "propose_seed",
    "Engagement",
    "simulate_coverage",
    "CoverageResult",
    "MisstatementModel",
    "FixedTaint",
    "UniformTaint",
    "BetaTaint",
    "ObservedTaints",
    "Estimate",
    "estimate_total",
    "Evaluation",
    "evaluate",
    "second_opinion",
]
