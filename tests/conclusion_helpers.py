"""A small generated ledger for command-line tests (not demo data: made here, seeded)."""

from __future__ import annotations

import numpy as np
import pandas as pd


def ledger(n: int = 600, seed: int = 3) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    amount = np.round(rng.lognormal(7, 1.1, n), 2)
    return pd.DataFrame({"doc": [f"D{i:05d}" for i in range(n)], "amount": amount})
