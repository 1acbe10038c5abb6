"""Campaign planning before the beam time: predicted phases, voltage ladders, expected precision.

A planning campaign is an ordinary ``campaign.toml`` (instrument, deflector, optional
``[analysis]``) with a ``[plan]`` table instead of measured data, and a ``compounds.csv`` that
names each compound by its structure (``smiles``, or a record of ``[data] structures``) or by stated
values (``alpha_A3``, ``dipole_D``).  For every compound and source temperature the planner

1. predicts α_eff(T) = α + ⟨μ²⟩/(3kT) (structure estimates of :mod:`polarbeam.comparison.structure_check`, or the
   stated values) and, with the analysis' own model (:func:`polarbeam.extraction.series.observable_model`),
   the phase φ(V) and the phasor modulus M(V) = |⟨e^{iφ(v)}⟩| of the velocity average;
2. finds the largest voltage that keeps |φ| ≤ ``phase_limit`` and the visibility V₀·M(V) above
   ``visibility_floor`` (and below ``voltage_limit``);
3. chooses a ladder of ``n_voltages`` levels on a grid evenly spaced in V² that minimises the
   variance of α_eff from the Fisher information of the fit model (c-optimal exact design by
   coordinate exchange), with the offset as a nuisance parameter;
4. propagates the design to σ(α_eff) (statistics plus the campaign's stated systematics), to σ(α)
   and σ(μ) from the Debye line, and to the beam time needed for a target precision;
5. compares candidate temperature sets and keeps the one that best separates α from ⟨μ²⟩.

Noise model of one scan
-----------------------
A scan of ``N`` counts (signal plus dark) over a full grating period with observed visibility
``V`` measures the phase with the Poisson Cramér–Rao variance

.. math:: σ_φ² = 1 / (N (1 - \\sqrt{1 - V²}))

(→ 2/(N V²) for small V); at voltage ``U`` the visibility is ``V₀ M(U)`` diluted by the dark
counts, so the phase noise grows where the velocity spread washes the fringe out.  The scans of a
series follow the acquisition order ``R S…S R S…S … R`` (``reference_every`` signal scans between
zero-voltage references; passes over the ladder alternate up/down and polarity).  Each signal phase
is drift-corrected by the references interpolated to its time, so its covariance is, exactly as
in the reduction (:func:`polarbeam.reduction.corrected_phase_covariance`),

.. math:: Σ = \\mathrm{diag}(σ_s²) + W R Wᵀ + D·(\\text{Brownian bridge}),

with ``W`` the interpolation weights, ``R`` the reference variances and ``D`` the random-walk
diffusion of the interferometer phase (``phase_diffusion``).  The Fisher matrix of (α_eff, offset)
is ``F = Jᵀ Σ⁻¹ J`` with ``J = [∂φ/∂α_eff, 1]``; σ²_stat(α_eff) = (F⁻¹)₀₀.

Systematics
-----------
α_eff depends on the geometry, field and mass only through α_eff·C/m, so the stated inputs add
the relative variance Σ_p (∂ln C/∂p · σ_p)² + (σ_m/m)² (sensitivities from
:func:`polarbeam.pipeline.analysis.build_context`), shared by all series of a compound.  The per-series
velocity calibration error adds (∂α̂/∂v̄ · σ_v)², with ∂α̂/∂v̄ the implicit derivative of the
least-squares solution (as in :func:`polarbeam.extraction.series.fit_series`).  The Debye line is
propagated as the pipeline does it: weights from the series-specific variances (plus the
temperature error as an effective variance), the full correlated covariance for the estimate.

Branch safety
-------------
The reduction picks the 2π branch of each phase from the trend of the lower voltages
(:func:`polarbeam.reduction.choose_branches`).  A ladder is accepted only if, at each level, the
trend extrapolated from the lower levels (its bias from the non-linear velocity average included)
lies within π of the phase with :data:`BRANCH_Z` standard deviations to spare.
"""

from __future__ import annotations

import itertools
import json
import math
import shutil
from collections.abc import Sequence
from dataclasses import asdict, dataclass, replace
from pathlib import Path
from typing import Any, Literal

import numpy as np

from polarbeam._util.atomic import write_text_atomic
from polarbeam._util.tables import read_table
from polarbeam._util.text import finite_or_none
from polarbeam._version import __version__
from polarbeam.beam.velocity import mean_inverse_square
from polarbeam.comparison.structure_check import (
    DIPOLE_REL_ERROR,
    predict_for_compound,
    stated_mass_check,
)
from polarbeam.constants import (
    AMU,
    ANGSTROM3_SI,
    BOLTZMANN,
    alpha_a3_from_si,
    alpha_si_from_a3,
    langevin_debye_si,
    si_from_debye,
)
from polarbeam.contract import campaign as cm
from polarbeam.contract.campaign import series_from_reduction
from polarbeam.errors import CompoundError, InputError, QuantityError
from polarbeam.extraction.series import fit_series, observable_model
from polarbeam.instrument.deflectors import coupling
from polarbeam.pipeline.analysis import build_context
from polarbeam.quantities import Measured, parse_quantity
from polarbeam.reduction import corrected_phase_covariance, interpolation_weights, reduce_table
from polarbeam.separation.debye import bounded_upper_limit
from polarbeam.simulation.scans import fringe_counts

__all__ = [
    "BRANCH_Z",
    "AcquisitionSequence",
    "CampaignPlan",
    "CompoundPlan",
    "DebyePrecision",
    "LadderPrecision",
    "PlanSettings",
    "SeriesModel",
    "SeriesPlan",
    "acquisition_sequence",
    "debye_precision",
    "design_ladder",
    "even_ladder",
    "ladder_precision",
    "load_plan",
    "make_plan",
    "phase_noise_crb",
    "plan_campaign",
    "rehearsal_scans",
    "rehearsal_scatter",
    "voltage_max",
    "write_plan",
    "write_rehearsal",
]

#: Standard deviations kept between the extrapolated branch trend and ±π (see module docstring).
BRANCH_Z = 4.0
#: Candidate ladder levels per requested level (grid evenly spaced in V²).
GRID_PER_LEVEL = 6
_EXACT_TARGET_MAX = 400  # scans per voltage up to which the target search uses exact Fisher values
Criterion = Literal["determinant", "alpha", "dipole"]
_CRITERIA = ("determinant", "alpha", "dipole")


# ---------------------------------------------------------------------------------------------
# Physics of one scan and one series
# ---------------------------------------------------------------------------------------------


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
        else mean_inverse_square(model.velocity_m_s, model.spread_m_s, model.nodes)
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


def _fixed_covariance(seq: AcquisitionSequence, var_ref: float, diffusion: float) -> np.ndarray:
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


def _precision_core(
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


def _branch_excess(
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
        _fixed_covariance(seq, model.reference_variance, diffusion_rad2_s)
        if _fixed is None
        else _fixed
    )
    rank = seq.rank[~seq.is_reference]
    var_a, dadv, diag = _precision_core(
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
        branch_excess=_branch_excess(ev["phase"], lev, rank, diag),
        n_signal=int(rank.size),
        n_reference=int(seq.is_reference.sum()),
    )


def even_ladder(v_max: float, n_voltages: int) -> np.ndarray:
    """``n_voltages`` levels evenly spaced in V from v_max/n to v_max (the usual lab ladder)."""
    return np.linspace(v_max / n_voltages, v_max, n_voltages)


def design_ladder(
    model: SeriesModel,
    v_max: float,
    n_voltages: int,
    scans_per_voltage: int,
    *,
    reference_every: int = 2,
    scan_time_s: float = 20.0,
    dead_time_s: float = 0.0,
    diffusion_rad2_s: float = 0.0,
    fit_offset: bool = True,
    grid_points: int | None = None,
) -> LadderPrecision:
    """c-optimal ladder for α_eff: ``n_voltages`` distinct levels on a grid evenly spaced in V².

    The grid has ``grid_points`` levels (default :data:`GRID_PER_LEVEL` per requested level)
    ``v_max·sqrt(g/G)``, g = 1..G.  Starting from the even ladder snapped to the grid, each level
    in turn is moved to the grid point that lowers σ²_stat(α_eff) most (coordinate exchange) until
    no move helps.  Ladders whose branch tracking is not safe (:data:`BRANCH_Z`) lose against
    every safe one; the least unsafe is kept when none is safe.
    """
    n = int(n_voltages)
    g_n = int(grid_points or max(GRID_PER_LEVEL * n, 24))
    grid = v_max * np.sqrt(np.arange(1, g_n + 1) / g_n)
    ev = model.evaluate(grid)
    seq = acquisition_sequence(
        grid[:n], scans_per_voltage, reference_every, scan_time_s, dead_time_s
    )
    fixed = _fixed_covariance(seq, model.reference_variance, diffusion_rad2_s)
    rank = seq.rank[~seq.is_reference]

    cache: dict[tuple[int, ...], tuple[float, float]] = {}

    def score(idx: tuple[int, ...]) -> tuple[float, float]:
        if idx not in cache:
            cache[idx] = _score(idx)
        return cache[idx]

    def _score(idx: tuple[int, ...]) -> tuple[float, float]:
        ids = np.asarray(idx)
        g = ids[rank]
        try:
            var_a, _, diag = _precision_core(
                ev["d_alpha"][g], ev["var"][g], None, fixed, fit_offset
            )
        except np.linalg.LinAlgError:
            return (math.inf, math.inf)
        excess = _branch_excess(ev["phase"][ids], grid[ids], rank, diag)
        return (round(excess, 9), var_a)

    def snap(levels: np.ndarray) -> tuple[int, ...]:
        out: list[int] = []
        for v in levels:
            order = np.argsort(np.abs(grid**2 - v**2))
            out.append(next(int(i) for i in order if int(i) not in out))
        return tuple(sorted(out))

    starts = [
        snap(even_ladder(v_max, n)),
        snap(v_max * np.sqrt(np.linspace(1.0 / n, 1.0, n))),  # even in V²
    ]
    best_idx, best = None, (math.inf, math.inf)
    for start in starts:
        cur, cur_s = start, score(start)
        for _ in range(60):
            moved = False
            for i in range(n):
                slot_best, slot_s = None, cur_s
                for gi in range(g_n):
                    if gi in cur:
                        continue
                    cand = tuple(sorted((*cur[:i], gi, *cur[i + 1 :])))
                    s = score(cand)
                    if s < slot_s:
                        slot_best, slot_s = cand, s
                if slot_best is not None:
                    cur, cur_s, moved = slot_best, slot_s, True
            if not moved:
                break
        if cur_s < best:
            best_idx, best = cur, cur_s
    return ladder_precision(
        model,
        grid[np.asarray(best_idx)],
        scans_per_voltage,
        reference_every=reference_every,
        scan_time_s=scan_time_s,
        dead_time_s=dead_time_s,
        diffusion_rad2_s=diffusion_rad2_s,
        fit_offset=fit_offset,
    )


# ---------------------------------------------------------------------------------------------
# Debye line: σ(α), σ(⟨μ²⟩) from the planned series
# ---------------------------------------------------------------------------------------------


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


def _dipole_figures(mu2_D2: float, sigma_mu2: float, significance: float, cl: float):
    """(σ(μ) in D or NaN, expected upper limit in D or NaN) as the analysis would report them."""
    if sigma_mu2 > 0 and mu2_D2 / sigma_mu2 >= significance and mu2_D2 > 0:
        return sigma_mu2 / (2.0 * math.sqrt(mu2_D2)), math.nan
    return math.nan, math.sqrt(max(bounded_upper_limit(mu2_D2, sigma_mu2, cl), 0.0))


# ---------------------------------------------------------------------------------------------
# The [plan] table and the planning compounds file
# ---------------------------------------------------------------------------------------------

_PLAN_KEYS: dict[str, str | None] = {
    "temperatures_K": None,
    "temperature_range_K": None,
    "n_temperatures": None,
    "temperature_err": "K",
    "velocity": "m/s",
    "velocity_spread": "m/s",
    "velocity_temperature_K": None,
    "visibility": None,
    "count_rate": "1/s",
    "counts_per_bin": None,
    "phase_noise": "rad",
    "dark_rate": "1/s",
    "bins": None,
    "scan_time": "s",
    "scan_dead_time": "s",
    "reference_every": None,
    "scans_per_voltage": None,
    "n_voltages": None,
    "ladder": None,
    "voltage_limit": "V",
    "phase_limit": "rad",
    "visibility_floor": None,
    "phase_drift": "rad/s",
    "phase_diffusion": "rad^2/s",
    "target_alpha_rel": None,
    "target_dipole_D": None,
    "temperature_criterion": None,
    "design_margin": None,
    "rehearsal": None,
    "seed": None,
}


@dataclass(frozen=True)
class PlanSettings:
    """The ``[plan]`` table in SI (see docs/planning.md for every key).

    Per-temperature values (``velocity``, ``velocity_spread``, ``count_rate``) are tuples with
    one entry, or one entry per planned temperature when ``temperatures_K`` is given.
    """

    temperatures_K: tuple[float, ...] | None
    temperature_range_K: tuple[float, float] | None
    n_temperatures: int
    temperature_err_K: float
    velocity: tuple[Measured, ...]
    velocity_spread: tuple[float, ...]
    velocity_temperature_K: float | None
    visibility: float
    count_rate: tuple[float, ...] | None  # signal counts per second at zero field
    counts_per_bin: float | None
    phase_noise: float | None  # rad per scan at zero field
    dark_rate: float
    bins: int
    scan_time: float
    scan_dead_time: float
    reference_every: int
    scans_per_voltage: int
    n_voltages: int
    ladder: str | tuple[float, ...]
    voltage_limit: float | None
    phase_limit: float
    visibility_floor: float
    phase_drift: float
    phase_diffusion: float
    target_alpha_rel: float | None
    target_dipole_D: float | None
    temperature_criterion: str
    design_margin: float
    rehearsal: bool
    seed: int

    def per_temperature(self, name: str, index: int):
        vals = getattr(self, name)
        return vals[index if len(vals) > 1 else 0]

    def signal_counts(self, index: int) -> float:
        """Mean signal counts of one scan at zero field (all bins)."""
        if self.counts_per_bin is not None:
            return self.counts_per_bin * self.bins
        if self.count_rate is not None:
            return self.per_temperature("count_rate", index) * self.scan_time
        # phase noise given: the counts that give it at the stated visibility
        return 1.0 / (self.phase_noise**2 * (1.0 - math.sqrt(1.0 - self.visibility**2)))

    def summary(self) -> dict[str, Any]:
        out = asdict(self)
        out["velocity"] = [{"value": m.value, "error": m.error} for m in self.velocity]
        return out


def _plan_error(fname: str, key: str, expected: str, found) -> InputError:
    return InputError(f"{fname} [plan] {key}: expected {expected}, found {found!r}")


def _parse_settings(table: dict, fname: str, layout: str) -> PlanSettings:
    unknown = [k for k in table if k not in _PLAN_KEYS]
    if unknown:
        raise InputError(
            f"{fname}: unknown key(s) in [plan]: {', '.join(repr(k) for k in unknown)}; "
            f"expected one of {', '.join(_PLAN_KEYS)}"
        )

    def q(key: str, default=None, *, positive=False, nonneg=False) -> Measured | None:
        if key not in table:
            return default
        try:
            m = parse_quantity(table[key], _PLAN_KEYS[key] or "", where=f"{fname} [plan] {key}")
        except QuantityError:
            raise
        if positive and not m.value > 0:
            raise _plan_error(fname, key, "a value > 0", table[key])
        if nonneg and m.value < 0:
            raise _plan_error(fname, key, "a value >= 0", table[key])
        return m

    def number(key: str, default=None, *, lo=None, hi=None, integer=False, open_lo=False):
        if key not in table:
            return default
        v = table[key]
        ok = isinstance(v, int | float) and not isinstance(v, bool)
        if integer:
            ok = isinstance(v, int) and not isinstance(v, bool)
        if ok and not math.isfinite(v):
            ok = False
        if ok and lo is not None and (v < lo or (open_lo and v == lo)):
            ok = False
        if ok and hi is not None and v > hi:
            ok = False
        if not ok:
            kind = "an integer" if integer else "a number"
            rng = ""
            if lo is not None and hi is not None:
                rng = f" in {'(' if open_lo else '['}{lo:g}, {hi:g}]"
            elif lo is not None:
                rng = f" {'>' if open_lo else '>='} {lo:g}"
            raise _plan_error(fname, key, kind + rng, v)
        return int(v) if integer else float(v)

    def required(key: str, hint: str = "") -> None:
        if key not in table:
            raise InputError(f"{fname} [plan] {key}: required key missing{hint}")

    # temperatures
    temps = rng_t = None
    if "temperatures_K" in table and "temperature_range_K" in table:
        raise InputError(
            f"{fname} [plan] temperatures_K, temperature_range_K: expected one of them, found both"
        )
    if "temperatures_K" in table:
        raw = table["temperatures_K"]
        if not (
            isinstance(raw, list)
            and raw
            and all(isinstance(t, int | float) and not isinstance(t, bool) and t > 0 for t in raw)
        ):
            raise _plan_error(fname, "temperatures_K", "a list of temperatures > 0 (K)", raw)
        temps = tuple(sorted(float(t) for t in raw))
        if len(set(temps)) != len(temps):
            raise _plan_error(fname, "temperatures_K", "distinct temperatures", raw)
        if "n_temperatures" in table and table["n_temperatures"] != len(temps):
            raise InputError(
                f"{fname} [plan] n_temperatures: expected {len(temps)} (the length of "
                f"temperatures_K) or nothing, found {table['n_temperatures']!r}"
            )
    elif "temperature_range_K" in table:
        raw = table["temperature_range_K"]
        if not (
            isinstance(raw, list)
            and len(raw) == 2
            and all(isinstance(t, int | float) and not isinstance(t, bool) and t > 0 for t in raw)
            and raw[0] < raw[1]
        ):
            raise _plan_error(
                fname, "temperature_range_K", "[lowest, highest] in K, lowest first", raw
            )
        rng_t = (float(raw[0]), float(raw[1]))
    else:
        raise InputError(
            f"{fname} [plan] temperatures_K: required key missing (or temperature_range_K with "
            "n_temperatures)"
        )
    n_t = number("n_temperatures", len(temps) if temps else 3, lo=1, hi=8, integer=True)

    def per_t(
        key: str, default=None, *, positive=False, nonneg=False
    ) -> tuple[Measured, ...] | None:
        if key not in table:
            return None if default is None else (default,)
        raw = table[key]
        if isinstance(raw, list):
            if temps is None:
                raise InputError(
                    f"{fname} [plan] {key}: a list (one value per temperature) needs "
                    "temperatures_K; with temperature_range_K give one value"
                )
            if len(raw) != len(temps):
                raise InputError(
                    f"{fname} [plan] {key}: expected {len(temps)} values (one per temperature of "
                    f"temperatures_K), found {len(raw)}"
                )
            items = raw
        else:
            items = [raw]
        out = []
        for item in items:
            m = parse_quantity(item, _PLAN_KEYS[key] or "", where=f"{fname} [plan] {key}")
            if positive and not m.value > 0:
                raise _plan_error(fname, key, "values > 0", raw)
            if nonneg and m.value < 0:
                raise _plan_error(fname, key, "values >= 0", raw)
            out.append(m)
        return tuple(out)

    timing = layout == "time-domain"
    if not timing:
        required("velocity", ' (mean detected velocity, e.g. "210 ± 1.3 m/s")')
        required("velocity_spread", ' (1σ of the velocity distribution; "0 m/s" if monochromatic)')
    vel = per_t("velocity", Measured(1.0, 0.0), positive=True)
    spread = per_t("velocity_spread", Measured(0.0, 0.0), nonneg=True)
    required("visibility", " (zero-field fringe visibility, 0 < V <= 1)")
    vis = number("visibility", lo=0.0, hi=1.0, open_lo=True)
    required("scan_time", ' (duration of one grating scan, e.g. "20 s")')
    scan_time = q("scan_time", positive=True).value
    given = [k for k in ("count_rate", "counts_per_bin", "phase_noise") if k in table]
    if len(given) != 1:
        raise InputError(
            f"{fname} [plan] count_rate: expected exactly one of count_rate, counts_per_bin, "
            f"phase_noise, found {', '.join(given) if given else 'none'}"
        )
    rate = per_t("count_rate", positive=True)
    cpb = number("counts_per_bin", lo=0.0, open_lo=True)
    noise = q("phase_noise", positive=True)
    if noise is not None and "dark_rate" in table:
        raise InputError(
            f"{fname} [plan] dark_rate: give it with count_rate or counts_per_bin; phase_noise "
            "already includes the dark counts"
        )
    vfloor = number("visibility_floor", 0.3 * vis, lo=0.0)
    if vfloor >= vis:
        raise _plan_error(fname, "visibility_floor", f"a value below visibility ({vis:g})", vfloor)
    ladder = table.get("ladder", "optimal")
    if isinstance(ladder, list):
        if not (
            len(ladder) >= 2
            and all(
                isinstance(v, int | float) and not isinstance(v, bool) and v != 0 for v in ladder
            )
            and len({abs(float(v)) for v in ladder}) == len(ladder)
        ):
            raise _plan_error(
                fname, "ladder", "'optimal', 'even' or a list of >= 2 distinct non-zero |V|", ladder
            )
        ladder = tuple(sorted(abs(float(v)) for v in ladder))
    elif ladder not in ("optimal", "even"):
        raise _plan_error(fname, "ladder", "'optimal', 'even' or a list of voltages (V)", ladder)
    crit = table.get("temperature_criterion", "determinant")
    if crit not in _CRITERIA:
        raise _plan_error(fname, "temperature_criterion", "one of " + ", ".join(_CRITERIA), crit)
    rehearsal = table.get("rehearsal", True)
    if not isinstance(rehearsal, bool):
        raise _plan_error(fname, "rehearsal", "true or false", rehearsal)
    vt = number("velocity_temperature_K", lo=0.0, open_lo=True)
    n_volt = number("n_voltages", 6, lo=2, hi=40, integer=True)
    if isinstance(ladder, tuple):
        n_volt = len(ladder)
    vlim = q("voltage_limit", positive=True)
    return PlanSettings(
        temperatures_K=temps,
        temperature_range_K=rng_t,
        n_temperatures=n_t,
        temperature_err_K=q("temperature_err", Measured(0.0), nonneg=True).value,
        velocity=vel,
        velocity_spread=tuple(m.value for m in spread),
        velocity_temperature_K=vt,
        visibility=vis,
        count_rate=None if rate is None else tuple(m.value for m in rate),
        counts_per_bin=cpb,
        phase_noise=None if noise is None else noise.value,
        dark_rate=q("dark_rate", Measured(0.0), nonneg=True).value,
        bins=number("bins", 40, lo=4, hi=100000, integer=True),
        scan_time=scan_time,
        scan_dead_time=q("scan_dead_time", Measured(0.0), nonneg=True).value,
        reference_every=number("reference_every", 2, lo=1, hi=1000, integer=True),
        scans_per_voltage=number("scans_per_voltage", 2, lo=1, hi=10000, integer=True),
        n_voltages=n_volt,
        ladder=ladder,
        voltage_limit=None if vlim is None else vlim.value,
        phase_limit=q("phase_limit", Measured(3.0), positive=True).value,
        visibility_floor=vfloor,
        phase_drift=q("phase_drift", Measured(0.0)).value,
        phase_diffusion=q("phase_diffusion", Measured(0.0), nonneg=True).value,
        target_alpha_rel=number("target_alpha_rel", lo=0.0, open_lo=True),
        target_dipole_D=number("target_dipole_D", lo=0.0, open_lo=True),
        temperature_criterion=crit,
        design_margin=number("design_margin", 0.0, lo=0.0),
        rehearsal=rehearsal,
        seed=number("seed", 0, lo=0, integer=True),
    )


@dataclass(frozen=True)
class PlanCompound:
    """One row of the planning compounds file: mass and where its α, μ come from."""

    name: str
    mass: Measured | None
    smiles: str | None
    alpha_A3: Measured | None
    dipole_D: Measured | None
    line: int
    problem: str | None = None


def _read_plan_compounds(path: Path) -> list[PlanCompound]:
    table = read_table(path, ("compound",), "compounds")
    out: list[PlanCompound] = []
    seen: set[str] = set()
    for i, row in enumerate(table.rows):
        name = row.get("compound", "").strip()
        line = table.lines[i]
        try:
            if "__bad__" in row:
                raise CompoundError(f"{table.name} line {line}: {row['__bad__']}")
            if not name:
                raise CompoundError(f"{table.name} line {line}: empty compound name")
            if name in seen:
                raise CompoundError(f"{table.name} line {line}: compound {name!r} listed twice")
            seen.add(name)
            mass = None
            if row.get("mass_u", "").strip():
                m = table.number(i, "mass_u", positive=True)
                dm = table.number(i, "mass_err_u", nonnegative=True, default=0.0)
                mass = Measured(m * AMU, dm * AMU)
            alpha = dip = None
            if row.get("alpha_A3", "").strip():
                alpha = Measured(
                    table.number(i, "alpha_A3", positive=True),
                    table.number(i, "alpha_err_A3", nonnegative=True, default=0.0),
                )
            if row.get("dipole_D", "").strip():
                dip = Measured(
                    table.number(i, "dipole_D", nonnegative=True),
                    table.number(i, "dipole_err_D", nonnegative=True, default=0.0),
                )
            smiles = row.get("smiles", "").strip() or None
            out.append(PlanCompound(name, mass, smiles, alpha, dip, line))
        except CompoundError as exc:
            out.append(PlanCompound(name or f"line {line}", None, None, None, None, line, str(exc)))
    if not out:
        raise InputError(f"{path.name}: expected at least one compound row, found none")
    return out


def load_plan(path: str | Path):
    """Read a planning campaign: ``(Campaign without data, PlanSettings, compounds)``.

    Raises
    ------
    InputError
        Structural problems, missing or bad ``[plan]`` keys (one line naming file and key).
    """
    path = Path(path)
    fname = path.name
    doc = cm.read_toml(path)
    if "plan" not in doc:
        raise InputError(
            f"{fname} [plan]: required table missing (a planning campaign describes the planned "
            "temperatures, velocity, count rate and visibility there)"
        )
    plan_table = doc.pop("plan")
    if not isinstance(plan_table, dict):
        raise InputError(f"{fname}: [plan] expected a table, found {type(plan_table).__name__}")
    cm._check_keys(doc, fname)
    data = doc.get("data", {})
    for key in ("shifts", "scans"):
        if key in data:
            raise InputError(
                f"{fname} [data] {key}: a planning campaign has no measurements yet; remove it "
                "(the rehearsal writes its own scans)"
            )
    inst, defl = doc.get("instrument", {}), doc.get("deflector", {})
    layout = cm._require_str(inst, "layout", f"{fname} [instrument]", cm.LAYOUTS)
    model = cm._require_str(defl, "model", f"{fname} [deflector]", cm.DEFLECTOR_MODELS)
    if layout == "beam-profile":
        raise InputError(
            f"{fname} [instrument] layout: planning needs a fringe layout (talbot-lau or "
            "time-domain), found 'beam-profile'"
        )
    title = doc.get("campaign", {}).get("title", path.stem)
    if not isinstance(title, str):
        raise InputError(f"{fname} [campaign] title: expected a string, found {title!r}")
    stated = cm._stated_inputs(doc, fname, layout, model)
    settings = cm._settings(doc, fname)
    base = path.parent
    field_map, waveform = cm.deflector_files(defl, base, fname, layout, model)
    camp = cm.Campaign(
        path=path,
        title=title,
        layout=layout,
        model=model,
        stated=stated,
        settings=settings,
        compounds=(),
        field_map=field_map,
        waveform=waveform,
        raw=doc,
        structures=cm._load_structures(base, doc, fname),
    )
    cm.check_geometry(camp)
    plan = _parse_settings(plan_table, fname, layout)
    compounds_path = cm._data_path(base, doc, "compounds", fname)
    compounds = _read_plan_compounds(compounds_path)
    return camp, plan, compounds


# ---------------------------------------------------------------------------------------------
# Planned series and compounds
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class SeriesPlan:
    """The plan of one compound at one source temperature (α in Å³, voltages in V, times in s)."""

    compound: str
    temperature_K: float
    velocity_m_s: float
    velocity_err_m_s: float
    velocity_spread_m_s: float
    alpha_eff_pred_A3: float
    alpha_eff_pred_err_A3: float
    voltage_max_V: float
    voltage_max_reason: str
    ladder: LadderPrecision
    even: LadderPrecision  # the evenly spaced ladder with the same scans, for comparison
    sigma_velocity_A3: float
    sigma_scale_A3: float  # coupling and mass (shared by the compound's series)
    signal_counts: float  # per scan at zero field
    dark_counts: float
    beam_time_s: float
    model: SeriesModel | None = None
    scans_per_voltage_target: int | None = None
    beam_time_target_s: float | None = None
    notes: tuple[str, ...] = ()

    @property
    def sigma_stat_A3(self) -> float:
        return self.ladder.sigma_stat_A3

    @property
    def sigma_total_A3(self) -> float:
        return math.sqrt(
            self.ladder.sigma_stat_A3**2 + self.sigma_velocity_A3**2 + self.sigma_scale_A3**2
        )

    @property
    def specific_var(self) -> float:
        return self.ladder.sigma_stat_A3**2 + self.sigma_velocity_A3**2

    def summary(self) -> dict[str, Any]:
        out = {k: v for k, v in self.__dict__.items() if k not in ("ladder", "even", "model")}
        out["ladder"] = asdict(self.ladder)
        out["even_ladder"] = asdict(self.even)
        out["sigma_stat_A3"] = self.sigma_stat_A3
        out["sigma_total_A3"] = self.sigma_total_A3
        out["notes"] = list(self.notes)
        return out


@dataclass(frozen=True)
class CompoundPlan:
    """The plan of one compound: its series, the α/μ precision and the temperature choice."""

    compound: str
    status: str  # "ok", "warning" or "failed"
    message: str
    mass_u: float | None = None
    mass_err_u: float = 0.0
    smiles: str | None = None
    source: str = ""  # where α and μ come from
    alpha_pred_A3: float | None = None
    dipole_pred_D: float | None = None
    series: tuple[SeriesPlan, ...] = ()
    debye: DebyePrecision | None = None
    sigma_dipole_D: float = math.nan
    dipole_limit_D: float = math.nan
    temperature_sets: tuple[dict[str, Any], ...] = ()
    beam_time_dipole_target_s: float | None = None
    warnings: tuple[str, ...] = ()

    @property
    def beam_time_s(self) -> float:
        return float(sum(s.beam_time_s for s in self.series))

    def summary(self) -> dict[str, Any]:
        return {
            "compound": self.compound,
            "status": self.status,
            "message": self.message,
            "mass_u": self.mass_u,
            "mass_err_u": self.mass_err_u,
            "smiles": self.smiles,
            "source": self.source,
            "alpha_pred_A3": self.alpha_pred_A3,
            "dipole_pred_D": self.dipole_pred_D,
            "series": [s.summary() for s in self.series],
            "debye": None if self.debye is None else asdict(self.debye),
            "sigma_dipole_D": finite_or_none(self.sigma_dipole_D),
            "dipole_limit_D": finite_or_none(self.dipole_limit_D),
            "temperature_sets": list(self.temperature_sets),
            "beam_time_s": self.beam_time_s,
            "beam_time_dipole_target_s": finite_or_none(self.beam_time_dipole_target_s),
            "warnings": list(self.warnings),
        }


@dataclass(frozen=True)
class CampaignPlan:
    """A whole plan: the campaign it came from, the settings, the systematics and every compound."""

    campaign: Any  # polarbeam.contract.campaign.Campaign (without data)
    settings: PlanSettings
    coupling: float
    coupling_rel_err: float
    budget: dict[str, float]  # stated input → its relative share σ_p·∂lnC/∂p
    compounds: tuple[CompoundPlan, ...]
    notes: tuple[str, ...] = ()

    @property
    def exit_code(self) -> int:
        failed = sum(c.status == "failed" for c in self.compounds)
        if failed == 0:
            return 0
        return 2 if failed == len(self.compounds) else 1

    def table(self):
        """``plan.csv`` as a DataFrame: one row per compound and temperature."""
        import pandas as pd

        rows = []
        for c in self.compounds:
            if c.status == "failed":
                continue
            for s in c.series:
                rows.append(
                    {
                        "compound": c.compound,
                        "temperature_K": s.temperature_K,
                        "alpha_eff_pred_A3": s.alpha_eff_pred_A3,
                        "sigma_alpha_eff_pred_A3": s.sigma_total_A3,
                        "voltage_max_V": s.voltage_max_V,
                        "n_voltages": len(s.ladder.levels_V),
                        "scans_per_voltage": s.ladder.scans_per_voltage,
                        "beam_time_h": s.beam_time_s / 3600.0,
                        "sigma_alpha_pred_A3": c.debye.sigma_alpha_A3 if c.debye else math.nan,
                        "sigma_dipole_pred_D": c.sigma_dipole_D,
                        "dipole_limit_pred_D": c.dipole_limit_D,
                        "alpha_pred_A3": c.alpha_pred_A3,
                        "dipole_pred_D": c.dipole_pred_D,
                        "alpha_eff_pred_err_A3": s.alpha_eff_pred_err_A3,
                        "sigma_alpha_eff_stat_A3": s.sigma_stat_A3,
                        "sigma_alpha_eff_even_A3": math.sqrt(
                            s.even.sigma_stat_A3**2 + s.sigma_velocity_A3**2 + s.sigma_scale_A3**2
                        ),
                        "voltage_limited_by": s.voltage_max_reason,
                        "ladder_V": ";".join(f"{v:.4g}" for v in s.ladder.levels_V),
                        "scans_per_voltage_target": s.scans_per_voltage_target,
                        "beam_time_target_h": (
                            math.nan
                            if s.beam_time_target_s is None
                            else s.beam_time_target_s / 3600
                        ),
                        "beam_time_dipole_target_h": (
                            math.nan
                            if c.beam_time_dipole_target_s is None
                            else c.beam_time_dipole_target_s / 3600
                        ),
                        "velocity_m_s": s.velocity_m_s,
                    }
                )
        return pd.DataFrame(rows)

    def summary(self) -> dict[str, Any]:
        return {
            "software": f"polarbeam {__version__}",
            "campaign": str(self.campaign.path),
            "title": self.campaign.title,
            "layout": self.campaign.layout,
            "model": self.campaign.model,
            "settings": self.settings.summary(),
            "coupling": self.coupling,
            "coupling_rel_err": self.coupling_rel_err,
            "coupling_budget": self.budget,
            "compounds": [c.summary() for c in self.compounds],
            "notes": list(self.notes),
            "cautions": CAUTIONS,
        }

    def to_markdown(self) -> str:
        return _render_markdown(self)

    def _repr_html_(self) -> str:
        import html

        return "<pre>" + html.escape(self.to_markdown()) + "</pre>"


CAUTIONS = (
    "Deflection experiments involve kilovolt electrodes (interlocked supplies; bleed and ground "
    "electrodes before touching them), vacuum vessels and viewports (implosion, over-pressure on "
    "venting), hot molecular sources (burns, toxic vapours: follow the compounds' safety data "
    "sheets) and lasers (eyewear for the wavelength, enclosed beam paths).  A plan is arithmetic, "
    "not a safety assessment: check every planned voltage and temperature against the ratings of "
    "the supply, feedthroughs, electrodes and oven, and follow local codes, your institution's "
    "rules and the lab's safety officer."
)


def _temperature_velocity(plan: PlanSettings, t: float, index: int) -> tuple[float, float, float]:
    """(velocity, its error, spread) at temperature t."""
    vel = plan.per_temperature("velocity", index)
    spread = plan.per_temperature("velocity_spread", index)
    f = 1.0
    if plan.velocity_temperature_K is not None:
        f = math.sqrt(t / plan.velocity_temperature_K)
    return vel.value * f, vel.error * f, spread * f


class _Predictor:
    """α_eff(T) ± its prediction error for one compound, from structure or stated values."""

    def __init__(self, pc: PlanCompound, camp, temps: Sequence[float]):
        self.notes: list[str] = []
        mol = camp.structures.get(pc.name)
        if isinstance(mol, str):
            raise CompoundError(f"structures file: record {pc.name!r} could not be read ({mol})")
        has_structure = pc.smiles is not None or mol is not None
        if pc.alpha_A3 is None and not has_structure:
            raise CompoundError(
                f"compounds.csv line {pc.line}: compound {pc.name!r} has no structure (smiles "
                "column or a [data] structures record) and no stated alpha_A3; expected one of them"
            )
        self.pred = None
        if has_structure and (pc.alpha_A3 is None or pc.dipole_D is None or pc.mass is None):
            conf = camp.settings.conformers if pc.dipole_D is None else 0
            self.pred = predict_for_compound(
                pc.name,
                pc.smiles,
                mol,
                temperatures=tuple(temps),
                conformers=conf,
                seed=camp.settings.conformer_seed,
            )
            self.notes.extend(self.pred.notes)
            if self.pred.flags:
                self.notes.append(
                    "outside the additive schemes' domain: " + ", ".join(self.pred.flags)
                )
        if pc.mass is not None:
            self.mass = pc.mass
            if self.pred is not None:
                w = stated_mass_check(pc.mass.value, self.pred.mass_u, pc.name)
                if w:
                    self.notes.append(w)
        elif self.pred is not None:
            self.mass = Measured(self.pred.mass_u * AMU, 0.0)
            self.notes.append(f"mass {self.pred.mass_u:.3f} u from the structure")
        else:
            raise CompoundError(
                f"compounds.csv line {pc.line}: compound {pc.name!r} expected a mass_u (or a "
                "structure to compute it from), found none"
            )
        self.pc = pc
        if pc.alpha_A3 is not None:
            self.alpha, self.alpha_err = pc.alpha_A3.value, pc.alpha_A3.error
            src_a = "stated α"
        else:
            self.alpha, self.alpha_err = (
                self.pred.alpha_additive_A3,
                self.pred.alpha_additive_err_A3,
            )
            src_a = "additive α"
        if pc.dipole_D is not None:
            src_m = "stated μ"
        elif self.pred is not None and self.pred.mu2_si:
            src_m = "conformer ⟨μ²⟩"
        else:
            src_m = "μ = 0 (none stated)"
            if pc.dipole_D is None and self.pred is None:
                self.notes.append("no dipole_D stated: planned as non-polar")
        self.source = f"{src_a}, {src_m}"

    def mu2_D2(self, t: float) -> tuple[float, float]:
        """⟨μ²⟩ (D²) and its 1σ at temperature t."""
        if self.pc.dipole_D is not None:
            m, dm = self.pc.dipole_D.value, self.pc.dipole_D.error
            return m * m, 2 * m * dm
        if self.pred is not None and self.pred.mu2_si:
            if t not in self.pred.mu2_si:
                raise KeyError(t)
            mu2 = self.pred.mu2_si[t] / si_from_debye(1.0) ** 2
            return mu2, 2 * DIPOLE_REL_ERROR * mu2
        return 0.0, 0.0

    def alpha_eff(self, t: float) -> tuple[float, float]:
        mu2, dmu2 = self.mu2_D2(t)
        per = alpha_a3_from_si(langevin_debye_si(si_from_debye(1.0), t))  # Å³ per D²
        return self.alpha + per * mu2, math.hypot(self.alpha_err, per * dmu2)


def _series_plan(
    name: str,
    t: float,
    index: int,
    predictor: _Predictor,
    plan: PlanSettings,
    camp,
    ctx,
    scale_rel: float,
    ladder_override: str | None = None,
) -> SeriesPlan:
    a_eff, a_err = predictor.alpha_eff(t)
    v, dv, spread = _temperature_velocity(plan, t, index)
    sig = plan.signal_counts(index)
    dark = plan.dark_rate * plan.scan_time
    vis_obs = plan.visibility * sig / (sig + dark)
    model = SeriesModel(
        a_eff,
        ctx.coupling / predictor.mass.value,
        v,
        spread,
        camp.layout,
        sig + dark,
        plan.visibility,
        vis_obs,
        camp.settings.velocity_nodes,
    )
    timing = _timing(plan, camp)
    notes: list[str] = []
    ladder_kind = ladder_override or plan.ladder
    if isinstance(ladder_kind, tuple):
        levels = np.asarray(ladder_kind)
        vmax, reason = float(levels.max()), "stated ladder"
        v_ok, _ = voltage_max(model, plan.phase_limit, plan.visibility_floor, plan.voltage_limit)
        if vmax > v_ok * (1 + 1e-9):
            notes.append(
                f"{name} @ {t:g} K: the stated ladder reaches {vmax:.4g} V, beyond the "
                f"{v_ok:.4g} V allowed by the phase limit and visibility floor"
            )
    else:
        design_a = a_eff + plan.design_margin * a_err
        vmax, reason = voltage_max(
            model, plan.phase_limit, plan.visibility_floor, plan.voltage_limit, design_a
        )
    k = plan.scans_per_voltage
    n = plan.n_voltages
    even = ladder_precision(model, even_ladder(vmax, n), k, **timing)
    if isinstance(ladder_kind, tuple):
        lad = ladder_precision(model, ladder_kind, k, **timing)
    elif ladder_kind == "even":
        lad = even
    else:
        lad = design_ladder(model, vmax, n, k, **timing)
        if lad.sigma_stat_A3 > even.sigma_stat_A3 and even.branch_excess <= lad.branch_excess:
            lad = even  # the grid may miss the even ladder's exact levels
    if lad.branch_excess > 0:
        notes.append(
            f"{name} @ {t:g} K: 2π branch tracking is not safe by {lad.branch_excess:.2f} rad "
            "(too few counts for this phase range): lower phase_limit or add scans"
        )
    n_scans = lad.n_signal + lad.n_reference
    time_s = n_scans * (plan.scan_time + plan.scan_dead_time)
    sig_v = abs(lad.dalpha_dvelocity) * dv
    sig_scale = a_eff * math.sqrt(scale_rel + (predictor.mass.error / predictor.mass.value) ** 2)
    sp = SeriesPlan(
        compound=name,
        temperature_K=t,
        velocity_m_s=v,
        velocity_err_m_s=dv,
        velocity_spread_m_s=spread,
        alpha_eff_pred_A3=a_eff,
        alpha_eff_pred_err_A3=a_err,
        voltage_max_V=vmax,
        voltage_max_reason=reason,
        ladder=lad,
        even=even,
        sigma_velocity_A3=sig_v,
        sigma_scale_A3=sig_scale,
        signal_counts=sig,
        dark_counts=dark,
        beam_time_s=time_s,
        model=model,
        notes=tuple(notes),
    )
    return sp


def _timing(plan: PlanSettings, camp) -> dict[str, Any]:
    return {
        "reference_every": plan.reference_every,
        "scan_time_s": plan.scan_time,
        "dead_time_s": plan.scan_dead_time,
        "diffusion_rad2_s": plan.phase_diffusion,
        "fit_offset": camp.settings.fit_offset,
    }


def _target_scans(sp: SeriesPlan, plan: PlanSettings, timing) -> SeriesPlan:
    """Scans per voltage (and beam time) that reach target_alpha_rel on α_eff, if reachable."""
    target = plan.target_alpha_rel * sp.alpha_eff_pred_A3
    sys2 = sp.sigma_scale_A3**2
    k0 = sp.ladder.scans_per_voltage
    if target**2 <= sys2 + sp.sigma_velocity_A3**2 * 0.999:
        note = (
            f"{sp.compound} @ {sp.temperature_K:g} K: target σ(α_eff)/α_eff = "
            f"{plan.target_alpha_rel:g} is below the systematic floor "
            f"{math.hypot(sp.sigma_scale_A3, sp.sigma_velocity_A3) / sp.alpha_eff_pred_A3:.3g} "
            "(coupling, mass and velocity errors): no beam time reaches it"
        )
        return replace(sp, beam_time_target_s=math.inf, notes=(*sp.notes, note))
    room = max(target**2 - sys2 - sp.sigma_velocity_A3**2, 1e-300)
    estimate = max(1, math.ceil(k0 * sp.ladder.sigma_stat_A3**2 / room))  # σ²_stat ∝ 1/k

    def reaches(k: int) -> bool:
        lp = ladder_precision(sp.model, sp.ladder.levels_V, k, **timing)
        vel2 = (lp.dalpha_dvelocity * sp.velocity_err_m_s) ** 2
        return lp.sigma_stat_A3**2 + vel2 + sys2 <= target**2

    if estimate > _EXACT_TARGET_MAX:
        k = estimate  # beyond a few hundred passes the 1/k scaling is exact enough
    else:  # the smallest k that reaches the target, by bisection on the exact Fisher value
        hi = estimate
        while not reaches(hi):
            hi *= 2
            if hi > _EXACT_TARGET_MAX:
                break
        lo = 0
        while hi - lo > 1 and hi <= _EXACT_TARGET_MAX:
            mid = (lo + hi) // 2
            if reaches(mid):
                hi = mid
            else:
                lo = mid
        k = hi
    n_sig = k * len(sp.ladder.levels_V)
    n_scans = n_sig + (-(-n_sig // plan.reference_every)) + 1
    return replace(
        sp,
        scans_per_voltage_target=int(k),
        beam_time_target_s=n_scans * (plan.scan_time + plan.scan_dead_time),
    )


def _candidate_sets(lo: float, hi: float, n: int, grid_n: int = 9) -> list[tuple[float, ...]]:
    """Temperature sets of ``n`` grid points in [lo, hi], spaced at least half the even spacing."""
    grid = np.linspace(lo, hi, grid_n)
    if n == 1:
        return [(float(t),) for t in grid]
    min_gap = (hi - lo) / (2 * (n - 1)) - 1e-9
    out = []
    for combo in itertools.combinations(range(grid_n), n):
        ts = grid[list(combo)]
        if np.all(np.diff(ts) >= min_gap):
            out.append(tuple(float(t) for t in ts))
    return out


def _criterion(dp: DebyePrecision, crit: str) -> float:
    if crit == "alpha":
        return dp.sigma_alpha_A3
    if crit == "dipole":
        return dp.sigma_mu2_D2
    return dp.determinant


def _plan_compound(
    pc: PlanCompound, camp, ctx, plan: PlanSettings, scale_rel: float
) -> CompoundPlan:
    if pc.problem:
        return CompoundPlan(pc.name, "failed", pc.problem)
    try:
        return _plan_compound_inner(pc, camp, ctx, plan, scale_rel)
    except CompoundError as exc:
        return CompoundPlan(pc.name, "failed", str(exc))
    except (ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
        return CompoundPlan(pc.name, "failed", f"compound {pc.name!r}: numerical failure ({exc})")


def _plan_compound_inner(pc, camp, ctx, plan: PlanSettings, scale_rel: float) -> CompoundPlan:
    st = camp.settings
    if plan.temperatures_K is not None:
        sets = [plan.temperatures_K]
        grid_temps = list(plan.temperatures_K)
    else:
        lo, hi = plan.temperature_range_K
        sets = _candidate_sets(lo, hi, plan.n_temperatures)
        n = plan.n_temperatures
        even_t = tuple(float(t) for t in np.linspace(lo, hi, n))
        even_inv = tuple(float(t) for t in sorted(1.0 / np.linspace(1 / hi, 1 / lo, n)))
        named = {"evenly spaced in T": even_t, "evenly spaced in 1/T": even_inv}
        grid_temps = sorted({t for s in sets for t in s} | set(even_t) | set(even_inv))
    pred = _Predictor(pc, camp, grid_temps)
    series_by_t: dict[float, SeriesPlan] = {}

    def series(t: float) -> SeriesPlan:
        if t not in series_by_t:
            idx = plan.temperatures_K.index(t) if plan.temperatures_K is not None else 0
            series_by_t[t] = _series_plan(pc.name, t, idx, pred, plan, camp, ctx, scale_rel)
        return series_by_t[t]

    def debye_for(ts: Sequence[float]) -> DebyePrecision | None:
        if len(ts) < 2:
            return None
        ss = [series(t) for t in ts]
        mu2 = pred.mu2_D2(min(ts))[0]
        return debye_precision(
            [s.alpha_eff_pred_A3 for s in ss],
            [s.specific_var for s in ss],
            [s.sigma_stat_A3**2 for s in ss],
            scale_rel + (pred.mass.error / pred.mass.value) ** 2,
            ts,
            plan.temperature_err_K,
            mu2,
        )

    temperature_sets: list[dict[str, Any]] = []
    if plan.temperatures_K is not None:
        chosen = plan.temperatures_K
    else:
        scored = []
        for ts in sets:
            dp = debye_for(ts)
            val = _criterion(dp, plan.temperature_criterion) if dp else _series_sigma(series(ts[0]))
            scored.append((val, ts, dp))
        for label, ts in named.items():
            dp = debye_for(ts)
            val = _criterion(dp, plan.temperature_criterion) if dp else _series_sigma(series(ts[0]))
            scored.append((val, ts, dp))
            temperature_sets.append(_set_record(label, ts, dp, val))
        scored.sort(key=lambda r: r[0])
        best_val, chosen, best_dp = scored[0]
        temperature_sets.insert(0, _set_record("best (chosen)", chosen, best_dp, best_val))
    ss = tuple(series(t) for t in chosen)
    if plan.target_alpha_rel is not None:
        ss = tuple(_target_scans(s, plan, _timing(plan, camp)) for s in ss)
    dp = debye_for(chosen)
    warnings = list(pred.notes)
    for s in ss:
        warnings.extend(s.notes)
    sig_mu = lim = math.nan
    mu2_pred = pred.mu2_D2(min(chosen))[0]
    dip_target_time = None
    if dp is not None:
        sig_mu, lim = _dipole_figures(
            mu2_pred, dp.sigma_mu2_D2, st.dipole_significance, st.upper_limit_cl
        )
        if plan.target_dipole_D is not None:
            dip_target_time = _dipole_target_time(dp, mu2_pred, plan, ss, st)
            if dip_target_time is not None and not math.isfinite(dip_target_time):
                warnings.append(
                    f"{pc.name}: target_dipole_D = {plan.target_dipole_D:g} D is below the "
                    "systematic floor of the Debye line: no beam time reaches it"
                )
    else:
        warnings.append(
            "single source temperature: α and μ cannot be separated; plan at least two temperatures"
        )
    fpv = ctx.field_per_volt
    if fpv and mu2_pred > 0:
        vmax = max(s.voltage_max_V for s in ss)
        tmin = min(chosen)
        ratio = si_from_debye(math.sqrt(mu2_pred)) * fpv * vmax / (BOLTZMANN * tmin)
        if ratio > st.orientation_warning:
            warnings.append(
                f"μE/kT = {ratio:.2f} at {vmax:.4g} V and {tmin:g} K: the weak-field "
                "Langevin–Debye limit is not well satisfied; lower the voltage or raise T"
            )
    return CompoundPlan(
        compound=pc.name,
        status="warning" if warnings else "ok",
        message="; ".join(warnings) or "ok",
        mass_u=pred.mass.value / AMU,
        mass_err_u=pred.mass.error / AMU,
        smiles=pc.smiles,
        source=pred.source,
        alpha_pred_A3=pred.alpha,
        dipole_pred_D=math.sqrt(mu2_pred),
        series=ss,
        debye=dp,
        sigma_dipole_D=sig_mu,
        dipole_limit_D=lim,
        temperature_sets=tuple(temperature_sets),
        beam_time_dipole_target_s=dip_target_time,
        warnings=tuple(warnings),
    )


def _series_sigma(s: SeriesPlan) -> float:
    return s.sigma_total_A3


def _set_record(label: str, ts, dp: DebyePrecision | None, val: float) -> dict[str, Any]:
    return {
        "label": label,
        "temperatures_K": list(ts),
        "sigma_alpha_A3": dp.sigma_alpha_A3 if dp else None,
        "sigma_mu2_D2": dp.sigma_mu2_D2 if dp else None,
        "corr": dp.corr if dp else None,
        "criterion": val,
    }


def _dipole_target_time(dp: DebyePrecision, mu2: float, plan: PlanSettings, ss, st) -> float | None:
    """Total beam time (s) for the compound to reach target_dipole_D (statistics scale as 1/time).

    For a significant dipole the target is σ(μ); otherwise it is the expected upper limit, which
    for ⟨μ²⟩ ≈ 0 is sqrt(z·σ(⟨μ²⟩)) with z the one-sided normal quantile of the bounded limit.
    """
    from scipy import stats

    tgt = plan.target_dipole_D
    if mu2 > 0 and mu2 / dp.sigma_mu2_D2 >= st.dipole_significance:
        want = 2.0 * math.sqrt(mu2) * tgt  # σ(⟨μ²⟩) that gives σ(μ) = target
    else:
        z = stats.norm.ppf(0.5 + 0.5 * st.upper_limit_cl)
        want = tgt**2 / z
    stat2 = dp.sigma_mu2_stat_D2**2
    sys2 = max(dp.sigma_mu2_D2**2 - stat2, 0.0)
    if want**2 <= sys2:
        return math.inf
    factor = stat2 / (want**2 - sys2)
    return factor * float(sum(s.beam_time_s for s in ss))


def plan_campaign(camp, plan: PlanSettings, compounds: Sequence[PlanCompound]) -> CampaignPlan:
    """Plan every compound of a loaded planning campaign (see the module docstring)."""
    ctx = build_context(camp)
    budget = {}
    scale_rel = 0.0
    for key, m in camp.stated.items():
        s = ctx.sensitivities.get(key)
        if s is None or m.error <= 0:
            continue
        budget[key] = abs(s) * m.error
        scale_rel += (s * m.error) ** 2
    out = tuple(_plan_compound(pc, camp, ctx, plan, scale_rel) for pc in compounds)
    notes = []
    if camp.layout == "time-domain":
        notes.append("time-domain layout: the phase does not depend on velocity")
    return CampaignPlan(camp, plan, ctx.coupling, math.sqrt(scale_rel), budget, out, tuple(notes))


def make_plan(path: str | Path) -> CampaignPlan:
    """Load a planning campaign and plan it (no files written)."""
    camp, plan, compounds = load_plan(path)
    return plan_campaign(camp, plan, compounds)


# ---------------------------------------------------------------------------------------------
# Rehearsal: simulated raw scans of the plan, in the input contract
# ---------------------------------------------------------------------------------------------


def _draw_instrument(camp, rng: np.random.Generator | None) -> dict[str, float]:
    vals = camp.nominal()
    if rng is None:
        return vals
    return {k: m.value + m.error * rng.standard_normal() for k, m in camp.stated.items()}


def rehearsal_scans(
    cplan: CampaignPlan,
    rng: np.random.Generator,
    *,
    systematics: bool = True,
    copies: int = 1,
    only: tuple[str, float] | None = None,
):
    """Simulated raw-scan table of the plan (and the truth per series).

    Each series follows its planned acquisition order (:func:`acquisition_sequence`).  Counts are
    Poisson with the planned signal and dark counts; the visibility of a signal scan is the
    zero-field visibility times the phasor modulus of the velocity average at its voltage; the
    interferometer phase drifts linearly (``phase_drift``) and as a random walk
    (``phase_diffusion``).  With ``systematics`` the instrument truth is drawn once from the stated
    errors (shared by all series of the table), each series draws its own velocity and temperature
    and each compound its mass, so an analysis of the table sees the systematics the plan
    propagates; without it the truth is the nominal set-up.

    ``copies`` repeats every series with independent counts and noise (compound names get
    ``#i``); ``only = (compound, temperature_K)`` restricts the table to one series.

    Returns
    -------
    (DataFrame, DataFrame)
        The scan table (columns of :data:`polarbeam.reduction.INPUT_COLUMNS`) and the truth per
        series (``compound, temperature_K, alpha_eff_true_A3, temperature_true_K,
        velocity_true_m_s``).
    """
    import pandas as pd

    camp, plan = cplan.campaign, cplan.settings
    period = camp.nominal().get("instrument.grating_period")
    inst_true = _draw_instrument(camp, rng if systematics else None)
    c_true = coupling(*camp.build(inst_true))
    period_true = inst_true.get("instrument.grating_period", period)
    tables, truth = [], []
    first_scan, t0 = 0, 0.0
    for c in cplan.compounds:
        if c.status == "failed":
            continue
        for copy in range(copies):
            label = c.compound if copies == 1 else f"{c.compound}#{copy}"
            m_true = c.mass_u * AMU
            if systematics and c.mass_err_u > 0:
                m_true = (c.mass_u + c.mass_err_u * rng.standard_normal()) * AMU
            for s in c.series:
                if only is not None and (c.compound, s.temperature_K) != only:
                    continue
                t_true = s.temperature_K
                v_true = s.velocity_m_s
                if systematics:
                    t_true += plan.temperature_err_K * rng.standard_normal()
                    v_true += s.velocity_err_m_s * rng.standard_normal()
                a_true = _alpha_eff_at(c, s, t_true)
                seq = acquisition_sequence(
                    s.ladder.levels_V,
                    s.ladder.scans_per_voltage,
                    plan.reference_every,
                    plan.scan_time,
                    plan.scan_dead_time,
                    t0,
                )
                model = SeriesModel(
                    a_true,
                    c_true / m_true,
                    v_true,
                    s.velocity_spread_m_s,
                    camp.layout,
                    s.signal_counts + s.dark_counts,
                    plan.visibility,
                    plan.visibility,
                    camp.settings.velocity_nodes,
                )
                shift, mod = model.phase(seq.voltages)
                shift[seq.is_reference] = 0.0
                mod[seq.is_reference] = 1.0
                n_sc = seq.voltages.size
                steps = rng.standard_normal(n_sc) * np.sqrt(
                    plan.phase_diffusion * np.r_[0.0, np.diff(seq.times)]
                )
                phi_i = (
                    rng.uniform(-np.pi, np.pi)
                    + plan.phase_drift * (seq.times - seq.times[0])
                    + np.cumsum(steps)
                )
                bins = plan.bins
                x_bins = np.arange(bins) * (period_true / bins)
                t_bins = (np.arange(bins) + 0.5) * (plan.scan_time / bins) - 0.5 * plan.scan_time
                _, counts = fringe_counts(
                    np.tile(x_bins, n_sc),
                    period_true,
                    np.repeat(phi_i + shift, bins),
                    s.signal_counts / bins,
                    np.repeat(plan.visibility * mod, bins),
                    s.dark_counts / bins,
                    rng,
                )
                n_rows = n_sc * bins
                tables.append(
                    pd.DataFrame(
                        {
                            "compound": np.full(n_rows, label, dtype=object),
                            "temperature_K": np.full(n_rows, s.temperature_K),
                            "temperature_err_K": np.full(n_rows, plan.temperature_err_K),
                            "velocity_m_s": np.full(n_rows, s.velocity_m_s),
                            "velocity_err_m_s": np.full(n_rows, s.velocity_err_m_s),
                            "velocity_spread_m_s": np.full(n_rows, s.velocity_spread_m_s),
                            "voltage_V": np.repeat(seq.voltages, bins),
                            "scan": np.repeat(first_scan + np.arange(n_sc), bins),
                            "time_s": np.repeat(seq.times, bins) + np.tile(t_bins, n_sc),
                            "position_m": np.tile(x_bins, n_sc),
                            "counts": counts,
                        }
                    )
                )
                truth.append(
                    {
                        "compound": label,
                        "temperature_K": s.temperature_K,
                        "alpha_eff_true_A3": a_true,
                        "temperature_true_K": t_true,
                        "velocity_true_m_s": v_true,
                        "alpha_eff_pred_A3": s.alpha_eff_pred_A3,
                    }
                )
                first_scan += n_sc
                t0 = float(seq.times[-1]) + plan.scan_time + 600.0
    if not tables:
        raise InputError("rehearsal: no planned series to simulate")
    return pd.concat(tables, ignore_index=True), pd.DataFrame(truth)


def _alpha_eff_at(c: CompoundPlan, s: SeriesPlan, t_true: float) -> float:
    """α_eff at the true temperature: the planned α plus the planned ⟨μ²⟩ scaled as 1/T."""
    orient = s.alpha_eff_pred_A3 - c.alpha_pred_A3
    return c.alpha_pred_A3 + orient * s.temperature_K / t_true


def rehearsal_scatter(
    cplan: CampaignPlan,
    compound: str,
    temperature_K: float,
    n: int = 200,
    *,
    seed: int = 0,
    systematics: bool = False,
):
    """Fit ``n`` independent rehearsals of one planned series; returns (α_eff fits, errors), Å³.

    The rehearsals are reduced together (:func:`polarbeam.reduction.reduce_table`) and each series is
    fitted as the analysis does (:func:`polarbeam.extraction.series.fit_series`), in memory.  With
    ``systematics`` every rehearsal draws its own instrument, velocity, temperature and mass, so the
    scatter includes the systematic errors (compare with the total σ); without, compare with
    σ_stat.  The returned errors are the fits' statistical errors.
    """
    rng = np.random.default_rng(seed)
    camp = cplan.campaign
    ctx = build_context(camp)
    comp = next(c for c in cplan.compounds if c.compound == compound)
    if systematics:
        import pandas as pd

        parts, truths = [], []
        for i in range(n):
            tab, tr = rehearsal_scans(cplan, rng, systematics=True, only=(compound, temperature_K))
            tab["compound"] = f"{compound}#{i}"
            tab["scan"] += i * 100000
            tab["time_s"] += i * 1e6
            tr["compound"] = f"{compound}#{i}"
            parts.append(tab)
            truths.append(tr)
        table = pd.concat(parts, ignore_index=True)
    else:
        table, _ = rehearsal_scans(
            cplan, rng, systematics=False, copies=n, only=(compound, temperature_K)
        )
    red = reduce_table(table, camp.nominal()["instrument.grating_period"], source="rehearsal")
    series, problems, _ = series_from_reduction(red)
    if problems:
        raise CompoundError("; ".join(problems.values()))
    fits, errs = [], []
    for name in sorted(series):
        (s,) = series[name]
        f = fit_series(
            s,
            ctx.coupling,
            comp.mass_u * AMU,
            camp.layout,
            fit_offset=camp.settings.fit_offset,
            nodes=camp.settings.velocity_nodes,
        )
        fits.append(alpha_a3_from_si(f.alpha_si))
        errs.append(alpha_a3_from_si(math.sqrt(f.covariance[0, 0])))
    return np.asarray(fits), np.asarray(errs)


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int | float):
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    raise TypeError(f"cannot write {v!r} to TOML")


def write_rehearsal(cplan: CampaignPlan, out_dir: str | Path, seed: int | None = None) -> Path:
    """Write ``campaign.toml``, ``scans.csv``, ``compounds.csv`` and ``truth.csv`` of a rehearsal.

    The campaign keeps the plan's ``[campaign]``, ``[instrument]``, ``[deflector]`` and
    ``[analysis]`` tables (field-map and waveform files are copied next to it), so
    ``polarbeam analyze out_dir/campaign.toml`` analyses it as it would the real data.
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    camp = cplan.campaign
    rng = np.random.default_rng(cplan.settings.seed if seed is None else seed)
    table, truth = rehearsal_scans(cplan, rng, systematics=True)
    raw = camp.raw
    lines = []
    title = raw.get("campaign", {}).get("title", camp.title)
    lines += ["[campaign]", f"title = {_toml_value('Rehearsal (simulated) of the plan: ' + title)}"]
    desc = (
        "Simulated raw scans of a planned campaign; invented data for rehearsing the analysis, "
        "not measurements."
    )
    lines += [f"description = {_toml_value(desc)}", ""]
    for tname in ("instrument", "deflector", "analysis"):
        tab = dict(raw.get(tname, {}))
        if not tab:
            continue
        for key in ("field_map", "waveform"):
            if key in tab:
                src = (camp.path.parent / tab[key]).resolve()
                shutil.copyfile(src, out / src.name)
                tab[key] = src.name
        lines.append(f"[{tname}]")
        lines += [f"{k} = {_toml_value(v)}" for k, v in tab.items()]
        lines.append("")
    lines += ["[data]", 'scans = "scans.csv"', 'compounds = "compounds.csv"']
    sdf = raw.get("data", {}).get("structures")
    if isinstance(sdf, str):  # the structures travel with the rehearsal for the cross-check
        src = (camp.path.parent / sdf).resolve()
        shutil.copyfile(src, out / src.name)
        lines.append(f"structures = {_toml_value(src.name)}")
    lines.append("")
    write_text_atomic(
        out / "scans.csv", table.to_csv(index=False, float_format="%.10g", lineterminator="\n")
    )
    import csv
    import io

    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(["compound", "mass_u", "mass_err_u", "smiles"])
    for c in cplan.compounds:
        if c.status != "failed":
            writer.writerow([c.compound, f"{c.mass_u:.8g}", f"{c.mass_err_u:g}", c.smiles or ""])
    write_text_atomic(out / "compounds.csv", buf.getvalue())
    write_text_atomic(
        out / "truth.csv",
        "# invented truth of the simulated rehearsal (not measurements)\n"
        + truth.to_csv(index=False, float_format="%.8g", lineterminator="\n"),
    )
    write_text_atomic(out / "campaign.toml", "\n".join(lines))
    return out / "campaign.toml"


# ---------------------------------------------------------------------------------------------
# Output: plan.csv, plan.json, plan.md, plots
# ---------------------------------------------------------------------------------------------


def _fmt(x, spec: str = ".3g") -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "—"
    return format(x, spec)


def _render_markdown(p: CampaignPlan) -> str:
    st = p.settings
    lines = [
        f"# Plan: {p.campaign.title}",
        "",
        f"Campaign `{p.campaign.path.name}`, layout {p.campaign.layout}, deflector "
        f"{p.campaign.model}.  Coupling C = {p.coupling:.6g} (stated-input scale error "
        f"σ_C/C = {p.coupling_rel_err:.3%}).  Scan {st.scan_time:g} s + {st.scan_dead_time:g} s "
        f"dead time, {st.bins} bins, zero-field visibility {st.visibility:g}, floor "
        f"{st.visibility_floor:.3g}, phase limit {st.phase_limit:g} rad, a reference every "
        f"{st.reference_every} signal scans.",
        "",
        "| compound | T (K) | α_eff pred (Å³) | σ(α_eff) (Å³) | stat | even ladder | V_max (V) "
        "| limited by | ladder (V) | scans/V | beam time (h) | to target (h) |",
        "|---|---|---|---|---|---|---|---|---|---|---|---|",
    ]
    for c in p.compounds:
        for s in c.series:
            even_tot = math.sqrt(
                s.even.sigma_stat_A3**2 + s.sigma_velocity_A3**2 + s.sigma_scale_A3**2
            )
            tt = s.beam_time_target_s
            lines.append(
                f"| {c.compound} | {s.temperature_K:g} | {s.alpha_eff_pred_A3:.2f} ± "
                f"{s.alpha_eff_pred_err_A3:.2f} | {s.sigma_total_A3:.3g} | "
                f"{s.sigma_stat_A3:.3g} | {even_tot:.3g} | {s.voltage_max_V:.4g} | "
                f"{s.voltage_max_reason} | {', '.join(f'{v:.4g}' for v in s.ladder.levels_V)} | "
                f"{s.ladder.scans_per_voltage} | {s.beam_time_s / 3600:.2f} | "
                f"{_fmt(None if tt is None else tt / 3600, '.2f')} |"
            )
    lines += [
        "",
        "| compound | source | mass (u) | α pred (Å³) | μ pred (D) | σ(α) (Å³) | σ(μ) (D) "
        "| μ limit (D) | temperatures (K) | status |",
        "|---|---|---|---|---|---|---|---|---|---|",
    ]
    for c in p.compounds:
        if c.status == "failed":
            lines.append(f"| {c.compound} | — | — | — | — | — | — | — | — | failed: {c.message} |")
            continue
        lines.append(
            f"| {c.compound} | {c.source} | {c.mass_u:.3f} | {_fmt(c.alpha_pred_A3, '.2f')} | "
            f"{_fmt(c.dipole_pred_D, '.2f')} | "
            f"{_fmt(c.debye.sigma_alpha_A3 if c.debye else None)} | {_fmt(c.sigma_dipole_D)} | "
            f"{_fmt(c.dipole_limit_D)} | {', '.join(f'{s.temperature_K:g}' for s in c.series)} "
            f"| {c.status} |"
        )
    sets = [(c.compound, r) for c in p.compounds for r in c.temperature_sets]
    if sets:
        lines += [
            "",
            f"Temperature sets compared (criterion: {st.temperature_criterion}):",
            "",
            "| compound | set | temperatures (K) | σ(α) (Å³) | σ(⟨μ²⟩) (D²) | corr |",
            "|---|---|---|---|---|---|",
        ]
        for name, r in sets:
            lines.append(
                f"| {name} | {r['label']} | {', '.join(f'{t:.0f}' for t in r['temperatures_K'])} "
                f"| {_fmt(r['sigma_alpha_A3'])} | {_fmt(r['sigma_mu2_D2'])} | "
                f"{_fmt(r['corr'], '.2f')} |"
            )
    notes = [
        w if w.startswith(c.compound) else f"{c.compound}: {w}"
        for c in p.compounds
        for w in c.warnings
    ]
    if notes or p.notes:
        lines += ["", "Notes:", ""] + [f"* {n}" for n in (*p.notes, *notes)]
    lines += ["", "## Safety", "", CAUTIONS, ""]
    return "\n".join(lines)


def _plot_compound(c: CompoundPlan, cplan: CampaignPlan, path: Path) -> None:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    st = cplan.settings
    fig = Figure(figsize=(7, 6))
    FigureCanvasAgg(fig)
    ax1, ax2 = fig.subplots(2, 1, sharex=True)
    for s in c.series:
        model = s.model
        vv = np.linspace(0.0, 1.15 * s.voltage_max_V, 300)[1:]
        ph, mod = model.phase(vv)
        (line,) = ax1.plot(vv, ph, label=f"{s.temperature_K:g} K")
        ax2.plot(vv, st.visibility * mod, color=line.get_color())
        lev = np.asarray(s.ladder.levels_V)
        ax1.plot(lev, s.ladder.phase_rad, "o", color=line.get_color())
        ax2.plot(lev, s.ladder.visibility, "o", color=line.get_color())
        ax1.axvline(s.voltage_max_V, color=line.get_color(), ls=":", lw=0.8)
    ax1.axhline(st.phase_limit, color="0.4", ls="--", lw=0.8, label="phase limit")
    ax2.axhline(st.visibility_floor, color="0.4", ls="--", lw=0.8, label="visibility floor")
    ax1.set_ylabel("predicted phase (rad)")
    ax2.set_ylabel("predicted visibility")
    ax2.set_xlabel("deflector voltage (V)")
    ax1.set_title(f"{c.compound}: ladder (points) and V_max (dotted)")
    ax1.legend(fontsize=8)
    ax2.legend(fontsize=8)
    fig.tight_layout()
    fig.savefig(path, dpi=110)


def write_plan(cplan: CampaignPlan, out: str | Path, *, rehearsal: bool | None = None) -> Path:
    """Write ``plan.csv``, ``plan.json``, ``plan.md``, one PNG per compound and ``rehearsal/``.

    Plots need matplotlib (extra ``polarbeam[plots]``); without it they are skipped with a note.
    """
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    table = cplan.table()
    write_text_atomic(
        out / "plan.csv", table.to_csv(index=False, float_format="%.6g", lineterminator="\n")
    )
    notes = list(cplan.notes)
    try:
        import matplotlib  # noqa: F401

        have_mpl = True
    except ImportError:
        have_mpl = False
        notes.append("plots skipped: matplotlib is not installed (pip install polarbeam[plots])")
    if have_mpl:
        for c in cplan.compounds:
            if c.status != "failed":
                safe = "".join(ch if ch.isalnum() or ch in "-_." else "_" for ch in c.compound)
                _plot_compound(c, cplan, out / f"plan_{safe}.png")
    do_rehearsal = cplan.settings.rehearsal if rehearsal is None else rehearsal
    if do_rehearsal and any(c.status != "failed" for c in cplan.compounds):
        write_rehearsal(cplan, out / "rehearsal")
    final = replace(cplan, notes=tuple(notes))
    write_text_atomic(out / "plan.md", final.to_markdown())
    write_text_atomic(
        out / "plan.json",
        json.dumps(_clean(final.summary()), indent=2, default=_json_default) + "\n",
    )
    return out


def _clean(o):
    """Non-finite floats → None (JSON has no NaN or Infinity), recursively."""
    if isinstance(o, dict):
        return {k: _clean(v) for k, v in o.items()}
    if isinstance(o, list | tuple):
        return [_clean(v) for v in o]
    if isinstance(o, float | np.floating) and not math.isfinite(o):
        return None
    return o


def _json_default(o):
    if isinstance(o, np.generic):
        return o.item()
    if isinstance(o, np.ndarray):
        return o.tolist()
    if isinstance(o, Path):
        return str(o)
    if isinstance(o, float) and not math.isfinite(o):
        return None
    raise TypeError(f"not JSON serialisable: {type(o).__name__}")
