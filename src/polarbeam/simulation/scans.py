"""Simulated raw fringe scans: Poisson counts, dark counts, drifting interferometer phase.

The simulator writes tables in the raw-scan layout read by
:func:`polarbeam.reduction.read_scans` (one row per counting bin) together with the truth per
scan.  It follows the sign convention of :mod:`polarbeam.reduction.fit`: the expected counts of
a scan are

    mu(x) = dark + S [1 + V cos(2 pi x / d - psi)],   psi = phi_I(t) + shift,

where ``phi_I`` is the interferometer phase at the time of the scan (offset + linear drift +
random walk + optional white jitter) and ``shift`` the true deflection-induced phase (0 for the
reference scans at 0 V).  Inside one scan the interferometer phase is held at its value at the
scan's mid-time.  Used by the tests, the benchmark and the demo; the data it makes are invented.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

from polarbeam.errors import InputError

__all__ = ["SimulatedScans", "fringe_counts", "simulate_scan_table", "simulate_series"]

TWO_PI = 2.0 * np.pi


def fringe_counts(
    positions: ArrayLike,
    period_m: float,
    phase: ArrayLike,
    signal_per_bin: ArrayLike,
    visibility: ArrayLike,
    dark_per_bin: ArrayLike = 0.0,
    rng: np.random.Generator | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Expected and Poisson-drawn counts of fringe bins.

    Parameters
    ----------
    positions : array_like
        Grating positions, m.
    period_m : float
        Grating period, m.
    phase, signal_per_bin, visibility, dark_per_bin : array_like
        Fringe phase (rad), mean signal counts per bin, visibility of the signal and dark counts
        per bin; broadcast against ``positions``.
    rng : numpy.random.Generator, optional
        Random source (a fresh default generator when omitted).

    Returns
    -------
    mu, counts : ndarray
        Expected counts ``dark + S (1 + V cos(2πx/d - phase))`` and a Poisson draw of them.
    """
    rng = np.random.default_rng() if rng is None else rng
    x = np.asarray(positions, dtype=float)
    mu = np.asarray(dark_per_bin, float) + np.asarray(signal_per_bin, float) * (
        1.0 + np.asarray(visibility, float) * np.cos(TWO_PI * x / period_m - np.asarray(phase))
    )
    return mu, rng.poisson(mu).astype(float)


@dataclass(frozen=True, eq=False)
class SimulatedScans:
    """A simulated raw-scan table and its truth.

    Attributes
    ----------
    table : DataFrame
        One row per counting bin with the columns of :data:`polarbeam.reduction.INPUT_COLUMNS`.
    truth : DataFrame
        One row per scan: ``scan, compound, temperature_K, voltage_V, time_s, is_reference,
        shift_rad, interferometer_phase_rad, measured_phase_rad, visibility,
        observed_visibility, mean_counts``.
    """

    table: pd.DataFrame
    truth: pd.DataFrame


def simulate_series(
    shifts_rad: ArrayLike,
    voltages_V: ArrayLike,
    *,
    compound: str = "demo-molecule",
    temperature_K: float = 300.0,
    temperature_err_K: float = 0.5,
    velocity_m_s: float = 180.0,
    velocity_err_m_s: float = 2.0,
    velocity_spread_m_s: float = 25.0,
    period_m: float = 2.0e-7,
    bins: int = 40,
    periods: int = 1,
    signal_per_bin: float = 200.0,
    dark_per_bin: float = 1.0,
    visibility: float | None = None,
    drift_rad_s: float = 2.0e-4,
    random_walk_rad2_s: float = 2.0e-5,
    jitter_rad: float = 0.0,
    initial_phase_rad: float | None = None,
    reference_every: int = 2,
    scan_duration_s: float = 20.0,
    gap_s: float = 4.0,
    start_time_s: float = 0.0,
    first_scan: int = 0,
    rng: np.random.Generator | None = None,
    contrast_factors: ArrayLike | None = None,
) -> SimulatedScans:
    """Simulate one series: references interleaved with signal scans of known phase shifts.

    The acquisition order is ``R, S, ..., S, R, S, ..., S, R`` with ``reference_every`` signal
    scans between consecutive references and a reference at both ends.

    Parameters
    ----------
    shifts_rad : array_like, shape (n,)
        True phase shift of each signal scan, rad, in acquisition order.
    voltages_V : array_like, shape (n,)
        Deflector voltage of each signal scan, V (non-zero).
    compound, temperature_K, temperature_err_K, velocity_m_s, velocity_err_m_s, \
velocity_spread_m_s
        Series labels copied into every row.
    period_m, bins, periods
        Grating period (m), bins per scan and whole periods covered by a scan.
    signal_per_bin, dark_per_bin : float
        Mean signal counts per bin and dark counts per bin.
    visibility : float, optional
        Visibility of the signal; drawn uniformly in [0.1, 0.4] when omitted.
    drift_rad_s, random_walk_rad2_s, jitter_rad : float
        Linear drift rate (rad/s), random-walk diffusion (rad²/s) and white jitter (rad, 1σ) of the
        interferometer phase.
    initial_phase_rad : float, optional
        Interferometer phase at the first scan; uniform in [-π, π) when omitted.
    reference_every : int
        Signal scans between consecutive references.
    scan_duration_s, gap_s, start_time_s : float
        Duration of a scan, dead time between scans, start time, s.
    first_scan : int
        Id of the first scan; ids increase by one in acquisition order.
    rng : numpy.random.Generator, optional
        Random source.
    contrast_factors : array_like, shape (n,), optional
        Relative visibility of each signal scan (the velocity average's phasor modulus relative
        to zero field); 1 when omitted. References keep the full visibility.

    Returns
    -------
    SimulatedScans
    """
    rng = np.random.default_rng() if rng is None else rng
    shifts = np.asarray(shifts_rad, dtype=float)
    volts = np.asarray(voltages_V, dtype=float)
    if shifts.shape != volts.shape or shifts.ndim != 1:
        raise InputError("simulate_series: shifts_rad and voltages_V must be 1-D of equal length")
    if np.any(volts == 0):
        raise InputError("simulate_series: signal voltages must be non-zero (0 V is a reference)")
    if reference_every < 1 or bins < 1 or periods < 1:
        raise InputError("simulate_series: reference_every, bins and periods must be >= 1")
    n_sig = shifts.size
    n_blocks = -(-n_sig // reference_every)
    n_scans = n_sig + n_blocks + 1
    is_ref = np.zeros(n_scans, dtype=bool)
    pos = 0
    sig_slots = []
    for blk in range(n_blocks):
        is_ref[pos] = True
        k = min(reference_every, n_sig - blk * reference_every)
        sig_slots.extend(range(pos + 1, pos + 1 + k))
        pos += 1 + k
    is_ref[pos] = True
    sig_slots = np.asarray(sig_slots, dtype=int)

    shift_all = np.zeros(n_scans)
    volt_all = np.zeros(n_scans)
    shift_all[sig_slots] = shifts
    volt_all[sig_slots] = volts
    t_start = start_time_s + np.arange(n_scans) * (scan_duration_s + gap_s)
    t_mid = t_start + 0.5 * scan_duration_s

    phi0 = rng.uniform(-np.pi, np.pi) if initial_phase_rad is None else float(initial_phase_rad)
    steps = rng.normal(0.0, 1.0, n_scans) * np.sqrt(random_walk_rad2_s * np.r_[0.0, np.diff(t_mid)])
    phi_i = phi0 + drift_rad_s * (t_mid - t_mid[0]) + np.cumsum(steps)
    if jitter_rad > 0:
        phi_i = phi_i + rng.normal(0.0, jitter_rad, n_scans)
    vis = rng.uniform(0.1, 0.4) if visibility is None else float(visibility)
    measured = phi_i + shift_all

    x_bins = np.arange(bins) * (periods * period_m / bins)
    t_bins = (np.arange(bins) + 0.5) * (scan_duration_s / bins)
    x = np.tile(x_bins, n_scans)
    t = np.repeat(t_start, bins) + np.tile(t_bins, n_scans)
    bin_vis = vis
    if contrast_factors is not None:
        factor = np.ones(n_scans)
        factor[sig_slots] = np.asarray(contrast_factors, dtype=float)
        vis = vis * factor
        bin_vis = np.repeat(vis, bins)
    _, counts = fringe_counts(
        x, period_m, np.repeat(measured, bins), signal_per_bin, bin_vis, dark_per_bin, rng
    )
    n_rows = n_scans * bins
    scan_ids = first_scan + np.arange(n_scans)
    table = pd.DataFrame(
        {
            "compound": np.full(n_rows, compound, dtype=object),
            "temperature_K": np.full(n_rows, float(temperature_K)),
            "temperature_err_K": np.full(n_rows, float(temperature_err_K)),
            "velocity_m_s": np.full(n_rows, float(velocity_m_s)),
            "velocity_err_m_s": np.full(n_rows, float(velocity_err_m_s)),
            "velocity_spread_m_s": np.full(n_rows, float(velocity_spread_m_s)),
            "voltage_V": np.repeat(volt_all, bins),
            "scan": np.repeat(scan_ids, bins),
            "time_s": t,
            "position_m": x,
            "counts": counts,
        }
    )
    truth = pd.DataFrame(
        {
            "scan": scan_ids,
            "compound": compound,
            "temperature_K": float(temperature_K),
            "voltage_V": volt_all,
            "time_s": t_mid,
            "is_reference": is_ref,
            "shift_rad": shift_all,
            "interferometer_phase_rad": phi_i,
            "measured_phase_rad": measured,
            "visibility": vis,
            "observed_visibility": vis * signal_per_bin / (signal_per_bin + dark_per_bin),
            "mean_counts": signal_per_bin + dark_per_bin,
        }
    )
    return SimulatedScans(table=table, truth=truth)


def simulate_scan_table(
    series: Sequence[Mapping],
    *,
    rng: np.random.Generator | None = None,
    pause_s: float = 600.0,
    **common,
) -> SimulatedScans:
    """Simulate several series one after the other with unique, increasing scan ids.

    Parameters
    ----------
    series : sequence of mappings
        Keyword arguments of :func:`simulate_series` for each series (at least ``shifts_rad``
        and ``voltages_V``); they override ``common``.
    rng : numpy.random.Generator, optional
        Random source shared by all series.
    pause_s : float
        Time between the end of one series and the start of the next, s.
    **common
        Keyword arguments applied to every series.

    Returns
    -------
    SimulatedScans
        Concatenated tables and truths.
    """
    rng = np.random.default_rng() if rng is None else rng
    tables, truths = [], []
    next_scan, t0 = 0, 0.0
    for spec in series:
        kwargs = {**common, **spec}
        kwargs.setdefault("first_scan", next_scan)
        kwargs.setdefault("start_time_s", t0)
        sim = simulate_series(rng=rng, **kwargs)
        tables.append(sim.table)
        truths.append(sim.truth)
        next_scan = int(sim.truth["scan"].max()) + 1
        t0 = float(sim.table["time_s"].max()) + pause_s
    return SimulatedScans(
        table=pd.concat(tables, ignore_index=True), truth=pd.concat(truths, ignore_index=True)
    )
