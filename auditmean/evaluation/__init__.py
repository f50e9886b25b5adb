"""Evaluation: from a recorded sample to estimates, limits, flags, second opinions and a conclusion."""

from auditmean.evaluation.conclusion import Evaluation, MethodConclusion, evaluate
from auditmean.evaluation.estimate import METHOD_NAMES, Estimate, estimate_total
from auditmean.evaluation.overstatement import OverstatementBound, overstatement_bound
from auditmean.evaluation.second_opinion import SecondOpinion, second_opinion

__all__ = [
    "Estimate",
    "estimate_total",
    "METHOD_NAMES",
    "Evaluation",
    "MethodConclusion",
    "evaluate",
    "SecondOpinion",
    "second_opinion",
    "OverstatementBound",
    "overstatement_bound",
]
