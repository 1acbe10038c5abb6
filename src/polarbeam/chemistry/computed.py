"""Computed polarizabilities and dipoles in: a CSV written by hand, or quantum-chemistry outputs.

No quantum-chemistry dependency is needed to read a CSV:

* :func:`read_computed` reads a CSV of values computed elsewhere
  (``compound, method, alpha, alpha_unit, dipole_D`` and optional ``alpha_xx, alpha_yy, alpha_zz``)
  and converts them to polarizability volumes in Å³.
* :func:`read_outputs` reads quantum-chemistry output files through cclib (optional extra
  ``polarbeam[qc]``) where cclib exposes a polarizability tensor.

Both give a table with the columns :data:`COMPUTED_COLUMNS`, the layout the comparisons of
:mod:`polarbeam.chemistry.parity` take.  Tables carry Å³ and debye because they are edges (files
a person reads); the tensor helpers are plain functions of floats/arrays.
"""

from __future__ import annotations

import csv
import glob
import logging
import math
import os
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from polarbeam._util.optional import lazy, require
from polarbeam._util.tables import CELL_BLANKS, csv_records, text_problem
from polarbeam._util.text import header_for_message
from polarbeam.constants import ANGSTROM3_SI, AU_POLARIZABILITY_SI
from polarbeam.errors import InputError, RowValueError

pd = lazy("pandas", "reading and writing tables")

__all__ = [
    "ALPHA_UNITS",
    "COMPUTED_COLUMNS",
    "COMPUTED_CSV_COLUMNS",
    "NAMED_ALPHA_UNITS",
    "alpha_a3_from_unit",
    "anisotropy",
    "isotropic_average",
    "read_computed",
    "read_outputs",
]

#: Polarizability unit strings accepted in a computed-values CSV → factor to Å³.
#: ``bohr3`` is the atomic unit of polarizability e²a0²/Eh read as a volume (4πε0·a0³).
ALPHA_UNITS: dict[str, float] = {
    "A3": 1.0,
    "bohr3": AU_POLARIZABILITY_SI / ANGSTROM3_SI,
    "C m2/V": 1.0 / ANGSTROM3_SI,
}

#: Columns of a computed-values table (from :func:`read_computed`, :func:`read_outputs` or
#: :func:`polarbeam.chemistry.qchem.results_table`).
COMPUTED_COLUMNS = [
    "compound",
    "qc_method",
    "alpha_computed_A3",
    "dipole_computed_D",
    "alpha_xx_A3",
    "alpha_yy_A3",
    "alpha_zz_A3",
    "anisotropy_A3",
    "source",
]

_REQUIRED = ("compound", "method", "alpha", "alpha_unit", "dipole_D")
_COMPONENTS = ("alpha_xx", "alpha_yy", "alpha_zz")
#: Units a ``computed.csv`` may carry in its column names (``alpha_A3``, ``alpha_xx_bohr3`` …).
NAMED_ALPHA_UNITS = ("A3", "bohr3")
#: Header of the layout with units in the names (what ``polarbeam compute`` writes).
COMPUTED_CSV_COLUMNS = (
    "compound",
    "qc_method",
    "alpha_A3",
    "dipole_D",
    "alpha_xx_A3",
    "alpha_yy_A3",
    "alpha_zz_A3",
    "source",
)
#: Relative mismatch allowed between ``alpha`` and the mean of the given diagonal components.
_TRACE_TOLERANCE = 0.01


# --------------------------------------------------------------------------------------------
# physics helpers (plain floats / arrays)
# --------------------------------------------------------------------------------------------


def alpha_a3_from_unit(value, unit: str):
    """Convert a polarizability given in one of :data:`ALPHA_UNITS` to Å³.

    Raises
    ------
    InputError
        If ``unit`` is not one of the accepted strings (the message lists them).
    """
    try:
        factor = ALPHA_UNITS[unit]
    except KeyError:
        valid = ", ".join(repr(u) for u in ALPHA_UNITS)
        raise InputError(f"alpha unit: expected one of {valid}, found {unit!r}") from None
    return np.asarray(value, dtype=float) * factor if np.ndim(value) else float(value) * factor


def isotropic_average(tensor) -> float:
    """Isotropic polarizability ᾱ = tr(α)/3 of a 3×3 tensor (any consistent unit)."""
    t = np.asarray(tensor, dtype=float)
    if t.shape != (3, 3):
        raise ValueError(f"polarizability tensor: expected shape (3, 3), found {t.shape}")
    return float(np.trace(t) / 3.0)


def anisotropy(tensor) -> float:
    """Polarizability anisotropy Δα of a 3×3 tensor (any consistent unit).

    Δα² = ½[(αxx−αyy)² + (αyy−αzz)² + (αzz−αxx)² + 6(αxy² + αyz² + αzx²)], the rotational
    invariant used for Rayleigh depolarisation and Kerr-effect work (common practice); for a
    tensor in its principal axes only the diagonal terms remain.  The tensor is symmetrised
    first.
    """
    t = np.asarray(tensor, dtype=float)
    if t.shape != (3, 3):
        raise ValueError(f"polarizability tensor: expected shape (3, 3), found {t.shape}")
    t = 0.5 * (t + t.T)
    xx, yy, zz = t[0, 0], t[1, 1], t[2, 2]
    off = t[0, 1] ** 2 + t[1, 2] ** 2 + t[2, 0] ** 2
    val = 0.5 * ((xx - yy) ** 2 + (yy - zz) ** 2 + (zz - xx) ** 2 + 6.0 * off)
    return float(math.sqrt(max(val, 0.0)))


# --------------------------------------------------------------------------------------------
# CSV of computed values
# --------------------------------------------------------------------------------------------


def _number(text: str, where: str, column: str, *, allow_blank: bool) -> float:
    s = text.strip()
    if not s:
        if allow_blank:
            return math.nan
        raise RowValueError(f"{where}, column {column}: expected a number, found an empty cell")
    try:
        value = float(s)
    except ValueError:
        raise RowValueError(f"{where}, column {column}: expected a number, found {s!r}") from None
    if not math.isfinite(value):
        raise RowValueError(f"{where}, column {column}: expected a finite number, found {s!r}")
    return value


def _parse_row(cells: dict[str, str], where: str, named: dict[str, str] | None = None) -> dict:
    named = named or {}

    def col(c: str) -> str:  # the column as the file names it
        return named.get(c, c)

    compound = cells["compound"].strip(CELL_BLANKS)
    method = cells["method"].strip()
    if not compound:
        raise RowValueError(f"{where}, column compound: expected a name, found an empty cell")
    if not method:
        raise RowValueError(f"{where}, column {col('method')}: expected a method name, found empty")
    unit = cells["alpha_unit"].strip()
    if unit not in ALPHA_UNITS:
        valid = ", ".join(repr(u) for u in ALPHA_UNITS)
        raise RowValueError(f"{where}, column alpha_unit: expected one of {valid}, found {unit!r}")
    factor = ALPHA_UNITS[unit]
    comps = [_number(cells.get(c, ""), where, col(c), allow_blank=True) for c in _COMPONENTS]
    given = [math.isfinite(c) for c in comps]
    if any(given) and not all(given):
        missing = ", ".join(col(c) for c, g in zip(_COMPONENTS, given, strict=True) if not g)
        raise RowValueError(
            f"{where}, columns {'/'.join(col(c) for c in _COMPONENTS)}: expected all three or "
            f"none, found {missing} empty"
        )
    alpha = _number(cells["alpha"], where, col("alpha"), allow_blank=all(given))
    if math.isnan(alpha):
        alpha = sum(comps) / 3.0
    if alpha <= 0:
        raise RowValueError(
            f"{where}, column {col('alpha')}: expected a value > 0, found {alpha!r}"
        )
    aniso = math.nan
    comps_a3 = [math.nan] * 3
    if all(given):
        mean = sum(comps) / 3.0
        if abs(mean - alpha) > _TRACE_TOLERANCE * abs(alpha):
            raise RowValueError(
                f"{where}, column {col('alpha')}: expected the mean of "
                f"{', '.join(col(c) for c in _COMPONENTS)} "
                f"({mean:.6g}) within {_TRACE_TOLERANCE:.0%}, found {alpha:.6g}"
            )
        comps_a3 = [c * factor for c in comps]
        aniso = anisotropy(np.diag(comps_a3))
    dipole = _number(cells["dipole_D"], where, "dipole_D", allow_blank=True)
    if dipole < 0:
        raise RowValueError(
            f"{where}, column dipole_D: expected a magnitude >= 0 debye, found {dipole!r}"
        )
    return {
        "compound": compound,
        "qc_method": method,
        "alpha_computed_A3": alpha * factor,
        "dipole_computed_D": dipole,
        "alpha_xx_A3": comps_a3[0],
        "alpha_yy_A3": comps_a3[1],
        "alpha_zz_A3": comps_a3[2],
        "anisotropy_A3": aniso,
    }


def _named_layout(header: list[str]) -> dict[str, str]:
    """For a header with units in the names (``qc_method``, ``alpha_A3`` …): old name → column
    (``alpha_unit`` → the unit); empty for the old layout (``method, alpha, alpha_unit``)."""
    if "alpha" in header or "alpha_unit" in header:
        return {}
    for unit in NAMED_ALPHA_UNITS:
        if f"alpha_{unit}" in header or f"alpha_xx_{unit}" in header:
            out = {"method": "qc_method", "alpha": f"alpha_{unit}", "alpha_unit": unit}
            out.update({c: f"{c}_{unit}" for c in _COMPONENTS})
            return out
    if "qc_method" in header:
        return {"method": "qc_method", "alpha": "alpha_A3", "alpha_unit": "A3"}
    return {}


def _old_layout(cells: dict[str, str], named: dict[str, str]) -> dict[str, str]:
    """The cells of a row under the old column names, whatever the layout of the file."""
    if not named:
        return cells
    out = dict(cells)
    for old, new in named.items():
        out[old] = named["alpha_unit"] if old == "alpha_unit" else cells.get(new, "")
    return out


def read_computed(
    path,
    failures: list[str] | None = None,
    notes: list[str] | None = None,
    as_frame: bool = True,
) -> pd.DataFrame | list[dict]:
    """Read a CSV of computed polarizabilities and dipoles into a table in Å³ and debye.

    Parameters
    ----------
    path
        CSV with a header row holding at least ``compound, qc_method, alpha_A3, dipole_D`` and
        optionally ``alpha_xx_A3, alpha_yy_A3, alpha_zz_A3`` (diagonal components, principal
        axes) — the unit in the names, ``A3`` or ``bohr3`` (atomic units) — as ``polarbeam
        compute`` writes.  The old layout ``compound, method, alpha, alpha_unit, dipole_D`` (and
        ``alpha_xx, alpha_yy, alpha_zz``) of earlier versions is still read, ``alpha_unit``
        one of ``A3``, ``bohr3`` or ``C m2/V``, with a deprecation note in ``notes``.
        ``alpha`` may be left empty when the three components are given (it is then their
        mean); a blank ``dipole_D`` means "not computed".  Lines starting with ``#`` and
        blank lines are skipped; other columns are ignored.  Several methods per compound are
        allowed; the same (compound, method) twice is an error.
    failures
        If a list is given, a bad row does not stop the reading: its one-line message is
        appended (it names the file, line, compound and column) and the good rows are returned.
        If ``None`` (default) the first bad row raises :class:`~polarbeam.errors.RowValueError`.
    notes
        If a list is given, a one-line deprecation note is appended for the old layout.
    as_frame
        False: check the file and return the rows as dicts (no pandas import; the campaign
        loader only checks the file).

    Returns
    -------
    pandas.DataFrame
        Columns :data:`COMPUTED_COLUMNS`; ``anisotropy_A3`` is Δα from the diagonal components
        (NaN when they are not given); ``source`` is ``"<file>:<line>"``.

    Raises
    ------
    InputError
        Missing or unreadable file, no header, missing required columns.
    RowValueError
        A bad value in a row (only when ``failures`` is ``None``).
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(f"{path}: computed-values file not found")
    rows: list[dict] = []
    seen: dict[tuple[str, str], int] = {}
    try:
        handle = path.open(newline="", encoding="utf-8-sig")
    except OSError as exc:
        raise InputError(f"{path}: cannot read computed-values file ({exc.strerror})") from None
    with handle:
        try:
            records = list(csv_records(handle, []))
        except UnicodeDecodeError as exc:
            raise InputError(text_problem(path, "computed-values", exc)) from None
        except csv.Error as exc:
            raise InputError(f"{path}: not a valid CSV file ({exc})") from None
    header: list[str] | None = None
    named: dict[str, str] = {}  # old column name → the column of a file with units in names
    method_column = "method"
    for line, record in records:
        if header is None:
            header = [c.strip() for c in record]
            named = _named_layout(header)
            if named:
                required = ("compound", "qc_method", named["alpha"], "dipole_D")
                method_column = "qc_method"
            else:
                required = _REQUIRED
                if notes is not None and "method" in header:
                    notes.append(
                        f"{path.name}: old column names (method, alpha, alpha_unit, alpha_xx…) "
                        "read; deprecated: name them qc_method, alpha_A3, alpha_xx_A3… (units "
                        "in the names, as polarbeam compute writes)"
                    )
            missing = [c for c in required if c not in header]
            if missing:
                raise InputError(
                    f"{path}: line {line}: expected columns {', '.join(required)}, "
                    f"missing {', '.join(missing)} "
                    f"(found {header_for_message(header, required)})"
                )
            continue
        where = f"{path}: line {line}"
        try:
            if len(record) != len(header):
                raise RowValueError(
                    f"{where}: expected {len(header)} fields as in the header, found {len(record)}"
                )
            cells = dict(zip(header, record, strict=True))
            name = cells["compound"].strip(CELL_BLANKS)
            if name:
                where = f"{where} (compound {name!r})"
            row = _parse_row(_old_layout(cells, named), where, named)
            key = (row["compound"], row["qc_method"])
            if key in seen:
                raise RowValueError(
                    f"{where}, column {method_column}: expected one row per compound and method, "
                    f"found {row['qc_method']!r} again (first on line {seen[key]})"
                )
        except RowValueError as exc:
            if failures is None:
                raise
            failures.append(str(exc))
            continue
        seen[key] = line
        row["source"] = f"{path.name}:{line}"
        rows.append(row)
    if header is None:
        raise InputError(f"{path}: expected a header row with {', '.join(_REQUIRED)}, found none")
    if not as_frame:
        return rows
    return pd.DataFrame(rows, columns=COMPUTED_COLUMNS)


# --------------------------------------------------------------------------------------------
# quantum-chemistry output files through cclib
# --------------------------------------------------------------------------------------------


def _cclib_method(ccdata) -> str:
    meta = getattr(ccdata, "metadata", {}) or {}
    functional = meta.get("functional")
    if not functional:
        methods = meta.get("methods") or []
        functional = methods[-1] if methods else None
    basis = meta.get("basis_set")
    if functional and basis:
        return f"{functional}/{basis}"
    return functional or (f"file/{basis}" if basis else "file")


def _symmetric_tensor(raw) -> np.ndarray:
    t = np.asarray(raw, dtype=float)
    if t.shape != (3, 3):
        raise ValueError(f"expected a 3x3 polarizability tensor, found shape {t.shape}")
    upper = t[np.triu_indices(3, 1)]
    lower = t[np.tril_indices(3, -1)]
    if np.all(upper == 0) and np.any(lower != 0):  # lower triangle only
        t = np.tril(t) + np.tril(t, -1).T
    elif np.all(lower == 0) and np.any(upper != 0):
        t = np.triu(t) + np.triu(t, 1).T
    return 0.5 * (t + t.T)


def read_outputs(patterns: Sequence[str], base_dir=".") -> tuple[pd.DataFrame, list[str]]:
    """Read polarizabilities and dipoles from quantum-chemistry output files through cclib.

    Parameters
    ----------
    patterns
        Glob patterns (``"qc/*.out"``, ``"**/*.log"``) relative to ``base_dir``; absolute
        patterns are used as they are.
    base_dir
        Folder the patterns are relative to (usually the campaign folder).

    Returns
    -------
    table : pandas.DataFrame
        Columns :data:`COMPUTED_COLUMNS`, one row per file with a polarizability.  The compound
        is the file stem; the method is ``"<functional>/<basis>"`` from cclib's metadata when the
        file states them, else ``"file"``.  cclib keeps polarizabilities in atomic units
        (converted here via CODATA); its ``moments[1]`` is the dipole vector in debye -- the
        attribute docstring of cclib 1.8 says "a.u.", but its parsers convert to debye.
        ``alpha_xx_A3`` … are the principal values (ascending).
    notes : list of str
        One line per file that gave no row (unsupported format, parse failure, no
        polarizability) or gave an incomplete one (no dipole, several tensors), and per pattern
        that matched nothing.  No exception is raised for such files.

    Raises
    ------
    polarbeam._util.optional.MissingExtraError
        If cclib is not installed (extra ``polarbeam[qc]``).
    """
    cclib = require("cclib", "reading quantum-chemistry output files")
    require("cclib.io", "reading quantum-chemistry output files")
    if isinstance(patterns, str | os.PathLike):
        patterns = [str(patterns)]
    base = Path(base_dir)
    notes: list[str] = []
    files: list[Path] = []
    for pattern in patterns:
        full = pattern if os.path.isabs(pattern) else str(base / pattern)
        matched = sorted(Path(p) for p in glob.glob(full, recursive=True) if Path(p).is_file())
        if not matched:
            notes.append(f"{pattern}: no file matched (relative to {base})")
        files.extend(m for m in matched if m not in files)
    rows = []
    seen: dict[tuple[str, str], Path] = {}
    for path in files:
        try:
            data = cclib.io.ccread(str(path), loglevel=logging.CRITICAL)
        except Exception as exc:  # cclib raises many kinds on truncated or odd files
            notes.append(f"{path}: cclib could not parse it ({type(exc).__name__}: {exc})")
            continue
        if data is None:
            notes.append(f"{path}: not a format cclib recognises; skipped")
            continue
        pols = getattr(data, "polarizabilities", None)
        if not pols:
            notes.append(f"{path}: no polarizability in the file (cclib found none); skipped")
            continue
        try:
            tensor_au = _symmetric_tensor(pols[0])
        except ValueError as exc:
            notes.append(f"{path}: unusable polarizability ({exc}); skipped")
            continue
        if len(pols) > 1:
            notes.append(
                f"{path}: {len(pols)} polarizability tensors in the file; using the first "
                "(the static one in the usual job layout) -- check it is static"
            )
        factor = ALPHA_UNITS["bohr3"]
        tensor = tensor_au * factor
        principal = np.sort(np.linalg.eigvalsh(tensor))
        moments = getattr(data, "moments", None)
        if moments is not None and len(moments) > 1 and moments[1] is not None:
            dipole = float(np.linalg.norm(np.asarray(moments[1], dtype=float)))
        else:
            dipole = math.nan
            notes.append(f"{path}: no dipole moment in the file; dipole left empty")
        method = _cclib_method(data)
        if (path.stem, method) in seen:
            notes.append(
                f"{path}: same compound and method as {seen[(path.stem, method)]}; skipped"
            )
            continue
        seen[(path.stem, method)] = path
        rows.append(
            {
                "compound": path.stem,
                "qc_method": method,
                "alpha_computed_A3": isotropic_average(tensor),
                "dipole_computed_D": dipole,
                "alpha_xx_A3": float(principal[0]),
                "alpha_yy_A3": float(principal[1]),
                "alpha_zz_A3": float(principal[2]),
                "anisotropy_A3": anisotropy(tensor),
                "source": str(path),
            }
        )
    return pd.DataFrame(rows, columns=COMPUTED_COLUMNS), notes
