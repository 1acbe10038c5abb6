"""Reading CSV tables with line numbers kept, so every bad cell can be named in a message."""

from __future__ import annotations

import csv
import itertools
import math
from dataclasses import dataclass
from pathlib import Path

from polarbeam._util.text import NOT_A_TABLE, column_hints, looks_like_header, other_separator
from polarbeam.errors import InputError, RowValueError

__all__ = ["CELL_BLANKS", "Table", "csv_records", "read_table", "text_problem"]

#: what is dropped around a cell (the spaces one types after a comma); any other character,
#: including other whitespace, is kept exactly.
CELL_BLANKS = " \t"


@dataclass(frozen=True)
class Table:
    """A CSV file read as strings: header, rows and the file line of every row."""

    path: Path
    columns: tuple[str, ...]
    rows: tuple[dict[str, str], ...]
    lines: tuple[int, ...]
    skipped: tuple[int, ...] = ()  # comment lines above the header

    @property
    def note(self) -> str | None:
        """What was skipped as comments (None when nothing was), for the campaign's notes."""
        if not self.skipped:
            return None
        where = ", ".join(str(n) for n in self.skipped[:20])
        where += "…" if len(self.skipped) > 20 else ""
        return (
            f"{self.name}: skipped {len(self.skipped)} comment line(s) above the header "
            f"(line(s) {where})"
        )

    @property
    def name(self) -> str:
        return self.path.name

    def check_row(self, i: int) -> str:
        """The compound name of row ``i``; :class:`RowValueError` (a compound error) for a row
        with the wrong number of cells or an empty compound name, naming the file and line."""
        row = self.rows[i]
        if "__bad__" in row:
            raise RowValueError(f"{self.name} line {self.lines[i]}: {row['__bad__']}")
        name = row.get("compound", "").strip(CELL_BLANKS)
        if not name:
            raise RowValueError(f"{self.name} line {self.lines[i]}: empty compound name")
        return name

    def number(
        self,
        i: int,
        column: str,
        *,
        positive: bool = False,
        nonnegative: bool = False,
        default: float | None = None,
    ) -> float:
        """Row ``i``'s ``column`` as a finite float, or a :class:`RowValueError` naming the cell."""
        raw = self.rows[i].get(column, "")
        raw = "" if raw is None else raw.strip()
        if raw == "" and default is not None:
            return default
        want = "a number > 0" if positive else "a number >= 0" if nonnegative else "a number"
        try:
            value = float(raw)
        except ValueError:
            value = math.nan
        if not math.isfinite(value) or (positive and value <= 0) or (nonnegative and value < 0):
            raise RowValueError(
                f"{self.name} line {self.lines[i]}: column '{column}' expected {want}, "
                f"found {raw!r}"
            )
        return value


def text_problem(path: Path, what: str, exc: Exception) -> str:
    """One line for a file that cannot be read as text: UTF-16/32 and other encodings named."""
    if isinstance(exc, UnicodeDecodeError):
        try:
            head = path.read_bytes()[:4]
        except OSError:
            head = b""
        if head.startswith((b"\xff\xfe", b"\xfe\xff")):
            found = "UTF-16 text (byte-order mark)"
        elif b"\x00" in head[:2]:
            found = "UTF-16 text without a byte-order mark"
        else:
            found = f"a byte 0x{exc.object[exc.start]:02x} that is not UTF-8 at offset {exc.start}"
        return f"{path}: cannot read {what} file: expected UTF-8 text, found {found}"
    return f"{path}: cannot read {what} file ({exc.__class__.__name__})"


def csv_records(handle, skipped: list[int]):
    """(first file line, cells) of every non-blank CSV record after the leading comment lines.

    ``handle`` is a text file opened with ``newline=""``; the numbers of the comment lines above
    the header are appended to ``skipped``.

    Lines end only at CR, LF or CRLF (the file is opened with ``newline=""``); the csv reader
    joins quoted fields across lines, so a quoted cell may hold any character.
    """
    n = 0
    first = None
    for line in handle:  # comments and blank lines above the header
        n += 1
        stripped = line.strip("\r\n").strip()
        if stripped.startswith("#"):
            skipped.append(n)
        elif stripped:
            first = line
            break
    if first is None:
        return
    before = n - 1
    reader = csv.reader(itertools.chain([first], handle), skipinitialspace=True)
    for cells in reader:
        start = before + 1
        before = n - 1 + reader.line_num
        if not cells or (len(cells) == 1 and not cells[0].strip()):
            continue
        yield start, cells


def read_table(path: Path, required: tuple[str, ...], what: str = "table") -> Table:
    """Read a CSV file (RFC 4180: records end at CR/LF only; quoted cells may hold anything).

    Lines whose first non-blank character is ``#`` are comments only above the header (they are
    listed in :attr:`Table.skipped` and :attr:`Table.note`); below it every non-blank record is
    data, so a compound named ``#7`` is kept. Blank lines are skipped.

    Raises :class:`InputError` for a missing or unreadable file, an empty file or missing
    required columns (all named in one line).
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(f"{path}: {what} file not found")
    skipped: list[int] = []
    try:
        with path.open(encoding="utf-8-sig", newline="") as handle:
            parsed = list(csv_records(handle, skipped))
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(text_problem(path, what, exc)) from exc
    except csv.Error as exc:
        raise InputError(f"{path}: not a valid CSV file ({exc})") from exc
    if not parsed:
        raise InputError(f"{path}: expected a header line with columns, found an empty file")
    header = tuple(h.strip() for h in parsed[0][1])
    missing = [c for c in required if c not in header]
    if missing and (sep := other_separator(header)) is not None:
        raise InputError(
            f"{path.name}: the header is {sep}-separated; expected a comma-separated CSV file "
            f"with columns {', '.join(required)} (export it again with commas)"
        )
    if missing and not looks_like_header(header, required):
        # a path in campaign.toml may name any file: never echo a line that is not ours
        raise InputError(f"{path.name}: {NOT_A_TABLE}; expected columns {', '.join(required)}")
    if missing:
        hint = column_hints(missing, header, required)
        raise InputError(
            f"{path.name}: missing column(s) {', '.join(missing)}; expected {', '.join(required)}, "
            f"found {', '.join(header) or 'none'}" + (f" ({hint})" if hint else "")
        )
    if len(set(header)) != len(header):
        dup = sorted({h for h in header if header.count(h) > 1})
        raise InputError(f"{path.name}: duplicate column(s) {', '.join(dup)}")
    rows, lines = [], []
    for n, cells in parsed[1:]:
        if len(cells) != len(header):
            row = dict(zip(header, cells, strict=False))
            row["__bad__"] = f"expected {len(header)} cells, found {len(cells)}" + (
                " (comment lines are allowed only above the header)"
                if cells and cells[0].lstrip().startswith("#")
                else ""
            )
        else:
            row = dict(zip(header, (c.strip(CELL_BLANKS) for c in cells), strict=True))
        rows.append(row)
        lines.append(n)
    return Table(path, header, tuple(rows), tuple(lines), tuple(skipped))
