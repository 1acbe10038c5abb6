"""Fits of beam profiles behind a magnet: the g-factor and spin of Stern–Gerlach components, the
moment of a superparamagnetic cluster (models: polarbeam.beam.magnetic_profiles).

Counts per detector bin are fitted by least squares on Poisson deviance residuals (the Poisson
maximum likelihood); errors from the Fisher information at the minimum.  ``fit_spin_profile``
fits (amplitude, x0, σ, g) for each candidate S
and keeps the S with the lowest χ²; ``fit_cluster_profiles`` fits a field-off and a field-on
profile together (shared amplitude ratio free, shared x0 and σ) for the moment m.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import optimize

from polarbeam.beam.magnetic import ELECTRON_G
from polarbeam.beam.magnetic_profiles import cluster_profile, component_profile, spin_profile
from polarbeam.constants import BOHR_MAGNETON
from polarbeam.errors import FitError

__all__ = ["ProfileFit", "fit_cluster_profiles", "fit_spin_profile", "moment_muB"]


@dataclass(frozen=True)
class ProfileFit:
    """A fitted parameter (g or m) with its 1σ error, the spin kept and the fit quality."""

    value: float
    error: float
    spin: float | None
    chi2: float
    ndof: int
    chi2_by_spin: dict[float, float]


def _lsq(model, counts, p0, scale):
    """Poisson ML fit of ``model(q)`` (expected counts; q = parameters / scale) to ``counts``:
    (parameters, covariance from the Fisher information Σ (∂μ/∂p)²/μ, deviance)."""

    def residual(q):
        return _pearson(counts, model(q))

    res = optimize.least_squares(residual, np.asarray(p0) / scale, method="lm", max_nfev=400)
    if not res.success:
        raise FitError(f"profile fit did not converge ({res.message})")
    q = res.x
    mu = np.maximum(model(q), 1e-12)
    cols = []
    for k in range(q.size):
        h = 1e-6 * max(abs(q[k]), 1e-3)
        up, dn = q.copy(), q.copy()
        up[k] += h
        dn[k] -= h
        cols.append((model(up) - model(dn)) / (2 * h) / np.sqrt(mu))
    jac = np.column_stack(cols)
    try:
        cov = np.linalg.inv(jac.T @ jac)
    except np.linalg.LinAlgError as exc:
        raise FitError("profile fit: singular covariance") from exc
    return q * scale, cov * np.outer(scale, scale), float(res.fun @ res.fun)


def _pearson(counts, mu):
    """Poisson deviance residuals: their sum of squares is −2 ln(L/L_saturated), so least
    squares on them is the Poisson maximum likelihood (no low-count bias)."""
    mu = np.maximum(mu, 1e-12)
    with np.errstate(divide="ignore", invalid="ignore"):
        term = np.where(counts > 0, counts * np.log(counts / mu), 0.0)
    dev = np.maximum(2.0 * (mu - counts + term), 0.0)
    return np.sign(counts - mu) * np.sqrt(dev)


def fit_spin_profile(
    x,
    counts,
    gradient,
    kappa,
    velocities,
    velocity_weights,
    spins=(0.5, 1.0, 1.5),
    g0: float = ELECTRON_G,
) -> ProfileFit:
    """g ± error and the spin S of a resolved Stern–Gerlach profile (counts per bin at ``x``)."""
    x = np.asarray(x, dtype=float)
    counts = np.asarray(counts, dtype=float)
    bw = float(np.mean(np.diff(x)))
    total = float(counts.sum())
    x0 = float(np.sum(x * counts) / total)
    width = float(np.sqrt(np.sum((x - x0) ** 2 * counts) / total))
    best = None
    chis = {}
    for s in spins:

        def model(p, s=s):
            amp, xc, sig, g = p
            return (
                amp
                * bw
                * spin_profile(x, s, g, gradient, kappa, velocities, velocity_weights, xc, abs(sig))
            )

        scale = np.array([total, width, width, 1.0])
        sig0 = width / (2 * s + 1)

        try:
            p, cov, chi2 = _lsq(
                lambda q, model=model, scale=scale: model(q * scale),
                counts,
                [total, x0, sig0, g0],
                scale,
            )
        except FitError:
            continue
        chis[s] = chi2
        if best is None or chi2 < best[0]:
            best = (chi2, s, p, cov)
    if best is None:
        raise FitError("spin profile: no candidate spin could be fitted")
    chi2, s, p, cov = best
    return ProfileFit(float(p[3]), math.sqrt(cov[3, 3]), s, chi2, x.size - 4, chis)


def fit_cluster_profiles(
    x,
    counts_off,
    counts_on,
    field,
    gradient,
    temperature,
    kappa,
    velocities,
    velocity_weights,
    m0: float,
) -> ProfileFit:
    """The moment m ± error (J/T) of superparamagnetic clusters from a field-off and a field-on
    profile at ``field`` (T), ``gradient`` (T/m) and cluster temperature ``temperature`` (K)."""
    x = np.asarray(x, dtype=float)
    c0, c1 = (np.asarray(c, dtype=float) for c in (counts_off, counts_on))
    bw = float(np.mean(np.diff(x)))
    t0, t1 = float(c0.sum()), float(c1.sum())
    xc = float(np.sum(x * c0) / t0)
    width = float(np.sqrt(np.sum((x - xc) ** 2 * c0) / t0))

    def model(q, scale):
        a0, a1, xm, sig, m = q * scale
        off = (
            a0
            * bw
            * component_profile(x, [0.0], [1.0], kappa, velocities, velocity_weights, xm, abs(sig))
        )
        on = (
            a1
            * bw
            * cluster_profile(
                x,
                m,
                field,
                gradient,
                temperature,
                kappa,
                velocities,
                velocity_weights,
                xm,
                abs(sig),
            )
        )
        return np.concatenate([off, on])

    scale = np.array([t0, t1, width, width, m0])
    both = np.concatenate([c0, c1])
    p, cov, chi2 = _lsq(lambda q: model(q, scale), both, [t0, t1, xc, width, m0], scale)
    return ProfileFit(float(p[4]), math.sqrt(cov[4, 4]), None, chi2, 2 * x.size - 5, {})


def moment_muB(fit: ProfileFit) -> tuple[float, float]:
    """A cluster fit's moment and error in Bohr magnetons."""
    return fit.value / BOHR_MAGNETON, fit.error / BOHR_MAGNETON
