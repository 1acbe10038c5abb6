"""Fuzz: any Unicode in a quoted cell written by csv.writer comes back exactly (RFC 4180)."""

from __future__ import annotations

import csv
import tempfile
from pathlib import Path

from hypothesis import given, settings
from hypothesis import strategies as st

from polarbeam._util.tables import CELL_BLANKS, read_table

SPECIAL = '\u2028\u2029\x1c\x1d\x1e\x85\v\f\r\n",# '
names = st.text(
    alphabet=st.one_of(st.characters(blacklist_categories=("Cs",)), st.sampled_from(SPECIAL)),
    min_size=1,
    max_size=30,
).filter(lambda s: s.strip(CELL_BLANKS) == s and s.strip(CELL_BLANKS))


@settings(max_examples=200, deadline=None)
@given(st.lists(names, min_size=1, max_size=5))
def test_quoted_names_round_trip(values):
    with tempfile.TemporaryDirectory() as d:
        p = Path(d) / "compounds.csv"
        with p.open("w", newline="", encoding="utf-8") as h:
            w = csv.writer(h, quoting=csv.QUOTE_ALL)
            w.writerow(["compound", "mass_u"])
            for i, v in enumerate(values):
                w.writerow([v, i + 1])
        t = read_table(p, ("compound", "mass_u"))
        assert [r["compound"] for r in t.rows] == values
        assert [t.number(i, "mass_u") for i in range(len(values))] == [
            float(i + 1) for i in range(len(values))
        ]
        assert t.skipped == ()
