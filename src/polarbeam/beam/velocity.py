"""Velocity averaging over the detected velocity distribution.

The detected distribution is taken as Gaussian with mean v̄ and standard deviation σ_v
(σ_v = 0: monochromatic), truncated at v > 0.  Averages use Gauss–Hermite quadrature.

For a spatial layout the shift of one velocity class is Δx(v) = κ/v² with κ ∝ α_eff V².

* ``beam-profile``: the centroid is ⟨Δx⟩ = κ⟨v⁻²⟩ — linear in α_eff, but not κ/v̄².
* ``talbot-lau``: each class adds its own fringe, so the detected fringe is the phasor average
  Z = ⟨exp(iκ'/v²)⟩ (κ' = 2πκ/d); its argument is the measured phase, its modulus the visibility
  reduction.  The phase is tracked continuously from κ' = 0 (no 2π wrapping), as an experiment
  stepping the voltage up follows it.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

__all__ = [
    "averaged_phasor_phase",
    "mean_inverse_square",
    "velocity_nodes",
]


@lru_cache(maxsize=8)
def _hermite(n: int):
    x, w = np.polynomial.hermite_e.hermegauss(n)
    return x, w / w.sum()


def velocity_nodes(mean: float, spread: float, n: int = 48) -> tuple[np.ndarray, np.ndarray]:
    """Quadrature nodes and normalised weights of the truncated Gaussian velocity distribution."""
    if spread <= 0:
        return np.array([float(mean)]), np.array([1.0])
    x, w = _hermite(n)
    v = mean + spread * x
    keep = (v > 0.02 * mean) & (w > 1e-13 * w.max())  # drop negligible far-tail nodes
    v, w = v[keep], w[keep]
    return v, w / w.sum()


def mean_inverse_square(mean: float, spread: float, n: int = 48) -> float:
    """⟨v⁻²⟩ of the distribution (s²/m²)."""
    v, w = velocity_nodes(mean, spread, n)
    return float(np.sum(w / v**2))


# The unwrapped phase of one distribution is tabulated once on a fixed κ grid (step chosen so the
# fastest component turns by at most 0.3 rad per step) and only used to count 2π turns: the phase
# returned is arg Z(κ) evaluated directly plus 2π times that count, so it does not depend on which
# κ were asked for before (a fit's iterations, or other compounds in the same worker).
_STEP_RAD = 0.3
_MAX_TABLE = 200_000
_turn_tables: dict[tuple[float, float, int], tuple[float, np.ndarray]] = {}


def _phasor(kappa: np.ndarray, u: np.ndarray, w: np.ndarray) -> np.ndarray:
    return (w[None, :] * np.exp(1j * np.outer(kappa, u))).sum(axis=1)


def _turn_table(mean: float, spread: float, n: int, u, w, kmax: float):
    """(grid step, unwrapped phase at j·step for j = 0…) covering at least [0, kmax]."""
    key = (float(mean), float(spread), int(n))
    step = _STEP_RAD / float(u.max())
    need = int(np.ceil(kmax / step)) + 2
    if need > _MAX_TABLE:
        return None
    hit = _turn_tables.get(key)
    if hit is not None and hit[1].size >= need:
        return hit
    size = max(need, 64, 2 * (hit[1].size if hit is not None else 0))
    size = min(size, _MAX_TABLE)
    grid = step * np.arange(size)
    table = (step, np.unwrap(np.angle(_phasor(grid, u, w))))
    if len(_turn_tables) >= 64:  # bounded: a worker walks through compounds one by one
        _turn_tables.pop(next(iter(_turn_tables)))
    _turn_tables.pop(key, None)
    _turn_tables[key] = table
    return table


def averaged_phasor_phase(kappa, mean: float, spread: float, n: int = 48):
    """Continuous phase arg⟨exp(iκ/v²)⟩ and modulus |⟨exp(iκ/v²)⟩| for each κ (rad·m²/s²).

    The phase is odd in κ and followed continuously from κ = 0 along a path fine enough that no
    component of the average turns by more than 0.3 rad between neighbouring path points.
    """
    kappa = np.asarray(kappa, dtype=float)
    v, w = velocity_nodes(mean, spread, n)
    u = 1.0 / v**2
    if v.size == 1:
        return kappa * u[0], np.ones_like(kappa)
    kabs = np.abs(kappa).ravel()
    kmax = float(kabs.max(initial=0.0))
    table = _turn_table(mean, spread, n, u, w, kmax)
    if table is None:
        return _averaged_phasor_phase_path(kappa, u, w)
    step, ref = table
    z = _phasor(kabs, u, w)
    direct = np.angle(z)
    near = ref[np.minimum(np.rint(kabs / step).astype(np.int64), ref.size - 1)]
    turns = np.rint((near - direct) / (2 * np.pi))
    phase = (direct + 2 * np.pi * turns).reshape(kappa.shape) * np.sign(kappa)
    return phase, np.abs(z).reshape(kappa.shape)


def _averaged_phasor_phase_path(kappa, u, w):
    """Fallback for very large κ: unwrap along a path of at most 20 000 steps up to max |κ|."""
    kabs = np.abs(kappa).ravel()
    kmax = float(kabs.max(initial=0.0))
    nstep = int(min(20000, max(8, np.ceil(kmax * u.max() / _STEP_RAD))))
    grid = np.linspace(0.0, kmax, nstep + 1)
    allk = np.concatenate([grid, kabs])
    order = np.argsort(allk, kind="stable")
    z = _phasor(allk[order], u, w)
    ph = np.unwrap(np.angle(z))
    out_phase = np.empty_like(allk)
    out_mod = np.empty_like(allk)
    out_phase[order] = ph
    out_mod[order] = np.abs(z)
    phase = out_phase[grid.size :].reshape(kappa.shape) * np.sign(kappa)
    modulus = out_mod[grid.size :].reshape(kappa.shape)
    return phase, modulus
