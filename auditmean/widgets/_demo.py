"""Conveniences for the invented demo only: where its files are, and its "examination".

The demo's answer file ``invoices_audited.csv`` holds the true audited value
of every invented invoice. A real engagement never has such a file: the
audited values come from examining each selected item. The panels offer
these conveniences only when the population read is the demo's ledger.
"""

from __future__ import annotations

import os
from pathlib import Path

import pandas as pd

from auditmean._atomic import write_bytes_atomic
from auditmean.errors import InputError

__all__ = ["DEMO_LEDGER", "DEMO_ANSWERS", "is_demo_population", "write_demo_results"]

DEMO_LEDGER = "invoices.csv"
DEMO_ANSWERS = "invoices_audited.csv"


def is_demo_population(population: object, demo_data: str | os.PathLike[str] | None) -> bool:
    """True when ``population`` was read from the demo ledger in ``demo_data``."""
    if demo_data is None or population is None:
        return False
    source = getattr(population, "source", None)
    if not source:
        return False
    try:
        return Path(source).resolve() == (Path(demo_data) / DEMO_LEDGER).resolve()
    except OSError:
        return False


def write_demo_results(item_ids: list[str], demo_data: str | os.PathLike[str], path: str | os.PathLike[str]) -> Path:
    """Write the demo's true audited values (and findings, as notes) of ``item_ids`` to a results file.

    The file has the columns ``item_id``, ``audited_value`` and ``note``,
    like the one ``auditmean demo`` writes; it is written atomically.
    """
    answers = Path(demo_data) / DEMO_ANSWERS
    if not answers.exists():
        raise InputError("the demo's answer file is not there", file=str(answers))
    truth = pd.read_csv(answers, dtype=str, keep_default_na=False).set_index("invoice_no")
    unknown = [i for i in item_ids if i not in truth.index]
    if unknown:
        raise InputError(f"{len(unknown)} selected items are not in the demo's answer file, e.g. {unknown[0]!r}",
                         file=str(answers))
    found = truth.loc[list(item_ids)]
    frame = pd.DataFrame(
        {"item_id": list(item_ids), "audited_value": found["audited_value"].to_numpy(), "note": found["finding"].to_numpy()}
    )
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    write_bytes_atomic(target, frame.to_csv(index=False).encode("utf-8"))
    return target
