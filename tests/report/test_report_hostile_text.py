"""User strings in the outputs: Markdown escaping, terminal stripping and the formula guard."""

from __future__ import annotations

import pandas as pd
import pytest

from polarbeam.report.text import (
    FORMULA_CHARS,
    formula_guard,
    guarded_frame,
    md_code,
    md_escape,
    terminal_safe,
)

HOSTILE_IMAGE = "![x](http://evil/x.png)"
HOSTILE_LINK = "[click](https://evil/)"


@pytest.mark.parametrize("name", [HOSTILE_IMAGE, HOSTILE_LINK, "a|b", "<img src=x>", "`code`"])
def test_md_escape_leaves_no_markdown_syntax(name):
    out = md_escape(name)
    for ch in "[]`|":
        # every special character is preceded by a backslash
        assert all(out[i - 1] == "\\" for i, c in enumerate(out) if c == ch), out
    assert "<" not in out and ">" not in out
    assert "://" not in out  # a bare URL is not autolinked


def test_md_escape_renders_as_text():
    """Rendered with markdown-it (CommonMark + tables + linkify): no <img>, no <a>, the name
    itself visible as text."""
    mdit = pytest.importorskip("markdown_it")
    md = mdit.MarkdownIt("commonmark").enable("table")
    for name in (HOSTILE_IMAGE, HOSTILE_LINK, "<script>x</script>"):
        html = md.render(f"| compound |\n|---|\n| {md_escape(name)} |\n\n# {md_escape(name)}\n")
        assert "<img" not in html and "<a " not in html and "<script" not in html, html


def test_md_escape_keeps_plain_names_and_breaks_lines():
    assert md_escape("DM-101") == "DM-101"
    assert md_escape("a\nb\rc\u2028d") == "a b c d"
    assert md_escape("x\x1b[31my") == "xy"


def test_md_code_cannot_be_closed_from_inside():
    assert md_code("campaign.toml") == "`campaign.toml`"
    out = md_code("a`b``c")
    assert out.startswith("```") and out.endswith("```")


def test_terminal_safe_strips_escape_and_control_sequences():
    assert terminal_safe("ok\x1b[2J\x1b[31mred\x1b[0m") == "okred"
    assert terminal_safe("t\x1b]0;title\x07x") == "tx"  # OSC window title
    assert terminal_safe("a\x00b\x07c\x7fd\x9b2Je\x85f") == "abcdef"  # \x9b: C1 CSI
    assert terminal_safe("r\u202eevil") == "revil"  # bidi override
    assert terminal_safe("a\tb\nc") == "a b c"
    assert terminal_safe("DM-101 α") == "DM-101 α"


@pytest.mark.parametrize("first", FORMULA_CHARS)
def test_formula_guard_text_cells(first):
    assert formula_guard(first + "1+1") == "'" + first + "1+1"


def test_formula_guard_leaves_numbers_and_plain_text():
    assert formula_guard(-5.0) == -5.0
    assert formula_guard(None) is None
    assert formula_guard("DM-101") == "DM-101"


def test_guarded_frame_only_touches_text_cells():
    df = pd.DataFrame(
        {
            "compound": ["=HYPERLINK(1)", "@SUM(A1)", "DM-1", "-x"],
            "alpha_A3": [-1.5, 2.0, -3.0, 4.0],
            "message": ["+cmd", "", None, "ok"],
        }
    )
    out = guarded_frame(df)
    assert list(out["compound"]) == ["'=HYPERLINK(1)", "'@SUM(A1)", "DM-1", "'-x"]
    assert list(out["alpha_A3"]) == [-1.5, 2.0, -3.0, 4.0]
    assert list(out["message"])[:2] == ["'+cmd", ""] and pd.isna(out["message"][2])
    assert df["compound"][0] == "=HYPERLINK(1)"  # the input frame is not changed
