"""Columns of raw scan tables and their validation.

A raw scan table (CSV or Parquet) has one row per counting bin with :data:`INPUT_COLUMNS`.
:func:`checked_columns` validates a table column by column and hands the columns back as arrays;
a bad cell gives one :class:`~polarbeam.errors.RowValueError` naming the source, the row (data
row and file line), the column, what was expected and what was found.  Columns that hold one
value per scan may be kept as Arrow chunks and checked per scan by the caller
(:func:`value_changes`, :func:`at_rows`).
"""

from __future__ import annotations

import math

import numpy as np

from polarbeam._util.optional import lazy, require
from polarbeam._util.text import column_hints, other_separator
from polarbeam.errors import InputError, RowValueError

pd = lazy("pandas", "reading and writing tables")

__all__ = [
    "CARRIED_COLUMNS",
    "INPUT_COLUMNS",
    "NUMERIC_COLUMNS",
    "OPTIONAL_COLUMNS",
    "OUTPUT_COLUMNS",
    "PER_SCAN_COLUMNS",
    "all_finite",
    "at_rows",
    "check_range",
    "checked_columns",
    "is_empty_cell",
    "row_problems",
    "validate_scans",
    "value_changes",
]

#: Columns of a raw scan table (CSV or Parquet), one row per counting bin.
INPUT_COLUMNS = (
    "compound",
    "temperature_K",
    "temperature_err_K",
    "velocity_m_s",
    "velocity_err_m_s",
    "velocity_spread_m_s",
    "voltage_V",
    "scan",
    "time_s",
    "position_m",
    "counts",
)
#: Per-series beam columns carried unchanged into the output so that it works as a shifts file.
CARRIED_COLUMNS = ("temperature_err_K", "velocity_m_s", "velocity_err_m_s", "velocity_spread_m_s")
#: Optional per-scan columns carried unchanged into the output when the table has them (after
#: :data:`OUTPUT_COLUMNS`): the rotational temperature in the deflector and its error.  A blank
#: cell means "not stated"; their values are checked by the caller, series by series.
OPTIONAL_COLUMNS = ("rotational_temperature_K", "rotational_temperature_err_K")
#: Columns of :attr:`polarbeam.reduction.result.ReducedPhases.table`, in order (then those of
#: :data:`OPTIONAL_COLUMNS` that the input has).
OUTPUT_COLUMNS = (
    "compound",
    "temperature_K",
    "voltage_V",
    "scan",
    "time_s",
    "phase_rad",
    "phase_err_rad",
    "visibility",
    "visibility_err",
    "flags",
    *CARRIED_COLUMNS,
)

#: The numeric input columns (all but ``compound``).
NUMERIC_COLUMNS = [c for c in INPUT_COLUMNS if c != "compound"]
_POSITIVE = ("temperature_K", "velocity_m_s")
_NON_NEGATIVE = ("temperature_err_K", "velocity_err_m_s", "velocity_spread_m_s", "counts")


def _row_error(source: str, i: int, col: str, expected: str, found) -> RowValueError:
    if isinstance(found, np.generic):  # plain numbers in messages, not np.float64(-5.0)
        found = found.item()
    shown = found if isinstance(found, str) and found == "empty cell" else repr(found)
    if len(shown) > 60:
        shown = shown[:57] + "..."
    return RowValueError(
        f"{source}: row {i + 1} (line {i + 2}), column {col!r}: expected {expected}, found {shown}"
    )


def is_empty_cell(value) -> bool:
    """True for a missing cell (None, pd.NA, NaT), False for a NaN that the file spelled out."""
    if value is None or value is pd.NA or value is pd.NaT:
        return True
    return isinstance(value, str) and not value.strip()


def row_problems(df: pd.DataFrame, source: str) -> dict[int, str]:
    """The first bad cell of every data row that has one (row index → one-line message).

    Used to fail only the compounds whose rows hold a bad cell: the compound column itself is
    not checked here (a row without a name cannot be given to a compound).
    """
    first: dict[int, str] = {}
    for col in NUMERIC_COLUMNS:
        if col not in df.columns:
            continue
        raw = df[col]
        if pd.api.types.is_bool_dtype(raw):
            vals = np.full(len(raw), np.nan)
        elif pd.api.types.is_numeric_dtype(raw):
            vals = raw.to_numpy(dtype=float, na_value=np.nan)
        else:
            try:
                num = pd.to_numeric(raw.astype(str).where(raw.notna()), errors="coerce")
            except (TypeError, ValueError, UnicodeError):
                num = pd.Series(np.nan, index=raw.index)
            vals = num.to_numpy(dtype=float, na_value=np.nan)
        with np.errstate(invalid="ignore"):
            bad = ~np.isfinite(vals)
            if col in _POSITIVE:
                bad |= vals <= 0
            elif col in _NON_NEGATIVE:
                bad |= vals < 0
            elif col == "scan":
                bad |= vals != np.round(vals)
        for i in np.flatnonzero(bad):
            i = int(i)
            if i in first:
                continue
            cell = raw.iloc[i]
            if is_empty_cell(cell):
                expected, found = "a number", "empty cell"
            elif not np.isfinite(vals[i]):
                text = cell if isinstance(cell, str) else repr(cell)
                number = pd.to_numeric(pd.Series([text]), errors="coerce").iloc[0]
                expected = "a finite number" if pd.notna(number) or text == "nan" else "a number"
                found = cell
            elif col in _POSITIVE:
                expected, found = "a value > 0", vals[i]
            elif col in _NON_NEGATIVE:
                expected, found = "a value >= 0", vals[i]
            else:
                expected, found = "a whole-number scan id", vals[i]
            first[i] = str(_row_error(source, i, col, expected, found))
    for col in OPTIONAL_COLUMNS:
        if col in df.columns:
            for i in _non_numbers(df[col]):
                first.setdefault(i, str(_row_error(source, i, col, "a number", df[col].iloc[i])))
    return first


def _non_numbers(raw: pd.Series) -> np.ndarray:
    """Rows of a column whose cell is neither blank nor a number."""
    if pd.api.types.is_bool_dtype(raw):
        return np.flatnonzero(raw.notna().to_numpy())
    if pd.api.types.is_numeric_dtype(raw):
        return np.zeros(0, dtype=np.int64)
    isnull = np.array([is_empty_cell(v) for v in raw], dtype=bool) | raw.isna().to_numpy()
    try:
        num = pd.to_numeric(raw.astype(str).where(~isnull), errors="coerce")
        return np.flatnonzero(num.isna().to_numpy() & ~isnull)
    except (TypeError, ValueError, UnicodeError):
        return np.array([_first_non_number(raw)])


def _optional_values(raw: pd.Series) -> np.ndarray:
    """An optional column as float64, a blank cell as NaN (the caller has checked
    :func:`_non_numbers`)."""
    if pd.api.types.is_numeric_dtype(raw) and not pd.api.types.is_bool_dtype(raw):
        return raw.to_numpy(dtype=float, na_value=np.nan)
    isnull = np.array([is_empty_cell(v) for v in raw], dtype=bool) | raw.isna().to_numpy()
    num = pd.to_numeric(raw.astype(str).where(~isnull), errors="coerce")
    return num.to_numpy(dtype=float, na_value=np.nan)


def _first_non_number(raw: pd.Series) -> int:
    for i, value in enumerate(raw):
        try:
            if not isinstance(value, int | float | str):
                raise TypeError
            float(value)
        except (TypeError, ValueError):
            return i
    return 0


#: Columns that hold one value per scan (checked per scan once the rows are grouped).
PER_SCAN_COLUMNS = ("temperature_K", "voltage_V", *CARRIED_COLUMNS)


class _Chunks:
    """A numeric column held as the NumPy views of its Arrow chunks (never concatenated).

    Per-scan columns of a large Parquet file only need their value changes and their values at
    the first row of each scan, so copying them into one array would be wasted work.
    """

    __slots__ = ("offsets", "parts")

    def __init__(self, parts: list[np.ndarray]):
        self.parts = [p for p in parts if p.size] or [np.zeros(0)]
        self.offsets = np.cumsum([0] + [p.size for p in self.parts])

    def __len__(self) -> int:
        return int(self.offsets[-1])

    def changes(self) -> np.ndarray:
        """Rows ``i >= 1`` whose value differs from row ``i - 1``."""
        found = []
        for k, part in enumerate(self.parts):
            lo = self.offsets[k]
            if k and (part[0] != self.parts[k - 1][-1]):
                found.append(np.array([lo]))
            found.append(np.flatnonzero(part[1:] != part[:-1]) + (lo + 1))
        return np.concatenate(found)

    def take(self, rows: np.ndarray) -> np.ndarray:
        """Values at ``rows`` (chunk by chunk when they increase)."""
        if rows.size > 1 and np.any(rows[1:] < rows[:-1]):
            return np.concatenate(self.parts)[rows]
        cut = np.searchsorted(rows, self.offsets)
        return np.concatenate(
            [p[rows[cut[k] : cut[k + 1]] - self.offsets[k]] for k, p in enumerate(self.parts)]
        )

    def __getitem__(self, i: int):
        """One value (for messages)."""
        k = int(np.searchsorted(self.offsets, i, side="right")) - 1
        return self.parts[k][i - self.offsets[k]]


def value_changes(v) -> np.ndarray:
    """Rows ``i >= 1`` of a column (array or Arrow chunks) whose value differs from row i - 1."""
    if isinstance(v, _Chunks):
        return v.changes()
    return np.flatnonzero(v[1:] != v[:-1]) + 1


def at_rows(v, rows: np.ndarray) -> np.ndarray:
    """Values of a column (array or Arrow chunks) at ``rows``."""
    return v.take(rows) if isinstance(v, _Chunks) else v[rows]


def all_finite(vals: np.ndarray) -> bool:
    """True when every value is finite."""
    # A finite sum implies finite terms (NaN and inf propagate); an overflowing sum of finite
    # values falls through to the element-wise test.
    with np.errstate(over="ignore", invalid="ignore"):
        return math.isfinite(vals.sum()) or bool(np.isfinite(vals).all())


def check_range(source: str, col: str, vals: np.ndarray) -> None:
    """Raise the row error for the first value of ``col`` outside its allowed range."""
    if col in _POSITIVE and vals.min() <= 0:
        bad = int(np.flatnonzero(vals <= 0)[0])
        raise _row_error(source, bad, col, "a value > 0", vals[bad])
    if col in _NON_NEGATIVE and vals.min() < 0:
        bad = int(np.flatnonzero(vals < 0)[0])
        raise _row_error(source, bad, col, "a value >= 0", vals[bad])


def _deferred_values(raw: pd.Series):
    """A deferred column as float64: Arrow chunks kept as views when there are several."""
    arr = raw.array
    chunked = getattr(arr, "_pa_array", None)  # pandas' ArrowExtensionArray
    if chunked is not None and chunked.num_chunks > 1 and chunked.null_count == 0:
        pa = require("pyarrow", "reading scans with pyarrow")
        if chunked.type == pa.float64():
            return _Chunks([c.to_numpy(zero_copy_only=True) for c in chunked.chunks])
    return raw.to_numpy(dtype=float, na_value=np.nan)


def checked_columns(
    df: pd.DataFrame, source: str, deferred: tuple[str, ...] = ()
) -> dict[str, np.ndarray]:
    """Validate the columns of a raw scan table and return them as arrays (no frame copy).

    Numeric columns come back as float64 (``scan`` as int64); the compound column as
    ``compound_codes`` (int) indexing the sorted, stripped ``compound_names``.  Columns named in
    ``deferred`` are only converted to numbers: the caller checks their values (per scan) and
    calls this again without ``deferred`` to name the first bad cell if that check fails.
    """
    if not isinstance(df, pd.DataFrame):
        raise InputError(f"{source}: expected a table, found {type(df).__name__}")
    missing = [c for c in INPUT_COLUMNS if c not in df.columns]
    if missing and (sep := other_separator([str(c) for c in df.columns])) is not None:
        raise InputError(
            f"{source}: the header is {sep}-separated; expected a comma-separated CSV file "
            f"with columns {', '.join(INPUT_COLUMNS)} (export it again with commas)"
        )
    if missing:
        hint = column_hints(missing, [str(c) for c in df.columns], INPUT_COLUMNS)
        raise InputError(
            f"{source}: missing column(s) {', '.join(missing)} "
            f"(expected {', '.join(INPUT_COLUMNS)})" + (f"; {hint}" if hint else "")
        )
    if len(df) == 0:
        raise InputError(f"{source}: no data rows")
    if df.columns.duplicated().any():
        dup = sorted(set(df.columns[df.columns.duplicated()]))
        raise InputError(f"{source}: duplicated column(s) {', '.join(map(str, dup))}")
    out: dict[str, np.ndarray] = {}
    for col in NUMERIC_COLUMNS:
        raw = df[col]
        if pd.api.types.is_bool_dtype(raw):
            raise _row_error(source, 0, col, "a number", raw.iloc[0])
        if not pd.api.types.is_numeric_dtype(raw):
            # Text (or dates, bytes...): every non-empty cell must read as a number.
            isnull = raw.isna().to_numpy()
            try:
                num = pd.to_numeric(raw.astype(str).where(~isnull), errors="coerce")
                bad = np.flatnonzero(num.isna().to_numpy() & ~isnull)
            except (TypeError, ValueError, UnicodeError):  # e.g. bytes that are not UTF-8
                bad = np.array([_first_non_number(raw)])
            if bad.size:
                i = int(bad[0])
                raise _row_error(source, i, col, "a number", raw.iloc[i])
            raw = num
        if col == "scan" and pd.api.types.is_integer_dtype(raw) and not raw.hasnans:
            out[col] = raw.to_numpy(dtype=np.int64)  # whole numbers by type: nothing to check
            continue
        if col in deferred:
            out[col] = _deferred_values(raw)
            continue
        vals = raw.to_numpy(dtype=float, na_value=np.nan)
        # fast paths (one reduction each); the offending row is located only on failure
        if not all_finite(vals):
            i = int(np.flatnonzero(~np.isfinite(vals))[0])
            found = "empty cell" if is_empty_cell(raw.iloc[i]) else vals[i]
            raise _row_error(source, i, col, "a finite number", found)
        check_range(source, col, vals)
        if col == "scan":
            bad = np.flatnonzero((vals != np.round(vals)) | (np.abs(vals) > 2**53))
            if bad.size:
                raise _row_error(source, int(bad[0]), col, "a whole-number scan id", vals[bad[0]])
            vals = vals.astype(np.int64)
        out[col] = vals
    for col in OPTIONAL_COLUMNS:
        if col in df.columns:
            bad = _non_numbers(df[col])
            if bad.size:
                i = int(bad[0])
                raise _row_error(source, i, col, "a number", df[col].iloc[i])
            out[col] = _optional_values(df[col])
    compound = df["compound"]
    if isinstance(compound.dtype, pd.CategoricalDtype):  # e.g. from Parquet: codes as they are
        codes = compound.cat.codes.to_numpy()
        uniques = compound.cat.categories
    else:
        codes, uniques = pd.factorize(compound, use_na_sentinel=True)
    if codes.min() < 0:
        raise _row_error(
            source, int(np.flatnonzero(codes < 0)[0]), "compound", "a compound name", "empty cell"
        )
    names = np.array([str(u).strip() for u in uniques], dtype=object)
    for k in np.flatnonzero(names == ""):
        rows = np.flatnonzero(codes == k)  # (an unused category of a Categorical has none)
        if rows.size:
            raise _row_error(source, int(rows[0]), "compound", "a compound name", uniques[k])
    sorted_names, remap = np.unique(names.astype(str), return_inverse=True)
    same = remap.size == sorted_names.size and np.array_equal(remap, np.arange(remap.size))
    out["compound_codes"] = codes if same else remap[codes]
    out["compound_names"] = sorted_names.astype(object)
    return out


def validate_scans(df: pd.DataFrame, source: str = "scans table") -> pd.DataFrame:
    """Check a raw scan table and return it with canonical dtypes.

    Required columns are :data:`INPUT_COLUMNS`; extra columns are kept.  Numeric columns must
    hold finite numbers; counts, errors and spreads must be >= 0; temperatures and velocities > 0;
    scan ids whole numbers; compound names non-empty (surrounding blanks are removed).  The
    returned ``compound`` column is a :class:`pandas.Categorical` of the names (cheap for
    millions of rows); ``scan`` is int64 and the other required columns float64.

    Raises
    ------
    InputError
        Missing columns (all are named, with the source) or an empty table.
    RowValueError
        The first bad cell, naming the source, the row (1-based data row and file line), the
        column, what was expected and what was found.
    """
    cols = checked_columns(df, source)
    changed = {c: cols[c] for c in NUMERIC_COLUMNS if df[c].dtype != cols[c].dtype}
    changed["compound"] = pd.Categorical.from_codes(
        cols["compound_codes"], categories=cols["compound_names"].astype(str)
    )
    out = df.reset_index(drop=True) if not isinstance(df.index, pd.RangeIndex) else df
    return out.assign(**changed)
