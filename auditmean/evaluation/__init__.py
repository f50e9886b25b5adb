"""Evaluation: from a recorded sample to estimates, limits, flags and a conclusion."""

from auditmean.evaluation.estimate import METHOD_NAMES, Estimate, estimate_total

__all__ = ["Estimate", "estimate_total", "METHOD_NAMES"]
