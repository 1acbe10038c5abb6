"""Velocity averaging over the detected velocity distribution.

The distribution is any :class:`~polarbeam.beam.distributions.VelocityDistribution` (today the
Gaussian of mean v̄ and standard deviation σ_v, truncated at v > 0, by Gauss–Hermite quadrature).

For a spatial layout the shift of one velocity class is Δx(v) = κ/v² with κ ∝ α_eff V².

* ``beam-profile``: the centroid is ⟨Δx⟩ = κ⟨v⁻²⟩ — linear in α_eff, but not κ/v̄².
* ``talbot-lau``: each class adds its own fringe, so the detected fringe is the phasor average
  Z = ⟨exp(iκ'/v²)⟩ (κ' = 2πκ/d); its argument is the measured phase, its modulus the visibility
  reduction.  The phase is tracked continuously from κ' = 0 (no 2π wrapping), as an experiment
  stepping the voltage up follows it.
"""

from __future__ import annotations

import numpy as np

from polarbeam.beam.distributions import VelocityDistribution

__all__ = [
    "averaged_phasor_phase",
    "fringe_nodes",
    "mean_inverse_square",
]


def fringe_nodes(dist: VelocityDistribution, n: int = 48) -> tuple[np.ndarray, np.ndarray]:
    """Quadrature nodes and weights of ``dist``, the weights times the nodes' relative contrast."""
    v, w = dist.nodes(n)
    c = dist.contrast(n)
    return (v, w) if c is None else (v, w * np.asarray(c, dtype=float))


def mean_inverse_square(dist: VelocityDistribution, n: int = 48) -> float:
    """⟨v⁻²⟩ of the distribution (s²/m²)."""
    v, w = dist.nodes(n)
    return float(np.sum(w / v**2))


# The unwrapped phase of one distribution is tabulated once on a fixed κ grid (step chosen so the
# fastest component turns by at most 0.3 rad per step) and only used to count 2π turns: the phase
# returned is arg Z(κ) evaluated directly plus 2π times that count, so it does not depend on which
# κ were asked for before (a fit's iterations, or other compounds in the same worker).
_STEP_RAD = 0.3
_MAX_TABLE = 200_000
_turn_tables: dict[tuple, tuple[float, np.ndarray]] = {}


def _phasor(kappa: np.ndarray, u: np.ndarray, w: np.ndarray) -> np.ndarray:
    return (w[None, :] * np.exp(1j * np.outer(kappa, u))).sum(axis=1)


def _turn_table(key: tuple, u, w, kmax: float):
    """(grid step, unwrapped phase at j·step for j = 0…) covering at least [0, kmax]."""
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


def averaged_phasor_phase(kappa, dist: VelocityDistribution, n: int = 48):
    """Continuous phase arg⟨exp(iκ/v²)⟩ and modulus |⟨exp(iκ/v²)⟩| for each κ (rad·m²/s²).

    The phase is odd in κ and followed continuously from κ = 0 along a path fine enough that no
    component of the average turns by more than 0.3 rad between neighbouring path points.
    """
    kappa = np.asarray(kappa, dtype=float)
    v, w = fringe_nodes(dist, n)
    u = 1.0 / v**2
    if v.size == 1 and dist.contrast(n) is None:
        return kappa * u[0], np.ones_like(kappa)
    kabs = np.abs(kappa).ravel()
    kmax = float(kabs.max(initial=0.0))
    table = _turn_table((*dist.key, int(n)), u, w, kmax)
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
