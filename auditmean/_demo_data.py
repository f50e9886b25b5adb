"""auditmean's demo data: INVENTED figures for fictional companies, written from a fixed seed.

Nothing here is real data. The companies, customers, products, invoices and
stock lines are made up by this module from a fixed seed; any resemblance to
a real business is coincidental. The files exist so that the tool can be
tried, and its documentation illustrated, without a client's records.

Two fictional businesses:

* **Quillonby Fixings Ltd**, a distributor of fasteners and fixings, and its
  open customer invoices (accounts receivable) at the year end
  31 December 2024: ``invoices.csv``, the true audited value of every item
  (``invoices_audited.csv``, with the misstatements planted below), the same
  ledger as an accounting system might export it (``invoices_export.csv``),
  and a ready-made stratified sample (``invoice_strata.csv``,
  ``invoice_sample.csv``).
* **Marrowdene Catering Supplies Ltd**, a catering wholesaler, and the lines
  of a stock count at five locations of its warehouse: ``stock_lines.csv``
  (the lines to be counted), ``stock_counted.csv`` (the true count of every
  line) and ``stock_locations.csv`` (lines per location, the strata).

``MANIFEST.json`` lists every file with its description, row count, total and
SHA-256. ``README.md`` describes the columns and the planted misstatements.

This module is part of the installed package, so that ``auditmean demo``
works from any folder: it writes the two files the demo needs
(:func:`write_invoice_files`). ``demo_data/make_demo.py`` in the project is a
thin script over :func:`main`, which writes every file::

    python demo_data/make_demo.py            # rewrites the files in demo_data/
    python demo_data/make_demo.py --out DIR  # writes into DIR instead

The output is the same byte for byte on every run: every random draw comes
from ``numpy.random.default_rng`` seeded with :data:`SEED` (one child seed
per part, so the parts do not disturb each other), amounts are held as whole
cents in 64-bit integers and written as text by this module (never through
float formatting), and rows are written in a fixed order.

The distributions (lognormal mixtures, error rates, taint ranges) are our own
choices made to look plausible; they come from no published source.
"""

from __future__ import annotations

import argparse
import hashlib
import json
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20241231
"""Seed of every random draw; the child seeds are ``[SEED, part]``."""

YEAR_END = np.datetime64("2024-12-31")

N_INVOICES = 25_000
N_CREDITS = 500  # credit notes: negative balances, 2 %
N_ZEROS = 250  # zero balances, 1 %
LARGE_INVOICES_CENTS = np.array(
    [25_840_000, 28_715_050, 31_260_000, 36_904_275, 42_150_000, 48_830_190, 61_472_500],
    dtype=np.int64,
)
"""The handful of very large invoices (all at least 250,000.00), in cents."""
TARGET_POSITIVE_TOTAL_CENTS = 3_812_500_000
"""The other positive invoices are scaled so that all positives sum to about this."""

TOP_THRESHOLD_CENTS = 25_000_000
"""Items with book value >= 250,000.00 form the stratum examined 100 %."""
STRATUM_UPPER_CENTS = (150_000, 400_000, 1_050_000)
"""Upper bounds (exclusive, cents) of ordinary strata "1", "2", "3"; stratum "4"
runs from the last bound up to the top threshold. Chosen by eye after looking
at the cumulative book value so that the four strata hold roughly equal book
value; zero balances fall in stratum "1"."""
STRATA = ("1", "2", "3", "4", "top", "credits")
SAMPLE_SIZE = {"1": 50, "2": 50, "3": 50, "4": 50, "credits": 20}
"""Items drawn per stratum; "top" is taken in full."""

STOCK_LOCATIONS = ("North bay", "South bay", "Cold store", "Freezer", "Mezzanine")

INVENTED_NOTE = (
    "INVENTED demo data: fictional companies, made-up figures, no real data. "
    "Written by make_demo.py from a fixed seed."
)

# --------------------------------------------------------------------------
# Names. Every stem below was made up for this file.

_CUSTOMER_STEMS = (
    "Quarrendell",
    "Brindlecote",
    "Hollinwick",
    "Tarrowby",
    "Fennimere",
    "Oakhallow",
    "Cradlemoor",
    "Wystanholt",
    "Pellingsby",
    "Gorsefield",
    "Thistlecombe",
    "Ravensmoat",
    "Dunmarrow",
    "Kettlesorrow",
    "Ashenquay",
    "Blackspinney",
    "Corrowdale",
    "Elmsworthy",
    "Farrowgill",
    "Glimmerdown",
    "Haddrigill",
    "Ingleborrow",
    "Jessamoor",
    "Kinderbeck",
    "Larchwold",
    "Millthwaite",
    "Nettlequay",
    "Orrinsford",
    "Pollardine",
    "Quernstone",
    "Rushmoorby",
    "Saltmarrow",
    "Tillingholt",
    "Umbrecott",
    "Varrowfield",
    "Wendlequist",
    "Yarrowmere",
    "Zellingham",
    "Brackenthorn",
    "Copperwold",
)
_CUSTOMER_TRADES = (
    "Joinery",
    "Roofing",
    "Plant Hire",
    "Building Services",
    "Shopfitting",
    "Scaffolding",
    "Engineering",
    "Fabrications",
    "Glazing",
    "Kitchens",
    "Timber",
    "Maintenance",
    "Electrical",
    "Plumbing",
    "Ironworks",
    "Construction",
)
_CUSTOMER_SUFFIXES = ("Ltd", "Ltd", "Ltd", "Limited", "& Sons Ltd", "Group Ltd")
_REGIONS = ("North", "Midlands", "South East", "South West", "Scotland")
_REGION_WEIGHTS = (0.28, 0.24, 0.22, 0.16, 0.10)

_STOCK_PRODUCTS = {
    "North bay": (
        ("Basmati rice", ("5kg", "10kg", "20kg sack")),
        ("Plain flour", ("16kg", "25kg sack")),
        ("Chopped tomatoes", ("2.5kg tin x6", "400g tin x24")),
        ("Penne pasta", ("3kg", "6kg")),
        ("Rapeseed oil", ("10l", "20l drum")),
        ("Caster sugar", ("3kg", "25kg sack")),
        ("Red lentils", ("5kg", "20kg sack")),
        ("Chickpeas", ("2.5kg tin x6", "400g tin x12")),
        ("Porridge oats", ("3kg", "12.5kg sack")),
        ("Baked beans", ("2.6kg tin x6",)),
        ("Vegetable stock powder", ("1kg tub", "2.25kg tub")),
        ("Sea salt", ("1kg box x6",)),
    ),
    "South bay": (
        ("Sparkling water", ("330ml can x24", "750ml glass x12")),
        ("Still water", ("500ml x24", "1.5l x6")),
        ("Orange juice", ("1l carton x12",)),
        ("Apple juice", ("1l carton x12", "200ml x24")),
        ("Cola", ("330ml can x24", "2l x6")),
        ("Lemonade", ("330ml can x24",)),
        ("Ginger beer", ("275ml glass x24",)),
        ("Tea bags", ("1100 pack", "600 pack")),
        ("Ground coffee", ("1kg", "3kg")),
        ("Coffee beans", ("1kg", "6kg")),
        ("Hot chocolate", ("2kg tub",)),
    ),
    "Cold store": (
        ("Whole milk", ("2l x6", "4 pint x4")),
        ("Double cream", ("1l x6",)),
        ("Salted butter", ("250g x40", "2kg block")),
        ("Mature cheddar", ("2.5kg block", "5kg block")),
        ("Natural yoghurt", ("5kg tub",)),
        ("Free range eggs", ("tray of 30", "case of 180")),
        ("Mozzarella", ("2kg", "125g x10")),
        ("Cooked ham", ("1kg", "2.5kg")),
        ("Houmous", ("1kg tub",)),
        ("Fresh pasta", ("1kg x6",)),
    ),
    "Freezer": (
        ("Garden peas", ("2.5kg x4",)),
        ("Oven chips", ("2.27kg x4", "2.5kg x4")),
        ("Chicken breast", ("5kg", "10kg case")),
        ("Beef mince", ("5kg",)),
        ("Cod fillets", ("3kg", "6kg case")),
        ("Vanilla ice cream", ("4l tub", "5l tub")),
        ("Puff pastry", ("2kg x4",)),
        ("Mixed vegetables", ("2.5kg x4",)),
        ("Prawns", ("1kg x10",)),
        ("Croissants", ("case of 60",)),
    ),
    "Mezzanine": (
        ("Stainless gastronorm pan", ("1/1 65mm", "1/2 100mm", "1/3 150mm")),
        ("Chef's knife", ("20cm", "25cm")),
        ("Commercial blender", ("2l",)),
        ("Stock pot", ("20l", "36l", "50l")),
        ("Non-stick frying pan", ("24cm", "28cm", "32cm")),
        ("Paper napkins", ("case of 2000",)),
        ("Takeaway boxes", ("case of 500",)),
        ("Dinner plate", ("27cm x6", "30cm x6")),
        ("Wine glass", ("250ml x24",)),
        ("Countertop fryer", ("8l",)),
        ("Combination microwave", ("34l",)),
        ("Cutlery set", ("case of 120",)),
    ),
}
_STOCK_SKU_PREFIX = {
    "North bay": "DRY",
    "South bay": "BEV",
    "Cold store": "CHL",
    "Freezer": "FRZ",
    "Mezzanine": "EQP",
}
# lines, log median unit cost, log sd of unit cost, log median quantity, log sd of quantity
_STOCK_SHAPE = {
    "North bay": (1_700, np.log(18.0), 0.7, np.log(40.0), 1.0),
    "South bay": (1_400, np.log(13.0), 0.5, np.log(60.0), 1.1),
    "Cold store": (1_100, np.log(21.0), 0.6, np.log(22.0), 0.9),
    "Freezer": (1_000, np.log(27.0), 0.6, np.log(30.0), 1.0),
    "Mezzanine": (800, np.log(60.0), 1.2, np.log(6.0), 1.0),
}


# --------------------------------------------------------------------------
# Formatting: amounts are whole cents (int64) and are written as text here.


def format_cents(cents: np.ndarray) -> pd.Series:
    """Plain decimal text with two decimals, e.g. ``-1234.50``."""
    cents = np.asarray(cents, dtype=np.int64)
    whole = pd.Series(np.abs(cents) // 100).astype(str)
    frac = pd.Series(np.abs(cents) % 100).astype(str).str.zfill(2)
    sign = pd.Series(np.where(cents < 0, "-", ""))
    return sign + whole + "." + frac


def format_cents_export(cents: np.ndarray, symbol: str = "¤") -> pd.Series:
    """Text the way an accounting export shows money: ``¤1,234.56``, ``(¤12.00)``."""
    cents = np.asarray(cents, dtype=np.int64)
    whole = pd.Series(np.abs(cents) // 100).map("{:,}".format)
    frac = pd.Series(np.abs(cents) % 100).astype(str).str.zfill(2)
    body = symbol + whole + "." + frac
    return body.where(cents >= 0, "(" + body + ")")


def _write_csv(frame: pd.DataFrame, path: Path) -> None:
    frame.to_csv(path, index=False, lineterminator="\n", encoding="utf-8")


def _lognormal_cents(rng: np.random.Generator, mu: float, sigma: float, size: int) -> np.ndarray:
    return np.rint(np.exp(mu + sigma * rng.standard_normal(size)) * 100).astype(np.int64)


# --------------------------------------------------------------------------
# Scenario 1: open customer invoices of Quillonby Fixings Ltd.


def _customers(rng: np.random.Generator, n: int = 320) -> pd.DataFrame:
    stems = np.array(_CUSTOMER_STEMS, dtype=object)
    trades = np.array(_CUSTOMER_TRADES, dtype=object)
    pairs = rng.permutation(len(stems) * len(trades))[:n]
    suffix = np.array(_CUSTOMER_SUFFIXES, dtype=object)[rng.integers(0, len(_CUSTOMER_SUFFIXES), n)]
    names = (
        pd.Series(stems[pairs // len(trades)])
        + " "
        + pd.Series(trades[pairs % len(trades)])
        + " "
        + pd.Series(suffix)
    )
    region = np.array(_REGIONS, dtype=object)[
        np.searchsorted(np.cumsum(_REGION_WEIGHTS), rng.random(n) * np.sum(_REGION_WEIGHTS))
    ]
    # A few large accounts and many small ones: weights fall off like 1/rank.
    weight = 1.0 / (np.arange(n) + 3.0)
    return pd.DataFrame({"customer": names, "region": region, "weight": weight / weight.sum()})


def make_invoices(rng: np.random.Generator) -> pd.DataFrame:
    """The open-item ledger, in date order, with book values in cents.

    Returns columns ``invoice_no``, ``customer``, ``invoice_date``, ``region``,
    ``book_cents`` and ``kind`` (``large``, ``body``, ``credit``, ``zero``; kept
    for planting the misstatements, not written out).
    """
    n_large = len(LARGE_INVOICES_CENTS)
    n_body = N_INVOICES - N_CREDITS - N_ZEROS - n_large

    # Positive body: three lognormal components (many small orders, regular
    # trade orders, a thin tail of project orders).
    component = np.searchsorted([0.70, 0.97], rng.random(n_body), side="right")
    mu = np.array([6.0, 7.6, 9.3])[component]
    sigma = np.array([1.0, 0.9, 0.8])[component]
    body = np.exp(mu + sigma * rng.standard_normal(n_body))
    body *= (TARGET_POSITIVE_TOTAL_CENTS - LARGE_INVOICES_CENTS.sum()) / 100 / body.sum()
    body_cents = np.rint(body * 100).astype(np.int64)
    if body_cents.min() <= 0 or body_cents.max() >= TOP_THRESHOLD_CENTS:
        raise RuntimeError("body invoices left the range (0, 250,000); change the shape")

    credit_cents = -_lognormal_cents(rng, 5.0, 1.0, N_CREDITS)
    credit_cents = np.minimum(credit_cents, -100)  # no credit note under 1.00

    book = np.concatenate(
        [LARGE_INVOICES_CENTS, body_cents, credit_cents, np.zeros(N_ZEROS, dtype=np.int64)]
    )
    kind = np.repeat(
        np.array(["large", "body", "credit", "zero"], dtype=object),
        [n_large, n_body, N_CREDITS, N_ZEROS],
    )

    # Open items at a year end are mostly recent; a tenth are older disputes.
    age = np.where(
        rng.random(N_INVOICES) < 0.9,
        np.floor(rng.exponential(40.0, N_INVOICES)),
        np.floor(rng.random(N_INVOICES) * 366),
    )
    age = np.minimum(age, 365).astype(np.int64)  # 2024 has 366 days: 1 Jan is age 365
    dates = YEAR_END - age.astype("timedelta64[D]")

    customers = _customers(rng)
    who = np.searchsorted(
        np.cumsum(customers["weight"].to_numpy()),
        rng.random(N_INVOICES) * customers["weight"].sum(),
    )
    who = np.minimum(who, len(customers) - 1)

    # Invoice numbers rise with the date; gaps are the invoices already paid,
    # wider for older months.
    order = np.lexsort((rng.random(N_INVOICES), dates))
    age_sorted = age[order]
    gaps = 1 + rng.poisson(0.3 + age_sorted / 25.0)
    numbers = 100_000 + np.cumsum(gaps)
    if numbers.max() > 999_999:
        raise RuntimeError("invoice numbers overflowed six digits")

    ledger = pd.DataFrame(
        {
            "invoice_no": "INV-" + pd.Series(numbers).astype(str),
            "customer": customers["customer"].to_numpy()[who[order]],
            "invoice_date": pd.Series(dates[order]).dt.strftime("%Y-%m-%d"),
            "region": customers["region"].to_numpy()[who[order]],
            "book_cents": book[order],
            "kind": kind[order],
        }
    )
    return ledger


def plant_misstatements(rng: np.random.Generator, ledger: pd.DataFrame) -> pd.DataFrame:
    """True audited values (cents) and findings for every invoice.

    The pattern (our own invention):

    * about 3.4 % of ordinary positive invoices carry a small error: price
      errors and credits not recorded, each overstating by 5-30 % of book
      value; 8 % of them are understatements ("undercharged", audited
      value 5-25 % above book);
    * invoices dated 29-31 December have a 1.5 % chance of a cut-off error
      (goods shipped in January; audited value 0);
    * one large duplicate billing: the largest ordinary invoice was billed
      twice, audited value 0;
    * one large partial cut-off error on a top invoice: 25 % of the goods
      left the warehouse in January;
    * credit notes and zero balances are correct except two credit notes
      recorded too high and one zero balance left unbilled.
    """
    book = ledger["book_cents"].to_numpy()
    kind = ledger["kind"].to_numpy()
    n = len(book)
    audited = book.copy()
    finding = np.full(n, "", dtype=object)
    u = rng.random(n)
    taint = rng.uniform(0.05, 0.30, n)

    body = kind == "body"
    wrong = body & (u < 0.034)
    what = rng.random(n)
    price = wrong & (what < 0.60)
    credit_missing = wrong & (what >= 0.60) & (what < 0.92)
    under = wrong & (what >= 0.92)
    audited[price | credit_missing] = np.rint(
        book[price | credit_missing] * (1 - taint[price | credit_missing])
    ).astype(np.int64)
    finding[price] = "price error"
    finding[credit_missing] = "credit not recorded"
    under_taint = rng.uniform(0.05, 0.25, n)
    audited[under] = np.rint(book[under] * (1 + under_taint[under])).astype(np.int64)
    finding[under] = "undercharged"

    late = body & ~wrong & (ledger["invoice_date"].to_numpy() >= "2024-12-29")
    cutoff = late & (rng.random(n) < 0.015)
    audited[cutoff] = 0
    finding[cutoff] = "cut-off"

    # One large duplicate billing: the largest ordinary invoice.
    dup = int(np.flatnonzero(body)[np.argmax(book[body])])
    audited[dup] = 0
    finding[dup] = "duplicate billing"

    # One large partial cut-off on the third-largest top invoice.
    large_idx = np.flatnonzero(kind == "large")
    big = int(large_idx[np.argsort(book[large_idx], kind="stable")[-3]])
    audited[big] = np.rint(book[big] * 0.75).astype(np.int64)
    finding[big] = "cut-off"

    # Credit notes recorded too high (book -x, true -0.8x: an understatement
    # of the receivable), and one zero balance that should have been billed.
    credits = np.flatnonzero(kind == "credit")
    for i in credits[rng.permutation(len(credits))[:2]]:
        audited[i] = np.rint(book[i] * 0.8).astype(np.int64)
        finding[i] = "price error"
    zeros = np.flatnonzero(kind == "zero")
    z = int(zeros[rng.integers(0, len(zeros))])
    audited[z] = 18_450
    finding[z] = "undercharged"

    return pd.DataFrame(
        {"invoice_no": ledger["invoice_no"], "audited_cents": audited, "finding": finding}
    )


def assign_strata(book_cents: np.ndarray) -> np.ndarray:
    """Stratum name of each invoice from its book value in cents.

    ``credits`` for negatives; ``top`` for >= 250,000.00; otherwise "1" to "4"
    by :data:`STRATUM_UPPER_CENTS` (lower bound inclusive), zeros in "1".
    """
    book_cents = np.asarray(book_cents, dtype=np.int64)
    ordinary = np.array(["1", "2", "3", "4"], dtype=object)[
        np.searchsorted(np.asarray(STRATUM_UPPER_CENTS), book_cents, side="right")
    ]
    return np.where(
        book_cents < 0, "credits", np.where(book_cents >= TOP_THRESHOLD_CENTS, "top", ordinary)
    )


def make_sample(
    rng: np.random.Generator, ledger: pd.DataFrame, audited: pd.DataFrame
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The strata table and a stratified simple random sample without replacement."""
    stratum = assign_strata(ledger["book_cents"].to_numpy())
    strata_rows = []
    picked = []
    for name in STRATA:
        members = np.flatnonzero(stratum == name)
        strata_rows.append(
            (name, len(members), int(ledger["book_cents"].to_numpy()[members].sum()))
        )
        if name == "top":
            chosen = members
        else:
            chosen = members[rng.permutation(len(members))[: SAMPLE_SIZE[name]]]
        picked.append(np.sort(chosen))
    strata = pd.DataFrame(strata_rows, columns=["stratum", "count", "book_cents"])
    rows = np.concatenate(picked)
    sample = pd.DataFrame(
        {
            "stratum": stratum[rows],
            "invoice_no": ledger["invoice_no"].to_numpy()[rows],
            "book_cents": ledger["book_cents"].to_numpy()[rows],
            "audited_cents": audited["audited_cents"].to_numpy()[rows],
        }
    )
    return strata, sample


# --------------------------------------------------------------------------
# Scenario 2: stock count of Marrowdene Catering Supplies Ltd.


def make_stock(rng: np.random.Generator) -> pd.DataFrame:
    """Every count line with its unit cost and its true counted quantity."""
    parts = []
    sku_numbers = 10_000 + rng.permutation(90_000)
    taken = 0
    for location in STOCK_LOCATIONS:
        n, cost_mu, cost_sd, qty_mu, qty_sd = _STOCK_SHAPE[location]
        products = _STOCK_PRODUCTS[location]
        pick = rng.integers(0, len(products), n)
        size_pick = rng.random(n)
        description = [
            f"{products[p][0]} {products[p][1][int(s * len(products[p][1]))]}"
            for p, s in zip(pick, size_pick, strict=True)
        ]
        unit_cents = np.maximum(_lognormal_cents(rng, cost_mu, cost_sd, n), 25)
        quantity = np.floor(np.exp(qty_mu + qty_sd * rng.standard_normal(n))).astype(np.int64)
        quantity[rng.random(n) < 0.02] = 0  # shelf found empty
        parts.append(
            pd.DataFrame(
                {
                    "location": location,
                    "sku": _STOCK_SKU_PREFIX[location]
                    + "-"
                    + pd.Series(sku_numbers[taken : taken + n]).astype(str),
                    "description": description,
                    "unit_cents": unit_cents,
                    "counted_quantity": quantity,
                }
            )
        )
        taken += n
    stock = pd.concat(parts, ignore_index=True)
    stock.insert(
        0, "line_id", "LN-" + pd.Series(np.arange(1, len(stock) + 1)).astype(str).str.zfill(5)
    )
    stock["counted_cents"] = stock["unit_cents"] * stock["counted_quantity"]
    return stock


# --------------------------------------------------------------------------


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


#: SHA-256 of the two files :func:`write_invoice_files` writes, as committed in
#: the project's ``demo_data/MANIFEST.json``. Every draw comes from numpy's
#: seeded generator; should a numpy release ever draw other numbers from the
#: same seed, the files written would differ, and the demo says so.
INVOICE_FILES_SHA256 = {
    "invoices.csv": "76166478f32aa03b591142136a7f165b60b5d2b7fadb03cdb616374d77d8cd81",
    "invoices_audited.csv": "1d92696d9e4139953445424b477f6dacb761b5a65a589309545cb159641e843c",
}


def _invoice_tables(ledger: pd.DataFrame, audited: pd.DataFrame) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The ledger as ``invoices.csv`` writes it, and the answers as ``invoices_audited.csv`` does."""
    invoices = ledger[["invoice_no", "customer", "invoice_date", "region"]].copy()
    invoices["book_value"] = format_cents(ledger["book_cents"].to_numpy())
    audited_out = pd.DataFrame(
        {
            "invoice_no": audited["invoice_no"],
            "audited_value": format_cents(audited["audited_cents"].to_numpy()),
            "finding": audited["finding"],
        }
    )
    return invoices, audited_out


def write_invoice_files(out: Path) -> dict[str, Path]:
    """Write only the demo ledger ``invoices.csv`` and its answers ``invoices_audited.csv`` into ``out``.

    The same bytes as :func:`write_all` writes for these two files (the
    stock count and the ready-made sample are not drawn). Returns
    ``{file name: path}``; compare with :data:`INVOICE_FILES_SHA256`.
    """
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    ledger = make_invoices(np.random.default_rng([SEED, 1]))
    audited = plant_misstatements(np.random.default_rng([SEED, 2]), ledger)
    invoices, audited_out = _invoice_tables(ledger, audited)
    written = {}
    for name, frame in (("invoices.csv", invoices), ("invoices_audited.csv", audited_out)):
        _write_csv(frame, out / name)
        written[name] = out / name
    return written


def write_all(out: Path) -> dict:
    """Write every demo file into ``out`` and return the manifest written with them."""
    out.mkdir(parents=True, exist_ok=True)
    ledger = make_invoices(np.random.default_rng([SEED, 1]))
    audited = plant_misstatements(np.random.default_rng([SEED, 2]), ledger)
    strata, sample = make_sample(np.random.default_rng([SEED, 3]), ledger, audited)
    stock = make_stock(np.random.default_rng([SEED, 4]))

    files: dict[str, tuple[pd.DataFrame, str, str | None, int | None]] = {}

    invoices, audited_out = _invoice_tables(ledger, audited)
    files["invoices.csv"] = (
        invoices,
        "INVENTED open customer invoices of the fictional Quillonby Fixings Ltd at "
        "31 December 2024 (book values).",
        "book_value",
        int(ledger["book_cents"].sum()),
    )
    files["invoices_audited.csv"] = (
        audited_out,
        "INVENTED true audited value of every invoice, with the planted misstatements "
        "(finding blank when correct).",
        "audited_value",
        int(audited["audited_cents"].sum()),
    )
    export = invoices.copy()
    export["book_value"] = format_cents_export(ledger["book_cents"].to_numpy())
    files["invoices_export.csv"] = (
        export,
        "INVENTED: invoices.csv as an accounting system might export it (currency sign, "
        "thousands separators, negatives in parentheses); same rows, same order.",
        "book_value",
        int(ledger["book_cents"].sum()),
    )
    strata_out = pd.DataFrame(
        {
            "stratum": strata["stratum"],
            "count": strata["count"].astype(str),
            "book_total": format_cents(strata["book_cents"].to_numpy()),
        }
    )
    files["invoice_strata.csv"] = (
        strata_out,
        "INVENTED: strata of invoices.csv (credits, four value bands, top examined 100%) "
        "with exact counts and book totals.",
        "book_total",
        int(strata["book_cents"].sum()),
    )
    sample_out = pd.DataFrame(
        {
            "stratum": sample["stratum"],
            "invoice_no": sample["invoice_no"],
            "book_value": format_cents(sample["book_cents"].to_numpy()),
            "audited_value": format_cents(sample["audited_cents"].to_numpy()),
        }
    )
    files["invoice_sample.csv"] = (
        sample_out,
        "INVENTED: stratified random sample of invoices.csv without replacement, with "
        "audited values from invoices_audited.csv.",
        "book_value",
        int(sample["book_cents"].sum()),
    )
    stock_lines = stock[["line_id", "location", "sku", "description"]].copy()
    stock_lines["unit_cost"] = format_cents(stock["unit_cents"].to_numpy())
    files["stock_lines.csv"] = (
        stock_lines,
        "INVENTED stock count lines of the fictional Marrowdene Catering Supplies Ltd "
        "(no book value, no system quantity).",
        None,
        None,
    )
    stock_counted = pd.DataFrame(
        {
            "line_id": stock["line_id"],
            "counted_quantity": stock["counted_quantity"].astype(str),
            "counted_value": format_cents(stock["counted_cents"].to_numpy()),
        }
    )
    files["stock_counted.csv"] = (
        stock_counted,
        "INVENTED true counted quantity and value (quantity x unit cost) of every stock line.",
        "counted_value",
        int(stock["counted_cents"].sum()),
    )
    locations = stock.groupby("location", sort=False).size()
    stock_locations = pd.DataFrame(
        {"location": locations.index.astype(str), "lines": locations.to_numpy().astype(str)}
    )
    files["stock_locations.csv"] = (
        stock_locations,
        "INVENTED: stock lines per location, the strata for mean-per-unit estimation.",
        "lines",
        None,
    )

    manifest: dict = {
        "note": INVENTED_NOTE,
        "invented": True,
        "generator": "make_demo.py",
        "seed": SEED,
        "files": {},
    }
    for name, (frame, description, total_column, total_cents) in files.items():
        path = out / name
        _write_csv(frame, path)
        if total_column == "lines":
            total: float | int | None = int(stock_locations["lines"].astype(int).sum())
        elif total_cents is None:
            total = None
        else:
            total = round(total_cents / 100, 2)
        manifest["files"][name] = {
            "description": description,
            "rows": len(frame),
            "total_of": total_column,
            "total": total,
            "sha256": _sha256(path),
        }
    (out / "MANIFEST.json").write_text(
        json.dumps(manifest, indent=2, ensure_ascii=False) + "\n", encoding="utf-8"
    )
    return manifest


def _summary(out: Path) -> str:
    """A few lines for the person running the script."""
    manifest = json.loads((out / "MANIFEST.json").read_text(encoding="utf-8"))
    lines = [INVENTED_NOTE, f"written to {out}"]
    for name, entry in manifest["files"].items():
        total = (
            "" if entry["total"] is None else f"  total {entry['total_of']} = {entry['total']:,}"
        )
        lines.append(f"  {name:<22} {entry['rows']:>6} rows{total}")
    return "\n".join(lines)


def main(argv: list[str] | None = None, default_out: Path | None = None) -> int:
    """Write every demo file (``--out DIR``, else ``default_out``) and print a summary."""
    parser = argparse.ArgumentParser(description="Write auditmean's INVENTED demo data.")
    parser.add_argument(
        "--out",
        type=Path,
        default=default_out,
        required=default_out is None,
        help="folder to write into" + ("" if default_out is None else f" (default: {default_out})"),
    )
    args = parser.parse_args(argv)
    write_all(args.out)
    print(_summary(args.out))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
