"""auditmean: classical variables sampling for audit.

Plan how many items to examine, stratify skewed book values, draw a
selection a reviewer can re-perform, project the misstatement with
mean-per-unit, difference, ratio or regression estimation and confidence
limits that use the finite-population correction, and flag every stratum
where the normal approximation behind those limits cannot be trusted.

A statistical result supports, and never replaces, the auditor's
professional judgement; apply the auditing standards and the firm's
methodology that govern the engagement.

The public names below are imported on first use (PEP 562), so that
``import auditmean`` and the command line start without loading the whole
scientific stack; ``from auditmean import plan_sample`` works as usual. A new
public name is added to :data:`_EXPORTS` (name: the module that defines it).
"""

from __future__ import annotations

import importlib
from typing import Any

from auditmean._version import __version__

#: Each public name and the module it comes from, in the order of the job.
_EXPORTS: dict[str, str] = {
    "AuditMeanError": "auditmean.errors",
    "InputError": "auditmean.errors",
    "MethodNotApplicable": "auditmean.errors",
    "ParameterError": "auditmean.errors",
    "RecordError": "auditmean.errors",
    "load_population": "auditmean.population",
    "profile": "auditmean.population",
    "Population": "auditmean.population",
    "Profile": "auditmean.population",
    "stratify": "auditmean.strata",
    "Strata": "auditmean.strata",
    "plan_sample": "auditmean.plan",
    "sample_size": "auditmean.plan",
    "allocate": "auditmean.plan",
    "Plan": "auditmean.plan",
    "MisstatementPattern": "auditmean.plan",
    "select": "auditmean.selection",
    "extend_selection": "auditmean.selection",
    "verify_selection": "auditmean.selection",
    "propose_seed": "auditmean.selection",
    "select_monetary_units": "auditmean.monetary_selection",
    "extend_monetary_units": "auditmean.monetary_selection",
    "verify_monetary_units": "auditmean.monetary_selection",
    "monetary_unit_sample_size": "auditmean.monetary_bound",
    "monetary_unit_bound": "auditmean.monetary_bound",
    "MonetaryUnitBound": "auditmean.monetary_bound",
    "Engagement": "auditmean.engagement",
    "simulate_coverage": "auditmean.coverage",
    "CoverageResult": "auditmean.coverage",
    "MisstatementModel": "auditmean.coverage",
    "FixedTaint": "auditmean.coverage",
    "UniformTaint": "auditmean.coverage",
    "BetaTaint": "auditmean.coverage",
    "ObservedTaints": "auditmean.coverage",
    "simulate_monetary_units": "auditmean.monetary_coverage",
    "MonetaryUnitCoverage": "auditmean.monetary_coverage",
    "Estimate": "auditmean.evaluation",
    "estimate_total": "auditmean.evaluation",
    "Evaluation": "auditmean.evaluation",
    "evaluate": "auditmean.evaluation",
    "second_opinion": "auditmean.evaluation",
    "overstatement_bound": "auditmean.evaluation",
    "OverstatementBound": "auditmean.evaluation",
}

__all__ = ["__version__", *_EXPORTS]


def __getattr__(name: str) -> Any:
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'auditmean' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
