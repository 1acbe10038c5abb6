"""Reading raw scan tables from CSV or Parquet files.

CSV files are parsed by pyarrow when it is installed (column types fixed up front, blocks parsed
on all cores), else by pandas; Parquet needs pyarrow.  Arrow tables become DataFrames without
pandas' generic conversion: numeric columns are handed over as NumPy views, per-scan columns
stay Arrow chunks and the dictionary-encoded compound column becomes a Categorical.
"""

from __future__ import annotations

import os
from pathlib import Path

from polarbeam._util.optional import has, lazy, require
from polarbeam.errors import InputError, MissingExtraError, RowValueError
from polarbeam.reduction.columns import (
    INPUT_COLUMNS,
    NUMERIC_COLUMNS,
    OPTIONAL_COLUMNS,
    PER_SCAN_COLUMNS,
    validate_scans,
)

pd = lazy("pandas", "reading and writing tables")

__all__ = ["read_scans", "read_table"]

_ARROW_PURPOSE = "reading scans with pyarrow"
_PARQUET_PURPOSE = "reading Parquet scans"


def _read_csv(path: Path) -> pd.DataFrame:
    if not has("pyarrow"):  # pragma: no cover - pandas' own parser as fallback
        return pd.read_csv(path, dtype={"compound": str})
    pa = require("pyarrow", _ARROW_PURPOSE)
    pacsv = require("pyarrow.csv", _ARROW_PURPOSE)
    # The column types are fixed, so a later block cannot disagree with types guessed from the
    # first; blocks are parsed on all cores.  Scan ids are read as integers, or as numbers when
    # written with a decimal point (validation then checks they are whole).
    read = pacsv.ReadOptions(block_size=1 << 22)
    # RFC 4180: a quoted cell (a compound name) may hold line breaks
    parse = pacsv.ParseOptions(newlines_in_values=True)
    table = None
    for scan_type in (pa.int64(), pa.float64()):
        types = {c: pa.float64() for c in (*NUMERIC_COLUMNS, *OPTIONAL_COLUMNS)}
        types["scan"] = scan_type
        types["compound"] = pa.dictionary(pa.int32(), pa.string())
        opts = pacsv.ConvertOptions(column_types=types, strings_can_be_null=False)
        try:
            table = pacsv.read_csv(
                path, read_options=read, parse_options=parse, convert_options=opts
            )
            break
        except pa.ArrowInvalid as exc:
            if "conversion error" not in str(exc).lower():
                raise
    if table is None:
        # A cell that is not a number: read everything as text so that validation can name
        # its row and column.
        text = pacsv.ConvertOptions(
            column_types=dict.fromkeys((*INPUT_COLUMNS, *OPTIONAL_COLUMNS), pa.string())
        )
        table = pacsv.read_csv(path, parse_options=parse, convert_options=text)
        return table.to_pandas(split_blocks=True, self_destruct=True)
    try:
        return _arrow_to_frame(table)
    except Exception:  # unusual column types: let pandas convert them
        return table.to_pandas(split_blocks=True, self_destruct=True)


def _arrow_to_frame(table) -> pd.DataFrame:
    """Arrow table → DataFrame without pandas' generic conversion (numeric columns are handed
    over as NumPy views; the dictionary-encoded compound column becomes a Categorical)."""
    pa = require("pyarrow", _ARROW_PURPOSE)
    cols = {}
    for name in table.column_names:
        col = table.column(name)
        if col.type == pa.float64() and col.null_count > 0:
            # kept as Arrow (an empty cell stays missing, told apart from a written "nan")
            cols[name] = pd.arrays.ArrowExtensionArray(col)
        elif name in PER_SCAN_COLUMNS and col.type == pa.float64() and col.null_count == 0:
            # kept as Arrow chunks (zero copy): checked per scan, never concatenated
            cols[name] = pd.arrays.ArrowExtensionArray(col)
        elif name == "compound":
            arr = col.unify_dictionaries().combine_chunks()
            if not hasattr(arr, "indices"):
                raise TypeError("compound column is not dictionary encoded")
            codes = arr.indices.fill_null(-1).to_numpy(zero_copy_only=False)
            cats = [str(v) for v in arr.dictionary.to_pylist()]
            if len(set(cats)) != len(cats):
                raise TypeError("repeated dictionary entries")
            # Codes straight from Arrow lie in range (or are null, -1) by construction.
            cols[name] = pd.Categorical.from_codes(codes, cats, validate=False)
        else:
            cols[name] = col.to_numpy()
    return pd.DataFrame(cols, copy=False)


def read_table(path: Path) -> pd.DataFrame:
    """Read a raw scan table (CSV or Parquet, chosen by extension) without validating it.

    :func:`read_scans` validates the result; :func:`polarbeam.reduction.reduce.reduce_file`
    leaves the validation to :func:`~polarbeam.reduction.reduce.reduce_table`.

    Raises
    ------
    InputError
        Unknown extension, unparsable file, or Parquet without pyarrow installed.
    """
    suffix = path.suffix.lower()
    if suffix in (".parquet", ".pq"):
        if not has("pyarrow"):  # pragma: no cover - optional dependency
            raise MissingExtraError(f"{path}: reading Parquet needs pyarrow (pip install pyarrow)")
        pq = require("pyarrow.parquet", _PARQUET_PURPOSE)
        try:
            table = pq.read_table(path, read_dictionary=["compound"])
            try:
                return _arrow_to_frame(table)
            except Exception:  # unusual column types: let pandas convert them
                return table.to_pandas(split_blocks=True, self_destruct=True)
        except Exception as exc:  # pyarrow raises several types for corrupt files
            msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
            raise InputError(f"{path}: cannot read Parquet file: {msg}") from exc
    if suffix in (".csv", ".txt"):
        try:
            return _read_csv(path)
        except (InputError, RowValueError):
            raise
        except Exception as exc:  # parser errors, bad encodings, ragged rows
            msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
            raise InputError(f"{path}: cannot parse CSV: {msg}") from exc
    raise InputError(f"{path}: unknown table format {suffix!r} (expected .csv or .parquet)")


def read_scans(path: str | os.PathLike) -> pd.DataFrame:
    """Read a raw scan table from CSV or Parquet (chosen by extension) and validate it.

    Parameters
    ----------
    path : str or path-like
        ``*.csv`` (or ``*.txt``) or ``*.parquet`` (``*.pq``) file with :data:`INPUT_COLUMNS`.

    Returns
    -------
    DataFrame
        The validated table (see :func:`validate_scans`).

    Raises
    ------
    InputError
        Missing file, unknown extension, unparsable file or missing columns.
    RowValueError
        A non-numeric or out-of-range value, naming the file, row and column.
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(f"{path}: scans file not found")
    return validate_scans(read_table(path), str(path))
