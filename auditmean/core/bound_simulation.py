"""The finite-sample bound inside the coverage simulation of a stratified design (pure numpy).

:func:`auditmean.core.simulation.run_simulation` calls :func:`bound_batch`
once per batch when its settings ask for a bound. The bound is
:func:`auditmean.core.finite_bounds.stratified_overstatement_bound` with its
default order (each stratum's items taken in the order least favourable to
the conclusion, so that the bound does not depend on the order of the
sample), the arithmetic of :func:`auditmean.overstatement_bound`, computed
for every replication of the batch at once and in every scenario (as
modelled, at tolerable, at expected; see :mod:`auditmean.core.simulation`).
Since the order does not matter, the engine's sorted samples are used as
they are, and simulating the bound takes no random numbers: the estimators'
figures are the same with or without it.

What the evaluation would compute
---------------------------------
The misstatement handed to the bound is ``book - (book - c m)``: the book
value minus the audited value the evaluation would be given, not ``c m``
itself (they may differ in the last bit). The bound of a replication is
then the one :func:`auditmean.overstatement_bound` computes from that
replication's sample, to the tolerance of the bound's search: the search
stops when every row of a block has converged, and a row that converged
early keeps stepping toward the exact bound, so the same sample may end a
hair closer to it in a batch than alone (both at or above the exact bound;
``tests/test_coverage_bounds.py`` checks the agreement). Strata examined in
full add their exact misstatement, summed over the stratum.

Samples without overstatement
-----------------------------
A replication in which no sampled item is overstated (every
``max(book - audited, 0)`` is zero) has the bound ``exact + Z``, ``exact``
the misstatement of the strata examined in full and ``Z`` the bound of the
same design with nothing found and nothing examined in full (the bound's
search depends on the sampled values only). ``Z`` is computed once per run
(:func:`zero_sample_bound`), so these replications cost nothing; at an
expected misstatement of zero every replication is such a sample.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from auditmean.core.finite_bounds import stratified_overstatement_bound

__all__ = ["BOUNDS", "zero_sample_bound", "bound_batch"]

#: The bounds the stratified coverage simulation can compute.
BOUNDS = ("stratified_betting",)


def zero_sample_bound(counts: np.ndarray, sizes: np.ndarray, full: np.ndarray, largest: np.ndarray,
                      confidence: float) -> float:
    """The bound of the design when no sampled item is overstated and nothing is examined in full."""
    blocks = [None if full[h] else np.zeros((1, int(sizes[h]))) for h in range(len(sizes))]
    out = stratified_overstatement_bound(blocks, counts, largest, confidence, census=np.zeros((1, len(sizes))))
    return float(out.upper[0])


def bound_batch(
    x: Sequence[np.ndarray | None],
    m: Sequence[np.ndarray | None],
    stratum_misstatement: np.ndarray,
    scales: Sequence[np.ndarray],
    counts: np.ndarray,
    largest: np.ndarray,
    confidence: float,
    zero: float,
) -> list[np.ndarray]:
    """The finite-sample bound of every replication of a batch, in each scenario.

    Parameters
    ----------
    x, m:
        Per stratum, ``(batch, n_h)`` blocks of sampled book values and
        misstatements ``book * taint``, or ``None`` for strata examined in
        full.
    stratum_misstatement:
        ``(batch, H)``: each population's misstatement per stratum (read for
        strata examined in full).
    scales:
        One ``(batch,)`` factor array per scenario (1 as modelled).
    counts, largest, confidence:
        ``N_h``, the largest book value of each stratum and the confidence.
    zero:
        :func:`zero_sample_bound` of the design.

    Returns
    -------
    One ``(batch,)`` array of upper bounds per scenario.
    """
    H = len(x)
    full = [x[h] is None for h in range(H)]
    out = []
    for c in scales:
        cc = np.asarray(c, dtype=float)[:, None]
        d = [None if full[h] else x[h] - (x[h] - cc * m[h]) for h in range(H)]
        census = stratum_misstatement * cc
        found = np.zeros(cc.shape[0], dtype=bool)
        for h in range(H):
            if not full[h] and largest[h] > 0:
                found |= (d[h] > 0).any(axis=1)
        exact = np.zeros(cc.shape[0])
        for h in range(H):
            if full[h]:
                exact += census[:, h]
        upper = exact + zero
        rows = np.flatnonzero(found)
        if rows.size:
            part = stratified_overstatement_bound(
                [None if full[h] else d[h][rows] for h in range(H)], counts, largest, confidence,
                census=census[rows],
            )
            upper[rows] = part.upper
        out.append(upper)
    return out
