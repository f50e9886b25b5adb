"""``auditmean record``: load audited values into the engagement (a file, or one item)."""

from __future__ import annotations

import argparse

from auditmean.cli._common import add_json_flag, print_json
from auditmean.cli.select import add_engagement_options, population_arg
from auditmean.errors import InputError

__all__ = ["register", "run"]


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "record",
        help="record audited values for the selected items",
        description=(
            "Record what the audit found: a results file (CSV or Excel: item id, audited value, "
            "optional notes) or one item with --item and --value. Every entry is kept; a different "
            "value for an item already recorded needs --replace, and the earlier one stays in the log."
        ),
    )
    add_engagement_options(p)
    p.add_argument("results", nargs="?", default=None, help="results file")
    p.add_argument("--id-column", default="item_id", metavar="NAME")
    p.add_argument("--value-column", default="audited_value", metavar="NAME")
    p.add_argument("--note-column", default=None, metavar="NAME")
    p.add_argument("--decimal", default=".", choices=(".", ","))
    p.add_argument("--sheet", default=None)
    p.add_argument("--item", default=None, help="one item id (instead of a file)")
    p.add_argument("--value", default=None, help="its audited value")
    p.add_argument("--note", default=None, help="a note for that item")
    p.add_argument("--replace", action="store_true", help="replace values already recorded (kept in the log)")
    add_json_flag(p)
    p.set_defaults(run=run)
    return p


def run(args) -> int:
    from auditmean.workflow import open_engagement

    eng, _population = open_engagement(args.engagement, population_arg(args))
    if args.results and args.item:
        raise InputError("give a results file or --item/--value, not both", table="options")
    if args.results:
        res = eng.record_results_file(
            args.results, id_column=args.id_column, value_column=args.value_column,
            note_column=args.note_column, decimal=args.decimal, sheet=args.sheet, replace=args.replace,
        )
    elif args.item is not None and args.value is not None:
        res = eng.record_result(args.item, args.value, note=args.note, replace=args.replace, decimal=args.decimal)
    else:
        raise InputError("give a results file, or --item with --value", table="options")
    status = eng.status()
    if args.json:
        print_json({"recorded": int(len(res.current)), "status": status.to_dict()})
        return 0
    from auditmean.cli._monetary import is_monetary_unit, print_next, say

    if is_monetary_unit(eng):
        say(status.summary())
        print_next(eng, "Next command")
        return 0
    print(status.summary())
    return 0
