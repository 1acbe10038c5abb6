"""The whole reduction: a raw scan table in, drift-corrected phases with their covariance out.

:func:`reduce_table` runs the stages in order, each a small function of this module:

1. check the options (:func:`_check_options`);
2. sort the rows by scan (:func:`_rows_by_scan`) and take each scan's value of the per-scan
   columns, checking that they are the same in all its bins (:func:`_per_scan_values`);
3. fit every scan (:func:`_fit_rows`) and collect the per-scan values, with the series
   (compound, temperature) numbered in sorted order (:func:`_scan_values`);
4. unwrap the good references of each series in time (:func:`_good_references`) and average
   their visibilities (:func:`_reference_visibility`);
5. estimate the excess phase noise per series or pooled (:func:`_estimate_noise`);
6. bracket each signal scan by the good references of its series (:func:`_bracket_signals`),
   subtract the interpolated reference phase (:func:`_subtract_references`) and choose the 2π
   branch (:func:`_choose_series_branches`);
7. build the banded covariance of the corrected phases (:func:`_phase_covariance`);
8. write the messages (:func:`_messages`) and the output tables (:func:`_output_tables`).

Every stage works on all series at once, on scans grouped by series (scan order kept within a
series); the result equals reducing each series alone.
"""

from __future__ import annotations

import logging
import math
import os
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from polarbeam._util.optional import lazy
from polarbeam.errors import InputError, RowValueError
from polarbeam.reduction.branches import choose_branches, grouped_branches
from polarbeam.reduction.columns import (
    CARRIED_COLUMNS,
    NUMERIC_COLUMNS,
    OPTIONAL_COLUMNS,
    PER_SCAN_COLUMNS,
    all_finite,
    at_rows,
    check_range,
    checked_columns,
    value_changes,
)
from polarbeam.reduction.drift import SymmetricTriplets, banded_triplets, grouped_bracket
from polarbeam.reduction.fit import FitSettings, ScanFits, fit_sorted
from polarbeam.reduction.flags import describe_flags
from polarbeam.reduction.groups import grouped_unwrap, wrap
from polarbeam.reduction.noise import (
    NOISE_MODELS,
    NOISE_SCOPES,
    NoiseEstimate,
    NoiseModel,
    NoiseScope,
    grouped_noise_moments,
    noise_from_moments,
)
from polarbeam.reduction.reading import read_table
from polarbeam.reduction.result import DenseOnAccess, ReducedPhases, SeriesKey

pd = lazy("pandas", "reading and writing tables")

__all__ = ["reduce_file", "reduce_table"]

log = logging.getLogger(__name__)


def reduce_file(path: str | os.PathLike, period_m: float, **options) -> ReducedPhases:
    """Read a raw scan file (CSV or Parquet) and reduce it: :func:`reduce_table` on the file.

    The table is validated once, inside :func:`reduce_table` (which names the file, row and
    column of a bad cell); ``options`` are those of :func:`reduce_table`.
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(f"{path}: scans file not found")
    return reduce_table(read_table(path), period_m, source=path.name, **options)


def reduce_table(
    df: pd.DataFrame,
    period_m: float,
    *,
    source: str = "scans.csv",
    noise_model: NoiseModel = "random-walk",
    noise_scope: NoiseScope = "series",
    expected_phase: Callable[[SeriesKey, np.ndarray], np.ndarray] | None = None,
    shift_sign: int | None = None,
    iterations: int = 3,
    min_bins: int = 4,
    chi2_pvalue_min: float = 1e-6,
    min_visibility_snr: float = 3.0,
) -> ReducedPhases:
    """Fit every scan, correct drift per series and return phases with their covariance.

    Parameters
    ----------
    df : DataFrame
        Raw scan table (:data:`~polarbeam.reduction.columns.INPUT_COLUMNS`), e.g. from
        :func:`~polarbeam.reduction.reading.read_scans`.
    period_m : float
        Grating period, m.
    source : str, optional
        Name used in messages.
    noise_model : {"random-walk", "jitter", "none"}, optional
        Excess-noise model added to the covariance (see :mod:`polarbeam.reduction.noise`).
    noise_scope : {"series", "pooled"}, optional
        Estimate the noise level per series, or once from all series' references together.
        Series with fewer than 3 good references use the pooled estimate.
    expected_phase : callable, optional
        ``expected_phase((compound, temperature_K), voltage_V) -> phase`` used to pick 2π
        branches; by default the branch follows a smooth trend in V²
        (:func:`~polarbeam.reduction.branches.choose_branches`).
    shift_sign : {+1, -1}, optional
        Known sign of the phase shift (used when ``expected_phase`` is not given).
    iterations, min_bins, chi2_pvalue_min, min_visibility_snr
        Passed to :func:`~polarbeam.reduction.fit.fit_scans`.

    Returns
    -------
    ReducedPhases
    """
    _check_options(source, period_m, noise_model, noise_scope, iterations)
    rows = _rows_by_scan(df, source)
    per_scan = _per_scan_values(df, source, rows)
    fits = _fit_rows(rows, period_m, iterations, min_bins, chi2_pvalue_min, min_visibility_snr)
    scans = _scan_values(rows, per_scan, fits)
    refs = _good_references(scans)
    noise = _estimate_noise(scans, refs, noise_model, noise_scope, source)
    signals = _bracket_signals(scans, refs)
    delta = _subtract_references(scans, refs, signals)
    delta = _choose_series_branches(delta, scans, signals, expected_phase, shift_sign)
    phase_err, covariance = _phase_covariance(scans, refs, signals, noise)

    out_phase = np.full(len(fits), np.nan)
    out_err = np.full(len(fits), np.nan)
    out_phase[signals.keep] = delta
    out_err[signals.keep] = phase_err
    unwrapped_ref = np.full(len(fits), np.nan)
    unwrapped_ref[refs.good] = refs.phase
    table, references = _output_tables(scans, rows.names, out_phase, out_err, unwrapped_ref)
    messages = _messages(scans, refs, signals, noise, source)

    n_flagged = int(np.count_nonzero(scans.flags))
    if n_flagged:
        log.warning(
            "%s: %d of %d scans flagged (see messages)", source, n_flagged, len(scans.flags)
        )
    return ReducedPhases(
        table=table,
        covariance=DenseOnAccess(covariance),
        references=references,
        reference_visibility=_reference_visibility(scans, refs),
        noise=noise.estimates,
        messages=tuple(messages),
        source=source,
        period_m=float(period_m),
        scan_fits=fits,
    )


# ---------------------------------------------------------------------------------------------
# Stage 1-3: options, rows by scan, per-scan values, fits
# ---------------------------------------------------------------------------------------------


def _check_options(
    source: str, period_m: float, noise_model: str, noise_scope: str, iterations: int
) -> None:
    """Raise :class:`InputError` for an unknown noise model or scope, a bad period or a bad
    number of iterations (checked in that order)."""
    if noise_model not in NOISE_MODELS:
        raise InputError(
            f"noise_model must be one of {', '.join(NOISE_MODELS)}, found {noise_model!r}"
        )
    if noise_scope not in NOISE_SCOPES:
        raise InputError(
            f"noise_scope must be one of {', '.join(NOISE_SCOPES)}, found {noise_scope!r}"
        )
    if not (isinstance(period_m, int | float) and math.isfinite(period_m) and period_m > 0):
        raise InputError(f"{source}: grating period must be a positive length, found {period_m!r}")
    if not (isinstance(iterations, int) and iterations >= 0):
        raise InputError(f"{source}: iterations must be a whole number >= 0, found {iterations!r}")


@dataclass(frozen=True, eq=False)
class _ScanRows:
    """The checked columns with the rows sorted by scan (stable: bin order kept in a scan).

    ``scan`` is the scan id of each row, ``starts`` the first row and ``n_bins`` the number of
    rows of each scan, ``names`` the sorted compound names that ``compound_codes`` index.
    """

    cols: dict[str, np.ndarray]
    scan: np.ndarray
    starts: np.ndarray
    n_bins: np.ndarray
    names: np.ndarray


def _rows_by_scan(df: pd.DataFrame, source: str) -> _ScanRows:
    """Check the table (per-scan columns only converted) and sort its rows by scan."""
    cols = checked_columns(df, source, deferred=PER_SCAN_COLUMNS)
    names = cols["compound_names"]
    row_keys = [*NUMERIC_COLUMNS, *OPTIONAL_COLUMNS, "compound_codes"]
    scan = cols["scan"]
    if len(scan) > 1 and np.any(scan[1:] < scan[:-1]):
        order = np.argsort(scan, kind="stable")
        cols = {k: (at_rows(cols[k], order) if k in row_keys else cols[k]) for k in cols}
        scan = cols["scan"]
    starts = np.flatnonzero(np.r_[True, scan[1:] != scan[:-1]])
    nb = np.diff(np.r_[starts, len(scan)])
    return _ScanRows(cols, scan, starts, nb, names)


def _per_scan_values(df: pd.DataFrame, source: str, rows: _ScanRows) -> dict[str, np.ndarray]:
    """Each scan's value of the compound and of every per-scan column.

    Every column that describes a scan must be the same in all its bins; then its values need
    checking once per scan.  On any failure the full row-by-row validation runs first, so a bad
    cell is named exactly as it would be without this shortcut; a scan with two values of a
    column is an :class:`InputError`.
    """
    cols, scan, starts, names = rows.cols, rows.scan, rows.starts, rows.names
    is_start = np.zeros(len(scan) + 1, dtype=bool)
    is_start[starts] = True
    per_scan: dict[str, np.ndarray] = {}  # each scan's value of the per-scan columns
    for col in ("compound_codes", *PER_SCAN_COLUMNS):
        v = cols[col]
        change = value_changes(v)
        inside = change[~is_start[change]]
        first = per_scan[col] = at_rows(v, starts)
        if col != "compound_codes":
            try:
                if not all_finite(first):
                    raise InputError(col)
                check_range(source, col, first)
            except (InputError, RowValueError):
                inside = np.r_[0, inside]  # a bad value: let the full validation name it
        if inside.size:
            checked_columns(df, source)  # raises for a bad cell anywhere
            inside = inside[inside > 0]
        if inside.size:
            i = int(inside[0])
            if col == "compound_codes":
                shown = (str(names[v[i - 1]]), str(names[v[i]]))
            else:
                shown = (float(v[i - 1]), float(v[i]))
            raise InputError(
                f"{source}: scan {scan[i]} has more than one "
                f"{'compound' if col == 'compound_codes' else col} ({shown[0]!r} and "
                f"{shown[1]!r}); a scan must have one value"
            )
    for col in OPTIONAL_COLUMNS:  # blank (NaN) cells count as one value
        if col not in cols:
            continue
        v = cols[col]
        same = (v[1:] == v[:-1]) | (np.isnan(v[1:]) & np.isnan(v[:-1]))
        inside = np.flatnonzero(~same) + 1
        inside = inside[~is_start[inside]]
        if inside.size:
            i = int(inside[0])
            raise InputError(
                f"{source}: scan {scan[i]} has more than one {col} ({float(v[i - 1])!r} and "
                f"{float(v[i])!r}); a scan must have one value"
            )
        per_scan[col] = v[starts]
    return per_scan


def _fit_rows(
    rows: _ScanRows,
    period_m: float,
    iterations: int,
    min_bins: int,
    chi2_pvalue_min: float,
    min_visibility_snr: float,
) -> ScanFits:
    """Fringe fit of every scan (rows already sorted by scan)."""
    settings = FitSettings(
        float(period_m),
        min_passes=iterations,
        min_bins=min_bins,
        chi2_pvalue_min=chi2_pvalue_min,
        min_visibility_snr=min_visibility_snr,
    )
    return fit_sorted(
        rows.scan, rows.cols["position_m"], rows.cols["counts"], rows.starts, settings
    )


@dataclass(frozen=True, eq=False)
class _Scans:
    """Per-scan values of the reduction, one entry per scan in scan order.

    ``flags`` starts as a copy of the fit flags; :func:`_bracket_signals` adds the bracketing
    flags to it in place.  ``series`` numbers the series (compound, temperature) in sorted
    order and ``keys[s]`` is the key of series ``s``.
    """

    fits: ScanFits
    per_scan: dict[str, np.ndarray]
    code: np.ndarray
    temperature: np.ndarray
    voltage: np.ndarray
    time: np.ndarray
    var: np.ndarray
    is_ref: np.ndarray
    flags: np.ndarray
    series: np.ndarray
    keys: list[SeriesKey]


def _scan_values(rows: _ScanRows, per_scan: dict[str, np.ndarray], fits: ScanFits) -> _Scans:
    """Collect the per-scan values (scan time = mean time of its bins) and number the series."""
    code_s = per_scan["compound_codes"]
    temp_s = per_scan["temperature_K"]
    volt_s = per_scan["voltage_V"]
    times = np.add.reduceat(rows.cols["time_s"], rows.starts) / rows.n_bins
    sid, keys = _number_series(code_s, temp_s, rows.names)
    return _Scans(
        fits=fits,
        per_scan=per_scan,
        code=code_s,
        temperature=temp_s,
        voltage=volt_s,
        time=times,
        var=fits.phase_err**2,
        is_ref=volt_s == 0.0,
        flags=fits.flags.copy(),
        series=sid,
        keys=keys,
    )


def _number_series(
    code_s: np.ndarray, temp_s: np.ndarray, names: np.ndarray
) -> tuple[np.ndarray, list[SeriesKey]]:
    """Series number of each scan, the series (compound, temperature) taken in sorted order,
    and the key of each series."""
    order = np.lexsort((temp_s, code_s))
    ck, tk = code_s[order], temp_s[order]
    first = np.r_[True, (ck[1:] != ck[:-1]) | (tk[1:] != tk[:-1])]
    sid = np.empty(len(code_s), dtype=np.int64)
    sid[order] = np.cumsum(first) - 1
    keys: list[SeriesKey] = [(str(names[code_s[h]]), float(temp_s[h])) for h in order[first]]
    return sid, keys


# ---------------------------------------------------------------------------------------------
# Stage 4-5: references and excess noise
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class _References:
    """The reference scans by series, then time (ties in scan order), and the good ones.

    ``good`` indexes the good references (one per time and series), ``series`` and ``time`` are
    theirs and ``phase`` their phases unwrapped within each series; the good references of
    series ``s`` are ``start[s] : start[s] + count[s]``.
    """

    scans: np.ndarray
    good: np.ndarray
    series: np.ndarray
    count: np.ndarray
    start: np.ndarray
    time: np.ndarray
    phase: np.ndarray


def _good_references(scans: _Scans) -> _References:
    """Sort the references, keep the unflagged ones (the first of two at the same time) and
    unwrap their phases in time within each series."""
    sid, times, flags = scans.series, scans.time, scans.flags
    refs = np.flatnonzero(scans.is_ref)
    refs = refs[np.lexsort((times[refs], sid[refs]))]
    good = refs[flags[refs] == 0]
    if good.size > 1:  # two references at the same time: keep the first
        gs = sid[good]
        good = good[np.r_[True, (gs[1:] != gs[:-1]) | (np.diff(times[good]) > 0)]]
    g_sid = sid[good]
    g_count = np.bincount(g_sid, minlength=len(scans.keys))
    g_start = np.cumsum(g_count) - g_count
    return _References(
        scans=refs,
        good=good,
        series=g_sid,
        count=g_count,
        start=g_start,
        time=times[good],
        phase=grouped_unwrap(scans.fits.phase[good], g_sid),
    )


def _reference_visibility(scans: _Scans, refs: _References) -> dict[SeriesKey, tuple[float, float]]:
    """Inverse-variance mean visibility of the good references of each series, with its error
    (NaN for a series without good references)."""
    fits, good, g_sid, n_ser = scans.fits, refs.good, refs.series, len(scans.keys)
    vw = 1.0 / fits.visibility_err[good] ** 2
    with np.errstate(invalid="ignore", divide="ignore"):
        vis_mean = np.bincount(g_sid, vw * fits.visibility[good], n_ser) / np.bincount(
            g_sid, vw, n_ser
        )
        vis_err = 1.0 / np.sqrt(np.bincount(g_sid, vw, n_ser))
    vis_mean[refs.count == 0] = vis_err[refs.count == 0] = np.nan
    return {key: (float(vis_mean[s]), float(vis_err[s])) for s, key in enumerate(scans.keys)}


@dataclass(frozen=True, eq=False)
class _SeriesNoise:
    """The noise estimate of each series, its level per series number (``diffusion`` in
    rad²/s, ``jitter`` in rad²) and the message of each series that fell back on the pooled
    estimate."""

    estimates: dict[SeriesKey, NoiseEstimate]
    diffusion: np.ndarray
    jitter: np.ndarray
    fallback: dict[int, str]


def _estimate_noise(
    scans: _Scans, refs: _References, noise_model: str, noise_scope: str, source: str
) -> _SeriesNoise:
    """Excess phase noise per series (and pooled) from the chord residuals of the references.

    Series with fewer than 3 good references take the pooled estimate (with a message when
    they have signal scans and the scope is per series).
    """
    keys, n_ser = scans.keys, len(scans.keys)
    moments = grouped_noise_moments(
        refs.time, refs.phase, scans.var[refs.good], refs.series, n_ser, noise_model
    )
    pooled = {name: float(v.sum()) for name, v in moments.items()}
    pooled_est = noise_from_moments(noise_model, pooled, "pooled")
    n_sig = np.bincount(scans.series[~scans.is_ref], minlength=n_ser)
    noise: dict[SeriesKey, NoiseEstimate] = {}
    fallback: dict[int, str] = {}
    for s, key in enumerate(keys):
        if noise_scope == "pooled" or refs.count[s] < 3:
            noise[key] = pooled_est
            if noise_scope == "series" and noise_model != "none" and n_sig[s]:
                fallback[s] = (
                    f"{source}: series ({key[0]}, {key[1]:g} K) has {refs.count[s]} usable "
                    f"reference(s); excess phase noise taken from all series pooled"
                )
        else:
            m_s = {name: v[s] for name, v in moments.items()}
            noise[key] = noise_from_moments(noise_model, m_s, "series")
    diffusion = np.array([e.level if e.model == "random-walk" else 0.0 for e in noise.values()])
    jitter = np.array([e.level if e.model == "jitter" else 0.0 for e in noise.values()])
    return _SeriesNoise(noise, diffusion, jitter, fallback)


# ---------------------------------------------------------------------------------------------
# Stage 6-7: drift-corrected signal phases, branches, covariance
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class _Signals:
    """The signal scans grouped by series (``all``) and the kept ones (``keep``, bracketed and
    unflagged) with their reference interval: ``left`` indexes the good references, ``w_right``
    is the weight of the one after it, ``exact`` marks scans at a reference time.  The kept
    scans of series ``s`` are ``start[s] : start[s] + count[s]``."""

    all: np.ndarray
    keep: np.ndarray
    left: np.ndarray
    w_right: np.ndarray
    exact: np.ndarray
    series: np.ndarray
    count: np.ndarray
    start: np.ndarray


def _bracket_signals(scans: _Scans, refs: _References) -> _Signals:
    """Bracket every signal scan by the good references of its series; scans that cannot be
    bracketed get their flags (added to ``scans.flags``), and only unflagged scans are kept."""
    sid, flags = scans.series, scans.flags
    sig = np.flatnonzero(~scans.is_ref)
    sig = sig[np.argsort(sid[sig], kind="stable")]
    left, w_right, exact, bracket = grouped_bracket(
        scans.time[sig], sid[sig], refs.time, refs.series, refs.start, refs.count
    )
    flags[sig] |= bracket
    ok = flags[sig] == 0
    keep = sig[ok]
    k_sid = sid[keep]
    k_count = np.bincount(k_sid, minlength=len(scans.keys))
    k_start = np.cumsum(k_count) - k_count
    return _Signals(sig, keep, left[ok], w_right[ok], exact[ok], k_sid, k_count, k_start)


def _subtract_references(scans: _Scans, refs: _References, signals: _Signals) -> np.ndarray:
    """Phase of each kept signal scan minus the interpolated reference phase, in (-π, π]."""
    keep, left, w_right, k_sid = signals.keep, signals.left, signals.w_right, signals.series
    if not keep.size:
        return np.zeros(0)
    ph_good = refs.phase
    right = np.minimum(left + 1, refs.start[k_sid] + refs.count[k_sid] - 1)
    interpolated = (1.0 - w_right) * ph_good[left] + w_right * ph_good[right]
    return wrap(scans.fits.phase[keep] - interpolated)


def _choose_series_branches(
    delta: np.ndarray,
    scans: _Scans,
    signals: _Signals,
    expected_phase: Callable[[SeriesKey, np.ndarray], np.ndarray] | None,
    shift_sign: int | None,
) -> np.ndarray:
    """The 2π branch of the corrected phases, series by series: nearest the expected phase when
    one is given, else by the trend rule for all series at once."""
    keep, volt_s = signals.keep, scans.voltage
    if expected_phase is not None:
        for s in np.flatnonzero(signals.count):
            part = slice(signals.start[s], signals.start[s] + signals.count[s])

            def expected(v, _key=scans.keys[s]):
                return expected_phase(_key, v)

            delta[part] = choose_branches(delta[part], volt_s[keep[part]], expected=expected)
        return delta
    n_ser = len(scans.keys)
    w = 1.0 / scans.var[keep]
    return grouped_branches(delta, volt_s[keep], w, signals.series, n_ser, shift_sign)


def _phase_covariance(
    scans: _Scans, refs: _References, signals: _Signals, noise: _SeriesNoise
) -> tuple[np.ndarray, dict[SeriesKey, SymmetricTriplets]]:
    """Errors of the kept corrected phases and the banded covariance of each series (triplets
    in the series' own row numbers)."""
    keep, k_sid, k_start = signals.keep, signals.series, signals.start
    row, col, val = banded_triplets(
        signals.left,
        signals.w_right,
        signals.exact,
        scans.var[keep],
        scans.var[refs.good],
        scans.time[keep],
        refs.time,
        noise.diffusion[k_sid],
        noise.jitter[k_sid],
    )
    on = row == col
    phase_err = np.sqrt(np.bincount(row[on], weights=val[on], minlength=keep.size))
    e_sid = k_sid[row]
    by_series = np.argsort(e_sid, kind="stable")  # three runs, each already by series
    e_sid = e_sid[by_series]
    row = row[by_series] - k_start[e_sid]
    col = col[by_series] - k_start[e_sid]
    val = val[by_series]
    e_bounds = np.searchsorted(e_sid, np.arange(len(scans.keys) + 1))
    covariance: dict[SeriesKey, SymmetricTriplets] = {}
    for s, key in enumerate(scans.keys):
        part = slice(e_bounds[s], e_bounds[s + 1])
        covariance[key] = SymmetricTriplets(int(signals.count[s]), row[part], col[part], val[part])
    return phase_err, covariance


# ---------------------------------------------------------------------------------------------
# Stage 8: messages and output tables
# ---------------------------------------------------------------------------------------------


def _messages(
    scans: _Scans, refs: _References, signals: _Signals, noise: _SeriesNoise, source: str
) -> list[str]:
    """One line per flagged reference, then per series (in series order) the pooled-noise
    fallback and one line per dropped signal scan."""
    keys, sid, flags, scan_ids = scans.keys, scans.series, scans.flags, scans.fits.scan
    messages = [
        f"{source}: reference scan {scan_ids[r]} ({keys[sid[r]][0]}, {keys[sid[r]][1]:g} K): "
        f"{describe_flags(flags[r])} -- not used for drift correction"
        for r in refs.scans[flags[refs.scans] != 0]
    ]
    sig = signals.all
    dropped: dict[int, list[str]] = {}
    for i in sig[flags[sig] != 0]:
        key = keys[sid[i]]
        dropped.setdefault(int(sid[i]), []).append(
            f"{source}: scan {scan_ids[i]} ({key[0]}, {key[1]:g} K, "
            f"{scans.voltage[i]:g} V): {describe_flags(flags[i])} -- dropped"
        )
    fallback = noise.fallback
    for s in sorted(fallback.keys() | dropped.keys()):
        messages.extend(([fallback[s]] if s in fallback else []) + dropped.get(s, []))
    return messages


def _text_column(labels: Sequence[str], codes: np.ndarray):
    """``labels[codes]`` as pandas' default text array (built once per label, then taken)."""
    text_dtype = pd.Series(["x"]).dtype  # object before pandas 3, "str" since
    return pd.array(np.asarray(labels, dtype=object), dtype=text_dtype).take(codes)


def _flag_strings(flags: np.ndarray):
    uniq, inverse = np.unique(flags, return_inverse=True)
    return _text_column([describe_flags(u) for u in uniq], inverse)


def _output_tables(
    scans: _Scans,
    names: np.ndarray,
    out_phase: np.ndarray,
    out_err: np.ndarray,
    unwrapped_ref: np.ndarray,
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The phase table (one row per signal scan, scan order) and the reference table."""
    fits, code_s, flags = scans.fits, scans.code, scans.flags
    sel = np.flatnonzero(~scans.is_ref)
    rsel = np.flatnonzero(scans.is_ref)
    flag_text = _flag_strings(flags)
    name_text = [str(x) for x in names]
    table = pd.DataFrame(
        {
            "compound": _text_column(name_text, code_s[sel]),
            "temperature_K": scans.temperature[sel],
            "voltage_V": scans.voltage[sel],
            "scan": fits.scan[sel],
            "time_s": scans.time[sel],
            "phase_rad": out_phase[sel],
            "phase_err_rad": out_err[sel],
            "visibility": fits.visibility[sel],
            "visibility_err": fits.visibility_err[sel],
            "flags": flag_text.take(sel),
            **{c: scans.per_scan[c][sel] for c in CARRIED_COLUMNS},
            **{c: scans.per_scan[c][sel] for c in OPTIONAL_COLUMNS if c in scans.per_scan},
        }
    )
    references = pd.DataFrame(
        {
            "compound": _text_column(name_text, code_s[rsel]),
            "temperature_K": scans.temperature[rsel],
            "scan": fits.scan[rsel],
            "time_s": scans.time[rsel],
            "phase_rad": unwrapped_ref[rsel],
            "phase_err_rad": fits.phase_err[rsel],
            "visibility": fits.visibility[rsel],
            "visibility_err": fits.visibility_err[rsel],
            "flags": flag_text.take(rsel),
        }
    )
    return table, references
