"""The ``auditmean`` command: one subcommand per step of the job.

Each subcommand lives in its own module of this package and defines
``register(subparsers)``, which adds its parser and sets ``run`` (a function
taking the parsed arguments and returning an exit code) as the parser's
default. The command line is a thin surface: it reads files, calls the same
functions a script would, and formats what they return.

Errors the user can fix (auditmean's own exception types) are printed as one
readable line on standard error with exit code 2, never as a traceback.

Building the parser imports no numpy, scipy or pandas, so that ``auditmean
--help`` answers at once: a subcommand module imports at its top only what
``register`` needs (the standard library, :mod:`auditmean.errors`,
:mod:`auditmean.core.choices`, :mod:`auditmean.cli._common`) and imports the
rest inside ``run``. ``tests/test_cli_startup.py`` checks this.
"""

from __future__ import annotations

import argparse
import importlib
import sys
from collections.abc import Sequence

from auditmean._version import __version__
from auditmean.errors import AuditMeanError

# Order is the order of the job; each name is a module of this package.
SUBCOMMANDS: tuple[str, ...] = (
    "demo",
    "plan",
    "simulate",
    "select",
    "record",
    "evaluate",
    "estimate",
    "verify",
    "report",
    "status",
    "app",
)


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="auditmean",
        description=(
            "Classical variables sampling for audit: plan, stratify, select, "
            "project misstatement with confidence limits, and flag strata where "
            "the normal approximation cannot be trusted. A statistical result "
            "supports, and never replaces, professional judgement."
        ),
    )
    parser.add_argument("--version", action="version", version=f"auditmean {__version__}")
    subparsers = parser.add_subparsers(dest="command", metavar="STEP")
    subparsers.required = True
    for name in SUBCOMMANDS:
        importlib.import_module(f"auditmean.cli.{name}").register(subparsers)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.run(args) or 0)
    except AuditMeanError as exc:
        print(f"auditmean {args.command}: {exc}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into a pager or head that closed early
        return 0
    except KeyboardInterrupt:
        print(f"auditmean {args.command}: stopped by the user", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
