"""``auditmean status``: which steps of an engagement are done, and what comes next."""

from __future__ import annotations

import argparse

from auditmean.cli._common import add_json_flag, print_json

__all__ = ["register", "run"]


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser("status", help="show which steps of an engagement are done")
    p.add_argument("--engagement", required=True, metavar="DIR")
    add_json_flag(p)
    p.set_defaults(run=run)
    return p


def run(args) -> int:
    from auditmean.engagement import Engagement

    eng = Engagement.open(args.engagement)
    status = eng.status()
    from auditmean.cli._monetary import is_monetary_unit, next_command, say

    monetary = eng.plan() is not None and is_monetary_unit(eng)
    if args.json:
        print_json({**status.to_dict(), "design": "monetary_unit", "next_command": next_command(eng)}
                   if monetary else status.to_dict())
    elif monetary:
        say(status.summary())
        print(f"Next command: {next_command(eng)}")
    else:
        print(status.summary())
    return 0
