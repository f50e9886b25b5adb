"""``auditmean demo``: the whole job on the bundled, invented demo ledger.

Plans, selects, "examines" the selected invoices by looking up their true
audited values in the demo's answer file, records them, evaluates, and
prints the conclusion. Everything lands in a new engagement folder that the
other subcommands can open. The data and every name in it are invented.
"""

from __future__ import annotations

import argparse
from datetime import datetime, timezone
from pathlib import Path

import pandas as pd

from auditmean.cli._common import add_json_flag, print_json
from auditmean.errors import InputError
from auditmean.plan import MisstatementPattern
from auditmean.workflow import (
    PopulationReading,
    draw_selection,
    evaluate_engagement,
    start_engagement,
)

__all__ = ["register", "run", "find_demo_data", "DEMO_SETTINGS"]

#: The demo's engagement settings (invented, like its data): tolerable
#: misstatement 2% of the book total, half of it expected.
DEMO_SETTINGS = {
    "stratify": {"method": "cumulative_sqrt", "n_strata": 4, "top_cutoff": 250_000.0},
    "plan": {
        "tolerable": 760_000.0,
        "expected": 150_000.0,
        "risk_incorrect_acceptance": 0.05,
        "risk_incorrect_rejection": 0.20,
        "method": "ratio",
        "std_dev_source": MisstatementPattern(0.04, 0.20),
        "minimum": 30,
    },
    "seed": "quillonby-2024-demo",
}


def find_demo_data(given: str | None = None) -> Path:
    """The folder with the demo files: the one given, ./demo_data, or the source checkout's."""
    candidates = [Path(given)] if given else [Path.cwd() / "demo_data", Path(__file__).resolve().parents[2] / "demo_data"]
    for c in candidates:
        if (c / "invoices.csv").exists() and (c / "invoices_audited.csv").exists():
            return c
    raise InputError(
        "the demo files (invoices.csv, invoices_audited.csv) were not found; run the demo from the "
        "project folder or pass --data DIR",
        file=str(candidates[0]),
    )


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "demo",
        help="run the whole job on the bundled invented demo ledger",
        description=(
            "Run plan, selection, recording and evaluation on the bundled demo ledger of a fictional "
            "distributor (invented data) into a new engagement folder, and print the conclusion."
        ),
    )
    p.add_argument("--folder", default=None, metavar="DIR", help="engagement folder to create (default: a new one here)")
    p.add_argument("--data", default=None, metavar="DIR", help="folder with the demo files (default: ./demo_data)")
    add_json_flag(p)
    p.set_defaults(run=run)
    return p


def run_demo(folder: Path, data: Path):
    reading = PopulationReading(str(data / "invoices.csv"), id_column="invoice_no", value_column="book_value")
    eng, population, strata, plan = start_engagement(
        folder, reading, stratify_options=DEMO_SETTINGS["stratify"], plan_options=DEMO_SETTINGS["plan"]
    )
    selection, seed = draw_selection(eng, population, seed=DEMO_SETTINGS["seed"])
    truth = pd.read_csv(data / "invoices_audited.csv", dtype=str, keep_default_na=False).set_index("invoice_no")
    found = truth.loc[selection["item_id"]]
    results_file = Path(folder) / "demo_examination_results.csv"
    pd.DataFrame(
        {"item_id": selection["item_id"].to_numpy(), "audited_value": found["audited_value"].to_numpy(), "note": found["finding"].to_numpy()}
    ).to_csv(results_file, index=False)
    eng.record_results_file(results_file, id_column="item_id", value_column="audited_value", note_column="note", entered_by="auditmean demo")
    evaluation = evaluate_engagement(eng)
    return eng, population, strata, plan, evaluation


def run(args) -> int:
    data = find_demo_data(args.data)
    folder = Path(args.folder) if args.folder else Path.cwd() / ("auditmean-demo-" + datetime.now(timezone.utc).strftime("%Y%m%d-%H%M%S"))
    eng, population, strata, plan, evaluation = run_demo(folder, data)
    from auditmean.cli.report import write_both

    written, _wp = write_both(folder, population=population)
    if args.json:
        print_json({"engagement": str(folder), "plan": plan.to_dict(), "evaluation": evaluation.to_dict(),
                    "workpaper": {k: str(v) for k, v in written.items()}})
        return 0
    print("auditmean demo: invented data (a fictional distributor's 25,000 open invoices)")
    print(f"Engagement folder: {folder}\n")
    print(plan.summary())
    print()
    print(evaluation.summary())
    print(f"\nWorkpaper: {written['xlsx']}\n           {written['html']}")
    return 0

