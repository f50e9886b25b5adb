"""The monetary-unit design on the command line: what ``plan``, ``select``, ``evaluate``,
``record``, ``verify`` and ``status`` do for an engagement of that design.

Each subcommand module calls in here when the design is the monetary-unit
one, so the stratified paths stay as they were. Output is plain text within
100 columns and ends with the next command to type. Heavy imports stay
inside the functions, so building the parser stays fast.
"""

from __future__ import annotations

import shlex
import textwrap
from typing import Any

from auditmean.errors import InputError

__all__ = [
    "DESIGN_CHOICES",
    "BOUND_CHOICES",
    "add_design_options",
    "add_bound_option",
    "is_monetary_unit",
    "next_command",
    "run_plan",
    "run_select",
    "run_evaluate",
    "print_next",
    "say",
]

#: ``--design`` values (our own words) -> the design recorded in plan.json.
DESIGN_CHOICES = {"stratified": "stratified", "monetary-unit": "monetary_unit"}
#: ``--bound`` values -> the method names of :func:`auditmean.monetary_unit_bound`.
BOUND_CHOICES = {
    "count-or-betting": "count_or_betting",
    "betting": "betting",
    "count": "count",
    "stringer": "stringer",
}
_WIDTH = 100


def say(text: str = "") -> None:
    """Print ``text`` wrapped at 100 columns (each paragraph line separately)."""
    for line in text.split("\n"):
        print(
            textwrap.fill(line, width=_WIDTH, subsequent_indent="  ")
            if len(line) > _WIDTH
            else line
        )


def add_design_options(p) -> None:
    """``--design`` and the monetary-unit plan options, on the ``plan`` parser."""
    g = p.add_argument_group("design")
    g.add_argument(
        "--design",
        choices=tuple(DESIGN_CHOICES),
        default="stratified",
        help="stratified (default): strata and simple random samples, estimated totals with normal-theory "
        "limits; monetary-unit: items drawn with probability proportional to book value, bounds for rare "
        "misstatements that hold in finite samples",
    )
    add_bound_option(
        g,
        "the bound the evaluation relies on (monetary-unit design; default betting, which holds in "
        "finite samples; count-or-betting suits errors expected few and total)",
    )
    g.add_argument(
        "--factors",
        choices=("poisson", "binomial"),
        default="poisson",
        help="confidence factors of the monetary-unit sample size (default poisson)",
    )


def add_bound_option(p, help_text: str) -> None:
    p.add_argument("--bound", choices=tuple(BOUND_CHOICES), default=None, help=help_text)


def _folder(path: Any) -> str:
    return shlex.quote(str(path))


def is_monetary_unit(eng) -> bool:
    """True when the engagement's plan records the monetary-unit design."""
    from auditmean.workflow import design_of

    return design_of(eng) == "monetary_unit"


def next_command(eng) -> str:
    """The next command to type for an engagement, from its status."""
    folder = _folder(eng.folder)
    st = eng.status()
    done = dict(zip(st.steps["step"], st.steps["done"]))
    if not done.get("plan"):
        return f"auditmean plan POPULATION --engagement {folder} ..."
    if not done.get("selection"):
        return f"auditmean select --engagement {folder}"
    if not done.get("results"):
        return f"auditmean record --engagement {folder} RESULTS.csv --id-column ID --value-column AUDITED"
    if not done.get("evaluation"):
        return f"auditmean evaluate --engagement {folder}"
    return (
        f"auditmean verify --engagement {folder}  (re-performs the selection; all steps are done)"
    )


def _refuse_stratified_options(args) -> None:
    given = []
    for attr, flag in (
        ("strata", "--strata"),
        ("boundaries", "--boundaries"),
        ("top_cutoff", "--top-cutoff"),
        ("top_items", "--top-items"),
        ("pilot", "--pilot"),
        ("error_rate", "--error-rate"),
        ("typical_taint", "--typical-taint"),
        ("risk_rejection", "--risk-rejection"),
        ("stratum_column", "--stratum-column"),
    ):
        if getattr(args, attr, None) is not None:
            given.append(flag)
    if getattr(args, "top_at_tolerable", False):
        given.append("--top-at-tolerable")
    for attr, flag, default in (
        ("strata_rule", "--strata-rule", "cumulative_sqrt"),
        ("method", "--method", "mpu"),
        ("allocation", "--allocation", "neyman"),
        ("credits", "--credits", "separate"),
        ("zeros", "--zeros", "separate"),
    ):
        if getattr(args, attr, default) != default:
            given.append(flag)
    if given:
        raise InputError(
            f"{', '.join(given)} belong to the stratified design; the monetary-unit design takes --tolerable, "
            "--expected, --risk-acceptance, --bound and --factors",
            table="options",
        )


def run_plan(args) -> int:
    """``auditmean plan ... --design monetary-unit``."""
    from auditmean.cli._common import print_json
    from auditmean.cli.plan import reading_from
    from auditmean.monetary_engagement import plan_monetary_units
    from auditmean.workflow import start_monetary_unit_engagement

    _refuse_stratified_options(args)
    bound = BOUND_CHOICES[args.bound or "betting"]
    reading = reading_from(args, args.population)
    options = dict(
        tolerable=args.tolerable,
        expected=args.expected,
        risk_incorrect_acceptance=args.risk_acceptance,
        bound=bound,
        basis=args.factors,
    )
    if args.engagement:
        _eng, population, plan = start_monetary_unit_engagement(args.engagement, reading, **options)
    else:
        from dataclasses import replace

        population = replace(reading, engine="pandas").load()
        plan = plan_monetary_units(population, **options)
    if args.json:
        print_json(
            {"design": "monetary_unit", "plan": plan.to_dict(), "engagement": args.engagement}
        )
        return 0
    print(f"Population read: {population.count:,} items, book value total {population.total:,.2f}.")
    print()
    say(plan.summary())
    if args.engagement:
        print()
        print(f"Engagement started in {args.engagement}.")
        print(f"Next: auditmean select --engagement {_folder(args.engagement)}")
    else:
        print()
        print(
            "Next: run this plan again with --engagement DIR to keep it and start the engagement."
        )
    return 0


def run_select(args, eng, population) -> int:
    """``auditmean select`` on a monetary-unit engagement (``--extend-to N`` extends the sample)."""
    from auditmean.cli._common import print_json
    from auditmean.engagement import _MONETARY_UNIT_COPY_COLUMNS
    from auditmean.workflow import draw_selection, extend_monetary_unit_selection

    extend_to = getattr(args, "extend_to", None)
    if extend_to is not None:
        if args.seed is not None:
            raise InputError("--extend-to keeps the recorded seed; give no --seed", table="options")
        selection, seed = extend_monetary_unit_selection(eng, population, extend_to)
    else:
        selection, seed = draw_selection(eng, population, seed=args.seed)
    rec = eng.selection_record()
    n = int(rec["sample_size"])
    in_full = int(selection["examined_in_full"].sum())
    credits, zeros = rec["credits"], rec["zeros"]
    if args.json:
        cols = list(_MONETARY_UNIT_COPY_COLUMNS)  # the columns of the selection's copy, in its order
        if "added" in selection.columns:
            cols.append("added")
        print_json(
            {
                "design": "monetary_unit",
                "seed": seed,
                "sample_size": n,
                "items": len(selection),
                "examined_in_full": in_full,
                "book_total": rec["book_total"],
                "interval": rec["interval"],
                "credits": credits,
                "zeros": zeros,
                "file": str(eng.folder / "selection.csv"),
                "extended_from": rec["history"][-1]["sample_size"]
                if extend_to is not None
                else None,
                "selection": selection[cols],
            }
        )
        return 0
    from auditmean._records import format_number

    print(f"Seed: {seed!r} (recorded; keep it with the working papers)")
    if extend_to is not None:
        before = int(rec["history"][-1]["sample_size"])
        print(
            f"Extended from {before:,} to {n:,} monetary units: {int(selection['added'].sum()):,} items added; "
            "every item selected before is kept."
        )
    say(
        f"{n:,} monetary units drawn from a positive book total of {format_number(rec['book_total'])} "
        f"(sampling interval {format_number(rec['interval'])}): {len(selection):,} items selected, "
        f"{in_full:,} of them examined in full (book value at or above the interval)."
    )
    say(
        f"Kept apart, never selected: {int(credits.get('count') or 0):,} credits (total "
        f"{format_number(credits.get('total') or 0.0)}) and {int(zeros.get('count') or 0):,} zero balances; "
        "they need their own procedures."
    )
    print(f"The list is in {eng.folder / 'selection.csv'}.")
    print(f"Next: {next_command(eng)}")
    return 0


def _refuse_evaluate_options(args) -> None:
    given = [
        flag
        for attr, flag in (
            ("method", "--method"),
            ("rely_on", "--rely-on"),
            ("seed", "--seed"),
            ("planned_allowance", "--planned-allowance"),
        )
        if getattr(args, attr, None) is not None
    ]
    for attr, flag, default in (
        ("distribution", "--distribution", "normal"),
        ("replicates", "--replicates", 2000),
        ("single_item", "--single-item", "average"),
        ("unsampled", "--unsampled", "error"),
    ):
        if getattr(args, attr, default) != default:
            given.append(flag)
    if given:
        raise InputError(
            f"{', '.join(given)} belong to the stratified evaluation; a monetary-unit engagement takes "
            "--missing and --bound",
            table="options",
        )


def run_evaluate(args, eng) -> int:
    """``auditmean evaluate --engagement DIR`` on a monetary-unit engagement."""
    from auditmean.cli._common import print_json
    from auditmean.workflow import evaluate_engagement

    _refuse_evaluate_options(args)
    bound = None if getattr(args, "bound", None) is None else BOUND_CHOICES[args.bound]
    ev = evaluate_engagement(eng, missing_treatment=args.missing, primary=bound)
    if args.json:
        print_json(ev.to_dict())
        return 0
    say(ev.summary())
    print()
    print(
        f"Saved in {eng.folder / 'evaluations'} (items without an audited value: {args.missing})."
    )
    print(f"Next: {next_command(eng)}")
    return 0


def print_next(eng, label: str = "Next") -> None:
    """The closing line of ``record``, ``verify`` and ``status`` on a monetary-unit engagement."""
    print(f"{label}: {next_command(eng)}")
