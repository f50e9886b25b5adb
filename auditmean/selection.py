"""Reproducible selection of sample items by permanent random numbers.

Every item of the population gets a *key* computed from the selection seed
and its item id alone::

    key = first 16 hexadecimal digits of SHA-256( UTF-8( seed + ":" + item_id ) )

read as an unsigned 64-bit integer. Each stratum takes the ``n`` items with
the smallest keys; equal keys (which need a 64-bit collision) are broken by
item id in Python string order (code-point order). Because a key depends on
nothing but the seed and the id, the selection does not depend on the order
of the rows, on the other strata, or on the computer, and a reviewer can
recompute any key with a command-line SHA-256 tool, for example::

    printf '%s' 'SEED:ITEM-ID' | sha256sum     # take the first 16 hex digits

Taking the ``n`` smallest of independent uniform numbers gives a simple
random sample without replacement, and taking the next ``k`` smallest later
extends it to a simple random sample of ``n + k`` (:func:`extend_selection`).

The seed is used exactly as given: no trimming, no change of case and no
Unicode normalisation. Two seeds that look the same on screen but are
written with different Unicode code points (for example ``"é"`` as one
character U+00E9 or as ``"e"`` followed by the combining accent U+0301) are
different seeds and give different keys. The seed is therefore stored
exactly, in JSON, never retyped.
"""

from __future__ import annotations

import hashlib
import math
import secrets
from collections.abc import Mapping
from dataclasses import dataclass
from numbers import Integral
from typing import Any

import numpy as np
import pandas as pd

from auditmean._frames import duplicated_rows, require_columns, require_frame
from auditmean._records import RecordMixin, text_table
from auditmean.errors import InputError, ParameterError, spreadsheet_row

__all__ = [
    "SEED_ALPHABET",
    "VerificationResult",
    "compare_selection",
    "extend_selection",
    "item_key",
    "item_keys",
    "propose_seed",
    "select",
    "verify_selection",
]

#: Characters of a proposed seed: lowercase letters and digits without the
#: ones easily misread for one another (0/o, 1/l/i). Our own format.
SEED_ALPHABET = "abcdefghjkmnpqrstuvwxyz23456789"

#: Columns of a selection, in this order.
SELECTION_COLUMNS = ("item_id", "stratum", "key", "key_int", "order")

_KEY_BYTES = 8  # 16 hexadecimal digits


# ---------------------------------------------------------------------------
# keys
# ---------------------------------------------------------------------------


def _check_seed(seed: object) -> str:
    if not isinstance(seed, str):
        raise ParameterError("seed", f"must be a text string, got {type(seed).__name__}")
    if seed.strip() == "":
        raise ParameterError(
            "seed", "must not be empty or only spaces; use propose_seed() for a fresh one"
        )
    try:
        seed.encode("utf-8")
    except UnicodeEncodeError as exc:
        raise ParameterError(
            "seed",
            f"contains a character that cannot be written in UTF-8 (position {exc.start}); "
            "use ordinary text",
        ) from None
    return seed


def _digests(prefix: bytes, ids: list[str], table: str) -> bytes:
    """First 8 bytes of each SHA-256 digest, concatenated."""
    sha = hashlib.sha256
    n = _KEY_BYTES
    try:
        return b"".join([sha(prefix + s.encode("utf-8")).digest()[:n] for s in ids])
    except UnicodeEncodeError:
        bad = []
        for i, s in enumerate(ids):
            try:
                s.encode("utf-8")
            except UnicodeEncodeError:
                bad.append(spreadsheet_row(i))
        raise InputError(
            "item ids contain characters that cannot be written in UTF-8",
            table=table,
            column="item_id",
            rows=bad,
        ) from None


def item_keys(seed: str, item_ids: Any) -> tuple[np.ndarray, np.ndarray]:
    """Selection keys of many items: the hexadecimal keys and the same keys as integers.

    Parameters
    ----------
    seed:
        The selection seed, used exactly as given (see the module notes).
    item_ids:
        A sequence (list, array, Series) of item ids, each a ``str``.

    Returns
    -------
    (keys, key_ints):
        ``keys`` is an array of 16-character lowercase hexadecimal strings,
        ``key_ints`` the same keys as ``uint64``.

    Notes
    -----
    ``key = SHA-256(UTF-8(seed + ":" + item_id))[:16 hex digits]``; SHA-256 as
    specified in NIST (2015), FIPS PUB 180-4, *Secure Hash Standard*,
    section 6.2. Python's :mod:`hashlib` computes the digests (neither numpy
    nor pyarrow offers SHA-256 on arrays); the hexadecimal text and the
    integers are then made from the concatenated digests in one numpy step.
    """
    seed = _check_seed(seed)
    ids = [s for s in item_ids]
    not_text = [i for i, s in enumerate(ids) if not isinstance(s, str)]
    if not_text:
        raise InputError(
            "item ids must be text (str)",
            table="item_ids",
            rows=[spreadsheet_row(i) for i in not_text],
        )
    return _keys_of(seed, ids, "item_ids")


def _keys_of(seed: str, ids: list[str], table: str) -> tuple[np.ndarray, np.ndarray]:
    raw = _digests((seed + ":").encode("utf-8"), ids, table)
    key_int = np.frombuffer(raw, dtype=">u8").astype(np.uint64)
    key_hex = np.frombuffer(raw.hex().encode("ascii"), dtype=f"S{2 * _KEY_BYTES}").astype(
        f"U{2 * _KEY_BYTES}"
    )
    return key_hex, key_int


def item_key(seed: str, item_id: str) -> str:
    """The selection key of one item, as the 16 hexadecimal digits a reviewer recomputes.

    Examples
    --------
    >>> item_key("k7mq-x3rt-9ab2-hnpw", "INV-1")
    'b1eae2037c324ef8'
    """
    if not isinstance(item_id, str):
        raise ParameterError("item_id", f"must be a text string, got {type(item_id).__name__}")
    return str(item_keys(seed, [item_id])[0][0])


def propose_seed() -> str:
    """A fresh random seed, e.g. ``"k7mq-x3rt-9ab2-hnpw"``, for the caller to store.

    Four groups of four characters from :data:`SEED_ALPHABET` (31 characters,
    so about 79 bits of randomness), drawn with :mod:`secrets`. The format is
    our own; any non-empty text is accepted as a seed by :func:`select`.
    """
    chars = [secrets.choice(SEED_ALPHABET) for _ in range(16)]
    return "-".join("".join(chars[i : i + 4]) for i in range(0, 16, 4))


# ---------------------------------------------------------------------------
# validation at the boundary
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class _Checked:
    ids: list[str]
    id_series: pd.Series  # item ids as given (dtype kept)
    strata: pd.Series  # stratum labels as given (dtype kept)
    labels: list[Any]  # distinct labels, sorted
    codes: np.ndarray  # int64 index into labels
    counts: np.ndarray  # items per label


def _sorted_labels(values: list[Any]) -> list[Any]:
    try:
        return sorted(values)
    except TypeError:  # mixed label types: a fixed order that does not depend on rows
        return sorted(values, key=lambda v: (type(v).__name__, str(v)))


def _refuse_non_text_ids(ids: pd.Series, missing: np.ndarray, table: str) -> None:
    """Refuse item ids that are not text (``missing``: the rows without one), naming the rows;
    for every design's selection."""
    if ids.dtype == object or not pd.api.types.is_string_dtype(ids.dtype):
        not_text = ~missing & ~ids.map(lambda v: isinstance(v, str)).to_numpy(dtype=bool)
        if not_text.any():
            raise InputError(
                "item ids must be text, exactly as written in the population file "
                "(numbers would be rewritten, e.g. 1001 as 1001.0); convert them with "
                ".astype(str) only if that reproduces the ids as written",
                table=table,
                column="item_id",
                rows=[spreadsheet_row(i) for i in np.flatnonzero(not_text)],
            )


def _refuse_blank_ids(blank: np.ndarray, table: str) -> None:
    """Refuse blank item ids (``blank``: a flag a row), naming the rows; for every design's selection."""
    if blank.any():
        raise InputError(
            "blank item ids; every item needs an id",
            table=table,
            column="item_id",
            rows=[spreadsheet_row(i) for i in np.flatnonzero(blank)],
        )


def _check_population(population: object, table: str = "population") -> _Checked:
    df = require_frame(population, table)
    require_columns(df, ["item_id", "stratum"], table, why="needed to select items")
    ids_s = df["item_id"].reset_index(drop=True)
    missing = ids_s.isna().to_numpy()
    _refuse_non_text_ids(ids_s, missing, table)
    _refuse_blank_ids(missing | ids_s.str.strip().eq("").fillna(False).to_numpy(dtype=bool), table)
    dup = duplicated_rows(ids_s)
    if dup:
        examples = ", ".join(repr(v) for v in ids_s[ids_s.duplicated()].unique()[:3])
        raise InputError(
            f"duplicate item ids (for example {examples}); each item must appear once",
            table=table,
            column="item_id",
            rows=dup,
        )
    ids = ids_s.tolist()
    strata_s = df["stratum"].reset_index(drop=True)
    no_stratum = strata_s.isna().to_numpy()
    if no_stratum.any():
        raise InputError(
            "items without a stratum",
            table=table,
            column="stratum",
            rows=[spreadsheet_row(i) for i in np.flatnonzero(no_stratum)],
        )
    labels = _sorted_labels([_plain(v) for v in pd.unique(strata_s)])
    codes = pd.Index(labels, dtype=object).get_indexer(strata_s.astype(object))
    counts = np.bincount(codes, minlength=len(labels))
    return _Checked(
        ids=ids,
        id_series=ids_s,
        strata=strata_s,
        labels=labels,
        codes=codes.astype(np.int64),
        counts=counts,
    )


def _plain(v: Any) -> Any:
    """numpy scalars to Python scalars, so labels print and serialise plainly."""
    return v.item() if isinstance(v, np.generic) else v


def _check_size(name: str, stratum: Any, n: object) -> int:
    if isinstance(n, bool) or not isinstance(n, Integral):
        raise ParameterError(
            name, f"stratum {stratum!r}: sample size must be a whole number (int), got {n!r}"
        )
    n = int(n)
    if n < 0:
        raise ParameterError(name, f"stratum {stratum!r}: sample size must not be negative, got {n}")
    return n


def _check_sizes(
    sizes: object, checked: _Checked, name: str = "sizes", absent_is_zero: bool = False
) -> np.ndarray:
    """Sample size per stratum code, validated against the population."""
    if not isinstance(sizes, Mapping):
        raise ParameterError(name, f"must be a mapping stratum -> sample size, got {type(sizes).__name__}")
    index = {label: i for i, label in enumerate(checked.labels)}
    unknown = [s for s in sizes if s not in index]
    if unknown:
        have = ", ".join(repr(s) for s in checked.labels)
        raise ParameterError(
            name,
            f"strata not in the population: {', '.join(repr(s) for s in unknown)} "
            f"(the population has {have}; labels must match in type too, 1 is not '1')",
        )
    if not absent_is_zero:
        absent = [s for s in checked.labels if s not in sizes]
        if absent:
            raise ParameterError(
                name,
                f"no sample size given for strata {', '.join(repr(s) for s in absent)}; "
                "name every stratum (give 0 to select nothing from a stratum)",
            )
    out = np.zeros(len(checked.labels), dtype=np.int64)
    for s, n in sizes.items():
        out[index[s]] = _check_size(name, s, n)
    over = [
        f"{checked.labels[i]!r} ({out[i]} asked, {checked.counts[i]} items)"
        for i in np.flatnonzero(out > checked.counts)
    ]
    if over:
        raise ParameterError(name, f"sample size above the number of items in strata {', '.join(over)}")
    return out


# ---------------------------------------------------------------------------
# ranking and selection
# ---------------------------------------------------------------------------


def _rank(codes: np.ndarray, key_int: np.ndarray, ids: list[str]) -> tuple[np.ndarray, np.ndarray]:
    """Permutation sorting items by (stratum, key, item id) and each item's 0-based rank.

    Returns ``(perm, rank_sorted)``: ``perm`` lists the rows in sorted order and
    ``rank_sorted[j]`` is the rank within its stratum of row ``perm[j]``.
    """
    perm = np.lexsort((key_int, codes))
    c, k = codes[perm], key_int[perm]
    tie = (c[1:] == c[:-1]) & (k[1:] == k[:-1])
    if tie.any():  # a 64-bit collision: order the tied run by item id (Python string order)
        starts = np.flatnonzero(tie & ~np.concatenate(([False], tie[:-1])))
        for s in starts:
            e = s + 1
            while e < len(tie) and tie[e]:
                e += 1
            run = perm[s : e + 1]
            perm[s : e + 1] = sorted(run.tolist(), key=lambda r: ids[r])
        c = codes[perm]
    first = np.searchsorted(c, c, side="left")
    return perm, np.arange(len(perm), dtype=np.int64) - first


def _build(checked: _Checked, n: np.ndarray, seed: str, table: str) -> pd.DataFrame:
    key_hex, key_int = _keys_of(seed, checked.ids, table)
    perm, rank = _rank(checked.codes, key_int, checked.ids)
    take = rank < n[checked.codes[perm]]
    rows = perm[take]
    return pd.DataFrame(
        {
            "item_id": checked.id_series.iloc[rows].reset_index(drop=True),
            "stratum": checked.strata.iloc[rows].reset_index(drop=True),
            "key": pd.Series(key_hex[rows].tolist(), dtype=str),
            "key_int": key_int[rows],
            "order": rank[take] + 1,
        }
    )


def select(population: pd.DataFrame, sizes: Mapping[Any, int], seed: str) -> pd.DataFrame:
    """Select, in each stratum, the ``n`` items with the smallest keys for ``seed``.

    Parameters
    ----------
    population:
        A DataFrame with columns ``item_id`` (text, unique, no blanks) and
        ``stratum`` (any labels, no blanks). Other columns are ignored.
    sizes:
        Mapping stratum -> sample size, a whole number from 0 to the number of
        items in the stratum. **Every stratum of the population must be
        named**: a stratum left out would silently contribute nothing to the
        sample, so it is an error; give 0 to select nothing from a stratum
        on purpose. A size equal to the stratum's count takes every item.
    seed:
        Non-empty text, used exactly as given (no trimming, no Unicode
        normalisation). :func:`propose_seed` makes a fresh one.

    Returns
    -------
    pandas.DataFrame
        One row per selected item, sorted by stratum then ``order``, columns

        ``item_id``, ``stratum``
            as in the population;
        ``key``
            the 16 hexadecimal digits of the item's key, as a reviewer
            recomputes them with any SHA-256 tool;
        ``key_int``
            the same key as ``uint64``;
        ``order``
            1 for the smallest key of the stratum, 2 for the next, ...

        Strata are sorted by label. The result does not depend on the order
        of the population's rows.

    Raises
    ------
    InputError
        Missing columns, blank or non-text or duplicate item ids, items
        without a stratum (rows in spreadsheet numbering).
    ParameterError
        ``sizes`` names unknown strata, leaves a stratum out, or gives a size
        that is negative, not a whole number or above the stratum's count;
        ``seed`` empty or not text.

    Notes
    -----
    Sorting the units by independent uniform random numbers and keeping the
    first ``n`` yields a simple random sample without replacement, every
    subset of size ``n`` being equally likely; keeping fixed ("permanent")
    random numbers per unit lets a sample be reproduced and extended
    (Ohlsson, 1995; Tillé, 2006, the random-sort method of chapter 4 --
    section cited from memory). Here the random numbers are truncated
    SHA-256 digests (NIST, 2015); treating them as independent uniform
    numbers is the usual working assumption about a cryptographic hash,
    not a theorem.

    References
    ----------
    Ohlsson, E. (1995). Coordination of samples using permanent random
    numbers. In B. G. Cox et al. (eds), *Business Survey Methods*, Wiley,
    ch. 9, 153-169 (chapter and pages from memory).

    Tillé, Y. (2006). *Sampling Algorithms*. Springer (chapter from memory).

    NIST (2015). FIPS PUB 180-4, *Secure Hash Standard (SHS)*.

    Examples
    --------
    >>> import pandas as pd
    >>> pop = pd.DataFrame({"item_id": ["A", "B", "C", "D"], "stratum": [1, 1, 2, 2]})
    >>> select(pop, {1: 1, 2: 2}, "k7mq-x3rt-9ab2-hnpw")[["item_id", "stratum", "order"]]
      item_id  stratum  order
    0       A        1      1
    1       C        2      1
    2       D        2      2
    """
    checked = _check_population(population)
    seed = _check_seed(seed)
    n = _check_sizes(sizes, checked)
    return _build(checked, n, seed, "population")


# ---------------------------------------------------------------------------
# verification and extension
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class VerificationResult(RecordMixin):
    """Whether a recorded selection is exactly what the seed and sizes give.

    Attributes
    ----------
    match:
        True when the recorded selection has exactly the expected items, each
        in the expected stratum, and (where recorded) the expected order and key.
    seed:
        The seed checked, exactly as given.
    n_expected, n_recorded:
        Rows of the recomputed and of the recorded selection.
    differences:
        One row per difference, columns ``item_id``, ``problem``,
        ``expected``, ``recorded`` (empty when ``match``).
    """

    match: bool
    seed: str
    n_expected: int
    n_recorded: int
    differences: pd.DataFrame

    record_kind = "selection_verification"

    def summary(self) -> str:
        head = (
            f"Selection re-performed with seed {self.seed!r}: "
            + ("matches" if self.match else f"DOES NOT MATCH ({len(self.differences)} differences)")
            + f"\n{self.n_recorded} items recorded, {self.n_expected} expected"
        )
        if self.match:
            return head
        shown = self.differences.head(20)
        rows = [[r.item_id, r.problem, r.expected, r.recorded] for r in shown.itertuples()]
        more = len(self.differences) - len(shown)
        tail = f"\n... and {more} more" if more > 0 else ""
        return head + "\n" + text_table(["item id", "problem", "expected", "recorded"], rows) + tail


def _text(v: Any) -> str:
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return ""
    return str(_plain(v))


def _verification_result(
    diffs: list[tuple[str, str, str, str]], seed: str, n_expected: int, n_recorded: int
) -> VerificationResult:
    """The result of re-performing a selection (either design) from its differences
    (item id, problem, expected, recorded), sorted by item id and problem."""
    differences = pd.DataFrame(diffs, columns=["item_id", "problem", "expected", "recorded"], dtype=object)
    differences = differences.sort_values(["item_id", "problem"], kind="stable").reset_index(drop=True)
    return VerificationResult(
        match=differences.empty,
        seed=seed,
        n_expected=n_expected,
        n_recorded=n_recorded,
        differences=differences,
    )


def verify_selection(
    population: pd.DataFrame,
    sizes: Mapping[Any, int],
    seed: str,
    recorded_selection: pd.DataFrame,
) -> VerificationResult:
    """Re-perform :func:`select` and list every way ``recorded_selection`` differs.

    Parameters
    ----------
    population, sizes, seed:
        As for :func:`select`.
    recorded_selection:
        A DataFrame with columns ``item_id`` and ``stratum``; the columns
        ``order`` and ``key``, when present, are compared too (``order`` as a
        whole number, ``key`` as exact text).

    Returns
    -------
    VerificationResult
        ``match`` and the list of differences: items expected but not
        recorded, recorded but not expected, listed more than once, or
        recorded with another stratum, order or key.
    """
    return compare_selection(select(population, sizes, seed), seed, recorded_selection)


def compare_selection(expected: pd.DataFrame, seed: str, recorded_selection: pd.DataFrame) -> VerificationResult:
    """List every way ``recorded_selection`` differs from ``expected`` (a selection as :func:`select` returns it).

    The comparison of :func:`verify_selection`, for a caller that computed
    the expected selection another way (for example from a file too large
    to hold in memory, :func:`auditmean.scan.select_scan`).
    """
    rec = require_frame(recorded_selection, "recorded_selection")
    require_columns(rec, ["item_id", "stratum"], "recorded_selection")
    rec = rec.reset_index(drop=True)
    diffs: list[tuple[str, str, str, str]] = []

    rec_ids = rec["item_id"].map(_text)
    dup_mask = rec_ids.duplicated(keep="first")
    for item in rec_ids[dup_mask].unique():
        diffs.append((item, "listed more than once", "", str(int((rec_ids == item).sum())) + " times"))
    rec_first = rec[~dup_mask.to_numpy()].assign(id_text=rec_ids[~dup_mask])
    exp = expected.assign(id_text=expected["item_id"])
    merged = exp.merge(rec_first, on="id_text", how="outer", suffixes=("_e", "_r"), indicator=True)

    for r in merged[merged["_merge"] == "left_only"].itertuples():
        diffs.append((r.id_text, "expected but not recorded", f"stratum {_text(r.stratum_e)!s}", ""))
    for r in merged[merged["_merge"] == "right_only"].itertuples():
        diffs.append((r.id_text, "recorded but not expected", "", f"stratum {_text(r.stratum_r)}"))
    both = merged[merged["_merge"] == "both"]
    for r in both.itertuples():
        if _plain(r.stratum_e) != _plain(r.stratum_r):
            diffs.append((r.id_text, "different stratum", _text(r.stratum_e), _text(r.stratum_r)))
    if "order" in rec.columns and len(both):
        rec_order = pd.to_numeric(both["order_r"], errors="coerce")
        bad = ~(rec_order == both["order_e"]).to_numpy()
        for r in both[bad].itertuples():
            diffs.append((r.id_text, "different order", _text(r.order_e), _text(r.order_r)))
    if "key" in rec.columns and len(both):
        bad = (both["key_e"].map(_text) != both["key_r"].map(_text)).to_numpy()
        for r in both[bad].itertuples():
            diffs.append((r.id_text, "different key", _text(r.key_e), _text(r.key_r)))

    return _verification_result(diffs, seed, len(expected), len(rec))


def extend_selection(
    population: pd.DataFrame,
    previous_selection: pd.DataFrame,
    extra_sizes: Mapping[Any, int],
    seed: str,
) -> pd.DataFrame:
    """Add ``k`` more items to a stratum's selection: the next smallest keys.

    Parameters
    ----------
    population, seed:
        As for :func:`select`; the seed must be the one of the previous selection.
    previous_selection:
        The selection being extended (columns ``item_id`` and ``stratum``,
        and ``order``/``key`` if recorded). It must be exactly the first
        ``n`` keys of each stratum for ``seed`` (``n`` = its count in that
        stratum); otherwise an :class:`InputError` lists the differences.
    extra_sizes:
        Mapping stratum -> number of items to add. Unlike :func:`select`, a
        stratum not named adds nothing: its sample size is already fixed by
        the previous selection.

    Returns
    -------
    pandas.DataFrame
        The whole extended selection, as :func:`select` returns it for the
        sizes ``n + k``; the added items are those with ``order`` above the
        previous ``n`` of their stratum. Because it is again the first
        ``n + k`` keys, the extended sample is itself a simple random sample
        of ``n + k`` items (Ohlsson, 1995; see :func:`select`).
    """
    checked = _check_population(population)
    seed = _check_seed(seed)
    prev = require_frame(previous_selection, "previous_selection")
    require_columns(prev, ["item_id", "stratum"], "previous_selection")
    extra = _check_sizes(extra_sizes, checked, name="extra_sizes", absent_is_zero=True)
    index = {label: i for i, label in enumerate(checked.labels)}
    prev_strata = [_plain(v) for v in prev["stratum"].tolist()]
    unknown = sorted({repr(s) for s in prev_strata if s not in index})
    if unknown:
        raise InputError(
            f"strata not in the population: {', '.join(unknown)}",
            table="previous_selection",
            column="stratum",
        )
    n_prev = np.zeros(len(checked.labels), dtype=np.int64)
    np.add.at(n_prev, np.asarray([index[s] for s in prev_strata], dtype=np.int64), 1)
    prev_sizes = {label: int(n_prev[i]) for i, label in enumerate(checked.labels)}
    if (n_prev > checked.counts).any():
        over = [repr(checked.labels[i]) for i in np.flatnonzero(n_prev > checked.counts)]
        raise InputError(
            f"more items than the population has in strata {', '.join(over)}",
            table="previous_selection",
        )
    check = verify_selection(population, prev_sizes, seed, prev)
    if not check.match:
        raise InputError(
            "is not the selection this seed gives (the first n keys of each stratum); "
            "it cannot be extended. Differences:\n" + check.summary(),
            table="previous_selection",
        )
    total = n_prev + extra
    over = [
        f"{checked.labels[i]!r} ({n_prev[i]} selected + {extra[i]} asked > {checked.counts[i]} items)"
        for i in np.flatnonzero(total > checked.counts)
    ]
    if over:
        raise ParameterError("extra_sizes", f"more items than the stratum has: {', '.join(over)}")
    return _build(checked, total, seed, "population")
