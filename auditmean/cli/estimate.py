"""``auditmean estimate``: every applicable estimator side by side, from two files.

The sample file has one row per examined item (stratum, audited value and,
for the book-value methods, book value); the strata file one row per
population stratum (stratum, item count and, for the book-value methods,
book total). Column names can be mapped with the ``--*-column`` options.
"""

from __future__ import annotations

import argparse

from auditmean.cautions import cautions_text
from auditmean.cli._common import (
    add_json_flag,
    add_table_options,
    load_sample_and_strata,
    print_json,
)
from auditmean.core.choices import BOOK_VALUE_METHODS, METHODS
from auditmean.errors import MethodNotApplicable

__all__ = ["register", "run"]


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "estimate",
        help="project the audited total and misstatement from a sample file and a strata file",
        description=(
            "Estimate the population's audited total and the projected misstatement with every "
            "applicable method (mean-per-unit, difference, separate and combined ratio, "
            "regression), with confidence limits that use the finite-population correction."
        ),
    )
    p.add_argument(
        "--method",
        action="append",
        choices=METHODS,
        help="only this method (repeat for several); default: every method the files allow",
    )
    p.add_argument("--confidence", type=float, default=0.95, help="confidence level (default 0.95)")
    p.add_argument(
        "--sides",
        choices=("two-sided", "lower", "upper"),
        default="two-sided",
        help="two-sided limits, or a one-sided lower or upper bound on the audited total",
    )
    p.add_argument("--distribution", choices=("normal", "t"), default="normal", help="normal or Student t limits")
    p.add_argument(
        "--ratio-variance",
        choices=("sample_book_mean", "population_book_mean"),
        default="sample_book_mean",
        help="variance form of the ratio estimators (default: sample book mean)",
    )
    p.add_argument(
        "--single-item",
        choices=("average", "zero", "error"),
        default="average",
        help="treatment of a stratum whose variance cannot be estimated (default: average)",
    )
    p.add_argument(
        "--unsampled",
        choices=("error", "book_value"),
        default="error",
        help="treatment of a stratum with no sampled item (default: error)",
    )
    add_table_options(p)
    add_json_flag(p)
    p.set_defaults(run=run)
    return p


def run(args) -> int:
    from auditmean.evaluation import METHOD_NAMES, estimate_total

    sample, strata = load_sample_and_strata(args)
    has_book = "book_value" in sample.columns and "book_total" in strata.columns
    methods = args.method or [m for m in METHODS if has_book or m not in BOOK_VALUE_METHODS]
    results, skipped = [], []
    for m in methods:
        try:
            results.append(
                estimate_total(
                    sample,
                    strata,
                    method=m,
                    confidence=args.confidence,
                    sides=args.sides,
                    distribution=args.distribution,
                    ratio_variance=args.ratio_variance,
                    single_item=args.single_item,
                    unsampled=args.unsampled,
                    sample_file=args.sample,
                    strata_file=args.strata,
                )
            )
        except MethodNotApplicable as exc:
            if args.method:  # asked for by name: the user must hear why it failed
                raise
            skipped.append((m, exc.reason))
    if args.json:
        print_json(
            {
                "estimates": [r.to_dict() for r in results],
                "not_applicable": [{"method": m, "reason": why} for m, why in skipped],
            }
        )
        return 0
    print(side_by_side(results))
    for m, why in skipped:
        print(f"\n{METHOD_NAMES[m]}: not applicable: {why}")
    for r in results:
        if r.flags:
            print(f"\nWarnings for {r.method_name}:")
            for f in r.flags:
                print(f"  [{f.code}] {f.message}")
                print(f"      advice: {f.advice}")
    if not has_book and not args.method:
        print("\nOnly mean-per-unit applies: the files give no book values per item and book totals per stratum.")
    print()
    print(cautions_text())
    return 0


def side_by_side(results) -> str:
    """One column per method, one row per quantity."""
    from auditmean._records import format_number, text_table
    from auditmean.evaluation import METHOD_NAMES

    if not results:
        return "No estimate could be made."
    first = results[0]
    side = {"two-sided": "two-sided limits", "lower": "lower bound", "upper": "upper bound"}[first.sides]
    head = (
        f"Estimates at {first.confidence:.0%} confidence ({side}, {first.distribution}); "
        f"{first.sample_size:,} of {first.population_count:,} items examined in "
        f"{len(first.by_stratum)} strata; book total {format_number(first.book_total) or 'not given'}"
    )
    quantities = [
        ("estimated audited total", "total"),
        ("standard error", "std_error"),
        ("lower limit", "lower"),
        ("upper limit", "upper"),
        ("achieved allowance", "allowance"),
        ("projected misstatement", "misstatement"),
        ("misstatement, lower limit", "misstatement_lower"),
        ("misstatement, upper limit", "misstatement_upper"),
    ]
    rows = [[label] + [format_number(getattr(r, attr)) for r in results] for label, attr in quantities]
    rows.append(["warnings"] + [str(len(r.flags)) for r in results])
    header = [""] + [METHOD_NAMES[r.method] for r in results]
    return head + "\n\n" + text_table(header, rows)
