"""Which temperature the separation uses: rotational temperatures of the series and the
campaign's shared thermometer offset.

The orientational term ⟨μ²⟩/(3kT) needs the temperature of the molecules' rotation in the
deflector. In a thermal effusive source that is the source temperature; in a supersonic
expansion it is far below the nozzle temperature, so the optional columns
``rotational_temperature_K`` and ``rotational_temperature_err_K`` (shifts.csv, raw-scan tables)
state it per series. ``[source] thermometer_offset`` states one error common to every source
temperature of the campaign (one thermometer, one calibration).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from polarbeam.contract.schema import ROTATIONAL_COLUMNS
from polarbeam.errors import CompoundError, InputError, RowValueError
from polarbeam.quantities import Measured, parse_quantity

__all__ = [
    "cell_rotational",
    "row_rotational",
    "series_rotational",
    "thermometer_offset",
]

_T, _T_ERR = ROTATIONAL_COLUMNS


def cell_rotational(where: str, raw: str, raw_err: str = "") -> tuple[str, float | None, float]:
    """(raw cell, rotational temperature K or None when the cell is blank, its error K) of one
    row given as its two cells of text; ``where`` names file and row (``"shifts.csv line 4"``,
    ``"scans.csv scan 12"``). A bad cell raises a :class:`~polarbeam.errors.RowValueError`
    naming ``where`` and the column."""
    raw = (raw or "").strip()
    if not raw:
        return "", None, 0.0
    value = _number(where, _T, raw, "a number > 0", lambda v: v > 0)
    raw_err = (raw_err or "").strip()
    err = _number(where, _T_ERR, raw_err, "a number >= 0", lambda v: v >= 0) if raw_err else 0.0
    return raw, value, err


def _number(where: str, column: str, raw: str, want: str, ok) -> float:
    try:
        value = float(raw)
    except ValueError:
        value = math.nan
    if not (math.isfinite(value) and ok(value)):
        raise RowValueError(f"{where}: column '{column}' expected {want}, found {raw!r}")
    return value


def row_rotational(table, i: int) -> tuple[str, float | None, float]:
    """(raw cell, rotational temperature K or None when the cell is blank, its error K) of a row
    of a :class:`~polarbeam._util.tables.Table`; a bad cell raises a
    :class:`~polarbeam.errors.RowValueError` naming file, line and column."""
    row = table.rows[i]
    return cell_rotational(f"{table.name} line {table.lines[i]}", row.get(_T), row.get(_T_ERR))


def series_rotational(
    source: str,
    name: str,
    temp: float,
    cells: Sequence[tuple[str, float | None, float]],
    lines: Sequence,
    line_word: str = "line",
) -> Measured | None:
    """The rotational temperature (K) of one series, or None when none is stated.

    Every row of a series must state the same value and error (or none): otherwise a
    :class:`~polarbeam.errors.CompoundError` names the file, the first row that differs and the
    row it differs from.
    """
    if not cells:
        return None
    first = cells[0]
    for cell, line in zip(cells, lines, strict=True):
        if (cell[1], cell[2]) != (first[1], first[2]):
            col = _T if cell[1] != first[1] else _T_ERR
            shown = cell[0] if col == _T else f"{cell[2]:g}"
            ref = first[0] if col == _T else f"{first[2]:g}"
            raise CompoundError(
                f"{source} {line_word} {line}: column '{col}' expected the same value for every "
                f"row of series {name} @ {temp:g} K ({ref!r} at {line_word} {lines[0]}), "
                f"found {shown!r}"
            )
    if first[1] is None:
        return None
    return Measured(float(first[1]), float(first[2]))


def thermometer_offset(doc: dict, fname: str) -> Measured | None:
    """``[source] thermometer_offset`` (K): one offset common to every source temperature."""
    raw = doc.get("source", {}).get("thermometer_offset")
    if raw is None:
        return None
    where = f"{fname} [source] thermometer_offset"
    m = parse_quantity(raw, "K", where=where)
    if m.error <= 0 and m.value == 0:
        raise InputError(
            f'{where}: expected an offset with its error (e.g. "0 ± 2 K"), found {raw!r}'
        )
    return m
