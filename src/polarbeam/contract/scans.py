"""Raw fringe scans in a campaign: reduce the scan file and turn its phases into series.

A bad cell fails only its compound: the file is reduced again without the compounds whose rows
are bad, and each of those gets the message of its first bad cell.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from polarbeam._util.tables import CELL_BLANKS
from polarbeam.contract.schema import (
    ROTATIONAL_COLUMNS,
    SeriesData,
)
from polarbeam.contract.temperatures import cell_rotational, series_rotational
from polarbeam.errors import CompoundError, InputError, RowValueError
from polarbeam.quantities import Measured
from polarbeam.reduction import read_table as read_scans_table
from polarbeam.reduction import reduce_file, reduce_table, row_problems

__all__ = [
    "reduce_scans_file",
    "series_from_reduction",
]


def reduce_scans_file(path: Path, period_m: float):
    """Read a raw-scan file (CSV or Parquet) and reduce it to drift-corrected phases.

    Returns ``(reduction, problems)``: a bad cell fails only its compound (``problems`` maps
    the compound to the message of its first bad cell), the others are reduced without it.
    """
    try:
        return reduce_file(path, period_m), {}
    except RowValueError as exc:
        first_error = exc
    df = read_scans_table(path)
    bad_rows = row_problems(df, path.name)
    names = df["compound"].astype(str).str.strip(CELL_BLANKS).to_numpy()
    problems: dict[str, str] = {}
    for i, msg in sorted(bad_rows.items()):
        if names[i] and names[i] != "nan":
            problems.setdefault(names[i], msg)
    keep = ~np.isin(names, list(problems))
    if not problems or not keep.any():  # no compound to blame, or none left: structural
        raise InputError(str(first_error)) from None
    try:
        reduction = reduce_table(df[keep].reset_index(drop=True), period_m, source=path.name)
    except RowValueError as exc:
        raise InputError(str(exc)) from None
    return reduction, problems


def series_from_reduction(reduction):
    """Series (with full phase covariance and relative visibility) from reduced phases."""
    t = reduction.table
    vis = reduction.relative_visibility()
    kept = t["phase_rad"].notna().to_numpy()
    series: dict[str, list[SeriesData]] = {}
    problems: dict[str, str] = {}
    notes: dict[str, list[str]] = {}
    names = list(dict.fromkeys(str(c) for c in t["compound"]))
    for msg in reduction.messages:
        for name in names:
            if f"({name}, " in msg:
                notes.setdefault(name, []).append(msg)
    keys = list(dict.fromkeys(zip(t["compound"].astype(str), t["temperature_K"], strict=True)))
    for name, temp in keys:
        sel = ((t["compound"].astype(str) == name) & (t["temperature_K"] == temp)).to_numpy()
        rows = sel & kept
        if name in problems:
            continue
        volts = t["voltage_V"].to_numpy()[rows]
        if np.unique(np.round(volts**2, 9)).size < 2:
            problems[name] = (
                f"{reduction.source}: series {name} @ {temp:g} K expected at least two different "
                f"voltages with usable scans, found {np.unique(np.abs(volts)).size}"
            )
            series.pop(name, None)
            continue
        try:
            rot = _series_rotational(reduction.source, t, sel, name, temp)
        except CompoundError as exc:
            problems[name] = str(exc)
            series.pop(name, None)
            continue
        cov = _series_covariance(reduction.covariance, name, temp, t["compound"][sel].iloc[0])
        v = t["velocity_m_s"].to_numpy()[rows]
        series.setdefault(name, []).append(
            SeriesData(
                compound=name,
                temperature=Measured(float(temp), float(t["temperature_err_K"][rows].mean())),
                velocity=Measured(float(v.mean()), float(t["velocity_err_m_s"][rows].mean())),
                velocities=v.astype(float),
                spreads=t["velocity_spread_m_s"].to_numpy()[rows].astype(float),
                voltages=volts.astype(float),
                values=t["phase_rad"].to_numpy()[rows].astype(float),
                errors=t["phase_err_rad"].to_numpy()[rows].astype(float),
                lines=tuple(str(x) for x in t["scan"].to_numpy()[rows]),
                covariance=cov,
                visibility=vis["relative_visibility"].to_numpy()[rows].astype(float),
                visibility_err=vis["relative_visibility_err"].to_numpy()[rows].astype(float),
                rotational=rot,
            )
        )
    for name in series:
        series[name].sort(key=lambda s: s.temperature.value)
    return series, problems, notes


#: Series longer than this keep their phase covariance sparse (a dense one would need n² floats).
DENSE_SERIES_LIMIT = 2000


def _series_covariance(covariances, name: str, temp: float, raw_name):
    """A series' phase covariance: sparse when the reduction keeps it banded (a long series is
    never made dense here; the fit factorises it in banded storage), else a dense array."""
    key = (name, temp) if (name, temp) in covariances else (raw_name, temp)
    if key not in covariances:
        return None
    if hasattr(covariances, "sparse") and covariances.sparse(key).shape[0] > DENSE_SERIES_LIMIT:
        return covariances.sparse(key)
    return np.asarray(covariances[key], dtype=float)


def _cell_text(value: float) -> str:
    return "" if np.isnan(value) else f"{value:g}"


def _series_rotational(source: str, t, sel: np.ndarray, name: str, temp: float):
    """The rotational temperature of one series from the signal scans' optional columns, with
    the checks and messages of shifts.csv (a scan id in place of the file line)."""
    col, col_err = ROTATIONAL_COLUMNS
    if col not in t.columns:
        return None
    scans = [str(x) for x in t["scan"].to_numpy()[sel]]
    values = t[col].to_numpy(dtype=float)[sel]
    errs = (
        t[col_err].to_numpy(dtype=float)[sel]
        if col_err in t.columns
        else np.full(values.size, np.nan)
    )
    cells = [
        cell_rotational(f"{source} scan {scan}", _cell_text(v), _cell_text(e))
        for scan, v, e in zip(scans, values, errs, strict=True)
    ]
    return series_rotational(source, name, temp, cells, scans, line_word="scan")
