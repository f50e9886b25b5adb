"""``auditmean evaluate``: the conclusion against tolerable misstatement, every method side by side."""

from __future__ import annotations

import argparse

from auditmean.cli._common import (
    add_json_flag,
    add_table_options,
    load_sample_and_strata,
    print_json,
)
from auditmean.core.choices import METHODS
from auditmean.errors import InputError

__all__ = ["register", "run", "add_risk_options"]


def add_risk_options(p, required: bool = True) -> None:
    g = p.add_argument_group("materiality and risk" + ("" if required else " (two-file form; an engagement uses its plan's)"))
    g.add_argument("--tolerable", type=float, required=required, metavar="AMOUNT", help="tolerable misstatement")
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
    add_table_options(p, optional=True)
    e = p.add_argument_group("from an engagement folder (instead of the two files)")
    e.add_argument("--engagement", default=None, metavar="DIR", help="evaluate the results recorded in this engagement")
    e.add_argument("--population", default=None, metavar="FILE", help="the population file, if it has moved")
    e.add_argument(
        "--missing", choices=("error", "at_book_value", "as_zero"), default="error",
        help="selected items without an audited value: refuse (default), take at book value, or as fully misstated",
    )
    from auditmean.cli._monetary import add_bound_option

    add_bound_option(e, "monetary-unit engagement: the bound to conclude on (default the plan's); every bound is shown")
    add_risk_options(p, required=False)
    p.add_argument("--planned-allowance", type=float, default=None, metavar="AMOUNT", help="planned allowance for sampling risk, if the plan set one")
    p.add_argument("--method", action="append", choices=METHODS, help="only this method (repeat for several)")
    p.add_argument("--rely-on", choices=METHODS, default=None, help="the method the conclusion rests on (default: separate ratio, or mean-per-unit without book values)")
    p.add_argument("--distribution", choices=("normal", "t"), default="normal")
    p.add_argument("--replicates", type=int, default=2000, help="bootstrap replicates for second opinions (default 2000)")
    p.add_argument("--seed", default=None, help="seed of the second-opinion bootstrap, recorded (default: the selection seed of an engagement, else 0)")
    p.add_argument("--single-item", choices=("average", "zero", "error"), default="average")
    p.add_argument("--unsampled", choices=("error", "book_value"), default="error")
    add_json_flag(p)
    p.set_defaults(run=run)
    return p


def _seed(text: str):
    return int(text) if text.isdigit() else text


def _run_engagement(args) -> int:
    from auditmean.cli.select import population_arg
    from auditmean.workflow import evaluate_engagement, open_engagement

    if args.sample or args.strata:
        raise InputError("give either the two files or --engagement, not both", table="options")
    eng, _population = open_engagement(args.engagement, population_arg(args))
    from auditmean.cli._monetary import is_monetary_unit, run_evaluate

    if is_monetary_unit(eng):
        return run_evaluate(args, eng)
    if getattr(args, "bound", None) is not None:
        raise InputError("--bound is for a monetary-unit engagement; this engagement is stratified", table="options")
    ev = evaluate_engagement(
        eng, missing_treatment=args.missing, primary=args.rely_on, distribution=args.distribution,
        bootstrap_replicates=args.replicates, seed=None if args.seed is None else _seed(args.seed),
        single_item=args.single_item, unsampled=args.unsampled,
    )
    if args.json:
        print_json(ev.to_dict())
    else:
        print(ev.summary())
        print(f"\nSaved in {eng.folder / 'evaluations'} (missing items treated: {args.missing}).")
    return 0


def run(args) -> int:
    if args.engagement:
        return _run_engagement(args)
    if getattr(args, "bound", None) is not None:
        raise InputError("--bound is for a monetary-unit engagement (--engagement DIR)", table="options")
    if not (args.sample and args.strata):
        raise InputError("give a sample file and a strata file, or --engagement DIR", table="options")
    if args.tolerable is None:
        raise InputError("--tolerable is needed with the two-file form", table="options")
    from auditmean.evaluation.conclusion import evaluate

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
        seed=0 if args.seed is None else _seed(args.seed),
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
