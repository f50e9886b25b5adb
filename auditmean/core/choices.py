"""Codes and limits the command line offers before any work starts, in a module that imports nothing.

``auditmean --help`` and every subcommand's parser are built from these
without loading numpy, scipy or pandas (see :mod:`auditmean.cli`); the
modules that do the work re-export them (:mod:`auditmean.core.estimators`,
:mod:`auditmean.coverage`).
"""

__all__ = ["METHODS", "BOOK_VALUE_METHODS", "MAX_REPLICATIONS"]

#: The estimators, by code.
METHODS = ("mpu", "difference", "ratio", "combined_ratio", "regression")
#: The estimators that need each item's book value and each stratum's book total.
BOOK_VALUE_METHODS = ("difference", "ratio", "combined_ratio", "regression")
#: Most replications one coverage check accepts.
MAX_REPLICATIONS = 100_000
