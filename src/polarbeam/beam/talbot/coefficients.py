"""Generalized Talbot coefficients B_m(ξ) of a thin middle grating (plain functions).

A thin grating acts on the transverse state through the kernel R(x, s): t(x − s/2) t*(x + s/2)
for a transmission function t(x), or Σ_k K_k(x − s/2) K_k*(x + s/2) for a grating that is a
quantum operation with position-diagonal Kraus operators K_k (absorption with recoil). The
generalized Talbot coefficient of order m at Talbot parameter ξ is its Fourier component

    B_m(ξ) = (1/d) ∫_0^d R(x, ξ d) e^{−2πimx/d} dx,

(derivation in docs/visibility.md). The first harmonic of the fringe of a symmetric three-grating
interferometer is proportional to B_2(L/L_T); the mean signal to B_0(0).

Light grating (standing wave of period d = λ_L/2, antinodes at x = 0): with θ = 2πx/d the kernel is
pref · exp(a cos θ + i b sin θ), whose Fourier components are (u/w)^{m/2} I_m(2√(uw)) with
u = (a+b)/2, w = (a−b)/2 (the generating function of the modified Bessel functions); they are
real, and so is B_m of these gratings (symmetric about x = 0):

========================  ===========================  =====================  ==============
case                      pref                         a                      b
========================  ===========================  =====================  ==============
quantum, kept             e^{−n0(1 − cos πξ)/2}        +n0(1 − cos πξ)/2      φ0 sin πξ
quantum, lost             e^{−n0/2}                    −n0 cos(πξ)/2          φ0 sin πξ
classical, kept           e^{−n0(1 − cos πξ)/2}        −n0(1 − cos πξ)/2      φ0 πξ
classical, lost           e^{−n0/2}                    −n0/2                  φ0 πξ
========================  ===========================  =====================  ==============

Material grating of open fraction f (slits centred on x = 0): the kernel is the product of two
shifted slit indicators; quantum B_m is the exact Fourier integral over their overlap, the
classical (straight-ray) kernel |t(x)|² gives B_m = f sinc(πmf) at every ξ.
"""

from __future__ import annotations

import math
from typing import Literal

import numpy as np

from polarbeam._util.optional import lazy

integrate = lazy("scipy.integrate", "numerical routines")
special = lazy("scipy.special", "numerical routines")

__all__ = [
    "ABSORBED_CHOICES",
    "MODELS",
    "coefficient_by_quadrature",
    "exp_cos_sin_coefficient",
    "light_coefficient",
    "light_kernel",
    "material_coefficient",
    "material_kernel",
    "slit_coefficient",
]

ABSORBED_CHOICES = ("kept", "lost")
MODELS = ("quantum", "classical")

Absorbed = Literal["kept", "lost"]
Model = Literal["quantum", "classical"]


def _check(absorbed: str, model: str) -> None:
    if absorbed not in ABSORBED_CHOICES:
        raise ValueError(f"absorbed: expected one of {ABSORBED_CHOICES}, found {absorbed!r}")
    if model not in MODELS:
        raise ValueError(f"model: expected one of {MODELS}, found {model!r}")


def _series_factor(m: int, t, log_pref):
    """e^{log_pref} Σ_l t^l/(l!(m+l)!) for m ≥ 0: e^{log_pref} t^{−m/2} I_m(2√t) (t > 0) or
    |t|^{−m/2} J_m(2√|t|) (t < 0), exponentially scaled so that e^{log_pref} I_m never overflows."""
    t = np.asarray(t, dtype=float)
    out = np.empty(t.shape)
    small = np.abs(t) < 1e-3
    ts = t[small]
    series = sum(ts**k / (math.factorial(k) * math.factorial(m + k)) for k in range(6))
    out[small] = np.exp(log_pref[small]) * series
    pos = (t > 0) & ~small
    x = 2.0 * np.sqrt(t[pos])
    neg = (t < 0) & ~small
    y = 2.0 * np.sqrt(-t[neg])
    if m == 2:  # I₂ = I₀ − 2I₁/x, J₂ = 2J₁/y − J₀ (recurrences; faster than the general order)
        i_m = special.i0e(x) - 2.0 * special.i1e(x) / x
        j_m = 2.0 * special.j1(y) / y - special.j0(y)
    else:
        i_m = special.ive(m, x)
        j_m = special.jv(m, y)
    out[pos] = i_m * np.exp(x + log_pref[pos]) / (0.5 * x) ** m
    out[neg] = j_m * np.exp(log_pref[neg]) / (0.5 * y) ** m
    return out


def exp_cos_sin_coefficient(m: int, a, b, log_pref=0.0):
    """e^{log_pref}·(1/2π) ∫ e^{−imθ} exp(a cos θ + i b sin θ) dθ for real arrays a, b.

    exp(u z + w/z), z = e^{iθ}, u = (a+b)/2, w = (a−b)/2, has the z^m coefficient
    Σ_l u^{m+l} w^l/((m+l)! l!) = u^m F_m(uw) (m ≥ 0), with F_m(t) = t^{−m/2} I_m(2√t) for
    t > 0 and |t|^{−m/2} J_m(2√|t|) for t < 0 (the Bessel generating function); m < 0 follows
    from θ → −θ (b → −b). Real arithmetic throughout; the result is real.
    """
    m = int(m)
    a, b, lp = np.broadcast_arrays(
        np.asarray(a, dtype=float), np.asarray(b, dtype=float), np.asarray(log_pref, dtype=float)
    )
    if m < 0:
        m, b = -m, -b
    u = 0.5 * (a + b)
    w = 0.5 * (a - b)
    out = u**m * _series_factor(m, u * w, lp)
    return out if out.ndim else float(out)


def light_coefficient(
    m: int, xi, phi0, n0=0.0, absorbed: Absorbed = "kept", model: Model = "quantum"
):
    """B_m(ξ) of a standing light wave of phase amplitude φ0 and mean absorbed photons n0.

    Parameters
    ----------
    m
        Order of the coefficient (the first fringe harmonic needs m = 2, the mean m = 0).
    xi
        Talbot parameter ξ = L/L_T (array).
    phi0, n0
        Eikonal phase amplitude and mean number of absorbed photons at an antinode (arrays,
        broadcast with ``xi``); see :mod:`polarbeam.beam.talbot.light`.
    absorbed
        ``"kept"``: an absorbing molecule stays in the beam with a photon recoil (±ħk in coherent
        superposition: Kraus operator ∝ cos kx); ``"lost"``: it leaves the beam (ionised or
        fragmented), the grating is then an amplitude mask exp(−n0 cos² kx / 2).
    model
        ``"quantum"`` (wave propagation) or ``"classical"`` (straight rays, same kicks).
    """
    _check(absorbed, model)
    xi, phi0, n0 = np.broadcast_arrays(
        np.asarray(xi, dtype=float), np.asarray(phi0, dtype=float), np.asarray(n0, dtype=float)
    )
    if model == "quantum":
        b = phi0 * np.sin(np.pi * xi)
        if absorbed == "kept":
            a = 0.5 * n0 * (1.0 - np.cos(np.pi * xi))
            log_pref = -a
        else:
            a = -0.5 * n0 * np.cos(np.pi * xi)
            log_pref = -0.5 * n0
    else:
        b = phi0 * np.pi * xi
        if absorbed == "kept":
            a = -0.5 * n0 * (1.0 - np.cos(np.pi * xi))
            log_pref = a
        else:
            a = -0.5 * n0
            log_pref = -0.5 * n0
    return exp_cos_sin_coefficient(m, a, b, log_pref)


def light_kernel(x_d, s_d, phi0, n0=0.0, absorbed: Absorbed = "kept", model: Model = "quantum"):
    """The defining kernel R(x, s) of the light grating, written from cos²(πx/d) directly.

    ``x_d`` = x/d and ``s_d`` = s/d. Quantum: the eikonal phase φ0 cos²(πx/d) at x ∓ s/2 and the
    absorption channel (Poisson with Kraus operator cos(πx/d), rate ∝ cos²) — kept:
    exp(n0[c₋c₊ − c₋²/2 − c₊²/2]), lost: exp(−n0[c₋² + c₊²]/2). Classical: the phase difference
    to first order in s (the kick −ħφ'(x)), the absorption probability e^{−n0 c²} (lost) or a
    Poisson number of ±ħk kicks, characteristic function exp(n0 c²(cos πs/d − 1)) (kept).
    """
    _check(absorbed, model)
    cm = np.cos(np.pi * (x_d - 0.5 * s_d))
    cp = np.cos(np.pi * (x_d + 0.5 * s_d))
    c0 = np.cos(np.pi * x_d)
    if model == "quantum":
        phase = 1j * phi0 * (cm**2 - cp**2)
        if absorbed == "kept":
            damp = n0 * (cm * cp - 0.5 * cm**2 - 0.5 * cp**2)
        else:
            damp = -0.5 * n0 * (cm**2 + cp**2)
    else:
        # φ(x) = φ0 cos²(πx/d): −φ'(x) s = φ0 (π s/d) sin(2πx/d)
        phase = 1j * phi0 * np.pi * s_d * np.sin(2.0 * np.pi * x_d)
        if absorbed == "kept":
            damp = n0 * c0**2 * (np.cos(np.pi * s_d) - 1.0)
        else:
            damp = -n0 * c0**2
    return np.exp(damp + phase)


def material_kernel(x_d, s_d, open_fraction: float, model: Model = "quantum"):
    """R(x, s) of a slit grating (slits of width f d centred on integer multiples of d)."""

    def open_(y):
        y = np.asarray(y) - np.round(y)
        return (np.abs(y) < 0.5 * open_fraction).astype(float)

    if model == "classical":
        return open_(x_d) + 0j
    return open_(x_d - 0.5 * s_d) * open_(x_d + 0.5 * s_d) + 0j


def slit_coefficient(m: int, open_fraction: float) -> float:
    """Fourier coefficient of |t|² of a slit grating: f sinc(πmf) (with sinc x = sin x / x)."""
    return float(open_fraction * np.sinc(m * open_fraction))  # numpy sinc(x) = sin(πx)/(πx)


def material_coefficient(m: int, xi, open_fraction: float, model: Model = "quantum"):
    """B_m(ξ) of a slit grating of open fraction f: exact Fourier integral over the overlap.

    Quantum: t(x − ξd/2) t(x + ξd/2) is 1 where a slit centred on ξd/2 + jd overlaps one centred
    on −ξd/2 + kd; the integral of e^{−2πimx/d} over each overlap interval is elementary.
    Classical: f sinc(πmf) independent of ξ (the straight-ray shadow).
    """
    if model not in MODELS:
        raise ValueError(f"model: expected one of {MODELS}, found {model!r}")
    xi = np.asarray(xi, dtype=float)
    f = float(open_fraction)
    if model == "classical":
        return np.full(xi.shape, slit_coefficient(m, f), dtype=complex)
    out = np.zeros(xi.shape, dtype=complex)
    flat = out.reshape(-1)
    for i, x in enumerate(xi.reshape(-1)):
        shift = x - np.floor(x)  # the kernel is periodic in ξ with period 1 up to a relabelling
        total = 0j
        # slit A centred on shift/2, slit B on −shift/2 + j (in units of d), j = 0, 1
        for j in (0, 1):
            lo = max(0.5 * shift - 0.5 * f, -0.5 * shift + j - 0.5 * f)
            hi = min(0.5 * shift + 0.5 * f, -0.5 * shift + j + 0.5 * f)
            if hi <= lo:
                continue
            if m == 0:
                total += hi - lo
            else:
                k = -2j * np.pi * m
                total += (np.exp(k * hi) - np.exp(k * lo)) / k
        # shifting ξ by an integer n moves slit centres by ±n/2: x → x + n/2, a phase e^{−iπmn}
        total *= np.exp(-1j * np.pi * m * (x - shift))
        flat[i] = total
    return out if out.ndim else complex(out)


def coefficient_by_quadrature(m: int, xi: float, kernel, **quad) -> complex:
    """B_m(ξ) by adaptive quadrature of (1/d)∫_0^d R(x, ξd) e^{−2πimx/d} dx (x in units of d).

    ``kernel(x_d, s_d)`` is the grating's R; an independent check of the closed forms.
    """
    opts = {"epsabs": 1e-14, "epsrel": 1e-13, "limit": 400, **quad}

    def part(fn):
        return integrate.quad(fn, 0.0, 1.0, **opts)[0]

    def f(x):
        return kernel(x, xi) * np.exp(-2j * np.pi * m * x)

    return complex(part(lambda x: f(x).real), part(lambda x: f(x).imag))
