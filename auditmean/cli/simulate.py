"""``auditmean simulate``: the coverage check of a planned design on the population file.

Reads a population file (one row per item: book value and stratum), the
planned sample sizes (a sizes table with one row per stratum, or a plan
record written as JSON), builds a misstatement model from the options and
runs :func:`auditmean.coverage.simulate_coverage`. A progress bar is shown
on standard error when it is a terminal (``--progress`` to force it);
Ctrl-C stops the run after the current batch and the replications finished
so far are reported, marked as partial.
"""

from __future__ import annotations

import argparse
import json
import signal
import sys
import time
from typing import TYPE_CHECKING

from auditmean.cautions import cautions_text
from auditmean.cli._common import add_json_flag, print_json
from auditmean.core.choices import MAX_REPLICATIONS, METHODS
from auditmean.errors import InputError, ParameterError, spreadsheet_row

if TYPE_CHECKING:
    from auditmean.coverage import MisstatementModel

# numpy, pandas and the engine are imported inside the functions that use them,
# so that building the command line's parser stays light (see auditmean/cli/__init__.py).

__all__ = ["register", "run", "ProgressBar"]


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "simulate",
        help="check by simulation how often a planned design's limits would hold on this population",
        description=(
            "Before any item is examined: repeat the planned stratified sample many times on the "
            "population's own book values, with misstatement drawn from a model, and report how often "
            "each estimator's confidence limits contain the true audited total, its bias, the actual "
            "risks of incorrect acceptance and rejection, and how often each warning would be raised; "
            "beside them, the bound that holds in finite samples. For an engagement of the monetary-unit "
            "design (--engagement), the planned monetary-unit sample is repeated instead and every bound "
            "it offers is shown beside the normal limit, each with how often it held."
        ),
    )
    p.add_argument("population", nargs="?", default=None, help="population file (CSV, TSV, Excel or Parquet): one row per item")
    p.add_argument(
        "--engagement", default=None, metavar="DIR",
        help="check the engagement's own plan on its population, and keep the result in the folder (coverage.json)",
    )
    design = p.add_mutually_exclusive_group()
    design.add_argument("--sizes", metavar="FILE", help="sizes table: one row per stratum with its planned size")
    design.add_argument("--plan", metavar="FILE", help="a plan record saved as JSON (its sizes, tolerable and expected)")

    cols = p.add_argument_group("column names")
    cols.add_argument("--value-column", default="book_value", metavar="NAME", help="book values (default book_value)")
    cols.add_argument("--stratum-column", default="stratum", metavar="NAME",
                      help="stratum of each item, and the stratum column of the sizes table (default stratum)")
    cols.add_argument("--id-column", default=None, metavar="NAME", help="item ids, checked for blanks and duplicates")
    cols.add_argument("--size-column", default="size", metavar="NAME", help="planned sizes in the sizes table (default size)")
    cols.add_argument("--decimal", choices=(".", ","), default=".", help="decimal mark of amounts written as text")
    cols.add_argument("--sheet", default=None, help="sheet name for Excel files (default: the first)")

    model = p.add_argument_group("misstatement model")
    model.add_argument("--error-rate", type=float, metavar="RATE",
                       help="share of items misstated, e.g. 0.05 (for every stratum not given below)")
    model.add_argument("--stratum-error-rate", action="append", default=[], metavar="STRATUM=RATE",
                       help="error rate of one stratum (repeat for several)")
    taint = model.add_mutually_exclusive_group(required=True)
    taint.add_argument("--taint", type=float, metavar="SHARE", help="every misstated item misstated by this share of its book value")
    taint.add_argument("--taint-uniform", type=float, nargs=2, metavar=("LOW", "HIGH"),
                       help="share misstated uniform between LOW and HIGH")
    taint.add_argument("--taint-beta", type=float, metavar="MEAN", help="share misstated from a beta distribution with this mean")
    taint.add_argument("--taint-list", metavar="FILE",
                       help="table of taints seen before (column 'taint'), drawn with replacement, signs kept")
    model.add_argument("--concentration", type=float, default=2.0,
                       help="concentration of the beta taints (default 2; larger: closer to the mean)")
    model.add_argument("--understatement-share", type=float, default=0.0, metavar="SHARE",
                       help="share of misstated items that are understated (default 0)")
    model.add_argument("--large-errors", nargs=3, metavar=("ITEMS", "TAINT", "PROBABILITY"),
                       help="the ITEMS largest items are each misstated with PROBABILITY by TAINT of book value")

    run_opts = p.add_argument_group("simulation")
    run_opts.add_argument("--estimator", action="append", choices=METHODS,
                          help="only this estimator (repeat for several; default: all five)")
    run_opts.add_argument("--replications", type=int, default=2000,
                          help=f"simulated samples, 1 to {MAX_REPLICATIONS:,} (default 2,000)")
    run_opts.add_argument("--seed", type=int, default=None, help="seed (default: a new one, printed with the results)")
    run_opts.add_argument("--confidence", type=float, default=None,
                          help="confidence level (default 0.95; a monetary-unit engagement: its plan's)")
    run_opts.add_argument("--distribution", choices=("normal", "t"), default="normal", help="normal or Student t limits")
    run_opts.add_argument("--tolerable", type=float, default=None, help="tolerable misstatement (default: the plan's)")
    run_opts.add_argument("--expected", type=float, default=None, help="expected misstatement (default: the plan's)")
    run_opts.add_argument("--fixed-population", action="store_true",
                          help="draw one misstated population and sample it again and again")
    run_opts.add_argument("--second-opinion", action="store_true",
                          help="also measure the bootstrap second-opinion interval (slow)")
    run_opts.add_argument("--second-opinion-replicates", type=int, default=2000, metavar="N",
                          help="bootstrap replicates per simulated sample (default 2,000)")
    bar = run_opts.add_mutually_exclusive_group()
    bar.add_argument("--progress", dest="progress", action="store_true", default=None,
                     help="show the progress bar even when standard error is not a terminal")
    bar.add_argument("--no-progress", dest="progress", action="store_false", help="never show the progress bar")
    add_json_flag(p)
    p.set_defaults(run=run)
    return p


class ProgressBar:
    """A one-line text progress bar on a stream, and a Ctrl-C that stops the run after the current batch.

    Call it as the engine's ``progress(done, total)``; it returns ``False``
    once Ctrl-C was pressed. Use it as a context manager: it installs its
    own handler of the interrupt signal and restores the previous one.
    """

    def __init__(self, stream=None, show: bool = True, width: int = 30) -> None:
        self.stream = sys.stderr if stream is None else stream
        self.show = show
        self.width = width
        self.interrupted = False
        self._start = time.monotonic()
        self._previous = None
        self._drawn = False

    def __enter__(self) -> ProgressBar:
        self._previous = signal.signal(signal.SIGINT, self._on_interrupt)
        return self

    def __exit__(self, *exc) -> None:
        signal.signal(signal.SIGINT, self._previous)
        if self._drawn:
            self.stream.write("\n")
            self.stream.flush()

    def _on_interrupt(self, signum, frame) -> None:
        self.interrupted = True

    def __call__(self, done: int, total: int) -> bool:
        if self.show:
            filled = int(self.width * done / total) if total else self.width
            elapsed = time.monotonic() - self._start
            left = elapsed / done * (total - done) if done else 0.0
            note = "  stopping after this batch (Ctrl-C)" if self.interrupted else ""
            self.stream.write(
                f"\rsimulating [{'#' * filled}{'.' * (self.width - filled)}] {done:,}/{total:,}"
                f"  {elapsed:,.1f} s, about {left:,.0f} s left{note}"
            )
            self.stream.flush()
            self._drawn = True
        return not self.interrupted


def _population(args):
    from auditmean._frames import duplicated_rows, label_column
    from auditmean.amounts import parse_amounts
    from auditmean.tables import read_table

    frame = read_table(args.population, sheet=args.sheet)
    where = {"file": args.population}
    for col, option in ((args.value_column, "--value-column"), (args.stratum_column, "--stratum-column")):
        if col not in frame.columns:
            have = ", ".join(repr(c) for c in frame.columns)
            raise InputError(f"no column {col!r} (name it with {option}); the file has {have}", column=col, **where)
    if args.id_column is not None:
        if args.id_column not in frame.columns:
            have = ", ".join(repr(c) for c in frame.columns)
            raise InputError(f"no column {args.id_column!r} (given with --id-column); the file has {have}",
                             column=args.id_column, **where)
        ids = label_column(frame, args.id_column, "population", args.population).astype(str).str.strip()
        dup = duplicated_rows(ids)
        if dup:
            raise InputError("each item may appear only once", rows=dup, column=args.id_column, **where)
    book = parse_amounts(frame[args.value_column], decimal=args.decimal, column=args.value_column, file=args.population)
    strata = label_column(frame, args.stratum_column, "population", args.population)
    return book, strata.to_numpy(dtype=object)


def _sizes(args, strata):
    import numpy as np

    from auditmean._frames import duplicated_rows, label_column, numeric_column
    from auditmean.plan import Plan
    from auditmean.tables import read_table

    if args.plan is not None:
        try:
            with open(args.plan, encoding="utf-8") as fh:
                record = json.load(fh)
        except FileNotFoundError:
            raise InputError("no such file", file=args.plan) from None
        except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise InputError(f"not readable as a JSON plan record ({exc})", file=args.plan) from None
        plan = Plan.from_dict(record, source=args.plan)
        labels, counts = np.unique(np.array([str(s).strip() for s in strata], dtype=object), return_counts=True)
        have = dict(zip(labels, counts))
        for row in plan.table.itertuples(index=False):
            lab = str(row.stratum).strip()
            if have.get(lab) != int(row.count):
                raise InputError(
                    f"the plan counts {int(row.count):,} items in this stratum but the population file has "
                    f"{have.get(lab, 0):,}: the plan was made for another population or stratification",
                    file=args.plan, stratum=lab,
                )
        return plan.sizes, plan.tolerable, plan.expected
    table = read_table(args.sizes, sheet=args.sheet)
    for col, option in ((args.stratum_column, "--stratum-column"), (args.size_column, "--size-column")):
        if col not in table.columns:
            have = ", ".join(repr(c) for c in table.columns)
            raise InputError(f"no column {col!r} (name it with {option}); the file has {have}",
                             column=col, file=args.sizes)
    labels = label_column(table, args.stratum_column, "sizes", args.sizes).astype(str).str.strip()
    dup = duplicated_rows(labels)
    if dup:
        raise InputError("each stratum must appear once", rows=dup, column=args.stratum_column, file=args.sizes)
    values = numeric_column(table, args.size_column, "sizes", args.sizes)
    not_whole = np.flatnonzero(values != np.round(values))
    if not_whole.size:
        raise InputError("planned sizes must be whole numbers", rows=[spreadsheet_row(i) for i in not_whole],
                         column=args.size_column, file=args.sizes)
    return {lab: int(v) for lab, v in zip(labels, values)}, None, None


def _model(args, strata) -> MisstatementModel:
    from auditmean._frames import numeric_column
    from auditmean.coverage import (
        BetaTaint,
        FixedTaint,
        MisstatementModel,
        ObservedTaints,
        UniformTaint,
    )
    from auditmean.tables import read_table

    if args.taint is not None:
        taint = FixedTaint(args.taint)
    elif args.taint_uniform is not None:
        taint = UniformTaint(*args.taint_uniform)
    elif args.taint_beta is not None:
        taint = BetaTaint(args.taint_beta, args.concentration)
    else:
        table = read_table(args.taint_list, sheet=args.sheet)
        if "taint" not in table.columns:
            have = ", ".join(repr(c) for c in table.columns)
            raise InputError(f"no column 'taint'; the file has {have}", column="taint", file=args.taint_list)
        taint = ObservedTaints(tuple(numeric_column(table, "taint", "taints", args.taint_list)))
    per_stratum = {}
    for text in args.stratum_error_rate:
        label, sep, rate = text.rpartition("=")
        if not sep or not label.strip():
            raise ParameterError("--stratum-error-rate", f"got {text!r}; write STRATUM=RATE, e.g. 3=0.02")
        try:
            per_stratum[label.strip()] = float(rate)
        except ValueError:
            raise ParameterError("--stratum-error-rate", f"got {text!r}; the rate after '=' is not a number") from None
    if per_stratum and args.error_rate is not None:
        # Strata not listed take --error-rate: the user said so explicitly.
        labels = {str(s).strip() for s in strata}
        rate: float | dict[str, float] = {lab: per_stratum.get(lab, args.error_rate) for lab in sorted(labels)}
        rate.update(per_stratum)  # a listed stratum the population lacks is reported by the model
    elif per_stratum:
        rate = per_stratum
    elif args.error_rate is not None:
        rate = args.error_rate
    else:
        raise ParameterError("--error-rate", "give the share of items misstated (or --stratum-error-rate per stratum)")
    large = {}
    if args.large_errors is not None:
        k, t, q = args.large_errors
        try:
            large = dict(large_items=int(k), large_item_taint=float(t), large_item_probability=float(q))
        except ValueError:
            raise ParameterError("--large-errors", f"got {' '.join(args.large_errors)}; write ITEMS TAINT PROBABILITY, "
                                 f"e.g. 5 1.0 0.2") from None
    return MisstatementModel(error_rate=rate, taint=taint, understatement_share=args.understatement_share, **large)


def _run_engagement(args) -> int:
    import numpy as np

    from auditmean.engagement import Engagement
    from auditmean.workflow import (
        design_of,
        engagement_strata,
        open_engagement,
        simulate_engagement,
    )

    if args.population or args.sizes or args.plan:
        raise InputError("with --engagement the population and plan come from the folder; give no file", table="options")
    monetary = design_of(Engagement.open(args.engagement)) == "monetary_unit"
    eng, population = open_engagement(args.engagement)
    if monetary:
        return _run_monetary_engagement(args, eng, population)
    strata = engagement_strata(eng, population)
    labels = np.asarray(strata.labels, dtype=object)[strata.codes]
    model = _model(args, labels)
    show = sys.stderr.isatty() if args.progress is None else args.progress
    extra = {}
    if args.tolerable is not None:
        extra["tolerable"] = args.tolerable
    if args.expected is not None:
        extra["expected"] = args.expected
    with ProgressBar(show=show) as bar:
        result = simulate_engagement(
            eng, population, model, estimators=args.estimator or METHODS, replications=args.replications,
            confidence=_confidence(args), seed=args.seed, fixed_population=args.fixed_population, progress=bar,
            distribution=args.distribution, second_opinion=args.second_opinion,
            second_opinion_replicates=args.second_opinion_replicates, **extra,
        )
    return _report(args, result)


def _confidence(args) -> float:
    """``--confidence``, 0.95 when not given (a monetary-unit engagement takes its plan's instead)."""
    return 0.95 if args.confidence is None else args.confidence


def _run_monetary_engagement(args, eng, population) -> int:
    """The coverage check of a monetary-unit engagement: every bound and the normal limit, side by side."""
    from auditmean.workflow import simulate_engagement

    for given, option in (
        (args.estimator, "--estimator"),
        (args.distribution != "normal", "--distribution"),
        (args.second_opinion, "--second-opinion"),
        (args.stratum_error_rate, "--stratum-error-rate"),
    ):
        if given:
            raise ParameterError(
                option, "does not apply to a monetary-unit engagement: its check simulates every bound that "
                "auditmean.monetary_unit_bound offers and the normal limit of the mean taint, on one error rate "
                "for the whole population (--error-rate)",
            )
    model = _model(args, [])
    show = sys.stderr.isatty() if args.progress is None else args.progress
    extra = {}
    for name in ("tolerable", "expected", "confidence"):
        if getattr(args, name) is not None:
            extra[name] = getattr(args, name)
    with ProgressBar(show=show) as bar:
        result = simulate_engagement(
            eng, population, model, replications=args.replications, seed=args.seed,
            fixed_population=args.fixed_population, progress=bar, **extra,
        )
    return _report(args, result)


def run(args) -> int:
    from auditmean.coverage import simulate_coverage

    if args.engagement:
        return _run_engagement(args)
    if not args.population or not (args.sizes or args.plan):
        raise InputError("give a population file with --sizes or --plan, or --engagement DIR", table="options")
    book, strata = _population(args)
    sizes, plan_tm, plan_em = _sizes(args, strata)
    model = _model(args, strata)
    tolerable = args.tolerable if args.tolerable is not None else plan_tm
    expected = args.expected if args.expected is not None else plan_em
    show = sys.stderr.isatty() if args.progress is None else args.progress
    with ProgressBar(show=show) as bar:
        result = simulate_coverage(
            book,
            strata,
            sizes,
            model,
            estimators=args.estimator or METHODS,
            replications=args.replications,
            confidence=_confidence(args),
            tolerable=tolerable,
            expected=expected,
            seed=args.seed,
            fixed_population=args.fixed_population,
            progress=bar,
            distribution=args.distribution,
            second_opinion=args.second_opinion,
            second_opinion_replicates=args.second_opinion_replicates,
        )
    return _report(args, result)


def _report(args, result) -> int:
    if args.json:
        print_json(result.to_dict())
        return 0
    import textwrap

    print(result.summary())
    print(f"\nSeed {result.seed} (give --seed {result.seed} to repeat this run).")
    print()
    for line in cautions_text().split("\n"):  # within 100 columns, as the summary
        print(textwrap.fill(line, width=100, subsequent_indent="  ") if len(line) > 100 else line)
    return 0
