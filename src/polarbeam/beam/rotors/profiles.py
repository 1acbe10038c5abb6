"""Whole deflection profiles of rigid rotors (plain functions): the undeflected beam shape
displaced by every rotational state's and velocity class's own deflection.

A state s of a rigid molecule in a field E feels the force (μ_eff,s + αE)·∂E/∂x, i.e. it moves
like a particle of α_eff,s = α + μ_eff,s/E; in the beam-profile layout its displacement at speed
v is κ_s/v² with κ_s = α_eff,s·C·V²/m (C the coupling of layout and deflector, as for the
centroid). The profile recorded at voltage V is

    n(x) = b + A·Σ_s Σ_v p_s w_v·g(x − x₀ − κ_s/v²),

g the undeflected shape (a Gaussian of width σ centred at x₀, integrated over each detector bin),
p_s the Boltzmann populations at the rotational temperature, w_v the velocity weights. The sum is
made on a fine grid of displacements (cloud-in-cell weights), then convolved with g.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from polarbeam._util.optional import lazy
from polarbeam.constants import BOLTZMANN

_special = lazy("scipy.special", "numerical routines")

__all__ = [
    "Profile",
    "ProfileSeries",
    "displacement_density",
    "expected_counts",
    "reweighted_populations",
]


@dataclass(frozen=True)
class Profile:
    """One recorded profile: voltage (V), bin centres (m) and counts."""

    voltage: float
    positions: np.ndarray
    counts: np.ndarray


@dataclass(frozen=True)
class ProfileSeries:
    """The profiles of one compound at one source temperature."""

    label: str
    velocity: float
    spread: float
    profiles: tuple[Profile, ...]
    rotational_k: float | None = None  # stated rotational temperature; None: fitted
    temperature_k: float | None = None  # the source temperature (K), for the outputs


def reweighted_populations(states, t_ref_k: float, t_k: float) -> np.ndarray:
    """Populations at T from states computed at T_ref ≥ T (same basis, same field)."""
    de = states.energy_free - states.energy_free.min()
    with np.errstate(over="ignore", under="ignore"):
        w = states.population * np.exp(
            -de * (1.0 / (BOLTZMANN * t_k) - 1.0 / (BOLTZMANN * t_ref_k))
        )
    return w / w.sum()


def displacement_density(shifts: np.ndarray, weights: np.ndarray, grid: np.ndarray) -> np.ndarray:
    """Weights of the displacements ``shifts`` spread on the uniform ``grid`` (cloud in cell)."""
    h = grid[1] - grid[0]
    u = np.clip((shifts.ravel() - grid[0]) / h, 0.0, grid.size - 1.000001)
    i = np.floor(u).astype(int)
    f = u - i
    out = np.bincount(i, weights.ravel() * (1.0 - f), minlength=grid.size)
    out += np.bincount(i + 1, weights.ravel() * f, minlength=grid.size)[: grid.size]
    return out


def expected_counts(
    positions: np.ndarray,
    bin_width: float,
    centre: float,
    width: float,
    background: float,
    amplitude: float,
    shifts: np.ndarray | None = None,
    weights: np.ndarray | None = None,
) -> np.ndarray:
    """Expected counts per bin: background + amplitude × (Gaussian beam displaced by the
    weighted ``shifts``; undisplaced when None)."""
    x = np.asarray(positions, dtype=float)
    s2 = math.sqrt(2.0) * width

    def bin_integral(offset):
        lo = (x[:, None] - 0.5 * bin_width - centre - offset) / s2
        hi = (x[:, None] + 0.5 * bin_width - centre - offset) / s2
        return 0.5 * (_special.erf(hi) - _special.erf(lo))

    if shifts is None:
        return background + amplitude * bin_integral(np.zeros(1))[:, 0]
    lo, hi = float(np.min(shifts)), float(np.max(shifts))
    h = min(width / 6.0, bin_width / 2.0)
    if hi - lo < h:
        grid = np.array([lo, lo + h])
    else:
        grid = np.arange(lo, hi + 2 * h, h)
    dens = displacement_density(shifts, weights, grid)
    keep = dens > 0
    return background + amplitude * (bin_integral(grid[keep]) @ dens[keep])
