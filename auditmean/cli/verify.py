"""``auditmean verify``: re-perform the selection from the population file and the recorded seed."""

from __future__ import annotations

import argparse

from auditmean.cli._common import add_json_flag, print_json
from auditmean.cli.select import add_engagement_options, population_arg

__all__ = ["register", "run"]


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "verify",
        help="re-perform the selection and say whether it matches the record",
        description="Recompute every key from the population file and the recorded seed; exit 0 if the recorded selection matches, 1 if not.",
    )
    add_engagement_options(p)
    add_json_flag(p)
    p.set_defaults(run=run)
    return p


def run(args) -> int:
    from auditmean.workflow import open_engagement, verify_engagement

    eng, population = open_engagement(args.engagement, population_arg(args))
    result = verify_engagement(eng, population)
    if args.json:
        print_json(result.to_dict())
    else:
        print(result.summary())
        from auditmean.cli._monetary import is_monetary_unit, print_next

        if is_monetary_unit(eng):
            print_next(eng)
    return 0 if result.match else 1
