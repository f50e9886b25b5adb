"""``auditmean evaluate``: the conclusion against tolerable misstatement, every method side by side."""

from __future__ import annotations

import argparse

from auditmean.cli._common import (
    add_json_flag,
    add_table_options,
    load_sample_and_strata,
    print_json,
)
from auditmean.core.estimators import METHODS
from auditmean.evaluation.conclusion import evaluate

__all__ = ["register", "run", "add_risk_options"]


def add_risk_options(p) -> None:
    g = p.add_argument_group("materiality and risk")
    g.add_argument("--tolerable", type=float, required=True, metavar="AMOUNT", help="tolerable misstatement")
    g.add_argument("--expected", type=float, default=0.0, metavar="AMOUNT", help="expected misstatement (default 0)")
    g.add_argument(
        "--risk-acceptance", type=float, default=0.10, metavar="P",
        help="risk of incorrect acceptance (default 0.10)",
    )
    g.add_argument(
        "--risk-rejection", type=float, default=None, metavar="P",
        help="risk of incorrect rejection (optional)",
    )


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "evaluate",
        help="judge the sample against tolerable misstatement, with warnings and second opinions",
        description=(
            "Evaluate a sample against the tolerable misstatement with every applicable estimator: "
            "projected misstatement, its limits at the risk of incorrect acceptance, achieved and "
            "adjusted allowance for sampling risk, warnings where the normal approximation is in "
            "doubt, and a second-opinion bootstrap interval there. The result supports, and never "
            "replaces, professional judgement."
        ),
    )
    add_table_options(p)
    add_risk_options(p)
    p.add_argument("--planned-allowance", type=float, default=None, metavar="AMOUNT", help="planned allowance for sampling risk, if the plan set one")
    p.add_argument("--method", action="append", choices=METHODS, help="only this method (repeat for several)")
    p.add_argument("--rely-on", choices=METHODS, default=None, help="the method the conclusion rests on (default: separate ratio, or mean-per-unit without book values)")
    p.add_argument("--distribution", choices=("normal", "t"), default="normal")
    p.add_argument("--replicates", type=int, default=2000, help="bootstrap replicates for second opinions (default 2000)")
    p.add_argument("--seed", default="0", help="seed of the second-opinion bootstrap (recorded; default 0)")
    p.add_argument("--single-item", choices=("average", "zero", "error"), default="average")
    p.add_argument("--unsampled", choices=("error", "book_value"), default="error")
    add_json_flag(p)
    p.set_defaults(run=run)
    return p


def _seed(text: str):
    return int(text) if text.isdigit() else text


def run(args) -> int:
    sample, strata = load_sample_and_strata(args)
    ev = evaluate(
        sample,
        strata,
        tolerable=args.tolerable,
        expected=args.expected,
        risk_incorrect_acceptance=args.risk_acceptance,
        risk_incorrect_rejection=args.risk_rejection,
        planned_allowance=args.planned_allowance,
        methods=args.method,
        primary=args.rely_on,
        distribution=args.distribution,
        bootstrap_replicates=args.replicates,
        seed=_seed(args.seed),
        single_item=args.single_item,
        unsampled=args.unsampled,
        sample_file=args.sample,
        strata_file=args.strata,
    )
    if args.json:
        print_json(ev.to_dict())
    else:
        print(ev.summary())
    return 0
