"""``auditmean report``: write the workpaper of an engagement (Excel workbook and HTML report)."""

from __future__ import annotations

import argparse
from pathlib import Path

from auditmean.cli._common import add_json_flag, print_json
from auditmean.cli.select import add_engagement_options, population_arg

__all__ = ["register", "run", "write_both"]


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "report",
        help="write the workpaper: an Excel workbook and a self-contained HTML report",
        description=(
            "Write the workpaper of an engagement: what population was sampled and its fingerprint, how it was "
            "stratified, why the sample is that large, how it was selected, what was found, how it was projected "
            "and what the sample supports, every warning with its rule and source, the coverage check when one is "
            "recorded, every formula with its source, and how to re-perform the work. With neither --xlsx nor "
            "--html both files are written into the engagement folder (workpaper.xlsx, workpaper.html)."
        ),
    )
    add_engagement_options(p)
    p.add_argument("--xlsx", default=None, metavar="PATH", help="write the Excel workbook here")
    p.add_argument("--html", default=None, metavar="PATH", help="write the HTML report here")
    p.add_argument(
        "--evaluation", default=None, metavar="FILE",
        help="which saved evaluation to report (its file name in evaluations/; default the latest)",
    )
    p.add_argument("--purpose", default=None, metavar="TEXT", help="the purpose of the work, in your words")
    p.add_argument(
        "--no-reperform", action="store_true",
        help="do not re-perform the selection while writing (by default the workpaper says whether it matches)",
    )
    add_json_flag(p)
    p.set_defaults(run=run)
    return p


def write_both(folder, xlsx=None, html=None, *, population=None, evaluation=None, purpose=None, reperform=True):
    """Write the files asked for (both, into the folder, when neither is given); returns ``{kind: path}``."""
    from auditmean.workpaper import (
        DEFAULT_NAMES,
        collect_workpaper,
        write_html_report,
        write_workbook,
    )

    if xlsx is None and html is None:
        xlsx, html = Path(folder) / DEFAULT_NAMES["xlsx"], Path(folder) / DEFAULT_NAMES["html"]
    wp = collect_workpaper(folder, population=population, evaluation=evaluation, purpose=purpose, reperform=reperform)
    written = {}
    if xlsx is not None:
        written["xlsx"] = write_workbook(folder, xlsx, workpaper=wp)
    if html is not None:
        written["html"] = write_html_report(folder, html, workpaper=wp)
    return written, wp


def run(args) -> int:
    written, wp = write_both(
        args.engagement, args.xlsx, args.html, population=population_arg(args), evaluation=args.evaluation,
        purpose=args.purpose, reperform=not args.no_reperform,
    )
    if args.json:
        print_json({**{k: str(v) for k, v in written.items()}, "notes": list(wp.notes)})
        return 0
    for kind, path in written.items():
        label = "Workbook" if kind == "xlsx" else "HTML report"
        print(f"{label}: {path}")
    for n in wp.notes:
        print(f"Note: {n}")
    return 0
