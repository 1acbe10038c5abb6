"""Small text and number helpers shared by the stages (no physics)."""

from __future__ import annotations

import difflib
import hashlib
import math
import re

from polarbeam._util.optional import lazy

_ptypes = lazy("pandas.api.types", "reading tables")

__all__ = [
    "FORMULA_CHARS",
    "NOT_A_TABLE",
    "close_name",
    "column_hints",
    "finite_or_none",
    "formula_guard",
    "guarded_frame",
    "header_for_message",
    "input_label",
    "join_message",
    "looks_like_header",
    "other_separator",
    "safe_name",
    "terminal_safe",
]

_UNSAFE = re.compile(r"[^A-Za-z0-9._-]+")

#: What an error message says instead of the first line of a file that is not a table of ours
#: (a path in campaign.toml may name any file: its content is never echoed).
NOT_A_TABLE = "not a polarbeam table (first line not shown)"

_HEADER_CELL = re.compile(r"[A-Za-z_][A-Za-z0-9_.]{0,63}")


def looks_like_header(cells, known=()) -> bool:
    """True when ``cells`` look like a CSV header of ours: every cell empty or a column-like name
    (a letter or ``_``, then letters, digits, ``_`` or ``.``; at most 64 characters), and two or
    more cells or one of the ``known`` column names."""
    cells = [str(c).strip() for c in cells]
    if not cells or not all(c == "" or _HEADER_CELL.fullmatch(c) for c in cells):
        return False
    return len(cells) >= 2 or any(c in known for c in cells)


def close_name(name: str, choices) -> str | None:
    """The one choice ``name`` is most likely a misspelling of (difflib ratio ≥ 0.75), or None."""
    match = difflib.get_close_matches(str(name), [str(c) for c in choices], n=1, cutoff=0.75)
    return match[0] if match else None


# a column named with a unit other than the SI one polarbeam expects: stem_unit
_UNIT_SUFFIX = re.compile(r"^(?P<stem>.+)_(?P<unit>[A-Za-z0-9]+)$")


def column_hints(missing, header, expected=()) -> str:
    """What to do about missing columns, from the header found: a unit prefix where polarbeam
    wants SI (``voltage_kV`` → "columns are in SI: use voltage_V") or a misspelling ("did you
    mean ..."). Columns found that are ``expected`` themselves are never suggested. Empty when
    nothing helps. Only column-like names are ever echoed."""
    found = [
        str(h).strip()
        for h in header
        if _HEADER_CELL.fullmatch(str(h).strip()) and str(h).strip() not in expected
    ]
    hints: list[str] = []
    for col in missing:
        want = _UNIT_SUFFIX.match(col)
        units = [
            h
            for h in found
            if want
            and (m := _UNIT_SUFFIX.match(h))
            and m["stem"] == want["stem"]
            and m["unit"] != want["unit"]
        ]
        if units:
            hints.append(f"columns are in SI: use {col}, not {units[0]}")
        elif (near := close_name(col, found)) is not None:
            hints.append(f"found {near}: did you mean {col}?")
    return "; ".join(hints)


def other_separator(cells) -> str | None:
    """ "semicolon" or "tab" when a one-cell header is really a header of ours split by that
    character (a spreadsheet export in another locale); else None."""
    if len(cells) != 1:
        return None
    for char, name in ((";", "semicolon"), ("\t", "tab")):
        parts = str(cells[0]).split(char)
        if len(parts) >= 2 and looks_like_header(parts):
            return name
    return None


def header_for_message(cells, known=()) -> str:
    """The header cells joined by ``", "`` for an error message when they look like a header
    of ours (:func:`looks_like_header`), else :data:`NOT_A_TABLE`."""
    if looks_like_header(cells, known):
        return ", ".join(str(c).strip() for c in cells)
    return NOT_A_TABLE


def input_label(key: str) -> str:
    """The tag of a stated input in budgets: ``"deflector.length"`` → ``"deflector: length"``."""
    table, _, name = key.partition(".")
    return f"{table}: {name}"


def safe_name(name: str) -> str:
    """A file name for a compound: its safe characters (≤ 60) and 10 hex digits of its hash."""
    stem = _UNSAFE.sub("_", name).strip("._")[:60] or "compound"
    return f"{stem}-{hashlib.sha256(name.encode('utf-8')).hexdigest()[:10]}"


def finite_or_none(x) -> float | None:
    """``float(x)`` when it is a finite number, else ``None`` (JSON null, blank CSV cell)."""
    if x is None:
        return None
    try:
        x = float(x)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def join_message(message: str, note: str) -> str:
    """Append ``note`` to a compound message (``"ok"`` or empty is replaced)."""
    return note if message in ("", "ok") else f"{message}; {note}"


# ESC sequences (CSI … final byte, OSC … BEL/ST, any other two-byte ESC x), then the remaining
# C0 controls, DEL, C1 controls and the Unicode bidirectional overrides/isolates.
_ANSI = re.compile(
    r"\x1b\[[0-?]*[ -/]*[@-~]?"
    r"|\x1b\][^\x07\x1b]*(?:\x07|\x1b\\)?"
    r"|\x1b[PX^_][^\x1b]*(?:\x1b\\)?"
    r"|\x1b[\x20-\x7e]?"
    r"|\x9b[0-?]*[ -/]*[@-~]?"
    r"|\x9d[^\x07\x1b\x9c]*(?:\x07|\x9c|\x1b\\)?"
)
_CONTROL = re.compile(r"[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")
_BREAKS = re.compile(r"[\t\n\r\u2028\u2029]")


def terminal_safe(s: str) -> str:
    """``s`` without escape sequences and control characters (tabs and line breaks → space)."""
    text = _ANSI.sub("", str(s))
    return _CONTROL.sub("", _BREAKS.sub(" ", text))


#: First characters that make a spreadsheet read a CSV cell as a formula.
FORMULA_CHARS = ("=", "+", "-", "@", "\t", "\r")


def formula_guard(value):
    """A text cell starting with ``= + - @``, tab or CR gets a leading ``'`` (spreadsheets then
    show it as text); anything else, numbers included, is returned unchanged."""
    if isinstance(value, str) and value.startswith(FORMULA_CHARS):
        return "'" + value
    return value


def guarded_frame(df):
    """A copy of a DataFrame whose text cells get :func:`formula_guard` (for CSV output); numeric
    cells, negative numbers included, are left exactly as they are."""
    out = df.copy()
    for c in out.columns:
        if not (
            _ptypes.is_numeric_dtype(out[c]) or _ptypes.is_bool_dtype(out[c])
        ):  # object or str columns
            out[c] = out[c].map(formula_guard)
    return out
