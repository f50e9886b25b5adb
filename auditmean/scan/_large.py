"""Large populations: the automatic choice of engine, and stratification and selection on any scan.

:func:`open_population` reads a population in memory (a
:class:`~auditmean.population.Population`) or, for a file at or above
:data:`LARGE_FILE_BYTES` (or a Parquet file of at least
:data:`LARGE_FILE_ROWS` rows), opens it with DuckDB and returns a
:class:`LargePopulation`, whose items stay in the file. The record says
which engine was chosen and why.

:func:`stratify_scan` and :func:`select_scan` are
:func:`~auditmean.strata.stratify` and :func:`~auditmean.selection.select`
written against :class:`~auditmean.scan.PopulationScan` only: the same
rules, the same checks, the same records, from per-stratum statistics and
the smallest keys instead of the items. :func:`stratify_population`,
:func:`select_planned` and :func:`verify_planned` pick the in-memory
functions or these, from the kind of population.
"""

from __future__ import annotations

import dataclasses
import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np
import pandas as pd

from auditmean._records import RecordMixin, format_number, html_table, property_text
from auditmean.core import boundaries as bnd
from auditmean.errors import InputError, ParameterError
from auditmean.population import PARQUET_EXTENSIONS, Population, load_population
from auditmean.scan._duckdb import DEFAULT_MEMORY_LIMIT, DuckDBScan
from auditmean.scan._interface import PopulationScan
from auditmean.scan._pandas import PandasScan
from auditmean.scan._rule import CREDITS, REST, ZEROS, StratumRule
from auditmean.selection import (
    VerificationResult,
    _check_seed,
    _check_sizes,
    _Checked,
    _sorted_labels,
    compare_selection,
    select,
)
from auditmean.strata import (
    _DEFAULT_STRATA,
    _POLICIES,
    _RESERVED,
    KIND_CREDITS,
    KIND_PREASSIGNED,
    KIND_RANGE,
    KIND_TOP,
    KIND_ZEROS,
    METHODS,
    Strata,
    _amount,
    _check_boundaries,
    _choice,
    _natural_order,
    _whole,
    stratify,
)

__all__ = [
    "LARGE_FILE_BYTES",
    "LARGE_FILE_ROWS",
    "EngineChoice",
    "LargePopulation",
    "ScannedStrata",
    "choose_engine",
    "open_population",
    "scan_of",
    "select_planned",
    "select_scan",
    "stratify_population",
    "stratify_scan",
    "verify_planned",
]

#: Files of at least this many bytes (100 MiB) are read by DuckDB.
LARGE_FILE_BYTES = 100 * 2**20
#: Parquet files of at least this many rows are read by DuckDB, whatever their size.
LARGE_FILE_ROWS = 5_000_000

#: Rules that need every book value in memory (sorted running sums): not on the large-file path.
_IN_MEMORY_METHODS = ("equal_value", "optimal")


# ---------------------------------------------------------------------------
# the choice of engine


@dataclass(frozen=True)
class EngineChoice(RecordMixin):
    """Which engine reads a population, and why (``engine`` is ``"pandas"`` or ``"duckdb"``)."""

    record_kind: ClassVar[str] = "engine_choice"

    engine: str
    reason: str

    def summary(self) -> str:
        return f"Read by {self.engine}: {self.reason}"


def choose_engine(
    source: object, *, threshold_bytes: int = LARGE_FILE_BYTES, threshold_rows: int = LARGE_FILE_ROWS
) -> EngineChoice:
    """The engine :func:`open_population` uses for ``source``, with the reason in words.

    DuckDB for a CSV or Parquet file of at least ``threshold_bytes`` bytes,
    or a Parquet file of at least ``threshold_rows`` rows (read from its
    footer); pandas (in memory) for anything else: smaller files, Excel
    workbooks, DataFrames. The thresholds are our own choice: below them
    the in-memory path reads the file in seconds and a few hundred MB;
    above them its memory grows past what a laptop spares comfortably.
    """
    if isinstance(source, pd.DataFrame):
        return EngineChoice("pandas", "a DataFrame is already in memory")
    if not isinstance(source, (str, os.PathLike)):
        return EngineChoice("pandas", "not a file path")
    path = os.fspath(source)
    ext = os.path.splitext(path)[1].lower()
    from auditmean.population import CSV_EXTENSIONS

    if ext not in CSV_EXTENSIONS + PARQUET_EXTENSIONS:
        return EngineChoice("pandas", f"files of type {ext!r} are read in memory only" if ext else "not a CSV or Parquet file name")
    try:
        size = os.path.getsize(path)
    except OSError:
        return EngineChoice("pandas", "the file could not be measured (the in-memory reader says why)")
    limit = f"{threshold_bytes / 2**20:,.0f} MiB"
    if size >= threshold_bytes:
        return EngineChoice("duckdb", f"the file is {size / 2**20:,.1f} MiB, at or above the {limit} threshold")
    if ext in PARQUET_EXTENSIONS:
        import pyarrow.parquet as pq  # here: only Parquet files need it

        try:
            rows = pq.ParquetFile(path).metadata.num_rows
        except Exception:  # a bad file: the in-memory reader reports it
            rows = 0
        if rows >= threshold_rows:
            return EngineChoice("duckdb", f"the file has {rows:,} rows, at or above the {threshold_rows:,}-row threshold")
    return EngineChoice("pandas", f"the file is {size / 2**20:,.1f} MiB, below the {limit} threshold")


@dataclass(frozen=True, eq=False)
class LargePopulation(RecordMixin):
    """A population read by DuckDB: the fingerprints and totals, with the items left in the file.

    Attributes
    ----------
    source, id_column, value_column, stratum_column, file_sha256, content_sha256, count:
        As in :class:`~auditmean.population.Population`; the content
        fingerprint follows the same rule
        (:func:`~auditmean.population.content_fingerprint`), so the same
        items give the same fingerprint on either path.
    total:
        Sum of the book values (DuckDB's compensated ``fsum``: equal to the
        correctly rounded sum to rounding).
    engine, reason:
        ``"duckdb"`` and why it was chosen.
    scan:
        The :class:`~auditmean.scan.DuckDBScan` over the file.
    """

    record_kind: ClassVar[str] = "population"

    source: str
    id_column: str
    value_column: str
    stratum_column: str | None
    file_sha256: str | None
    content_sha256: str
    count: int
    total: float
    engine: str
    reason: str
    scan: DuckDBScan = field(repr=False)

    def items_for(self, item_ids: list[str]) -> pd.DataFrame:
        """``item_id`` and ``book_value`` of the given items, looked up in the file."""
        return self.scan.book_values_of(list(item_ids))

    def to_dict(self) -> dict[str, Any]:
        out = super().to_dict()
        out.pop("scan", None)
        return out

    def _rows(self) -> list[tuple[str, str]]:
        return [
            ("source", self.source),
            ("items", format_number(self.count)),
            ("book value total", format_number(self.total)),
            ("item id column", self.id_column),
            ("book value column", self.value_column),
            ("preassigned stratum column", self.stratum_column or "none"),
            ("read by", f"{self.engine} ({self.reason})"),
            ("file SHA-256", self.file_sha256 or ""),
            ("content SHA-256", self.content_sha256),
        ]

    def summary(self) -> str:
        return property_text("Population (large file)", self._rows())

    def _html_body(self) -> str:
        return html_table(["property", "value"], self._rows(), caption="Population (large file)")


def open_population(
    source: str | os.PathLike[str] | pd.DataFrame,
    *,
    id_column: str,
    value_column: str,
    stratum_column: str | None = None,
    decimal: str = ".",
    sep: str | None = None,
    sheet: str | int | None = None,
    encoding: str = "utf-8",
    engine: str = "auto",
    threshold_bytes: int = LARGE_FILE_BYTES,
    threshold_rows: int = LARGE_FILE_ROWS,
    memory_limit: str = DEFAULT_MEMORY_LIMIT,
    threads: int | None = None,
) -> Population | LargePopulation:
    """Read a population in memory, or open a large file with DuckDB, whichever fits.

    Parameters
    ----------
    source, id_column, value_column, stratum_column, decimal, sep, sheet, encoding:
        As :func:`~auditmean.population.load_population`.
    engine:
        ``"auto"`` (default: :func:`choose_engine` decides), ``"pandas"`` or ``"duckdb"``.
    threshold_bytes, threshold_rows:
        The thresholds of the automatic choice.
    memory_limit, threads:
        DuckDB's working-memory limit and threads (DuckDB path only).

    Returns
    -------
    Population or LargePopulation
        A :class:`LargePopulation` carries the choice in ``engine`` and
        ``reason``; :func:`choose_engine` gives it for either.

    Notes
    -----
    Both records hold the content fingerprint of the same rule, computed
    as the file is read; on the DuckDB path this sorts the items by id out
    of core, the longest step for a large file (see DEVELOPERS.md,
    Benchmarks), and finds any repeated id on the way.
    """
    if engine not in ("auto", "pandas", "duckdb"):
        raise ParameterError("engine", f"must be 'auto', 'pandas' or 'duckdb', got {engine!r}")
    if engine == "auto":
        choice = choose_engine(source, threshold_bytes=threshold_bytes, threshold_rows=threshold_rows)
    else:
        choice = EngineChoice(engine, "asked for")
    if choice.engine == "pandas":
        return load_population(
            source,
            id_column=id_column,
            value_column=value_column,
            stratum_column=stratum_column,
            decimal=decimal,
            sep=sep,
            sheet=sheet,
            encoding=encoding,
        )
    if isinstance(source, pd.DataFrame):
        raise ParameterError("engine", "'duckdb' reads files; a DataFrame is read in memory (engine='pandas')")
    if sheet is not None:
        raise ParameterError("sheet", "the large-file path reads CSV and Parquet files, which have no sheets")
    scan = DuckDBScan(
        source,
        id_column=id_column,
        value_column=value_column,
        stratum_column=stratum_column,
        decimal=decimal,
        sep=sep,
        encoding=encoding,
        memory_limit=memory_limit,
        threads=threads,
    )
    file_sha256, content_sha256 = scan.fingerprint()
    return LargePopulation(
        source=os.fspath(source),
        id_column=id_column,
        value_column=value_column,
        stratum_column=stratum_column,
        file_sha256=file_sha256,
        content_sha256=content_sha256,
        count=scan.count,
        total=scan.total,
        engine="duckdb",
        reason=choice.reason,
        scan=scan,
    )


def scan_of(population: Population | LargePopulation) -> PopulationScan:
    """The scan of a population record (a :class:`PandasScan` for one in memory)."""
    if isinstance(population, LargePopulation):
        return population.scan
    if isinstance(population, Population):
        return PandasScan(population)
    raise ParameterError("population", f"must be a Population or LargePopulation, got {type(population).__name__}")


# ---------------------------------------------------------------------------
# strata from a scan


@dataclass(frozen=True, eq=False)
class ScannedStrata(Strata):
    """Strata computed from a scan: the record of :func:`~auditmean.strata.stratify` without the items.

    ``codes``, ``item_ids`` and ``book_values`` are empty (the items stay
    where the scan reads them); ``rule`` and ``groups`` say how an item
    finds its stratum, and ``scan`` reads them again for the selection.
    """

    rule: StratumRule = field(default_factory=StratumRule)
    groups: tuple[int, ...] = ()
    scan: Any = field(default=None, repr=False)

    @property
    def item_count(self) -> int:
        return int(self.table["count"].sum())

    @property
    def assignment(self) -> pd.Series:
        raise ParameterError(
            "strata", "the items of a population read from a large file are not held in memory; select with select_scan"
        )

    def assignment_frame(self) -> pd.DataFrame:
        raise ParameterError(
            "strata", "the items of a population read from a large file are not held in memory; select with select_scan"
        )


def stratify_scan(
    scan: PopulationScan,
    *,
    method: str | None = None,
    n_strata: int | None = None,
    top_cutoff: float | None = None,
    top_items: int | None = None,
    boundaries: list[float] | tuple[float, ...] | np.ndarray | None = None,
    credits: str = "separate",
    zeros: str = "separate",
    use_preassigned: bool = False,
    n_classes: int = bnd.DEFAULT_CLASSES,
    tolerable: float | None = None,
    expected: float = 0.0,
    risk_incorrect_acceptance: float = 0.10,
    risk_incorrect_rejection: float | None = None,
    seed: int = 0,
) -> ScannedStrata:
    """:func:`~auditmean.strata.stratify` on a scan: the same strata from statistics, not items.

    Parameters are those of :func:`~auditmean.strata.stratify`. The
    boundaries are exact, not approximated: the cumulative square-root rule
    needs only the counts of its equal-width classes (one histogram pass),
    the geometric rule only the smallest and largest values, given
    boundaries and preassigned strata nothing more; each stratum's
    statistics come from two passes (counts, sums and extremes, then
    centred powers about the stratum's mean). ``method="equal_value"`` and
    ``"optimal"`` need the sorted values and are refused here.

    Returns
    -------
    ScannedStrata
    """
    credits = _choice("credits", credits, _POLICIES)
    zeros = _choice("zeros", zeros, _POLICIES)
    n_classes = _whole("n_classes", n_classes, 2)
    if not isinstance(use_preassigned, bool):
        raise ParameterError("use_preassigned", f"must be True or False, got {use_preassigned!r}")
    if use_preassigned:
        if method is not None or boundaries is not None or n_strata is not None:
            raise ParameterError(
                "method" if method is not None else ("boundaries" if boundaries is not None else "n_strata"),
                "leave it out with use_preassigned=True: the strata come from 'preassigned_stratum'",
            )
        if not scan.has_preassigned:
            raise InputError(
                "missing column 'preassigned_stratum' (use_preassigned=True); name the stratum column when "
                "reading the population",
                table="population",
            )
        method = "preassigned"
    else:
        if method is None:
            method = "boundaries" if boundaries is not None else "cumulative_sqrt"
        method = _choice("method", method, METHODS)
        if (boundaries is not None) != (method == "boundaries"):
            raise ParameterError(
                "boundaries",
                "give boundaries exactly when method='boundaries'"
                if boundaries is None
                else f"boundaries are only used with method='boundaries', not {method!r}",
            )
        if method in _IN_MEMORY_METHODS and scan.engine != "pandas":
            raise ParameterError(
                "method",
                f"{method!r} needs every book value in memory, sorted; for a population read from a large "
                "file use 'cumulative_sqrt', 'geometric', 'boundaries' or preassigned strata",
            )
    if method != "optimal" and tolerable is not None:
        raise ParameterError("tolerable", f"is only used by method='optimal', not {method!r}")
    if method in _IN_MEMORY_METHODS:
        population = getattr(scan, "population", None)
        return _from_strata(
            stratify(
                population, method=method, n_strata=n_strata, top_cutoff=top_cutoff, top_items=top_items,
                credits=credits, zeros=zeros, n_classes=n_classes, tolerable=tolerable, expected=expected,
                risk_incorrect_acceptance=risk_incorrect_acceptance,
                risk_incorrect_rejection=risk_incorrect_rejection, seed=seed,
            ),
            scan,
        )

    notes: list[str] = []
    if top_cutoff is not None and top_items is not None:
        raise ParameterError("top_items", "give top_cutoff or top_items, not both")
    apart = {"credits_apart": credits == "separate", "zeros_apart": zeros == "separate"}
    cutoff: float | None = None
    top_rule = "none"
    if top_cutoff is not None:
        cutoff = _amount("top_cutoff", top_cutoff)
        top_rule = "items at or above the amount given"
    elif top_items is not None:
        k = _whole("top_items", top_items, 1)
        signs = scan.extent(StratumRule())[0]
        n_pos = int(signs[REST])
        if k > n_pos:
            raise ParameterError("top_items", f"asks for the {k:,} largest items but only {n_pos:,} are positive")
        cutoff = scan.largest(k)
        top_rule = f"the {k:,} largest items"
    base = StratumRule(top_cutoff=cutoff, **apart)
    count0, lo0, hi0 = scan.extent(base)
    if top_items is not None:
        extra = int(count0[base.top]) - int(top_items)
        if extra > 0:
            notes.append(
                f"{extra:,} more item{'s' if extra > 1 else ''} equal to the {int(top_items):,}-th largest book value "
                f"({format_number(cutoff)}) joined the top stratum"
            )
    parameters: dict[str, Any] = {
        # as stratify records them, so that the same call makes the same strata again
        "method": None if use_preassigned else method,
        "n_strata": n_strata,
        "top_cutoff": top_cutoff,
        "top_items": top_items,
        "credits": credits,
        "zeros": zeros,
        "use_preassigned": use_preassigned,
    }
    n_rest = int(count0[REST])
    cuts = np.empty(0)
    if method == "preassigned":
        everything = scan.labels(StratumRule(credits_apart=False, zeros_apart=False), "rest")
        reserved = sorted({lab for lab in everything if lab in _RESERVED})
        if reserved:
            raise InputError(
                f"the labels {', '.join(repr(r) for r in _RESERVED)} are kept for strata auditmean forms; "
                f"rename these preassigned strata ({', '.join(repr(r) for r in reserved)})",
                table="population",
                column="preassigned_stratum",
            )
        if count0[base.top] > 0:
            moved = np.unique(np.asarray(scan.labels(base, "top"), dtype=object))
            notes.append(
                f"{int(count0[base.top]):,} items with a preassigned stratum are at or above the top cutoff "
                f"and were put in the top stratum (their preassigned strata: {', '.join(moved[:5])}"
                f"{' ...' if moved.size > 5 else ''})"
            )
        rest_labels = _natural_order(scan.labels(base, "rest")) if n_rest else []
        rule = dataclasses.replace(base, preassigned=tuple(rest_labels))
        rule_kind = KIND_PREASSIGNED
        n_formed = len(rest_labels)
        stats = scan.count_and_moments(rule, centres=_centres(rule, lo0, hi0))
    else:
        n_req = _DEFAULT_STRATA if n_strata is None else _whole("n_strata", n_strata, 1)
        lo, hi = float(lo0[REST]), float(hi0[REST])
        if method == "boundaries":
            cuts = _check_boundaries(boundaries, np.array([lo, hi]) if n_rest else np.empty(0))
            if n_strata is not None and n_req != cuts.size + 1:
                raise ParameterError(
                    "n_strata", f"is {n_req} but {cuts.size} boundaries make {cuts.size + 1} strata; leave it out"
                )
            n_req = cuts.size + 1
            parameters["boundaries"] = [float(c) for c in cuts]
        parameters["n_strata"] = n_req
        if n_rest == 0:
            notes.append("no items are left for the rule once the top, credits and zeros strata are formed")
            n_req = 0
        elif method == "cumulative_sqrt":
            parameters["n_classes"] = n_classes
            if n_req >= 2 and lo != hi:
                edges = np.histogram_bin_edges(np.array([lo, hi]), bins=n_classes, range=(lo, hi))
                cuts = bnd.cumulative_sqrt_from_histogram(scan.histogram(base, edges), edges, n_req)
        elif method == "geometric":
            if lo <= 0:
                which = "zeros" if lo == 0 and int(count0[CREDITS]) == 0 else "credits"
                raise ParameterError(
                    which,
                    "geometric boundaries need positive book values; keep credits and zeros apart "
                    "(credits='separate', zeros='separate')",
                )
            cuts = bnd.geometric(np.array([lo, hi]), n_req)
        rule = dataclasses.replace(base, boundaries=tuple(float(b) for b in cuts))
        stats = scan.count_and_moments(rule, centres=_centres(rule, lo0, hi0))
        counts = stats.count[REST : rule.top]
        n_formed = int(np.count_nonzero(counts))
        if n_rest and (n_formed < n_req or cuts.size + 1 != n_req):
            raise ParameterError(
                "n_strata",
                f"the {method.replace('_', ' ')} rule can form only {n_formed} non-empty strata from these "
                f"{n_rest:,} book values, not {n_req}; ask for fewer strata"
                + (", use more classes (n_classes)" if method == "cumulative_sqrt" else "")
                + (", or give other boundaries" if method == "boundaries" else "")
                + " or a different top stratum",
            )
        rule_kind = KIND_RANGE
        if n_rest == 0:
            n_formed = 0

    names = rule.labels()
    groups: list[int] = []
    kinds: list[str] = []
    if stats.count[CREDITS] > 0:
        groups.append(CREDITS)
        kinds.append(KIND_CREDITS)
    if stats.count[ZEROS] > 0:
        groups.append(ZEROS)
        kinds.append(KIND_ZEROS)
    if n_rest:
        groups += list(range(REST, rule.top))
        kinds += [rule_kind] * (rule.top - REST)
    if stats.count[rule.top] > 0:
        groups.append(rule.top)
        kinds.append(KIND_TOP)
    elif cutoff is not None:
        notes.append(f"no item is at or above the top cutoff {format_number(cutoff)}; there is no top stratum")
        cutoff = None
        top_rule = "none"
        rule = dataclasses.replace(rule, top_cutoff=None)
    g = np.asarray(groups, dtype=np.int64)
    table = pd.DataFrame(
        {
            "stratum": pd.Series([names[i] for i in groups], dtype=object),
            "kind": pd.Series(kinds, dtype=object),
            "count": stats.count[g].astype(np.int64),
            "book_total": stats.total[g],
            "mean": stats.mean[g],
            "std_dev": stats.std_dev[g],
            "skewness": stats.skewness[g],
            "min_book": stats.minimum[g],
            "max_book": stats.maximum[g],
        }
    )
    return ScannedStrata(
        method=method,
        n_strata=int(n_formed),
        boundaries=tuple(float(b) for b in cuts),
        top_cutoff=cutoff,
        top_rule=top_rule,
        credits=credits,
        zeros=zeros,
        table=table,
        labels=tuple(names[i] for i in groups),
        codes=np.empty(0, dtype=np.int64),
        item_ids=np.empty(0, dtype=object),
        book_values=np.empty(0),
        parameters=parameters,
        details={},
        notes=tuple(notes),
        rule=rule,
        groups=tuple(groups),
        scan=scan,
    )


def _centres(rule: StratumRule, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """A value inside each group's range: the middle of its extremes (base rule) or of its boundaries."""
    c = np.where(np.isfinite(lo) & np.isfinite(hi), (lo + hi) / 2.0, 0.0)
    if rule.preassigned is not None or not rule.boundaries:
        out = np.zeros(rule.n_groups)
        out[:REST] = c[:REST]
        out[REST : rule.top] = c[REST]
        out[rule.top] = c[-1]
        return out
    edges = np.concatenate([[lo[REST]], rule.boundaries, [hi[REST]]])
    out = np.zeros(rule.n_groups)
    out[:REST] = c[:REST]
    out[REST : rule.top] = (edges[:-1] + edges[1:]) / 2.0
    out[rule.top] = c[-1]
    return out


def _from_strata(strata: Strata, scan: PopulationScan) -> ScannedStrata:
    """An in-memory Strata record (``equal_value``, ``optimal``) as ScannedStrata over the same scan."""
    rule = StratumRule(
        top_cutoff=strata.top_cutoff,
        credits_apart=strata.credits == "separate",
        zeros_apart=strata.zeros == "separate",
        boundaries=tuple(strata.boundaries),
    )
    names = rule.labels()
    groups = tuple(names.index(lab) for lab in strata.labels)
    values = {f.name: getattr(strata, f.name) for f in dataclasses.fields(Strata)}
    return ScannedStrata(**values, rule=rule, groups=groups, scan=scan)


# ---------------------------------------------------------------------------
# selection from a scan


def select_scan(strata: ScannedStrata, sizes: Mapping[Any, int], seed: str) -> pd.DataFrame:
    """:func:`~auditmean.selection.select` from strata made by :func:`stratify_scan`: the same items.

    Parameters
    ----------
    strata:
        The strata (their ``scan`` reads the items).
    sizes, seed:
        As for :func:`~auditmean.selection.select`: every stratum named,
        sizes from 0 to the stratum's count, the seed used exactly as given.

    Returns
    -------
    pandas.DataFrame
        As :func:`~auditmean.selection.select` returns it (``item_id``,
        ``stratum``, ``key``, ``key_int``, ``order``, by stratum then order).
    """
    if not isinstance(strata, ScannedStrata) or strata.scan is None:
        raise ParameterError("strata", "must be strata made by stratify_scan (or stratify_population)")
    seed = _check_seed(seed)
    labels = list(strata.labels)
    counts = dict(zip(labels, strata.table["count"].to_numpy(dtype=np.int64)))
    ordered = _sorted_labels(labels)
    checked = _Checked(
        ids=[],
        id_series=pd.Series([], dtype=object),
        strata=pd.Series([], dtype=object),
        labels=ordered,
        codes=np.empty(0, dtype=np.int64),
        counts=np.asarray([counts[lab] for lab in ordered], dtype=np.int64),
    )
    n = _check_sizes(sizes, checked)
    by_group = np.zeros(strata.rule.n_groups, dtype=np.int64)
    group_of = dict(zip(labels, strata.groups))
    for lab, k in zip(ordered, n):
        by_group[group_of[lab]] = int(k)
    chosen = strata.scan.smallest_keys(seed, strata.rule, by_group)
    label_of = {g: lab for lab, g in group_of.items()}
    rank = {lab: i for i, lab in enumerate(ordered)}
    stratum = chosen["group"].map(label_of)
    chosen = chosen.assign(stratum=stratum.astype(object), _rank=stratum.map(rank))
    chosen = chosen.sort_values(["_rank", "order"], kind="stable").reset_index(drop=True)
    # the column types select() gives for a frame of text ids and labels
    return pd.DataFrame(
        {
            "item_id": pd.Series(chosen["item_id"].tolist(), dtype="str"),
            "stratum": pd.Series(chosen["stratum"].tolist(), dtype="str"),
            "key": pd.Series(chosen["key"].tolist(), dtype="str"),
            "key_int": chosen["key_int"].to_numpy(dtype=np.uint64),
            "order": chosen["order"].to_numpy(dtype=np.int64),
        }
    )


# ---------------------------------------------------------------------------
# the choice between the in-memory functions and the scan functions


def stratify_population(population: Population | LargePopulation, **options: Any) -> Strata:
    """:func:`~auditmean.strata.stratify` for a population in memory, :func:`stratify_scan` for a large one."""
    if isinstance(population, LargePopulation):
        return stratify_scan(population.scan, **options)
    return stratify(population, **options)


def select_planned(strata: Strata, sizes: Mapping[Any, int], seed: str) -> tuple[pd.DataFrame, pd.DataFrame | None]:
    """The selection for ``sizes`` and ``seed``, and the frame it was drawn from (None for a large population)."""
    if isinstance(strata, ScannedStrata):
        return select_scan(strata, sizes, seed), None
    frame = strata.assignment_frame()[["item_id", "stratum"]]
    return select(frame, sizes, seed), frame


def verify_planned(
    strata: Strata, sizes: Mapping[Any, int], seed: str, recorded: pd.DataFrame
) -> VerificationResult:
    """Re-perform the selection (in memory or by the scan) and compare it with ``recorded``."""
    expected, _ = select_planned(strata, sizes, seed)
    return compare_selection(expected, seed, recorded)
