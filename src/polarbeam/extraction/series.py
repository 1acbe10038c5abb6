"""Extraction: fit each shift-versus-voltage series for its effective polarizability α_eff.

Model of one series (offset c, optional)::

    y_i = c + Ψ(κ_i),   κ_i = α_eff · C · V_i² / m,

with C = (layout scale) · ∫ w(s) g(s) ds the coupling of layout and deflector, and Ψ the velocity
average of the layout (:mod:`polarbeam.beam.velocity`): the continuous phase of ⟨exp(iκ/v²)⟩
(``talbot-lau``), κ⟨v⁻²⟩ (``beam-profile``) or κ itself (``time-domain``).

α_eff enters only through the product α_eff·C/m, so the stated geometry, field and mass scale the
fitted value exactly; the velocity enters non-linearly and its effect is taken from the implicit
derivative of the least-squares solution.  :func:`alpha_eff_with_errors` assembles the correlated
:mod:`uncertainties` value: fit covariance (tagged ``fit statistics``) plus every stated input.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import lmfit
import numpy as np
import uncertainties
from scipy import stats

from polarbeam.beam.distributions import GaussianVelocity
from polarbeam.beam.velocity import averaged_phasor_phase, mean_inverse_square
from polarbeam.constants import ANGSTROM3_SI
from polarbeam.contract.campaign import SeriesData
from polarbeam.errors import FitError
from polarbeam.extraction.whitening import whitener
from polarbeam.uncertain import FIT_TAG

__all__ = [
    "CURVE_POINTS",
    "SeriesFit",
    "alpha_eff_with_errors",
    "fit_series",
    "model_curve",
    "observable_model",
]


def observable_model(
    alpha_si: float,
    voltages: np.ndarray,
    coupling_over_mass: float,
    velocities: np.ndarray,
    spreads: np.ndarray,
    kind: str,
    nodes: int = 48,
) -> tuple[np.ndarray, np.ndarray]:
    """Predicted observable (without offset) and phasor modulus for each voltage.

    ``kind`` is ``"talbot-lau"``, ``"beam-profile"`` or ``"time-domain"``.
    """
    kappa = alpha_si * coupling_over_mass * np.asarray(voltages, dtype=float) ** 2
    if kind == "time-domain":
        return kappa, np.ones_like(kappa)
    out = np.empty_like(kappa)
    mod = np.ones_like(kappa)
    velocities = np.asarray(velocities, dtype=float)
    spreads = np.asarray(spreads, dtype=float)
    if velocities.size == 0:
        groups = []
    elif np.all(velocities == velocities.flat[0]) and np.all(spreads == spreads.flat[0]):
        groups = [(velocities.flat[0], spreads.flat[0])]  # one velocity class (the usual case)
    else:
        groups = np.unique(np.stack([velocities, spreads], axis=1), axis=0)
    for v, s in groups:
        sel = (velocities == v) & (spreads == s)
        if kind == "beam-profile":
            out[sel] = kappa[sel] * mean_inverse_square(GaussianVelocity(v, s), nodes)
        else:
            out[sel], mod[sel] = averaged_phasor_phase(kappa[sel], GaussianVelocity(v, s), nodes)
    return out, mod


@dataclass(frozen=True)
class SeriesFit:
    """Nominal result of one series fit (SI), before the stated inputs are attached."""

    alpha_si: float
    offset: float
    covariance: np.ndarray  # 2×2 (α, offset) or 1×1 without offset, SI units
    chi2: float
    ndof: int
    model: np.ndarray
    residuals: np.ndarray
    modulus: np.ndarray
    dalpha_dvelocity: float  # ∂α̂/∂v̄ (C·m²/V per m/s), 0 for the time domain
    error_scale: float = 1.0
    #: the fitted model on a dense voltage grid (for figures): voltages (V) and observable
    curve_voltages: np.ndarray = field(default_factory=lambda: np.empty(0))
    curve: np.ndarray = field(default_factory=lambda: np.empty(0))

    @property
    def reduced_chi2(self) -> float:
        return self.chi2 / self.ndof if self.ndof > 0 else math.nan

    @property
    def p_value(self) -> float:
        return float(stats.chi2.sf(self.chi2, self.ndof)) if self.ndof > 0 else math.nan


def fit_series(
    series: SeriesData,
    coupling: float,
    mass: float,
    kind: str,
    *,
    fit_offset: bool = True,
    nodes: int = 48,
    scale_errors: str = "never",
) -> SeriesFit:
    """Least-squares fit of α_eff (and the zero-field offset) to one series.

    Raises :class:`~polarbeam.errors.FitError` when the fit has no usable covariance.
    """
    V, y = series.voltages, series.values
    vel, spr = series.velocities, series.spreads
    com = coupling / mass
    white = whitener(series.covariance, series.errors)

    def shape(alpha):
        return observable_model(alpha, V, com, vel, spr, kind, nodes)[0]

    # linear first guess using the small-phase limit
    x = shape(ANGSTROM3_SI)
    if kind == "talbot-lau":
        x = np.array(
            [
                com * vv**2 * ANGSTROM3_SI * mean_inverse_square(GaussianVelocity(v, s), nodes)
                for vv, v, s in zip(V, vel, spr, strict=True)
            ]
        )
    cols = [x, np.ones_like(x)] if fit_offset else [x]
    A = np.column_stack([white(c) for c in cols])
    sol, *_ = np.linalg.lstsq(A, white(y), rcond=None)
    a0 = float(sol[0])  # in Å³
    c_scale = float(np.median(series.errors))
    params = lmfit.Parameters()
    params.add("alpha", value=a0)
    params.add("offset", value=(float(sol[1]) / c_scale) if fit_offset else 0.0, vary=fit_offset)

    def residual(p):
        model = shape(p["alpha"].value * ANGSTROM3_SI) + p["offset"].value * c_scale
        return white(model - y)

    res = lmfit.minimize(residual, params, method="leastsq", scale_covar=False)
    if not res.success or res.covar is None:
        raise FitError(
            f"series {series.label}: the fit did not converge or its covariance is singular "
            f"({res.message})"
        )
    alpha = res.params["alpha"].value * ANGSTROM3_SI
    offset = res.params["offset"].value * c_scale if fit_offset else 0.0
    conv = np.array([ANGSTROM3_SI, c_scale])[: res.covar.shape[0]]
    cov = res.covar * np.outer(conv, conv)
    model, modulus = observable_model(alpha, V, com, vel, spr, kind, nodes)
    model = model + offset
    r = white(model - y)
    chi2 = float(r @ r)
    ndof = V.size - (2 if fit_offset else 1)
    scale = 1.0
    if scale_errors == "birge" and ndof > 0 and chi2 / ndof > 1:
        scale = math.sqrt(chi2 / ndof)
        cov = cov * scale**2
    if not np.all(np.isfinite(cov)) or cov[0, 0] <= 0:
        raise FitError(f"series {series.label}: the fit gave no usable error for α_eff")

    # ∂θ/∂v̄ = −(JᵀJ)⁻¹ Jᵀ ∂r/∂v̄ (implicit derivative of the least-squares solution)
    dadv = 0.0
    if kind != "time-domain":
        eps = 1e-4
        vbar = series.velocity.value

        def rv(factor):
            m = observable_model(alpha, V, com, vel * factor, spr, kind, nodes)[0] + offset
            return white(m - y)

        drdv = (rv(1 + eps) - rv(1 - eps)) / (2 * eps * vbar)
        da = alpha * 1e-5
        jac = [(white(shape(alpha + da)) - white(shape(alpha - da))) / (2 * da)]
        if fit_offset:
            jac.append(white(np.ones_like(y)))
        J = np.column_stack(jac)
        dtheta = -np.linalg.solve(J.T @ J, J.T @ drdv)
        dadv = float(dtheta[0])
    curve_v, curve = model_curve(alpha, offset, V, com, vel, spr, kind, nodes)
    return SeriesFit(
        alpha_si=alpha,
        offset=offset,
        covariance=cov,
        chi2=chi2,
        ndof=ndof,
        model=model,
        residuals=y - model,
        modulus=modulus,
        dalpha_dvelocity=dadv,
        error_scale=scale,
        curve_voltages=curve_v,
        curve=curve,
    )


#: Points of the dense model curve stored with every series fit (figures draw it).
CURVE_POINTS = 160


def model_curve(alpha_si, offset, voltages, coupling_over_mass, velocities, spreads, kind, nodes):
    """The fitted model on :data:`CURVE_POINTS` voltages from the lowest to the highest measured
    one, with the series' median velocity class (the one class of the usual series)."""
    V = np.asarray(voltages, dtype=float)
    grid = np.linspace(float(V.min()), float(V.max()), CURVE_POINTS)
    vel = np.full_like(grid, float(np.median(velocities))) if np.size(velocities) else velocities
    spr = np.full_like(grid, float(np.median(spreads))) if np.size(spreads) else spreads
    model = observable_model(alpha_si, grid, coupling_over_mass, vel, spr, kind, nodes)[0]
    return grid, model + offset


def alpha_eff_with_errors(fit: SeriesFit, label: str, coupling_ratio, mass_ratio, velocity_u):
    """α_eff (C·m²/V) as a correlated :class:`uncertainties` value.

    Parameters
    ----------
    coupling_ratio
        C_nominal / C as an uncertain number carrying the stated geometry and field inputs.
    mass_ratio
        m / m_nominal as an uncertain number (exactly 1 when no mass error is stated).
    velocity_u
        the series' mean velocity as a tagged uncertain number (or a float).
    """
    n = fit.covariance.shape[0]
    nominal = [fit.alpha_si, fit.offset][:n]
    tags = [f"{FIT_TAG}|{label}"] * n
    fit_u = uncertainties.correlated_values(nominal, fit.covariance, tags=tags)
    alpha_v = fit_u[0]
    if isinstance(velocity_u, uncertainties.UFloat):
        alpha_v = alpha_v + fit.dalpha_dvelocity * (velocity_u - velocity_u.nominal_value)
    return alpha_v * coupling_ratio * mass_ratio, (fit_u[1] if n > 1 else None)
