"""Independent numerical models of the interferometer (no Talbot coefficients): checks.

* :func:`wave_harmonics` — point sources across a G1 slit emit paraxial cylindrical waves; each
  Fourier component e^{2πijx/d} of the G2 amplitude transmission is carried to G3 by the exact
  Fresnel (Gaussian) integral, giving ψ₃ ∝ Σ_j b_j e^{−iπj(x₁+x₃)/d} e^{−iπj²ξ/2}; the intensity
  is integrated over the G1 slit and the G3 slits at every shift x_s, and the first harmonic is
  read off by FFT over x_s. Absorption with the molecule kept is the incoherent sum over the
  Kraus branches K_N = √(n0^N/N!) cos^N(πx/d) e^{−n0 cos²(πx/d)/2} (N absorbed photons).
* :func:`ray_harmonics` — straight rays: uniform x₁ in the G1 slit, uniform x₂ over a G2 period
  (a flat transverse-momentum distribution), the kick ħφ'(x₂) and Poisson numbers of ±h/λ_L
  photon kicks, landing at x₃ = 2x₂ − x₁ + Δ; the first harmonic is A₁⁽³⁾⟨e^{2πix₃/d}⟩.

Both return (c₁, c₀) per velocity, normalised like
:meth:`~polarbeam.beam.talbot.interferometer.TalbotLauInterferometer.harmonics`.
"""

from __future__ import annotations

import math

import numpy as np

from polarbeam._util.optional import lazy
from polarbeam.beam.talbot.coefficients import slit_coefficient

stats = lazy("scipy.stats", "numerical routines")

__all__ = ["ray_harmonics", "wave_harmonics"]


def _branches(phi0: float, n0: float, absorbed: str, x: np.ndarray):
    """Amplitude transmissions of the Kraus branches on the grid x (units of d)."""
    c = np.cos(np.pi * x)
    base = np.exp((-0.5 * n0 + 1j * phi0) * c**2)
    if absorbed == "lost" or n0 == 0:
        return [base]
    n_max = int(n0 + 12.0 * math.sqrt(n0) + 12)
    return [math.sqrt(stats.poisson.pmf(n, n0) * math.exp(n0)) * c**n * base for n in range(n_max)]


def wave_harmonics(
    xi: float,
    f1: float,
    f3: float,
    phi0: float = 0.0,
    n0: float = 0.0,
    absorbed: str = "kept",
    second_open_fraction: float | None = None,
    grid: int = 16384,
):
    """(c₁, c₀) from point-source wave propagation (light grating, or slits if
    ``second_open_fraction`` is given), integrated in real space on a grid of ``grid`` points.

    For one source point x₁ the intensity at G3 depends on u = (x₁ + x₃)/d only and has period 4
    in u (2 for a grating of period d, doubled by the h/(2d) photon kicks); it is sampled exactly
    on the grid (FFT of the propagated Fourier components). The
    signal S(x_s) = ∫_{slit 1} dx₁ ∫_{slits 3} dx₃ I is the correlation of I with the
    trapezoid K(u) = (slit₁ ∗ slit₃)(u), integrated by the trapezoid rule on the periodic grid.
    """
    m = int(grid)
    # Kraus operators cos^N(πx/d) of odd N have period 2d (photon kick h/λ_L = h/(2d)): work with
    # orders q = j/2 of e^{2πiqx/d}; for one source point the intensity has period 4 in u
    j = np.fft.fftfreq(m, 1.0 / m).astype(int)  # order q = j/2 stored at index j mod m
    if second_open_fraction is not None:
        f2 = float(second_open_fraction)
        even = j % 2 == 0
        amp_coeffs = [np.where(even, f2 * np.sinc(0.5 * j * f2), 0.0) + 0j]  # exact, truncated
    else:
        n = m // 4
        x = 2.0 * (np.arange(n) + 0.5) / n  # two periods of G2 (units of d)
        jj = np.fft.fftfreq(n, 1.0 / n).astype(int)
        amp_coeffs = []
        for amp in _branches(phi0, n0, absorbed, x):
            b = np.fft.fft(amp) / n * np.exp(-1j * np.pi * jj / n)  # grid offset by half a step
            full = np.zeros(m, dtype=complex)
            full[jj % m] = b
            amp_coeffs.append(full)
    intensity = np.zeros(m)
    q = 0.5 * j.astype(float)
    for b in amp_coeffs:
        # ψ(u_k) = Σ_q b_q e^{−iπq²ξ/2} e^{−iπ q u_k}, u_k = 4k/m: a forward DFT
        psi = np.fft.fft(b * np.exp(-0.5j * np.pi * q**2 * xi))
        intensity += np.abs(psi) ** 2
    u = 4.0 * np.arange(m) / m
    u = np.where(u >= 2.0, u - 4.0, u)  # centred on 0, period 4

    def trapezoid(y):
        y = (y + 2.0) % 4.0 - 2.0
        return np.clip(0.5 * (f1 + f3) - np.abs(y), 0.0, min(f1, f3))

    # G1 slits at 0, 1 and G3 slits at 0…3 (units of d): every total offset k = 0…3 equally
    kern = 0.25 * sum(trapezoid(u - k) for k in range(4))
    # S(s_q) = ∫ I(s_q + u) K(u) du: circular correlation on the grid (trapezoid rule)
    sig = np.fft.ifft(np.fft.fft(intensity) * np.conj(np.fft.fft(kern))).real * (4.0 / m)
    s = 4.0 * np.arange(m) / m
    c1 = np.mean(sig * np.exp(2j * np.pi * s))  # S = c₀ + 2 Re[c₁ e^{−2πi s}]
    return complex(c1), float(sig.mean())


def ray_harmonics(
    xi: float,
    f1: float,
    f3: float,
    phi0: float = 0.0,
    n0: float = 0.0,
    absorbed: str = "kept",
    second_open_fraction: float | None = None,
    nodes: int = 4000,
):
    """(c₁, c₀) from straight rays through the same grating (classical counterpart)."""
    x2 = (np.arange(nodes) + 0.5) / nodes  # one G2 period, flat transverse momentum
    g, gw = np.polynomial.legendre.leggauss(96)
    x1 = 0.5 * f1 * g
    w1 = 0.5 * f1 * gw
    if second_open_fraction is not None:
        y = x2 - np.round(x2)
        trans = (np.abs(y) < 0.5 * second_open_fraction).astype(float)
        kick = np.zeros_like(x2)
        kicks_char = np.ones_like(x2)
    else:
        c2 = np.cos(np.pi * x2) ** 2
        # φ(x) = φ0 cos²(πx/d); kick ħφ'(x); displacement at G3 φ'(x) L λ/(2π) = ξ d φ'(x)/(2π)
        dphi = -phi0 * np.pi * np.sin(2.0 * np.pi * x2)  # dφ/d(x/d)
        kick = xi * dphi / (2.0 * np.pi)
        if absorbed == "lost":
            trans = np.exp(-n0 * c2)
            kicks_char = np.ones_like(x2)
        else:
            trans = np.ones_like(x2)
            # N ~ Poisson(n0 c²) photons, each ±ξ/2 (units of d): Σ_N P(N) cos(πξ)^N
            n_max = int(n0 + 12.0 * math.sqrt(n0) + 12)
            pmf = stats.poisson.pmf(np.arange(n_max)[:, None], n0 * c2[None, :])
            kicks_char = (np.cos(np.pi * xi) ** np.arange(n_max)) @ pmf
    x3 = 2.0 * x2[None, :] - x1[:, None] + kick[None, :]
    mean = float(w1.sum() * trans.mean())
    first = w1 @ (np.exp(2j * np.pi * x3) * trans * kicks_char).mean(axis=1)
    a3 = slit_coefficient(1, f3)
    return complex(a3 * first), f3 * mean
