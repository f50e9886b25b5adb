"""``auditmean select``: draw the planned sample by permanent random numbers."""

from __future__ import annotations

import argparse

from auditmean.cli._common import add_json_flag, print_json

__all__ = ["register", "run", "add_engagement_options", "population_arg"]


def add_engagement_options(p) -> None:
    p.add_argument("--engagement", required=True, metavar="DIR", help="the engagement folder")
    p.add_argument(
        "--population", default=None, metavar="FILE",
        help="the population file, if it has moved since the plan (read with the recorded column names)",
    )


def population_arg(args):
    """The population read from --population with the recorded reading, or None (use the recorded file)."""
    if not args.population:
        return None
    from auditmean.engagement import Engagement
    from auditmean.workflow import PopulationReading, _record

    rec = _record(Engagement.open(args.engagement))
    reading = PopulationReading.from_dict({**rec["population_reading"], "source": args.population})
    return reading.load()


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "select",
        help="draw the planned sample (reproducible from the seed)",
        description=(
            "Draw the planned sample. Each item's key is the first 16 hexadecimal digits of "
            "SHA-256(seed + ':' + item id); each stratum takes the items with the smallest keys, so "
            "anyone can re-perform the selection with any SHA-256 tool. For the monetary-unit design, draw "
            "k is the cent floor(u * B / 2^52) of the positive book total B laid out in item-id order, u the "
            "first 13 hexadecimal digits of SHA-256(seed + ':unit:' + k)."
        ),
    )
    add_engagement_options(p)
    p.add_argument("--seed", default=None, help="the seed (any text); default: a new one is proposed and recorded")
    p.add_argument(
        "--extend-to", type=int, default=None, metavar="N",
        help="monetary-unit design: draw more units, N in all, with the recorded seed; every item already "
        "selected stays selected",
    )
    add_json_flag(p)
    p.set_defaults(run=run)
    return p


def run(args) -> int:
    from auditmean.workflow import draw_selection, open_engagement

    eng, population = open_engagement(args.engagement, population_arg(args))
    from auditmean.cli._monetary import is_monetary_unit, run_select

    if is_monetary_unit(eng):
        return run_select(args, eng, population)
    if getattr(args, "extend_to", None) is not None:
        from auditmean.errors import InputError

        raise InputError("--extend-to is for the monetary-unit design; this engagement is stratified", table="options")
    selection, seed = draw_selection(eng, population, seed=args.seed)
    if args.json:
        print_json({"seed": seed, "items": len(selection), "file": str(eng.folder / "selection.csv"),
                    "sizes": eng.sizes(), "selection": selection[["item_id", "stratum", "key", "order"]]})
        return 0
    counts = selection.groupby("stratum", sort=False).size()
    print(f"Seed: {seed!r} (recorded; keep it with the workpaper)")
    print(f"{len(selection):,} items selected: " + ", ".join(f"{s} {n}" for s, n in counts.items()))
    print(f"The list is in {eng.folder / 'selection.csv'}; record what the audit finds with auditmean record.")
    return 0
