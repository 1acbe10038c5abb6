"""Reference rows shared by the chemistry tests (test helper).

reference_values/polarizabilities.csv and reference_values/dipoles.csv hold CRC Handbook / NIST
CCCBDB experimental values, quoted from memory (see the file headers).
"""

from __future__ import annotations

import csv
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
REF = ROOT / "reference_values"


def read_ref(name: str) -> list[dict[str, str]]:
    """Rows of a reference_values/ CSV (comment lines skipped)."""
    with (REF / name).open(encoding="utf-8") as fh:
        return list(csv.DictReader(ln for ln in fh if not ln.startswith("#")))


POL = read_ref("polarizabilities.csv")
DIP = read_ref("dipoles.csv")
ORGANIC = [r for r in POL if r["class"] == "organic"]
