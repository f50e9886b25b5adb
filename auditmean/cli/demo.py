"""``auditmean demo``: the whole job on an invented demo ledger, from any folder.

Writes the invented demo ledger and its answer file (generated from a fixed
seed by :mod:`auditmean._demo_data`, part of the installed package), plans,
selects, "examines" the selected invoices by looking up their true audited
values in the answer file, records them, evaluates, prints the conclusion
and writes the workpaper. The data and every name in it are invented.

Everything lands in the demo's own folder (``./auditmean-demo`` unless
``--folder`` names another)::

    auditmean-demo/
        .auditmean-demo       the marker: this folder is the demo's own
        demo_data/            invoices.csv and invoices_audited.csv (invented)
        receivables-2024/     the stratified engagement, which the other subcommands open
        receivables-2024-units/  the same ledger sampled by monetary unit

A later run replaces a folder that carries the marker, so demos do not pile
up; it refuses any other folder that holds something, so the demo never
deletes what it did not write.
"""

from __future__ import annotations

import argparse
import hashlib
import shutil
from pathlib import Path
from typing import Any

from auditmean.cli._common import add_json_flag, print_json
from auditmean.errors import InputError, ParameterError

__all__ = [
    "register",
    "run",
    "run_demo",
    "find_demo_data",
    "demo_settings",
    "prepare_demo_folder",
    "write_demo_data",
    "DEMO_FOLDER",
    "MARKER",
    "DATA_SUBFOLDER",
    "ENGAGEMENT_SUBFOLDER",
    "UNITS_SUBFOLDER",
    "run_monetary_unit_demo",
    "true_misstatement",
    "truth_table",
]

#: The demo's folder in the current folder, unless --folder names another.
DEMO_FOLDER = "auditmean-demo"
#: The file that marks a folder as the demo's own (and so replaceable by the next demo).
MARKER = ".auditmean-demo"
#: Inside the demo's folder: the invented data, and the engagement.
DATA_SUBFOLDER = "demo_data"
ENGAGEMENT_SUBFOLDER = "receivables-2024"
#: The same ledger sampled by monetary unit, as a second engagement beside the first.
UNITS_SUBFOLDER = "receivables-2024-units"
#: The two files the demo reads.
DEMO_FILES = ("invoices.csv", "invoices_audited.csv")

_MARKER_TEXT = (
    "This folder was written by `auditmean demo` from invented data.\n"
    "The next `auditmean demo` that writes here deletes this folder and everything in it,\n"
    "and writes it anew. Delete this file to keep the folder: the demo then refuses it.\n"
)


def demo_settings() -> dict[str, Any]:
    """The demo's engagement settings (invented, like its data).

    Tolerable misstatement 2% of the book total, about a fifth of it
    expected. Built on first use: the plan's types load the scientific
    stack, which building the command line's parser must not.
    """
    from auditmean.plan import MisstatementPattern

    return {
        "stratify": {"method": "cumulative_sqrt", "n_strata": 4, "top_cutoff": 250_000.0},
        "plan": {
            "tolerable": 760_000.0,
            "expected": 150_000.0,
            "risk_incorrect_acceptance": 0.05,
            "risk_incorrect_rejection": 0.20,
            "method": "ratio",
            "std_dev_source": MisstatementPattern(0.04, 0.20),
            "minimum": "checks",
        },
        "monetary_unit": {
            "tolerable": 760_000.0,
            "expected": 150_000.0,
            "risk_incorrect_acceptance": 0.05,
        },
        "seed": "quillonby-2024-demo",
        # the coverage check of the stratified plan: samples and seed, so the demo repeats exactly
        "check": {"replications": 2000, "seed": 2024},
    }


def __getattr__(name: str) -> Any:
    # ``DEMO_SETTINGS`` as a module attribute (``from auditmean.cli.demo import DEMO_SETTINGS``),
    # built on first use (PEP 562).
    if name == "DEMO_SETTINGS":
        value = globals()["DEMO_SETTINGS"] = demo_settings()
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def find_demo_data(given: str | None = None) -> Path:
    """A folder with the demo files: the one given, ./demo_data, the last demo's, or the source checkout's."""
    candidates = (
        [Path(given)]
        if given
        else [
            Path.cwd() / "demo_data",
            Path.cwd() / DEMO_FOLDER / DATA_SUBFOLDER,
            Path(__file__).resolve().parents[2] / "demo_data",
        ]
    )
    for c in candidates:
        if all((c / name).exists() for name in DEMO_FILES):
            return c
    raise InputError(
        "the demo files (invoices.csv, invoices_audited.csv) were not found; run `auditmean demo` "
        f"(it writes them into ./{DEMO_FOLDER}/{DATA_SUBFOLDER}) or pass --data DIR",
        file=str(candidates[0]),
    )


def prepare_demo_folder(folder: str | Path) -> bool:
    """Make ``folder`` the demo's own, empty but for its marker; True when an earlier demo's was replaced.

    A missing or empty folder is created or used; a folder with the marker
    file :data:`MARKER` is deleted with everything in it and made anew.
    Refused (:class:`~auditmean.errors.ParameterError` on ``--folder``),
    with nothing deleted: a file or a link, a folder holding anything but
    without the marker, and the current folder or one that holds it.
    """
    folder = Path(folder)
    if folder.is_symlink():
        raise ParameterError("--folder", f"{str(folder)!r} is a link; give the demo a folder of its own")
    if folder.exists() and not folder.is_dir():
        raise ParameterError("--folder", f"{str(folder)!r} is a file, not a folder")
    replaced = False
    if folder.exists() and any(folder.iterdir()):
        marker = folder / MARKER
        if marker.is_symlink() or not marker.is_file():
            raise ParameterError(
                "--folder",
                f"{str(folder)!r} already holds files that auditmean demo did not write (it has no {MARKER} "
                "file), and the demo deletes only its own folders; name another folder with --folder DIR",
            )
        here, target = Path.cwd().resolve(), folder.resolve()
        if here == target or target in here.parents:
            raise ParameterError(
                "--folder",
                f"{str(folder)!r} is the current folder or holds it; run the demo from another folder",
            )
        shutil.rmtree(folder)
        replaced = True
    folder.mkdir(parents=True, exist_ok=True)
    (folder / MARKER).write_text(_MARKER_TEXT, encoding="utf-8")
    return replaced


def write_demo_data(target: str | Path, source: str | Path | None = None) -> tuple[Path, bool]:
    """Put the demo's two files into ``target``: copied from ``source``, or written from the fixed seed.

    Returns the folder and whether both files are byte for byte the published
    demo files (SHA-256 in :data:`auditmean._demo_data.INVOICE_FILES_SHA256`).
    """
    from auditmean._demo_data import INVOICE_FILES_SHA256, write_invoice_files

    target = Path(target)
    target.mkdir(parents=True, exist_ok=True)
    if source is None:
        write_invoice_files(target)
    else:
        for name in DEMO_FILES:
            shutil.copyfile(Path(source) / name, target / name)
    same = all(
        hashlib.sha256((target / name).read_bytes()).hexdigest() == INVOICE_FILES_SHA256[name] for name in DEMO_FILES
    )
    return target, same


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "demo",
        help="run the whole job on an invented demo ledger, in a folder of its own",
        description=(
            "Write the invented demo ledger of a fictional distributor (from a fixed seed) into the demo's "
            f"own folder, run plan, selection, recording and evaluation there as an engagement "
            f"({ENGAGEMENT_SUBFOLDER}/), print the conclusion and write the workpaper. The next demo "
            "replaces that folder; a folder the demo did not write is never deleted."
        ),
    )
    p.add_argument(
        "--folder", default=None, metavar="DIR",
        help=f"the demo's own folder (default: ./{DEMO_FOLDER}); an earlier demo's folder there is replaced, "
        "any other folder that holds files is refused",
    )
    p.add_argument(
        "--data", default=None, metavar="DIR",
        help="copy invoices.csv and invoices_audited.csv from this folder instead of writing them "
        "from the fixed seed (default: written from the seed)",
    )
    add_json_flag(p)
    p.set_defaults(run=run)
    return p


def _examine(eng, selection, data: Path, folder: Path) -> None:
    """"Examine" the selected invoices: their true audited values from the demo's answer file."""
    import pandas as pd

    truth = pd.read_csv(data / "invoices_audited.csv", dtype=str, keep_default_na=False).set_index("invoice_no")
    found = truth.loc[selection["item_id"]]
    results_file = Path(folder) / "demo_examination_results.csv"
    pd.DataFrame(
        {"item_id": selection["item_id"].to_numpy(), "audited_value": found["audited_value"].to_numpy(),
         "note": found["finding"].to_numpy()}
    ).to_csv(results_file, index=False)
    eng.record_results_file(results_file, id_column="item_id", value_column="audited_value", note_column="note",
                            entered_by="auditmean demo")


def run_demo(folder: Path, data: Path):
    """The stratified design on the demo files in ``data``, as a new engagement in ``folder``.

    The plan's coverage check (2,000 samples, fixed seed) is saved with it.
    """
    from auditmean.plan_check import check_plan
    from auditmean.workflow import (
        PopulationReading,
        draw_selection,
        evaluate_engagement,
        start_engagement,
    )

    settings = demo_settings()
    reading = PopulationReading(str(data / "invoices.csv"), id_column="invoice_no", value_column="book_value")
    eng, population, strata, plan = start_engagement(
        folder, reading, stratify_options=settings["stratify"], plan_options=settings["plan"],
        check=lambda st, pl: check_plan(st, pl, **settings["check"]),
    )
    selection, seed = draw_selection(eng, population, seed=settings["seed"])
    _examine(eng, selection, data, folder)
    evaluation = evaluate_engagement(eng)
    return eng, population, strata, plan, evaluation


def run_monetary_unit_demo(folder: Path, data: Path, population=None):
    """The monetary-unit design on the same demo files, as a new engagement in ``folder``."""
    from auditmean.workflow import (
        PopulationReading,
        draw_selection,
        evaluate_engagement,
        start_monetary_unit_engagement,
    )

    settings = demo_settings()
    reading = PopulationReading(str(data / "invoices.csv"), id_column="invoice_no", value_column="book_value")
    eng, population, plan = start_monetary_unit_engagement(
        folder, reading, population=population, **settings["monetary_unit"]
    )
    selection, seed = draw_selection(eng, population, seed=settings["seed"])
    _examine(eng, selection, data, folder)
    evaluation = evaluate_engagement(eng)
    return eng, population, plan, evaluation


def true_misstatement(data: Path) -> dict[str, float]:
    """The demo's true overstatement (book minus audited), known because the data are invented.

    ``"all"``: over every invoice; ``"positive"``: over the invoices with a
    positive book value, the ones a monetary-unit sample draws from.
    """
    import math

    import numpy as np
    import pandas as pd

    from auditmean.amounts import parse_amounts

    book = pd.read_csv(data / "invoices.csv", dtype=str, keep_default_na=False)
    audited = pd.read_csv(data / "invoices_audited.csv", dtype=str, keep_default_na=False)
    b = np.asarray(parse_amounts(book["book_value"]), dtype=float)
    a = np.asarray(parse_amounts(audited.set_index("invoice_no").loc[book["invoice_no"], "audited_value"]), dtype=float)
    d = b - a
    return {"all": math.fsum(d), "positive": math.fsum(d[b > 0])}


def truth_table(truth: dict[str, float], evaluation, units) -> list[tuple[str, float, bool]]:
    """Every upper limit of overstatement the two designs gave, and whether it covers the truth."""
    rows: list[tuple[str, float, bool]] = []
    for m, c in evaluation.conclusions.items():
        from auditmean.core.estimators import METHOD_NAMES

        rows.append((f"stratified, {METHOD_NAMES[m]}: normal limit", c.upper_limit, c.upper_limit >= truth["all"]))
    if evaluation.overstatement_bound is not None:
        u = evaluation.overstatement_bound.upper
        rows.append(("stratified: finite-sample bound", u, u >= truth["all"]))
    from auditmean.monetary_engagement import BOUND_NAMES

    for name, b in units.bounds.items():
        mark = " (relied on)" if name == units.relied_on else ""
        rows.append((f"monetary units: {BOUND_NAMES[name]}{mark}", b.upper, b.upper >= truth["positive"]))
    return rows


def run(args) -> int:
    from auditmean._records import format_number, text_table
    from auditmean.cli.report import write_both

    root = Path(args.folder) if args.folder else Path.cwd() / DEMO_FOLDER
    source = find_demo_data(args.data) if args.data else None  # checked before anything is deleted
    replaced = prepare_demo_folder(root)
    data, published = write_demo_data(root / DATA_SUBFOLDER, source)
    folder = root / ENGAGEMENT_SUBFOLDER
    eng, population, strata, plan, evaluation = run_demo(folder, data)
    written, _wp = write_both(folder, population=population)
    units_folder = root / UNITS_SUBFOLDER
    u_eng, _pop, u_plan, units = run_monetary_unit_demo(units_folder, data, population=population)
    u_written, _uwp = write_both(units_folder, population=population)
    truth = true_misstatement(data)
    rows = truth_table(truth, evaluation, units)
    check = (eng.plan() or {}).get("plan_check")
    if args.json:
        print_json({"folder": str(root), "replaced_earlier_demo": replaced, "data": str(data),
                    "data_as_published": published, "engagement": str(folder), "plan": plan.to_dict(),
                    "plan_check": check, "evaluation": evaluation.to_dict(),
                    "monetary_unit_engagement": str(units_folder), "monetary_unit_plan": u_plan.to_dict(),
                    "monetary_unit_evaluation": units.to_dict(),
                    "true_overstatement": truth,
                    "limits": [{"limit": n, "upper": v, "covers_truth": bool(c)} for n, v, c in rows],
                    "workpaper": {k: str(v) for k, v in written.items()},
                    "monetary_unit_workpaper": {k: str(v) for k, v in u_written.items()}})
        return 0
    print("auditmean demo: invented data (a fictional distributor's 25,000 open invoices)")
    print(f"Demo folder: {root}" + (" (the earlier demo there was replaced)" if replaced else ""))
    print("    the next `auditmean demo` here replaces it; a folder it did not write is never deleted")
    print(f"Invented data: {data}")
    if not published:
        print("    Note: these files differ from the published demo files (this numpy draws other numbers "
              "from the same seed), so the figures differ from the documentation's.")
    print()
    print("=" * 100)
    print("1. The classical design: strata, simple random samples, estimation")
    print(f"Engagement folder: {folder}")
    print("=" * 100)
    print(plan.summary())
    if check:
        print()
        print(check.get("line", ""))
    print()
    print(evaluation.summary())
    print()
    print("=" * 100)
    print("2. The same ledger sampled by monetary unit")
    print(f"Engagement folder: {units_folder}")
    print("=" * 100)
    print(u_plan.summary())
    print()
    print(units.summary())
    print()
    print("=" * 100)
    print("3. Which limits covered the truth? (known here only because the data are invented)")
    print("=" * 100)
    print(f"True overstatement: {format_number(truth['all'])} over every invoice, "
          f"{format_number(truth['positive'])} over those with a positive book value.")
    print(text_table(["upper limit of overstatement", "amount", "covers the truth"],
                     [[n, format_number(v), "yes" if c else "NO"] for n, v, c in rows]))
    print("A limit that misses the truth is not a mistake in one run: it is what a limit that does not")
    print("hold does too often. The normal limits above are the ones the warnings speak of.")
    print(f"\nWorkpaper: {written['xlsx']}\n           {written['html']}")
    print(f"Workpaper of the monetary-unit engagement: {u_written['xlsx']}\n"
          f"                                           {u_written['html']}")
    return 0
