"""Closed forms and fast paths of the rotor response (plain functions, SI: energies in joules).

* Second-order Stark energies of linear rotors and symmetric tops (Townes & Schawlow eq. 10-8
  and 10-10; Gordy & Cook ch. 10 — from memory, checked in the tests against the OCS values of
  the issue and against diagonalisation):

  W⁽¹⁾(J,K,M) = −μE·KM/(J(J+1)),
  W⁽²⁾(J,K,M) = (μ²E²/2B)·[ (J²−K²)(J²−M²)/(J³(2J−1)(2J+1))
                             − ((J+1)²−K²)((J+1)²−M²)/((J+1)³(2J+1)(2J+3)) ],
  W⁽²⁾(0,0,0) = −μ²E²/(6B).

* The weak-field orientational polarizability of a thermal ensemble: each state adds −∂²W/∂E²,
  the first-order (K·M) states cancel in pairs ±M. Summed over M, a (J, K) level gives
  (μ²/3B)·K²·(1/J² − 1/(J+1)²) for J ≥ 1 and μ²/3B for J = 0, so a linear rotor responds only
  through J = 0: α_or = p₀ μ²/(3B) ≈ μ²/(3kT)·(1 − B/(3kT)).

* The high-temperature symmetric-top ratio R = 1 − ⟨cos²χ⟩, χ the angle between J and the
  figure axis, averaged over the classical thermal distribution of J in the body frame (an
  anisotropic Gaussian): with ρ = B_⊥/B_axis,

  ⟨cos²χ⟩ = ρ/(ρ−1)·[1 − arctan(√(ρ−1))/√(ρ−1)]      (ρ > 1, oblate),
  ⟨cos²χ⟩ = ρ/(1−ρ)·[artanh(√(1−ρ))/√(1−ρ) − 1]       (ρ < 1, prolate),

  1/3 for ρ = 1 (R = 2/3, a spherical top), R = π/2 − 1 for a flat oblate top (ρ = 2), R → 1
  for a long prolate one (ρ → 0). Derived here from 1/s = ∫₀^∞ e^(−ts) dt.

* The classical limit of an asymmetric top (hot, μE larger than the asymmetry doublets,
  μE ≪ kT): the part of μ that survives the torque-free motion is its time average along J,
  ⟨μ·Ĵ⟩ = μ_a⟨J_a⟩/J on orbits circling a, μ_c⟨J_c⟩/J on orbits circling c (μ_b averages out),
  with ⟨J_3⟩ = √(I₃(J² − 2E I₁)/(I₃ − I₁))·π/(2K(k)) from the Euler-top solution (Landau &
  Lifshitz, Mechanics §37; from memory); R = 1 − ⟨(⟨μ·Ĵ⟩/μ)²⟩ over the thermal directions of J.
"""

from __future__ import annotations

import math

import numpy as np

from polarbeam._util.optional import lazy

_special = lazy("scipy.special", "numerical routines")

__all__ = [
    "classical_asymmetric_ratio",
    "first_order_energy",
    "second_order_energy",
    "symmetric_high_temperature_ratio",
    "weak_field_ratio",
]


def first_order_energy(j, k, m, mu: float, field: float):
    """W⁽¹⁾ = −μE·KM/(J(J+1)) (J) of a symmetric top; 0 for J = 0."""
    j = np.asarray(j, dtype=float)
    jj = np.where(j > 0, j * (j + 1), 1.0)
    return -mu * field * np.asarray(k, float) * np.asarray(m, float) / jj


def second_order_energy(j, k, m, b: float, mu: float, field: float):
    """W⁽²⁾ (J) of a linear rotor (K = 0) or symmetric top (B the perpendicular constant)."""
    j = np.asarray(j, dtype=float)
    k = np.asarray(k, dtype=float)
    m = np.asarray(m, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        low = np.where(
            j > 0, (j**2 - k**2) * (j**2 - m**2) / (j**3 * (2 * j - 1) * (2 * j + 1)), 0.0
        )
    high = (
        ((j + 1) ** 2 - k**2) * ((j + 1) ** 2 - m**2) / ((j + 1) ** 3 * (2 * j + 1) * (2 * j + 3))
    )
    return (mu * field) ** 2 / (2.0 * b) * (low - high)


def weak_field_ratio(b_perp: float, b_axis: float | None, kt: float, j_max: int | None = None):
    """R = α_or/(μ²/3kT) in the weak-field limit (exact second order, quantum populations).

    ``b_axis`` None: a linear rotor (K = 0 only). Energies in joules.
    """
    b_min = b_perp if b_axis is None else min(b_perp, b_axis)
    if j_max is None:
        j_max = math.ceil(math.sqrt(25.0 * kt / b_min)) + 6
    j = np.arange(0, j_max + 1, dtype=float)
    if b_axis is None:
        k = np.zeros((1, 1))
    else:
        k = np.arange(-j_max, j_max + 1, dtype=float)[None, :]
    jj = j[:, None]
    allowed = np.abs(k) <= jj
    w0 = b_perp * jj * (jj + 1) + (0.0 if b_axis is None else (b_axis - b_perp)) * k**2
    w0 = np.where(allowed, w0, np.inf)
    pop = np.exp(-(w0 - w0[allowed].min()) / kt)  # per M state
    z = float(np.sum(pop * (2 * jj + 1)))
    with np.errstate(divide="ignore", invalid="ignore"):
        per_level = np.where(jj > 0, k**2 * (1.0 / jj**2 - 1.0 / (jj + 1) ** 2), 1.0)
    alpha_over_mu2 = float(np.sum(np.where(allowed, pop * per_level, 0.0))) / z / (3.0 * b_perp)
    return alpha_over_mu2 * 3.0 * kt


def symmetric_high_temperature_ratio(rho: float) -> float:
    """R(ρ) = 1 − ⟨cos²χ⟩ of a hot symmetric top, ρ = B_⊥/B_axis (closed form, see above)."""
    if rho <= 0:
        raise ValueError(f"rho must be > 0, found {rho!r}")
    c = rho - 1.0
    if abs(c) < 1e-6:  # series about the spherical top: ⟨cos²χ⟩ = 1/3 + 2c/15 + …
        cos2 = 1.0 / 3.0 + 2.0 * c / 15.0
    elif c > 0:
        s = math.sqrt(c)
        cos2 = rho / c * (1.0 - math.atan(s) / s)
    else:
        d = math.sqrt(-c)
        cos2 = rho / (-c) * (math.atanh(d) / d - 1.0)
    return 1.0 - cos2


def _orbit_mean_projection(n, consts, direction):
    """⟨μ·Ĵ⟩/μ over the torque-free orbit of each unit J direction n (rows; a, b, c)."""
    a_, b_, c_ = consts
    inv = 1.0 / (2.0 * np.asarray(consts))  # "moments" I = 1/(2A) (any common scale works)
    i1, i2, i3 = inv  # I_a < I_b < I_c
    energy2 = 2.0 * (a_ * n[:, 0] ** 2 + b_ * n[:, 1] ** 2 + c_ * n[:, 2] ** 2)  # 2E at J = 1
    m2 = np.ones(len(n))
    out = np.zeros(len(n))
    if i3 - i1 <= 0:  # a spherical top: J stays fixed in the body
        return n @ np.asarray(direction)
    around_c = m2 > energy2 * i2  # J²/(2E) > I_b: orbits circling the c axis
    for circ, (lo, hi, axis) in ((around_c, (i1, i3, 2)), (~around_c, (i3, i1, 0))):
        if not np.any(circ):
            continue
        e2, sgn = energy2[circ], np.sign(n[circ, axis])
        amp2 = hi * (m2[circ] - e2 * lo) / (hi - lo)
        num = (i2 - lo) * (e2 * hi - m2[circ])
        den = (hi - i2) * (m2[circ] - e2 * lo)
        with np.errstate(divide="ignore", invalid="ignore"):
            k2 = np.clip(np.where(den > 0, num / den, 1.0), 0.0, 1.0)
            kk = _special.ellipk(k2)
            mean = np.where(np.isfinite(kk), np.sqrt(np.clip(amp2, 0, None)) * np.pi / (2 * kk), 0)
        out[circ] = sgn * mean * direction[axis]
    return out


def classical_asymmetric_ratio(
    constants: tuple[float, float, float],
    direction: tuple[float, float, float],
    n_theta: int = 160,
    n_phi: int = 160,
) -> float:
    """R of a hot asymmetric top in the classical limit (A ≥ B ≥ C; direction along a, b, c).

    The thermal directions of J in the body frame have the density ∝ (Σ A_g n_g²)^(−3/2) (the
    angular marginal of the anisotropic Gaussian); Gauss–Legendre in cos θ (θ from the c axis)
    times a uniform grid in φ, folded into one octant.
    """
    a_, b_, c_ = constants
    x, wx = np.polynomial.legendre.leggauss(n_theta)
    ct = 0.5 * (x + 1.0)  # cos θ in (0, 1): the octant
    wt = 0.5 * wx
    phi = (np.arange(n_phi) + 0.5) * (0.5 * np.pi / n_phi)
    ct_g, ph_g = np.meshgrid(ct, phi, indexing="ij")
    st_g = np.sqrt(1.0 - ct_g**2)
    n = np.stack([st_g * np.cos(ph_g), st_g * np.sin(ph_g), ct_g], axis=-1).reshape(-1, 3)
    w = (wt[:, None] * np.ones(n_phi)[None, :]).reshape(-1)
    dens = (a_ * n[:, 0] ** 2 + b_ * n[:, 1] ** 2 + c_ * n[:, 2] ** 2) ** -1.5
    u = np.asarray(direction, dtype=float)
    u = u / np.linalg.norm(u)
    proj = _orbit_mean_projection(n, constants, np.abs(u))
    return 1.0 - float(np.sum(w * dens * proj**2) / np.sum(w * dens))
