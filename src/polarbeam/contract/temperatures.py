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

from collections.abc import Sequence

from polarbeam.contract.schema import ROTATIONAL_COLUMNS
from polarbeam.errors import CompoundError, InputError
from polarbeam.quantities import Measured, parse_quantity

__all__ = [
    "row_rotational",
    "series_rotational",
    "thermometer_offset",
]

_T, _T_ERR = ROTATIONAL_COLUMNS


def row_rotational(table, i: int) -> tuple[str, float | None, float]:
    """(raw cell, rotational temperature K or None when the cell is blank, its error K) of a row
    of a :class:`~polarbeam._util.tables.Table`; a bad cell raises a
    :class:`~polarbeam.errors.RowValueError` naming file, line and column."""
    raw = (table.rows[i].get(_T) or "").strip()
    if not raw:
        return "", None, 0.0
    value = table.number(i, _T, positive=True)
    err = table.number(i, _T_ERR, nonnegative=True, default=0.0)
    return raw, value, err


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
