"""Predicted observables of one planned series: phase noise of a scan, the series model, the
largest usable voltage and the acquisition order.

Noise model of one scan
-----------------------
A scan of ``N`` counts (signal plus dark) over a full grating period with observed visibility
``V`` measures the phase with the Poisson Cramér–Rao variance

.. math:: σ_φ² = 1 / (N (1 - \\sqrt{1 - V²}))

(→ 2/(N V²) for small V); at voltage ``U`` the visibility is ``V₀ M(U)`` diluted by the dark
counts, so the phase noise grows where the velocity spread washes the fringe out.  The scans of a
series follow the acquisition order ``R S…S R S…S … R`` (``reference_every`` signal scans between
zero-voltage references; passes over the ladder alternate up/down and polarity).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from polarbeam.beam.distributions import GaussianVelocity
from polarbeam.beam.velocity import mean_inverse_square
from polarbeam.constants import alpha_si_from_a3
from polarbeam.extraction.series import observable_model

__all__ = [
    "AcquisitionSequence",
    "SeriesModel",
    "acquisition_sequence",
    "phase_noise_crb",
    "voltage_max",
]


def phase_noise_crb(total_counts, visibility):
    """Cramér–Rao standard deviation (rad) of a fringe phase from Poisson counts.

    Parameters
    ----------
    total_counts : float or array_like
        Counts of the scan summed over its bins (signal plus dark), uniformly covering whole
        grating periods.
    visibility : float or array_like
        Observed visibility (dark counts included) in (0, 1].

    Returns
    -------
    float or ndarray
        ``1/sqrt(N (1 - sqrt(1 - V²)))``; infinite for V = 0.
    """
    n = np.asarray(total_counts, dtype=float)
    v = np.clip(np.asarray(visibility, dtype=float), 0.0, 1.0)
    info = n * (v * v / (1.0 + np.sqrt(1.0 - v * v)))  # = N (1 - sqrt(1 - V²)), stable
    with np.errstate(divide="ignore"):
        out = 1.0 / np.sqrt(info)
    return float(out) if out.ndim == 0 else out


@dataclass(frozen=True)
class SeriesModel:
    """Everything that fixes the predicted phases of one series (SI inside, α in Å³).

    ``total_counts`` are the counts of one scan at zero field (signal plus dark) and
    ``visibility_observed`` the zero-field visibility diluted by the dark counts;
    ``visibility`` is the signal visibility V₀ used against the visibility floor.
    """

    alpha_eff_A3: float
    coupling_over_mass: float
    velocity_m_s: float
    spread_m_s: float
    kind: str
    total_counts: float
    visibility: float
    visibility_observed: float
    nodes: int = 48

    def phase(self, voltages, alpha_A3: float | None = None, velocity: float | None = None):
        """(phase, modulus) at the given voltages."""
        v = np.atleast_1d(np.asarray(voltages, dtype=float))
        a = self.alpha_eff_A3 if alpha_A3 is None else alpha_A3
        vel = self.velocity_m_s if velocity is None else velocity
        return observable_model(
            alpha_si_from_a3(a),
            v,
            self.coupling_over_mass,
            np.full(v.size, vel),
            np.full(v.size, self.spread_m_s),
            self.kind,
            self.nodes,
        )

    def evaluate(self, voltages) -> dict[str, np.ndarray]:
        """Phase, modulus, ∂φ/∂α_eff (rad/Å³), ∂φ/∂v̄ (rad·s/m) and scan variance (rad²)."""
        v = np.atleast_1d(np.asarray(voltages, dtype=float))
        ph, mod = self.phase(v)
        h = 1e-4
        a = self.alpha_eff_A3
        d_alpha = (self.phase(v, a * (1 + h))[0] - self.phase(v, a * (1 - h))[0]) / (2 * h * a)
        if self.kind == "time-domain":
            d_vel = np.zeros_like(ph)
        else:
            u = self.velocity_m_s
            d_vel = (
                self.phase(v, velocity=u * (1 + h))[0] - self.phase(v, velocity=u * (1 - h))[0]
            ) / (2 * h * u)
        var = phase_noise_crb(self.total_counts, self.visibility_observed * mod) ** 2
        return {"phase": ph, "modulus": mod, "d_alpha": d_alpha, "d_velocity": d_vel, "var": var}

    @property
    def reference_variance(self) -> float:
        """Phase variance of a zero-voltage reference scan, rad²."""
        return phase_noise_crb(self.total_counts, self.visibility_observed) ** 2


def voltage_max(
    model: SeriesModel,
    phase_limit: float,
    visibility_floor: float,
    voltage_limit: float | None = None,
    alpha_design_A3: float | None = None,
) -> tuple[float, str]:
    """Largest voltage with |φ| ≤ ``phase_limit`` and V₀·M ≥ ``visibility_floor``.

    The phase is evaluated for ``alpha_design_A3`` (default: the model's α_eff).  Returns the
    voltage and what limits it (``"phase limit"``, ``"visibility floor"`` or ``"voltage limit"``).
    """
    a = model.alpha_eff_A3 if alpha_design_A3 is None else alpha_design_A3
    inv_v2 = (
        1.0
        if model.kind == "time-domain"
        else mean_inverse_square(
            GaussianVelocity(model.velocity_m_s, model.spread_m_s), model.nodes
        )
    )
    kappa_per_v2 = alpha_si_from_a3(a) * model.coupling_over_mass * inv_v2
    v_est = math.sqrt(phase_limit / kappa_per_v2)  # small-spread estimate of the phase limit

    def bad(v: float) -> str | None:
        ph, mod = model.phase([v], alpha_A3=a)
        if abs(ph[0]) > phase_limit:
            return "phase limit"
        if model.visibility * mod[0] < visibility_floor:
            return "visibility floor"
        return None

    grid = np.linspace(0.0, 1.6 * v_est, 321)[1:]
    ph, mod = model.phase(grid, alpha_A3=a)
    viol = (np.abs(ph) > phase_limit) | (model.visibility * mod < visibility_floor)
    if not viol.any():  # extend once: the spread can slow the phase down
        grid = np.linspace(0.0, 4.0 * v_est, 801)[1:]
        ph, mod = model.phase(grid, alpha_A3=a)
        viol = (np.abs(ph) > phase_limit) | (model.visibility * mod < visibility_floor)
    if not viol.any():
        v_hi, reason = float(grid[-1]), "phase limit"
    else:
        k = int(np.argmax(viol))
        lo = float(grid[k - 1]) if k > 0 else 0.0
        hi = float(grid[k])
        reason = bad(hi) or "phase limit"
        for _ in range(40):
            mid = 0.5 * (lo + hi)
            if bad(mid) is None:
                lo = mid
            else:
                hi = mid
        v_hi = lo
    if voltage_limit is not None and voltage_limit < v_hi:
        return float(voltage_limit), "voltage limit"
    return v_hi, reason


@dataclass(frozen=True)
class AcquisitionSequence:
    """Acquisition order of one series (internal): all scans, references marked."""

    voltages: np.ndarray  # signed, 0 for references
    times: np.ndarray  # mid-times, s
    is_reference: np.ndarray
    rank: np.ndarray  # ladder level (ascending |V|) of each signal scan, -1 for references


def acquisition_sequence(
    levels_V: Sequence[float],
    scans_per_voltage: int,
    reference_every: int,
    scan_time_s: float,
    dead_time_s: float = 0.0,
    start_s: float = 0.0,
) -> AcquisitionSequence:
    """The planned order of scans: ``R, S×r, R, S×r, …, R``.

    The signal scans are ``scans_per_voltage`` passes over the ladder, alternately up and down in
    voltage and with alternating polarity (the phase depends on V², so polarity reversal is free
    and shows charging or stray-field effects).  Returns a small record with the signed voltage
    of every scan (0 for references), mid-times, the reference mask and the ladder rank of each
    signal scan.
    """
    lev = np.sort(np.abs(np.asarray(levels_V, dtype=float)))
    n = lev.size
    ranks, signs = [], []
    for p in range(int(scans_per_voltage)):
        order = range(n) if p % 2 == 0 else range(n - 1, -1, -1)
        for r in order:
            ranks.append(r)
            signs.append(1.0 if p % 2 == 0 else -1.0)
    ranks_a = np.asarray(ranks, dtype=int)
    sig_v = lev[ranks_a] * np.asarray(signs)
    n_sig = sig_v.size
    n_blocks = -(-n_sig // reference_every)
    n_scans = n_sig + n_blocks + 1
    is_ref = np.zeros(n_scans, dtype=bool)
    volts = np.zeros(n_scans)
    rank = np.full(n_scans, -1, dtype=int)
    pos = 0
    k = 0
    for _ in range(n_blocks):
        is_ref[pos] = True
        m = min(reference_every, n_sig - k)
        volts[pos + 1 : pos + 1 + m] = sig_v[k : k + m]
        rank[pos + 1 : pos + 1 + m] = ranks_a[k : k + m]
        k += m
        pos += 1 + m
    is_ref[pos] = True
    times = start_s + np.arange(n_scans) * (scan_time_s + dead_time_s) + 0.5 * scan_time_s
    return AcquisitionSequence(volts, times, is_ref, rank)
