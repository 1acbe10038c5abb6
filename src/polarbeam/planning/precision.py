"""Expected precision of a planned series (Fisher information) and of the Debye line.

Each signal phase is drift-corrected by the references interpolated to its time, so its
covariance is, exactly as in the reduction (:func:`polarbeam.reduction.corrected_phase_covariance`),

.. math:: Σ = \\mathrm{diag}(σ_s²) + W R Wᵀ + D·(\\text{Brownian bridge}),

with ``W`` the interpolation weights, ``R`` the reference variances and ``D`` the random-walk
diffusion of the interferometer phase (``phase_diffusion``).  The Fisher matrix of (α_eff, offset)
is ``F = Jᵀ Σ⁻¹ J`` with ``J = [∂φ/∂α_eff, 1]``; σ²_stat(α_eff) = (F⁻¹)₀₀.

Branch safety
-------------
The reduction picks the 2π branch of each phase from the trend of the lower voltages
(:func:`polarbeam.reduction.choose_branches`).  A ladder is accepted only if, at each level, the
trend extrapolated from the lower levels (its bias from the non-linear velocity average included)
lies within π of the phase with :data:`BRANCH_Z` standard deviations to spare.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from polarbeam.constants import ANGSTROM3_SI, BOLTZMANN, si_from_debye
from polarbeam.planning.model import AcquisitionSequence, SeriesModel, acquisition_sequence
from polarbeam.reduction import corrected_phase_covariance, interpolation_weights
from polarbeam.separation.debye import bounded_upper_limit

__all__ = [
    "BRANCH_Z",
    "DebyePrecision",
    "LadderPrecision",
    "branch_excess",
    "debye_precision",
    "dipole_figures",
    "fixed_covariance",
    "ladder_precision",
    "precision_core",
]

#: Standard deviations kept between the extrapolated branch trend and ±π (see module docstring).
BRANCH_Z = 4.0


def fixed_covariance(seq: AcquisitionSequence, var_ref: float, diffusion: float) -> np.ndarray:
    """W R Wᵀ + random-walk bridge of the drift-corrected signal phases."""
    ts, tr = seq.times[~seq.is_reference], seq.times[seq.is_reference]
    w, _ = interpolation_weights(ts, tr)
    return corrected_phase_covariance(
        w, np.zeros(ts.size), np.full(tr.size, var_ref), ts, tr, diffusion_rad2_s=diffusion
    )


@dataclass(frozen=True)
class LadderPrecision:
    """Fisher-information precision of one series for one ladder (α in Å³)."""

    levels_V: tuple[float, ...]
    scans_per_voltage: int
    sigma_stat_A3: float
    dalpha_dvelocity: float  # Å³ per m/s
    phase_rad: tuple[float, ...]  # predicted phase at each level
    visibility: tuple[float, ...]  # V₀·M at each level
    phase_err_rad: tuple[float, ...]  # drift-corrected point error at each level (first scan)
    branch_excess: float  # > 0: branch tracking not safe by that many rad
    n_signal: int
    n_reference: int


def precision_core(
    jac: np.ndarray,
    var: np.ndarray,
    d_vel: np.ndarray | None,
    fixed: np.ndarray,
    fit_offset: bool,
) -> tuple[float, float, np.ndarray]:
    """(σ²_stat(α_eff), ∂α̂/∂v̄, point variances) for Jacobian ``jac`` and point covariance."""
    cov = fixed + np.diag(var)
    cols = [jac, np.ones_like(jac)] if fit_offset else [jac]
    k = len(cols)
    if d_vel is not None:
        cols.append(d_vel)
    rhs = np.column_stack(cols)
    sol = np.linalg.solve(cov, rhs)  # Σ⁻¹ [J, ∂φ/∂v]
    fisher = rhs[:, :k].T @ sol[:, :k]
    if k == 2:
        det = fisher[0, 0] * fisher[1, 1] - fisher[0, 1] ** 2
        inv = np.array([[fisher[1, 1], -fisher[0, 1]], [-fisher[0, 1], fisher[0, 0]]]) / det
    else:
        inv = 1.0 / fisher
    dadv = 0.0
    if d_vel is not None:
        dadv = float(-(inv @ (rhs[:, :k].T @ sol[:, k]))[0])
    return float(inv[0, 0]), dadv, np.diag(cov)


def branch_excess(
    levels_phase: np.ndarray, levels_v: np.ndarray, rank: np.ndarray, diag: np.ndarray
) -> float:
    """How far (rad) the branch choice of the reduction falls short of BRANCH_Z safety.

    Levels are visited by increasing |V|; the target of level r is the weighted least-squares
    slope of the lower levels (through zero in V²) times V_r², as in
    :func:`polarbeam.reduction.choose_branches`.
    """
    n = levels_v.size
    w_lev = np.bincount(rank, weights=1.0 / diag, minlength=n)
    err2 = np.zeros(n)
    np.maximum.at(err2, rank, diag)
    v2 = levels_v**2
    sxx = np.zeros(n)
    sxy = np.zeros(n)
    np.cumsum((w_lev * v2 * v2)[:-1], out=sxx[1:])
    np.cumsum((w_lev * v2 * levels_phase)[:-1], out=sxy[1:])
    has = sxx > 0
    safe = np.where(has, sxx, 1.0)
    target = np.where(has, sxy / safe * v2, 0.0)
    sig_t = np.sqrt(np.where(has, v2 * v2 / safe, 0.0) + err2)
    worst = float(np.max(np.abs(target - levels_phase) + BRANCH_Z * sig_t - math.pi))
    return max(worst, 0.0)


def ladder_precision(
    model: SeriesModel,
    levels_V: Sequence[float],
    scans_per_voltage: int,
    *,
    reference_every: int = 2,
    scan_time_s: float = 20.0,
    dead_time_s: float = 0.0,
    diffusion_rad2_s: float = 0.0,
    fit_offset: bool = True,
    _evaluated: dict[str, np.ndarray] | None = None,
    _fixed: np.ndarray | None = None,
) -> LadderPrecision:
    """σ_stat(α_eff) and ∂α̂/∂v̄ of one series from the Fisher information of its planned scans.

    Parameters
    ----------
    model : SeriesModel
        Predicted α_eff, coupling, velocity distribution and counts.
    levels_V : sequence of float
        Distinct ladder voltages (V, any sign; sorted by |V|).
    scans_per_voltage : int
        Signal scans per level.
    reference_every, scan_time_s, dead_time_s : int, float, float
        Acquisition order and timing (see :func:`acquisition_sequence`).
    diffusion_rad2_s : float
        Random-walk diffusion of the interferometer phase, rad²/s.
    fit_offset : bool
        Fit the zero-field phase as a nuisance parameter (the analysis default).
    """
    lev = np.sort(np.abs(np.asarray(levels_V, dtype=float)))
    seq = acquisition_sequence(lev, scans_per_voltage, reference_every, scan_time_s, dead_time_s)
    ev = model.evaluate(lev) if _evaluated is None else _evaluated
    fixed = (
        fixed_covariance(seq, model.reference_variance, diffusion_rad2_s)
        if _fixed is None
        else _fixed
    )
    rank = seq.rank[~seq.is_reference]
    var_a, dadv, diag = precision_core(
        ev["d_alpha"][rank], ev["var"][rank], ev["d_velocity"][rank], fixed, fit_offset
    )
    first = [int(np.flatnonzero(rank == r)[0]) for r in range(lev.size)]
    return LadderPrecision(
        levels_V=tuple(float(x) for x in lev),
        scans_per_voltage=int(scans_per_voltage),
        sigma_stat_A3=math.sqrt(var_a),
        dalpha_dvelocity=dadv,
        phase_rad=tuple(float(x) for x in ev["phase"]),
        visibility=tuple(float(x) for x in model.visibility * ev["modulus"]),
        phase_err_rad=tuple(float(math.sqrt(diag[i])) for i in first),
        branch_excess=branch_excess(ev["phase"], lev, rank, diag),
        n_signal=int(rank.size),
        n_reference=int(seq.is_reference.sum()),
    )


@dataclass(frozen=True)
class DebyePrecision:
    """Expected precision of the α/⟨μ²⟩ separation (Å³; ⟨μ²⟩ in D²)."""

    sigma_alpha_A3: float
    sigma_mu2_D2: float
    corr: float
    sigma_alpha_stat_A3: float
    sigma_mu2_stat_D2: float

    @property
    def determinant(self) -> float:
        """det Cov(α, ⟨μ²⟩) (Å³² D⁴): the D-optimality criterion."""
        return (self.sigma_alpha_A3 * self.sigma_mu2_D2) ** 2 * (1.0 - self.corr**2)


_D2_PER_A3K = 3.0 * BOLTZMANN * ANGSTROM3_SI / si_from_debye(1.0) ** 2  # ⟨μ²⟩ (D²) per β (Å³ K)


def debye_precision(
    alpha_eff_A3: Sequence[float],
    specific_var_A3: Sequence[float],
    stat_var_A3: Sequence[float],
    scale_rel_var: float,
    temperatures_K: Sequence[float],
    temperature_err_K: float | Sequence[float],
    mu2_D2: float,
) -> DebyePrecision:
    """Propagate planned α_eff errors through the Debye line α_eff = α + β/T.

    Parameters
    ----------
    alpha_eff_A3
        Predicted α_eff per temperature.
    specific_var_A3
        Series-specific variances (fit statistics + velocity), Å⁶: they weight the line.
    stat_var_A3
        The statistical part alone (for the statistics-only figures).
    scale_rel_var
        Relative variance of the scale shared by all series (coupling and mass).
    temperatures_K, temperature_err_K
        Source temperatures and their 1σ errors.
    mu2_D2
        Predicted ⟨μ²⟩ in D² (sets the slope for the temperature-error term).
    """
    a = np.asarray(alpha_eff_A3, dtype=float)
    t = np.asarray(temperatures_K, dtype=float)
    dt = np.broadcast_to(np.asarray(temperature_err_K, dtype=float), t.shape)
    s = np.asarray(specific_var_A3, dtype=float)
    st = np.asarray(stat_var_A3, dtype=float)
    beta = mu2_D2 / _D2_PER_A3K
    x = 1.0 / t
    sx = dt / t**2
    tvar = (beta * sx) ** 2
    w = 1.0 / (s + tvar)
    design = np.column_stack([np.ones_like(x), x])
    est = np.linalg.solve(design.T @ (w[:, None] * design), (design * w[:, None]).T)
    full = np.diag(s + tvar) + scale_rel_var * np.outer(a, a)
    cov = est @ full @ est.T
    cov_stat = est @ np.diag(st) @ est.T
    sa, sb = math.sqrt(cov[0, 0]), math.sqrt(cov[1, 1])
    return DebyePrecision(
        sigma_alpha_A3=sa,
        sigma_mu2_D2=sb * _D2_PER_A3K,
        corr=float(cov[0, 1] / (sa * sb)),
        sigma_alpha_stat_A3=math.sqrt(cov_stat[0, 0]),
        sigma_mu2_stat_D2=math.sqrt(cov_stat[1, 1]) * _D2_PER_A3K,
    )


def dipole_figures(mu2_D2: float, sigma_mu2: float, significance: float, cl: float):
    """(σ(μ) in D or NaN, expected upper limit in D or NaN) as the analysis would report them."""
    if sigma_mu2 > 0 and mu2_D2 / sigma_mu2 >= significance and mu2_D2 > 0:
        return sigma_mu2 / (2.0 * math.sqrt(mu2_D2)), math.nan
    return math.nan, math.sqrt(max(bounded_upper_limit(mu2_D2, sigma_mu2, cl), 0.0))
