"""Markdown report: user strings are escaped, the cautions are printed."""

from __future__ import annotations

import math

from scipy import constants as sc
from uncertainties import ufloat

from polarbeam.report.files import render_markdown
from polarbeam.results.objects import CAUTIONS, CampaignResult, CompoundResult

A3 = 4 * math.pi * sc.epsilon_0 * 1e-30  # 1 Å³ in C·m²/V (SI definition, scipy.constants)

NAME = "pipe|and<angle>"


def _result() -> CampaignResult:
    ok = CompoundResult(
        compound=NAME,
        status="ok",
        message="fine",
        mass_u=250.0,
        alpha=ufloat(21.5 * A3, 0.5 * A3, tag="mass"),
        method="debye",
    )
    bad = CompoundResult(compound="x|y", status="failed", message="bad <mass>")
    return CampaignResult("t|itle", "camp.toml", "beam-profile", "parallel-plate", (ok, bad))


def test_compound_names_are_escaped():
    md = render_markdown(_result())
    # Markdown table cells: a literal | must be \| (CommonMark/GFM tables); < and > as HTML entities
    assert "| pipe\\|and&lt;angle&gt; |" in md
    assert "## pipe\\|and&lt;angle&gt;" in md
    assert "# t\\|itle" in md
    assert "**failed:** bad &lt;mass&gt;" in md
    assert NAME not in md and "<angle" not in md and "<mass>" not in md
    # every summary row keeps exactly the 5 columns of the header (6 unescaped pipes)
    rows = [ln for ln in md.splitlines() if ln.startswith("| pipe") or ln.startswith("| x")]
    assert len(rows) == 2
    for row in rows:
        assert row.replace("\\|", "").count("|") == 6


def test_cautions_section_present():
    md = render_markdown(_result())
    assert "\n## Cautions\n" in md
    tail = md.split("\n## Cautions\n", 1)[1]
    assert CAUTIONS and all(f"- {c}" in tail for c in CAUTIONS)
