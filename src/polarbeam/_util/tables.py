"""Reading CSV tables with line numbers kept, so every bad cell can be named in a message."""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass
from pathlib import Path

from polarbeam._util.text import NOT_A_TABLE, looks_like_header
from polarbeam.errors import InputError, RowValueError

__all__ = ["Table", "read_table"]


@dataclass(frozen=True)
class Table:
    """A CSV file read as strings: header, rows and the file line of every row."""

    path: Path
    columns: tuple[str, ...]
    rows: tuple[dict[str, str], ...]
    lines: tuple[int, ...]

    @property
    def name(self) -> str:
        return self.path.name

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


def read_table(path: Path, required: tuple[str, ...], what: str = "table") -> Table:
    """Read a CSV file; lines starting with ``#`` and blank lines are skipped.

    Raises :class:`InputError` for a missing or unreadable file, an empty file or missing
    required columns (all named in one line).
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(f"{path}: {what} file not found")
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: cannot read {what} file ({exc.__class__.__name__})") from exc
    numbered = [
        (n, line)
        for n, line in enumerate(text.splitlines(), start=1)
        if line.strip() and not line.lstrip().startswith("#")
    ]
    if not numbered:
        raise InputError(f"{path}: expected a header line with columns, found an empty file")
    reader = csv.reader([line for _, line in numbered], skipinitialspace=True)
    try:
        parsed = list(reader)
    except csv.Error as exc:
        raise InputError(f"{path}: not a valid CSV file ({exc})") from exc
    header = tuple(h.strip() for h in parsed[0])
    missing = [c for c in required if c not in header]
    if missing and not looks_like_header(header, required):
        # a path in campaign.toml may name any file: never echo a line that is not ours
        raise InputError(f"{path.name}: {NOT_A_TABLE}; expected columns {', '.join(required)}")
    if missing:
        raise InputError(
            f"{path.name}: missing column(s) {', '.join(missing)}; expected {', '.join(required)}, "
            f"found {', '.join(header) or 'none'}"
        )
    if len(set(header)) != len(header):
        dup = sorted({h for h in header if header.count(h) > 1})
        raise InputError(f"{path.name}: duplicate column(s) {', '.join(dup)}")
    rows, lines = [], []
    for (n, _), cells in zip(numbered[1:], parsed[1:], strict=True):
        if len(cells) != len(header):
            row = dict(zip(header, cells, strict=False))
            row["__bad__"] = f"expected {len(header)} cells, found {len(cells)}"
        else:
            row = dict(zip(header, (c.strip() for c in cells), strict=True))
        rows.append(row)
        lines.append(n)
    return Table(path, header, tuple(rows), tuple(lines))
