"""``auditmean plan``: population file in; profile, strata and sample sizes out.

With ``--engagement DIR`` the plan starts an engagement folder that the
later steps (``select``, ``record``, ``evaluate``, ``verify``) read.
"""

from __future__ import annotations

import argparse
from typing import TYPE_CHECKING

from auditmean.cli._common import add_json_flag, print_json
from auditmean.cli.evaluate import add_risk_options
from auditmean.errors import InputError

if TYPE_CHECKING:
    from auditmean.workflow import PopulationReading

# The engine is imported inside the functions that use it, so that building the
# command line's parser stays light (see auditmean/cli/__init__.py).

__all__ = ["register", "run", "add_population_options", "reading_from"]


def add_population_options(p, required: bool = True) -> None:
    g = p.add_argument_group("population file")
    g.add_argument("--id-column", required=required, metavar="NAME", help="column holding the item id")
    g.add_argument("--value-column", required=required, metavar="NAME", help="column holding the book value")
    g.add_argument("--stratum-column", default=None, metavar="NAME", help="column that pre-assigns strata (e.g. a location)")
    g.add_argument("--decimal", default=".", choices=(".", ","), help="decimal mark of the amounts (default '.')")
    g.add_argument("--sep", default=None, help="field separator of a text file (default ',' or tab for .tsv)")
    g.add_argument("--sheet", default=None, help="sheet of an Excel file (default: the first)")


def reading_from(args, source: str) -> PopulationReading:
    from auditmean.workflow import PopulationReading

    return PopulationReading(
        source=source,
        id_column=args.id_column,
        value_column=args.value_column,
        stratum_column=args.stratum_column,
        decimal=args.decimal,
        sep=args.sep,
        sheet=args.sheet,
    )


def _minimum(text: str):
    """``--minimum``: 'checks' or a whole number."""
    if text.strip().lower() == "checks":
        return "checks"
    try:
        return int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"give a whole number or 'checks', not {text!r}") from None


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "plan",
        help="profile the population, stratify it and size the sample",
        description=(
            "Read the population, describe how skewed it is, divide it into strata (the largest items "
            "examined in full), and compute the sample size and its allocation from the tolerable and "
            "expected misstatement and the risks. With --engagement the plan starts an engagement folder."
        ),
    )
    p.add_argument("population", help="population file (CSV, TSV, Excel or Parquet)")
    add_population_options(p)
    add_risk_options(p)
    s = p.add_argument_group("strata")
    s.add_argument(
        "--strata-rule",
        default="cumulative_sqrt",
        choices=("cumulative_sqrt", "geometric", "equal_value", "optimal", "boundaries", "preassigned"),
        help="how to set stratum boundaries (default: cumulative square root of frequency)",
    )
    s.add_argument("--strata", type=int, default=None, metavar="N", help="number of strata besides top, credits and zeros")
    s.add_argument("--boundaries", default=None, metavar="B1,B2,...", help="boundaries for --strata-rule boundaries")
    top = s.add_mutually_exclusive_group()
    top.add_argument("--top-cutoff", type=float, default=None, metavar="AMOUNT", help="examine every item at or above this amount")
    top.add_argument("--top-items", type=int, default=None, metavar="K", help="examine the K largest items in full")
    top.add_argument("--top-at-tolerable", action="store_true", help="examine every item at or above the tolerable misstatement")
    s.add_argument("--credits", choices=("separate", "include"), default="separate", help="negative items in their own stratum (default)")
    s.add_argument("--zeros", choices=("separate", "include"), default="separate", help="zero items in their own stratum (default)")
    a = p.add_argument_group("sample size")
    a.add_argument("--method", choices=("mpu", "difference", "ratio"), default="mpu", help="estimator the plan is for (default mean-per-unit)")
    a.add_argument("--allocation", choices=("neyman", "proportional", "equal"), default="neyman")
    a.add_argument(
        "--minimum", type=_minimum, default="checks", metavar="N|checks",
        help="fewest items per sampled stratum: a whole number, or 'checks' for the size each stratum's "
        "normal-approximation checks ask for (default: checks)",
    )
    a.add_argument("--error-rate", type=float, default=None, metavar="P", help="assumed share of items misstated (difference and ratio plans)")
    a.add_argument("--typical-taint", type=float, default=None, metavar="T", help="assumed misstatement as a share of book value")
    a.add_argument("--pilot", default=None, metavar="FILE", help="pilot standard deviations per stratum (columns stratum, std_dev)")
    a.add_argument(
        "--check-samples", type=int, default=2000, metavar="N",
        help="samples the coverage check simulates on the proposed plan, to measure its real risk of "
        "incorrect acceptance (default 2000; 0 skips the check)",
    )
    from auditmean.cli._monetary import add_design_options

    add_design_options(p)
    p.add_argument("--engagement", default=None, metavar="DIR", help="start an engagement folder holding this plan")
    add_json_flag(p)
    p.set_defaults(run=run)
    return p


def _std_dev_source(args):
    from auditmean.plan import MisstatementPattern
    from auditmean.tables import read_table

    if args.pilot:
        t = read_table(args.pilot)
        for col in ("stratum", "std_dev"):
            if col not in t.columns:
                raise InputError(f"missing column {col!r}", file=args.pilot, column=col)
        return {str(s): float(v) for s, v in zip(t["stratum"], t["std_dev"])}
    if args.error_rate is not None or args.typical_taint is not None:
        if args.error_rate is None or args.typical_taint is None:
            raise InputError("give both --error-rate and --typical-taint", table="options")
        return MisstatementPattern(args.error_rate, args.typical_taint)
    return "book"


def options_from(args) -> tuple[dict, dict]:
    method = "boundaries" if args.strata_rule == "boundaries" else args.strata_rule
    strat = dict(credits=args.credits, zeros=args.zeros, n_strata=args.strata)
    if args.strata_rule == "preassigned":
        strat = dict(credits=args.credits, zeros=args.zeros, use_preassigned=True)
    else:
        strat["method"] = method
    if args.boundaries:
        try:
            strat["boundaries"] = [float(b) for b in args.boundaries.split(",")]
        except ValueError:
            raise InputError(f"--boundaries must be amounts separated by commas, got {args.boundaries!r}", table="options") from None
    if args.top_cutoff is not None:
        strat["top_cutoff"] = args.top_cutoff
    elif args.top_at_tolerable:
        strat["top_cutoff"] = args.tolerable
    elif args.top_items is not None:
        strat["top_items"] = args.top_items
    if method == "optimal":
        strat.update(
            tolerable=args.tolerable,
            expected=args.expected,
            risk_incorrect_acceptance=args.risk_acceptance,
            risk_incorrect_rejection=args.risk_rejection,
        )
    plan = dict(
        tolerable=args.tolerable,
        expected=args.expected,
        risk_incorrect_acceptance=args.risk_acceptance,
        risk_incorrect_rejection=args.risk_rejection,
        method=args.method,
        std_dev_source=_std_dev_source(args),
        allocation=args.allocation,
        minimum=args.minimum,
    )
    return strat, plan


def run(args) -> int:
    from auditmean.plan import plan_sample
    from auditmean.scan import choose_engine, scan_of, stratify_population
    from auditmean.workflow import start_engagement

    if getattr(args, "design", "stratified") == "monetary-unit":
        from auditmean.cli._monetary import run_plan

        return run_plan(args)
    reading = reading_from(args, args.population)
    population = reading.load()
    strat_opts, plan_opts = options_from(args)
    checked: list = []

    def check(strata, plan):
        """The plan's coverage check (None when skipped, or when the items are not in memory)."""
        if not args.check_samples or getattr(strata, "book_values", None) is None:
            return None
        from auditmean.plan_check import check_plan

        checked.append(check_plan(strata, plan, replications=args.check_samples))
        return checked[-1]

    if args.engagement:
        eng, population, strata, plan = start_engagement(
            args.engagement, reading, stratify_options=strat_opts, plan_options=plan_opts, population=population,
            check=check,
        )
    else:
        strata = stratify_population(population, **strat_opts)
        plan = plan_sample(strata, **plan_opts)
        check(strata, plan)
    check = checked[-1] if checked else None
    prof = scan_of(population).profile()
    engine = {"engine": getattr(population, "engine", "pandas"),
              "reason": getattr(population, "reason", None) or choose_engine(population.source).reason}
    if args.json:
        print_json({"profile": prof.to_dict(), "strata": strata.to_dict(), "plan": plan.to_dict(),
                    "plan_check": None if check is None else check.to_dict(),
                    "engagement": args.engagement, "population_engine": engine})
        return 0
    print(f"Population read by {engine['engine']}: {engine['reason']}.")
    print(prof.summary())
    print()
    print(strata.summary())
    print()
    print(plan.summary())
    if check is not None:
        print()
        print(check.summary())
    if args.engagement:
        print(f"\nEngagement started in {args.engagement}. Next: auditmean select --engagement {args.engagement}")
    return 0
