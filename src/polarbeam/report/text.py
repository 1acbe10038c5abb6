"""Text helpers of the renderers: user strings made safe for Markdown, terminals and spreadsheets.

Compound names, titles, sources and messages come from the user's files. In ``report.md`` they
must stay text (no link, image, HTML or table cell of their own); on a terminal they must not
move the cursor, recolour or retitle it; in a CSV opened by a spreadsheet they must not become a
formula. ``results.json`` keeps every string exactly as it was read.
"""

from __future__ import annotations

import re

from polarbeam._util.text import FORMULA_CHARS, formula_guard, guarded_frame, terminal_safe

__all__ = [
    "FORMULA_CHARS",
    "formula_guard",
    "guarded_frame",
    "md_code",
    "md_escape",
    "terminal_safe",
]

#: Markdown punctuation escaped with a backslash: ``\`` and ``|`` (table cells), the brackets
#: ``[ ]`` without which no link, image (``![x](u)``) or reference definition can form, and code
#: spans `````.  Parentheses, ``!`` and emphasis are harmless once the brackets are escaped and
#: are left as typed (so messages read the same in the raw file).
_MD_BACKSLASH = "\\|[]`"
_MD_TABLE = str.maketrans(
    {
        **{c: "\\" + c for c in _MD_BACKSLASH},
        "<": "&lt;",
        ">": "&gt;",
        "\n": " ",
        "\r": " ",
        "\t": " ",
        "\v": " ",
        "\f": " ",
        "\x85": " ",
        "\u2028": " ",
        "\u2029": " ",
    }
)


def md_escape(s: str) -> str:
    """Escape a user string for Markdown table cells and text.

    Links ``[x](u)`` and images ``![x](u)`` (their brackets), code spans, table pipes and HTML
    ``<…>`` are escaped,
    control characters are dropped (:func:`terminal_safe`), line breaks become spaces, and
    ``://`` is written ``:&#47;/`` so a bare URL is not turned into a link.
    """
    return terminal_safe(s).translate(_MD_TABLE).replace("://", ":&#47;/")


def md_code(s: str) -> str:
    """A user string as one Markdown code span (a fence longer than any backtick run inside)."""
    text = " ".join(terminal_safe(str(s)).splitlines())
    runs = [len(m) for m in re.findall(r"`+", text)]
    fence = "`" * (max(runs, default=0) + 1)
    pad = " " if text.startswith("`") or text.endswith("`") else ""
    return f"{fence}{pad}{text}{pad}{fence}"
