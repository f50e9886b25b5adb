"""How a population is read and summarised: in memory, or by DuckDB from a large file.

Planning and selection need per-stratum counts, sums and sums of powers, a
histogram, a few order statistics and the smallest keys per stratum. The
:class:`PopulationScan` interface asks for exactly these;
:class:`PandasScan` answers from a population in memory (with the
in-memory functions themselves) and :class:`DuckDBScan` by SQL, streaming
from a CSV or Parquet file. :func:`open_population` picks the engine by
the file's size (:func:`choose_engine`, thresholds :data:`LARGE_FILE_BYTES`
and :data:`LARGE_FILE_ROWS`) and says which it picked;
:func:`stratify_scan` and :func:`select_scan` give the records of
:func:`~auditmean.strata.stratify` and :func:`~auditmean.selection.select`
on any scan, so the same population gives the same strata and exactly the
same selected items on either path.
"""

from auditmean.scan._duckdb import DEFAULT_MEMORY_LIMIT, DuckDBScan
from auditmean.scan._interface import PopulationScan
from auditmean.scan._large import (
    LARGE_FILE_BYTES,
    LARGE_FILE_ROWS,
    EngineChoice,
    LargePopulation,
    ScannedStrata,
    choose_engine,
    open_population,
    scan_of,
    select_planned,
    select_scan,
    stratify_population,
    stratify_scan,
    verify_planned,
)
from auditmean.scan._pandas import PandasScan
from auditmean.scan._rule import StratumRule

__all__ = [
    "DEFAULT_MEMORY_LIMIT",
    "LARGE_FILE_BYTES",
    "LARGE_FILE_ROWS",
    "DuckDBScan",
    "EngineChoice",
    "LargePopulation",
    "PandasScan",
    "PopulationScan",
    "ScannedStrata",
    "StratumRule",
    "choose_engine",
    "open_population",
    "scan_of",
    "select_planned",
    "select_scan",
    "stratify_population",
    "stratify_scan",
    "verify_planned",
]
