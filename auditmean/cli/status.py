"""``auditmean status``: which steps of an engagement are done, and what comes next."""

from __future__ import annotations

import argparse

from auditmean.cli._common import add_json_flag, print_json
from auditmean.engagement import Engagement

__all__ = ["register", "run"]


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser("status", help="show which steps of an engagement are done")
    p.add_argument("--engagement", required=True, metavar="DIR")
    add_json_flag(p)
    p.set_defaults(run=run)
    return p


def run(args) -> int:
    status = Engagement.open(args.engagement).status()
    if args.json:
        print_json(status.to_dict())
    else:
        print(status.summary())
    return 0
