"""Write auditmean's demo data: INVENTED figures for fictional companies.

Nothing here is real data: the fictional Quillonby Fixings Ltd's open
invoices and Marrowdene Catering Supplies Ltd's stock count are made up from
a fixed seed. The generator is part of the installed package
(:mod:`auditmean._demo_data`, which ``auditmean demo`` uses to write its data
from any folder); this script only calls it, so the files here are the ones
the package writes, byte for byte.

Run from the repository root::

    python demo_data/make_demo.py            # writes next to this script
    python demo_data/make_demo.py --out DIR  # writes into DIR instead
"""

from __future__ import annotations

import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
# The project's own generator, also when auditmean is not installed (or another version is).
sys.path.insert(0, str(HERE.parent))

from auditmean._demo_data import (  # noqa: E402
    INVENTED_NOTE,
    SAMPLE_SIZE,
    SEED,
    STRATUM_UPPER_CENTS,
    TOP_THRESHOLD_CENTS,
    main,
    write_all,
    write_invoice_files,
)

__all__ = [
    "INVENTED_NOTE",
    "SAMPLE_SIZE",
    "SEED",
    "STRATUM_UPPER_CENTS",
    "TOP_THRESHOLD_CENTS",
    "main",
    "write_all",
    "write_invoice_files",
]

if __name__ == "__main__":
    raise SystemExit(main(default_out=HERE))
