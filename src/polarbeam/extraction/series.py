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

import numpy as np
import uncertainties

from polarbeam._util.optional import lazy
from polarbeam.beam.distributions import VelocityDistribution, distribution_from_moments
from polarbeam.beam.velocity import averaged_phasor_phase, mean_inverse_square
from polarbeam.constants import ANGSTROM3_SI
from polarbeam.contract.campaign import SeriesData
from polarbeam.errors import FitError
from polarbeam.extraction.whitening import whitener
from polarbeam.uncertain import FIT_TAG

lmfit = lazy("lmfit", "fitting series")
stats = lazy("scipy.stats", "numerical routines")

__all__ = [
    "CURVE_POINTS",
    "SeriesFit",
    "alpha_eff_with_errors",
    "fit_series",
    "model_curve",
    "observable_model",
    "series_distributions",
]


def series_distributions(
    velocities: np.ndarray,
    spreads: np.ndarray,
    *,
    distribution: VelocityDistribution | None = None,
    shape: str = "gaussian",
    velocity_factor: float = 1.0,
    spread_factor: float = 1.0,
    contrast=None,
) -> list[tuple[np.ndarray, VelocityDistribution]]:
    """(point mask, distribution) groups of one series: the series' own ``distribution`` (a
    table) for every point, else the named ``shape`` for each distinct (mean, spread) pair.

    ``velocity_factor`` scales the stated means (a table: every class, a common calibration
    scale), ``spread_factor`` the spreads; the derivatives of the fit with respect to the stated
    velocity and spread are taken through them. ``contrast`` (a
    :class:`~polarbeam.beam.talbot.GratingContrast`, from ``[gratings]``) gives every
    distribution the interferometer model's contrast per velocity class.
    """
    if contrast is not None:
        groups = series_distributions(
            velocities,
            spreads,
            distribution=distribution,
            shape=shape,
            velocity_factor=velocity_factor,
            spread_factor=spread_factor,
        )
        return [(sel, contrast.apply(d)) for sel, d in groups]
    velocities = np.asarray(velocities, dtype=float)
    spreads = np.asarray(spreads, dtype=float)
    n = velocities.size
    if distribution is not None:
        d = distribution
        if spread_factor != 1.0:
            d = d.widened(spread_factor)
        if velocity_factor != 1.0:
            d = d.scaled(velocity_factor)
        return [(np.ones(n, dtype=bool), d)]
    if n == 0:
        return []
    if np.all(velocities == velocities.flat[0]) and np.all(spreads == spreads.flat[0]):
        pairs = [(velocities.flat[0], spreads.flat[0])]  # one velocity class (the usual case)
    else:
        pairs = np.unique(np.stack([velocities, spreads], axis=1), axis=0)
    out = []
    for v, s in pairs:
        sel = (velocities == v) & (spreads == s)
        d = distribution_from_moments(shape, v * velocity_factor, s * spread_factor)
        out.append((sel, d))
    return out


def observable_model(
    alpha_si: float,
    voltages: np.ndarray,
    coupling_over_mass: float,
    velocities: np.ndarray,
    spreads: np.ndarray,
    kind: str,
    nodes: int = 48,
    *,
    groups: list[tuple[np.ndarray, VelocityDistribution]] | None = None,
    kappa_zero: float = 0.0,
) -> tuple[np.ndarray, np.ndarray]:
    """Predicted observable (without offset) and phasor modulus for each voltage.

    ``kind`` is ``"talbot-lau"``, ``"beam-profile"`` or ``"time-domain"``. ``groups`` (from
    :func:`series_distributions`) replaces the Gaussian of ``velocities``/``spreads``.
    ``kappa_zero`` (Talbot–Lau) is the zero-field phase constant 2π·a·W_tot/d of a background
    acceleration a: every class turns by (κ + κ₀)/v², and the observable is the phase relative
    to zero field, Ψ(κ + κ₀) − Ψ(κ₀); the modulus is |Z(κ + κ₀)|/|Z(κ₀)|, the visibility relative
    to zero field.
    """
    kappa = alpha_si * coupling_over_mass * np.asarray(voltages, dtype=float) ** 2
    if kind == "time-domain":
        return kappa, np.ones_like(kappa)
    out = np.empty_like(kappa)
    mod = np.ones_like(kappa)
    if groups is None:
        groups = series_distributions(velocities, spreads)
    for sel, dist in groups:
        if kind == "beam-profile":
            out[sel] = kappa[sel] * mean_inverse_square(dist, nodes)
            continue
        k = np.append(kappa[sel] + kappa_zero, kappa_zero)
        ph, mo = averaged_phasor_phase(k, dist, nodes)
        out[sel], mod[sel] = ph[:-1] - ph[-1], mo[:-1] / mo[-1]
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
    dalpha_dspread: float = 0.0  # ∂α̂/∂σ_v (per m/s), 0 without a stated spread error
    dalpha_dkappa_zero: float = 0.0  # ∂α̂/∂κ₀ of the background-acceleration phase constant
    #: the fitted model on a dense voltage grid (for figures): voltages (V) and observable
    curve_voltages: np.ndarray = field(default_factory=lambda: np.empty(0))
    curve: np.ndarray = field(default_factory=lambda: np.empty(0))

    @property
    def reduced_chi2(self) -> float:
        return self.chi2 / self.ndof if self.ndof > 0 else math.nan

    @property
    def p_value(self) -> float:
        return float(stats.chi2.sf(self.chi2, self.ndof)) if self.ndof > 0 else math.nan


def _covariance_by_differences(residual, params, fit_offset: bool):
    """(JᵀJ)⁻¹ of the whitened residuals by central differences (relative step 1e-6), or None
    when it is not finite and positive."""
    names = ["alpha", "offset"] if fit_offset else ["alpha"]
    cols = []
    for name in names:
        p0 = params[name].value
        h = max(abs(p0) * 1e-6, 1e-9)
        up, dn = params.copy(), params.copy()
        up[name].value, dn[name].value = p0 + h, p0 - h
        cols.append((residual(up) - residual(dn)) / (2 * h))
    J = np.column_stack(cols)
    try:
        cov = np.linalg.inv(J.T @ J)
    except np.linalg.LinAlgError:
        return None
    if not np.all(np.isfinite(cov)) or cov[0, 0] <= 0:
        return None
    return cov


def fit_series(
    series: SeriesData,
    coupling: float,
    mass: float,
    kind: str,
    *,
    fit_offset: bool = True,
    nodes: int = 48,
    scale_errors: str = "never",
    kappa_zero: float = 0.0,
) -> SeriesFit:
    """Least-squares fit of α_eff (and the zero-field offset) to one series.

    The series' velocity model is its ``distribution`` (a table) or its ``shape`` with the
    mean and spread columns; ``kappa_zero`` is the background-acceleration phase constant of
    :func:`observable_model`. Raises :class:`~polarbeam.errors.FitError` when the fit has no
    usable covariance.
    """
    V, y = series.voltages, series.values
    vel, spr = series.velocities, series.spreads
    com = coupling / mass
    white = whitener(series.covariance, series.errors)

    def groups(vf=1.0, sf=1.0):
        return series_distributions(
            vel,
            spr,
            distribution=series.distribution,
            shape=series.shape,
            velocity_factor=vf,
            spread_factor=sf,
            contrast=series.grating_contrast,
        )

    nominal_groups = groups() if kind != "time-domain" else []

    def predict(alpha, grp=None, k0=kappa_zero):
        grp = nominal_groups if grp is None else grp
        return observable_model(alpha, V, com, vel, spr, kind, nodes, groups=grp, kappa_zero=k0)

    def shape(alpha):
        return predict(alpha)[0]

    # linear first guess using the small-phase limit
    x = shape(ANGSTROM3_SI)
    if kind == "talbot-lau":
        x = np.zeros_like(V, dtype=float)
        for sel, dist in nominal_groups:
            x[sel] = com * V[sel] ** 2 * ANGSTROM3_SI * mean_inverse_square(dist, nodes)
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
    if (not res.success or res.covar is None) and kind != "time-domain":
        # a strongly non-linear phase (broad or far-tailed distributions): restart from the
        # best point of a logarithmic scan around the small-phase guess
        base = a0 if a0 != 0 else 1.0
        trial = params.copy()
        best = None
        for f in np.logspace(-3, 3, 61):
            trial["alpha"].value = base * f
            r = residual(trial)
            chi = float(r @ r)
            if np.isfinite(chi) and (best is None or chi < best[0]):
                best = (chi, base * f)
        if best is not None:
            params["alpha"].value = best[1]
            res = lmfit.minimize(residual, params, method="leastsq", scale_covar=False)
    covar = res.covar
    if res.success and covar is None:  # lmfit's own step found no curvature: central differences
        covar = _covariance_by_differences(residual, res.params, fit_offset)
    if not res.success or covar is None:
        raise FitError(
            f"series {series.label}: the fit did not converge or its covariance is singular "
            f"({res.message})"
        )
    alpha = res.params["alpha"].value * ANGSTROM3_SI
    offset = res.params["offset"].value * c_scale if fit_offset else 0.0
    conv = np.array([ANGSTROM3_SI, c_scale])[: covar.shape[0]]
    cov = covar * np.outer(conv, conv)
    model, modulus = predict(alpha)
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

    # ∂θ/∂p = −(JᵀJ)⁻¹ Jᵀ ∂r/∂p (implicit derivative of the least-squares solution) for the
    # mean velocity (a common scale of every class), the spread and the background acceleration
    dadv = dads = dadk = 0.0
    if kind != "time-domain":
        eps = 1e-4
        vbar = series.velocity.value
        da = alpha * 1e-5
        jac = [(white(shape(alpha + da)) - white(shape(alpha - da))) / (2 * da)]
        if fit_offset:
            jac.append(white(np.ones_like(y)))
        J = np.column_stack(jac)

        def implicit(dr):
            return float(-np.linalg.solve(J.T @ J, J.T @ dr)[0])

        def rv(grp, k0=kappa_zero):
            return white(predict(alpha, grp, k0)[0] + offset - y)

        dadv = implicit((rv(groups(vf=1 + eps)) - rv(groups(vf=1 - eps))) / (2 * eps * vbar))
        sbar = float(np.mean(spr)) if series.distribution is None else 0.0
        if series.spread_error > 0 and sbar > 0 and series.shape != "effusive":
            drs = (rv(groups(sf=1 + eps)) - rv(groups(sf=1 - eps))) / (2 * eps * sbar)
            dads = implicit(drs)
        if kind == "talbot-lau" and kappa_zero != 0.0:
            hk = abs(kappa_zero) * 1e-4
            dadk = implicit((rv(None, kappa_zero + hk) - rv(None, kappa_zero - hk)) / (2 * hk))
    curve_v, curve = model_curve(
        alpha, offset, V, com, kind, nodes, nominal_groups, kappa_zero=kappa_zero
    )
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
        dalpha_dspread=dads,
        dalpha_dkappa_zero=dadk,
        curve_voltages=curve_v,
        curve=curve,
    )


#: Points of the dense model curve stored with every series fit (figures draw it).
CURVE_POINTS = 160


def model_curve(
    alpha_si, offset, voltages, coupling_over_mass, kind, nodes, groups, kappa_zero=0.0
):
    """The fitted model (with its offset) on :data:`CURVE_POINTS` voltages from the lowest to the
    highest measured one, for figures.  The velocity distribution is that of the series' first
    velocity class (``groups`` from :func:`series_distributions`: the one class of the usual
    series)."""
    V = np.asarray(voltages, dtype=float)
    grid = np.linspace(float(V.min()), float(V.max()), CURVE_POINTS)
    grid_groups = [(np.ones(grid.size, dtype=bool), groups[0][1])] if groups else []
    model = observable_model(
        alpha_si,
        grid,
        coupling_over_mass,
        np.empty(0),
        np.empty(0),
        kind,
        nodes,
        groups=grid_groups,
        kappa_zero=kappa_zero,
    )[0]
    return grid, model + offset


def alpha_eff_with_errors(
    fit: SeriesFit,
    label: str,
    coupling_ratio,
    mass_ratio,
    velocity_u,
    spread_u=None,
    kappa_zero_u=None,
):
    """α_eff (C·m²/V) as a correlated :class:`uncertainties` value.

    Parameters
    ----------
    coupling_ratio
        C_nominal / C as an uncertain number carrying the stated geometry and field inputs.
    mass_ratio
        m / m_nominal as an uncertain number (exactly 1 when no mass error is stated).
    velocity_u
        the series' mean velocity as a tagged uncertain number (or a float).
    spread_u, kappa_zero_u
        the series' velocity spread and the campaign's background-acceleration phase constant
        κ₀ as tagged uncertain numbers (or None / floats: no error).
    """
    n = fit.covariance.shape[0]
    nominal = [fit.alpha_si, fit.offset][:n]
    tags = [f"{FIT_TAG}|{label}"] * n
    fit_u = uncertainties.correlated_values(nominal, fit.covariance, tags=tags)
    alpha_v = fit_u[0]
    if isinstance(velocity_u, uncertainties.UFloat):
        alpha_v = alpha_v + fit.dalpha_dvelocity * (velocity_u - velocity_u.nominal_value)
    if isinstance(spread_u, uncertainties.UFloat):
        alpha_v = alpha_v + fit.dalpha_dspread * (spread_u - spread_u.nominal_value)
    if isinstance(kappa_zero_u, uncertainties.UFloat):
        alpha_v = alpha_v + fit.dalpha_dkappa_zero * (kappa_zero_u - kappa_zero_u.nominal_value)
    return alpha_v * coupling_ratio * mass_ratio, (fit_u[1] if n > 1 else None)
