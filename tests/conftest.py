"""Shared fixtures: the open reference data in tests/data/ (source and licence in its README.md)."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

PROJECT_ROOT = Path(__file__).resolve().parents[1]
#: Every file the tests read lives in the repository (no test reads anything beside it).
REFERENCE_DIR = Path(__file__).resolve().parent / "data"

collect_ignore = ["benchmarks"]


def _reference(name: str) -> Path:
    path = REFERENCE_DIR / name
    if not path.exists():
        raise FileNotFoundError(
            f"reference data {path} is missing from the repository (see tests/data/README.md)"
        )
    return path


@pytest.fixture(scope="session")
def apistrat() -> pd.DataFrame:
    """The stratified sample of 200 schools from R's survey package (see tests/data/README.md)."""
    return pd.read_csv(_reference("apistrat.csv"), dtype={"cds": str})


@pytest.fixture(scope="session")
def apipop() -> pd.DataFrame:
    """The 6,194-school population the sample was drawn from."""
    return pd.read_csv(_reference("apipop.csv"), dtype={"cds": str})


@pytest.fixture(scope="session")
def api_strata(apipop: pd.DataFrame) -> pd.DataFrame:
    """Strata table: stratum = school type, count, book_total = population total of api99."""
    g = apipop.groupby("stype")
    return pd.DataFrame(
        {
            "stratum": g.size().index,
            "count": g.size().to_numpy(),
            "book_total": g["api99"].sum().to_numpy().astype(float),
        }
    )


@pytest.fixture(scope="session")
def api_sample(apistrat: pd.DataFrame) -> pd.DataFrame:
    """The sample with api99 as book value and api00 as audited value."""
    return pd.DataFrame(
        {
            "stratum": apistrat["stype"],
            "item_id": apistrat["cds"],
            "book_value": apistrat["api99"].astype(float),
            "audited_value": apistrat["api00"].astype(float),
            "enroll": apistrat["enroll"].astype(float),
        }
    )
