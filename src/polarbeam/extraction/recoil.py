"""Photon recoil: absolute absorption cross-sections from laser-induced fringe shifts.

A molecule that absorbs one photon of wavelength λ picks up the transverse velocity
Δv = ħk/m = h/(λ m).  A kick at z_L (spatial layouts) shifts its fringe by
Δx = (Δv/v)·w(z_L), with the layout weight w of :mod:`polarbeam.instrument.layouts`; in the
time-domain layout Δx = Δv·w(t_L).  One photon therefore turns the fringe phasor by φ1 = 2π Δx/d.

The number of absorbed photons is Poisson distributed with mean n̄ = σ E/(A ħω) for a pulse of
energy E spread over an effective area A (top hat; a Gaussian beam of waist w0 whose axis is
a distance r from the molecular beam has A = (π w0²/2)·exp(2r²/w0²)).  Summing the Poisson
mixture, the fringe phasor relative to the laser-off fringe is

    R = ⟨ exp( n̄ (g e^{iφ1(v)} − 1) ) ⟩_v,

averaged over the (Gaussian) velocity distribution.  arg R is the phase shift (tracked
continuously from n̄ = 0), |R| the visibility ratio.  g = 1 without re-emission; with isotropic
re-emission of quantum yield q, g = (1 − q) + q·sin φ_e/φ_e, φ_e being the phase of one
emitted photon's full recoil along the grating axis (the projection cos θ of an isotropic
emission is uniform on [−1, 1]).

The ``[[laser]]`` keys of the experiment as run enter the same phasor
(:mod:`polarbeam.beam.photon_recoil`): ``beam_height_rms`` averages it over the molecular-beam
height in a Gaussian spot, ``hit_fraction`` mixes in unlit molecules, ``mode = "cw"`` makes n̄
∝ 1/v inside the velocity average, ``illumination = "standing"`` replaces e^{iφ1} by cos φ1.
Visibility ratios are Rician moduli by default and shared laser-off references give a block
covariance (:mod:`polarbeam.extraction.recoil_noise`).

σ (and optionally q) is fitted to the phases and visibility ratios together.  σ enters only as
σ·E·s/A (s the pulse-energy calibration factor), so the area and the calibration scale the result
exactly; the laser position, the grating geometry, the mass, the velocity calibration and a stated
q enter non-linearly and are propagated with the implicit derivative of the least-squares
solution.  Every input is a tagged :mod:`uncertainties` number, so
:func:`~polarbeam.results.objects.variance_budget` splits the variance of each σ.

Contents: pure physics functions (top), campaign inputs (``[[laser]]`` tables and ``recoil.csv``),
the fit, result objects with their renderings, and a simulator for round trips and the example.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import uncertainties
from uncertainties import UFloat, ufloat

from polarbeam._util.optional import lazy
from polarbeam.beam.photon_recoil import (
    gaussian_crossing_length,
    gaussian_effective_area,
    height_fluence_nodes,
    photon_energy,
    recoil_observables,
    recoil_velocity,
)
from polarbeam.constants import AMU
from polarbeam.contract.campaign import build_layout
from polarbeam.contract.recoil import Laser, RecoilCompound, RecoilData
from polarbeam.errors import CompoundError, FitError, InputError
from polarbeam.extraction.recoil_noise import common_covariance, rician_mean, rician_sd, whiten
from polarbeam.quantities import Measured, format_value_error
from polarbeam.results.recoil import (
    CrossSectionFit,
    RecoilCompoundResult,
    RecoilResult,
    nominal_values,
    std_devs,
)
from polarbeam.uncertain import FIT_TAG

lmfit = lazy("lmfit", "fitting series")
stats = lazy("scipy.stats", "numerical routines")

__all__ = [
    "analyze_recoil",
]

#: Internal fit scale of the cross-section: 1e-16 cm² = 1e-20 m².
SIGMA_UNIT = 1e-20


# --------------------------------------------------------------------------------------------
# physics: plain functions of floats and arrays
# --------------------------------------------------------------------------------------------


# --------------------------------------------------------------------------------------------
# campaign inputs: [[laser]] tables and recoil.csv
# --------------------------------------------------------------------------------------------


# --------------------------------------------------------------------------------------------
# the fit
# --------------------------------------------------------------------------------------------


def _laser_tag(name: str, key: str) -> str:
    return f"laser {name}: {key}"


def _instrument_tag(key: str) -> str:
    table, _, name = key.partition(".")
    return f"{table}: {name}"


@dataclass(frozen=True)
class _Context:
    """Campaign-wide pieces shared by every compound (the same uncertain numbers for all)."""

    layout: str
    nominal: dict[str, float]
    shared: dict[str, UFloat]
    area_ratio: dict[str, Any]  # laser → A/A0 as an uncertain number (or 1.0)
    energy_ratio: dict[str, Any]  # laser → s/s0 as an uncertain number (or 1.0)
    lasers: dict[str, Laser]
    scale_errors: str
    nodes: int


def _tagged(m: Measured, tag: str):
    return ufloat(m.value, m.error, tag=tag) if m.error > 0 else m.value


def _build_context(c) -> _Context:
    rd: RecoilData = c.recoil
    nominal = {k: m.value for k, m in c.stated.items() if k.startswith("instrument.")}
    shared: dict[str, UFloat] = {}
    for k, m in c.stated.items():
        if k.startswith("instrument.") and m.error > 0:
            shared[k] = ufloat(m.value, m.error, tag=_instrument_tag(k))
    area_ratio, energy_ratio = {}, {}
    for la in rd.lasers:
        for key, m in (("wavelength", la.wavelength), ("position", la.position)):
            nominal[f"laser.{la.name}.{key}"] = m.value
            if m.error > 0:
                shared[f"laser.{la.name}.{key}"] = ufloat(
                    m.value, m.error, tag=_laser_tag(la.name, key)
                )
        if la.area is not None:
            a = _tagged(la.area, _laser_tag(la.name, "area"))
        else:
            waist = _tagged(la.waist, _laser_tag(la.name, "waist"))
            offset = _tagged(la.beam_offset, _laser_tag(la.name, "beam_offset"))
            profile = gaussian_crossing_length if la.cw else gaussian_effective_area
            a = profile(waist, offset)
            for key, u in (("waist", waist), ("beam_offset", offset)):
                nominal[f"laser.{la.name}.{key}"] = nominal_values(u)
                if isinstance(u, UFloat):
                    shared[f"laser.{la.name}.{key}"] = u  # the same number as in the area
        for key in ("beam_height_rms", "hit_fraction", "power"):
            m = getattr(la, key)
            if m is not None:
                nominal[f"laser.{la.name}.{key}"] = m.value
                if m.error > 0:
                    shared[f"laser.{la.name}.{key}"] = ufloat(
                        m.value, m.error, tag=_laser_tag(la.name, key)
                    )
        area_ratio[la.name] = a / la.effective_area
        energy_ratio[la.name] = (
            _tagged(la.energy_scale, _laser_tag(la.name, "energy_scale")) / la.energy_scale.value
        )
    return _Context(
        c.layout,
        nominal,
        shared,
        area_ratio,
        energy_ratio,
        {la.name: la for la in rd.lasers},
        c.settings.scale_errors,
        c.settings.velocity_nodes,
    )


@dataclass(frozen=True)
class _Block:
    laser: int
    group: int
    rows: np.ndarray
    velocity: float
    spread: float


class _CompoundModel:
    """Stacked rows of one compound and the model of their phases and visibility ratios."""

    def __init__(self, rc: RecoilCompound, ctx: _Context):
        self.rc, self.ctx = rc, ctx
        self.lasers = rc.lasers
        self.series = rc.series
        cat = np.concatenate
        s = rc.series
        self.energy = cat([x.pulse_energies for x in s])
        self.phase = cat([x.phases for x in s])
        self.phase_err = cat([x.phase_errors for x in s])
        self.vis = cat([x.visibility_ratios for x in s])
        self.vis_err = cat([x.visibility_errors for x in s])
        self.key_power = cat([_or_zeros(x.key_power, x.n_points, bool) for x in s])
        self.velocity_row = cat([x.velocities for x in s])
        labels = [lab for x in s for lab in (x.references or ("",) * x.n_points)]
        self.labels = labels
        self.ref_vis = cat([_or_zeros(x.reference_visibility_errors, x.n_points) for x in s])
        ref_ph = cat([_or_zeros(x.reference_phase_errors, x.n_points) for x in s])
        self.phase_cov = None
        if any(labels) and np.any(ref_ph > 0):
            self.phase_cov = common_covariance(self.phase_err, labels, ref_ph)
        self.vis_shared = any(labels) and bool(np.any(self.ref_vis > 0))
        self.laser_of_row = cat([np.full(x.n_points, self.lasers.index(x.laser)) for x in s])
        # hit fractions with a stated error: fitted with that error as a Gaussian constraint
        # (the saturation of the mixture measures f), the stated value its centre
        self.constrained = [
            (f"laser.{n}.hit_fraction", ctx.lasers[n].hit_fraction.error)
            for n in self.lasers
            if ctx.lasers[n].hit_fraction.error > 0
        ]
        self.rician = np.array(
            [ctx.lasers[self.lasers[i]].visibility_errors == "rician" for i in self.laser_of_row],
            dtype=bool,
        )
        self.group_of_row = cat([np.full(x.n_points, g) for g, x in enumerate(s)])
        self.velocity_dependent = ctx.layout != "time-domain"
        blocks: list[_Block] = []
        start = 0
        for g, x in enumerate(s):
            idx = np.arange(start, start + x.n_points)
            start += x.n_points
            pairs = np.stack([x.velocities, x.spreads], axis=1)
            for v, sp in np.unique(pairs, axis=0):
                sel = (x.velocities == v) & (x.spreads == sp)
                blocks.append(_Block(self.lasers.index(x.laser), g, idx[sel], float(v), float(sp)))
        self.blocks = tuple(blocks)
        self.n = self.energy.size

    def values(self) -> dict[str, float]:
        """Nominal inputs of this compound's model (SI; velocity entries are scale factors)."""
        v = dict(self.ctx.nominal)
        v["mass"] = self.rc.mass.value
        v["fluorescence_yield"] = self.rc.fluorescence_yield.value
        for g in range(len(self.series)):
            v[f"velocity[{g}]"] = 1.0
        return v

    def coefficients(self, vals: dict[str, float]):
        """Per laser: K (φ1 = K/v or K), K_e (emitted photon) and n̄ per unit σ·E (1/(m²·J))."""
        layout = build_layout(self.ctx.layout, vals)
        t0 = vals["instrument.pulse_times[0]"] if self.ctx.layout == "time-domain" else 0.0
        out = []
        for name in self.lasers:
            la = self.ctx.lasers[name]
            lam = vals[f"laser.{name}.wavelength"]
            w = float(layout.weight(t0 + vals[f"laser.{name}.position"]))
            k = la.direction * layout.scale * float(recoil_velocity(lam, vals["mass"])) * w
            lam_e = self.rc.emission_wavelength or lam
            ke = layout.scale * float(recoil_velocity(lam_e, vals["mass"])) * w
            per = la.energy_scale.value / (la.effective_area * float(photon_energy(lam)))
            if la.standing:  # n̄ is the mean over x of both passes (twice the incoming pass)
                per *= 2.0
            out.append((k, ke, per))
        return out

    def fluence_nodes(self, name: str, vals: dict[str, float]):
        """Relative fluence over the molecular-beam height (None: a line beam)."""
        height = vals.get(f"laser.{name}.beam_height_rms", 0.0)
        if height <= 0:
            return None
        return height_fluence_nodes(
            vals[f"laser.{name}.waist"], vals[f"laser.{name}.beam_offset"], height
        )

    def peak_dose(self, vals: dict[str, float], i: int) -> float:
        """Largest dose of laser ``i``'s rows (J, or W·s/m for cw: P/v at the mean speed)."""
        rows = np.flatnonzero(self.laser_of_row == i)
        name = self.lasers[i]
        d = self.dose(vals, rows, name)
        if self.ctx.lasers[name].cw:
            d = d / self.velocity_row[rows]
        return float(d.max())

    def dose(self, vals: dict[str, float], rows: np.ndarray, name: str) -> np.ndarray:
        """Pulse energies (J) or cw powers (W) of ``rows``; key-power rows follow ``power``."""
        e = self.energy[rows]
        key = self.key_power[rows]
        if key.any():
            e = np.where(key, vals[f"laser.{name}.power"], e)
        return e

    def predict(self, sigmas: np.ndarray, q: float, vals: dict[str, float]):
        """Model phases and visibility ratios for cross-sections ``sigmas`` (m², per laser)."""
        coef = self.coefficients(vals)
        ph = np.empty(self.n)
        vi = np.empty(self.n)
        for b in self.blocks:
            k, ke, per = coef[b.laser]
            name = self.lasers[b.laser]
            la = self.ctx.lasers[name]
            f = vals[f"velocity[{b.group}]"]
            nbar = sigmas[b.laser] * per * self.dose(vals, b.rows, name)
            if la.cw:  # n̄ at the mean speed; the fluence collected ∝ 1/v
                nbar = nbar / (b.velocity * f)
            ph[b.rows], vi[b.rows] = recoil_observables(
                nbar,
                k,
                b.velocity * f,
                b.spread * f,
                emission_coefficient=ke,
                fluorescence_yield=q,
                velocity_dependent=self.velocity_dependent,
                nodes=self.ctx.nodes,
                cw=la.cw,
                standing=la.standing,
                hit_fraction=vals.get(f"laser.{name}.hit_fraction", 1.0),
                fluence_nodes=self.fluence_nodes(name, vals),
            )
        return ph, vi

    def visibility_model(self, modulus: np.ndarray):
        """Expected measured ratio and its standard deviation (Rician rows: mean and sd)."""
        if not self.rician.any():
            return modulus, self.vis_err
        r = self.rician
        mean = np.where(r, rician_mean(modulus, self.vis_err), modulus)
        sd = np.where(r, rician_sd(modulus, self.vis_err), self.vis_err)
        return mean, sd

    def residual(self, theta: np.ndarray, vals: dict[str, float]) -> np.ndarray:
        nl = len(self.lasers)
        q = theta[nl] if self.rc.fit_yield else vals["fluorescence_yield"]
        prior = []
        if self.constrained:
            k0 = nl + int(self.rc.fit_yield)
            vals = dict(vals)
            for j, (key, err) in enumerate(self.constrained):
                prior.append((theta[k0 + j] - vals[key]) / err)
                vals[key] = theta[k0 + j]
        ph, vi = self.predict(theta[:nl] * SIGMA_UNIT, q, vals)
        if self.phase_cov is None:
            rp = (ph - self.phase) / self.phase_err
        else:
            rp = whiten(ph - self.phase, self.phase_cov)
        mean, sd = self.visibility_model(vi)
        if self.vis_shared:
            rv = whiten(mean - self.vis, common_covariance(sd, self.labels, self.ref_vis * vi))
        else:
            rv = (mean - self.vis) / sd
        return np.concatenate([rp, rv, prior])


def _or_zeros(a, n: int, dtype=float) -> np.ndarray:
    return np.zeros(n, dtype=dtype) if a is None else np.asarray(a, dtype=dtype)


def _jacobian(fun, x0: np.ndarray, steps: np.ndarray) -> np.ndarray:
    cols = []
    for k, h in enumerate(steps):
        xp, xm = x0.copy(), x0.copy()
        xp[k] += h
        xm[k] -= h
        cols.append((fun(xp) - fun(xm)) / (2 * h))
    return np.column_stack(cols)


def _failed(rc: RecoilCompound, message: str, mass_u=None) -> RecoilCompoundResult:
    return RecoilCompoundResult(rc.name, "failed", message, mass_u=mass_u)


def _analyze_compound(rc: RecoilCompound, ctx: _Context) -> RecoilCompoundResult:
    if rc.problem:
        return _failed(rc, rc.problem)
    if rc.mass is None:
        return _failed(rc, f"compound {rc.name!r}: no mass")
    mass_u = rc.mass.value / AMU
    try:
        return _fit_compound(rc, ctx, mass_u)
    except CompoundError as exc:
        return _failed(rc, str(exc), mass_u)
    except (ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
        return _failed(rc, f"compound {rc.name!r}: numerical failure ({exc})", mass_u)


def _start(model: _CompoundModel, vals, q0: float) -> np.ndarray:
    """Per laser, the best of a logarithmic scan of n̄ at the largest pulse energy."""
    nl = len(model.lasers)
    coef = model.coefficients(vals)
    per_sigma = np.array([coef[i][2] * model.peak_dose(vals, i) for i in range(nl)]) * SIGMA_UNIT
    best = np.full(nl, np.inf)
    theta0 = np.ones(nl)
    for nmax in np.geomspace(1e-3, 30.0, 22):
        th = nmax / per_sigma
        full = np.concatenate([th, [q0]]) if model.rc.fit_yield else th
        full = np.concatenate([full, [vals[key] for key, _ in model.constrained]])
        r = model.residual(full, vals) ** 2
        chi = r[: model.n] + r[model.n : 2 * model.n]
        for i in range(nl):
            c = float(chi[model.laser_of_row == i].sum())
            if c < best[i]:
                best[i], theta0[i] = c, th[i]
    return theta0


@dataclass(frozen=True)
class _Solution:
    """The least-squares solution of one compound's recoil fit (internal fit units)."""

    names: list[str]
    theta: np.ndarray
    jac: np.ndarray
    jtj: np.ndarray
    cov: np.ndarray
    residuals: np.ndarray
    chi2: float
    ndof: int
    error_scale: float


def _fit_compound(rc: RecoilCompound, ctx: _Context, mass_u: float) -> RecoilCompoundResult:
    """σ of every laser (and the fluorescence yield when fitted) for one compound, in steps."""
    model = _CompoundModel(rc, ctx)
    vals0 = model.values()
    sol = _solve(rc, model, vals0, ctx.scale_errors)
    fit_u = _uncertain_parameters(rc, model, ctx, vals0, sol)
    fits, warnings = _laser_fits(rc, model, ctx, vals0, sol, fit_u)
    q_u = _fluorescence_yield(rc, sol, fit_u, len(model.lasers), warnings)
    warnings.extend(rc.dropped)
    messages = _messages(rc, q_u, sol.error_scale)
    k0 = len(model.lasers) + int(rc.fit_yield)
    for j, (key, _) in enumerate(model.constrained):
        la = ctx.lasers[key[len("laser.") : -len(".hit_fraction")]]
        f = fit_u[k0 + j]
        messages.append(
            f"{la.name}: hit fraction {format_value_error(f.nominal_value, f.std_dev)} "
            f"(stated {format_value_error(la.hit_fraction.value, la.hit_fraction.error)}, "
            "refined by the data's saturation)"
        )
    status = "warning" if warnings else "ok"
    return RecoilCompoundResult(
        compound=rc.name,
        status=status,
        message="; ".join(messages + warnings) or "ok",
        mass_u=mass_u,
        fits=tuple(fits),
        fluorescence_yield=q_u,
        yield_fitted=rc.fit_yield,
        emission_wavelength_m=rc.emission_wavelength,
        chi2=sol.chi2,
        ndof=sol.ndof,
        warnings=tuple(warnings),
    )


def _solve(rc: RecoilCompound, model: _CompoundModel, vals0: dict, scale_errors: str) -> _Solution:
    """Least squares from the linearised start, then the covariance (Gauss–Newton, Birge)."""
    nl = len(model.lasers)
    fit_q = rc.fit_yield
    q_start = 0.5
    theta0 = _start(model, vals0, q_start)
    params = lmfit.Parameters()
    names = [f"s{i}" for i in range(nl)] + (["q"] if fit_q else [])
    for i in range(nl):
        params.add(names[i], value=theta0[i])
    if fit_q:
        params.add("q", value=q_start)
    for j, (key, _) in enumerate(model.constrained):
        names.append(f"f{j}")
        params.add(f"f{j}", value=vals0[key])

    def res_fun(p):
        return model.residual(np.array([p[k].value for k in names]), vals0)

    res = lmfit.minimize(res_fun, params, method="leastsq", scale_covar=False)
    theta = np.array([res.params[k].value for k in names])
    if not res.success or not np.all(np.isfinite(theta)):
        raise FitError(f"compound {rc.name!r}: the recoil fit did not converge ({res.message})")

    def r_theta(th):
        return model.residual(th, vals0)

    steps = 1e-4 * np.maximum(np.abs(theta), 1e-2)
    jac = _jacobian(r_theta, theta, steps)
    jtj = jac.T @ jac
    try:
        cov = np.linalg.inv(jtj)
    except np.linalg.LinAlgError:
        raise FitError(f"compound {rc.name!r}: the recoil fit has a singular covariance") from None
    if model.constrained:  # the data's share only: the constraints enter as stated inputs
        jd = jac[: 2 * model.n]
        cov = cov @ (jd.T @ jd) @ cov
    if not (np.all(np.isfinite(cov)) and np.all(np.diag(cov) > 0)):
        raise FitError(f"compound {rc.name!r}: the recoil fit gave no usable errors")
    r0 = r_theta(theta)
    chi2 = float(r0 @ r0)
    ndof = 2 * model.n - len(names) + len(model.constrained)
    error_scale = 1.0
    if scale_errors == "birge" and ndof > 0 and chi2 / ndof > 1:
        error_scale = math.sqrt(chi2 / ndof)
        cov = cov * error_scale**2
    return _Solution(names, theta, jac, jtj, cov, r0, chi2, ndof, error_scale)


def _nuisance_inputs(rc: RecoilCompound, model: _CompoundModel, ctx: _Context):
    """(key, 1σ, uncertain value) of every stated input that enters the model non-linearly."""
    nuisances: list[tuple[str, float, Any]] = []
    relevant = {f"laser.{n}.{x}" for n in model.lasers for x in _NONLINEAR_LASER_KEYS}
    for n in model.lasers:  # waist and offset shape the height profile (beyond the area)
        if ctx.lasers[n].beam_height_rms.value > 0:
            relevant |= {f"laser.{n}.waist", f"laser.{n}.beam_offset"}
    for k, u in ctx.shared.items():
        if k.startswith("instrument.") or k in relevant:
            nuisances.append((k, u.std_dev, u))
    if rc.mass.error > 0:
        nuisances.append(
            ("mass", rc.mass.error, ufloat(rc.mass.value, rc.mass.error, tag=f"mass: {rc.name}"))
        )
    if model.velocity_dependent:
        for g, s in enumerate(rc.series):
            if s.velocity.error > 0:
                rel = s.velocity.error / s.velocity.value
                nuisances.append(
                    (f"velocity[{g}]", rel, ufloat(1.0, rel, tag=f"velocity: {s.label}"))
                )
    q_stated = rc.fluorescence_yield
    if not rc.fit_yield and q_stated.error > 0:
        nuisances.append(
            (
                "fluorescence_yield",
                q_stated.error,
                ufloat(q_stated.value, q_stated.error, tag=f"fluorescence yield: {rc.name}"),
            )
        )
    return nuisances


_NONLINEAR_LASER_KEYS = ("wavelength", "position", "beam_height_rms", "hit_fraction", "power")


def _uncertain_parameters(rc, model, ctx, vals0, sol: _Solution) -> list:
    """Fitted parameters as correlated uncertain numbers, with every stated input attached.

    Nuisance inputs enter through the implicit derivative of the least-squares solution,
    dθ/dp = −(JᵀJ)⁻¹ Jᵀ ∂r/∂p.
    """
    nl = len(model.lasers)
    scales = np.array([SIGMA_UNIT] * nl + [1.0] * (len(sol.names) - nl))
    fit_u = uncertainties.correlated_values(
        sol.theta * scales,
        sol.cov * np.outer(scales, scales),
        tags=[f"{FIT_TAG}|recoil {rc.name}"] * len(sol.names),
    )
    fit_u = list(fit_u)
    for key, err, u in _nuisance_inputs(rc, model, ctx):
        h = 1e-3 * err
        vp, vm = dict(vals0), dict(vals0)
        vp[key] += h
        vm[key] -= h
        drdp = (model.residual(sol.theta, vp) - model.residual(sol.theta, vm)) / (2 * h)
        dtheta = -np.linalg.solve(sol.jtj, sol.jac.T @ drdp) * scales
        for i in range(len(sol.names)):
            fit_u[i] = fit_u[i] + dtheta[i] * (u - u.nominal_value)
    return fit_u


def _laser_fits(rc, model, ctx, vals0, sol: _Solution, fit_u) -> tuple[list, list[str]]:
    """One :class:`CrossSectionFit` per laser, and the warnings each raises."""
    nl = len(model.lasers)
    fit_q = rc.fit_yield
    theta, r0 = sol.theta, sol.residuals
    q_val = theta[nl] if fit_q else rc.fluorescence_yield.value
    ph_m, modulus = model.predict(theta[:nl] * SIGMA_UNIT, q_val, vals0)
    vi_m, _ = model.visibility_model(modulus)
    coef = model.coefficients(vals0)
    fits = []
    warnings: list[str] = []
    for i, name in enumerate(model.lasers):
        la = ctx.lasers[name]
        sigma_u = fit_u[i] * ctx.area_ratio[name] / ctx.energy_ratio[name]
        rows = model.laser_of_row == i
        rr = np.concatenate([r0[: model.n][rows], r0[model.n : 2 * model.n][rows]])
        chi_l = float(rr @ rr)
        nu_l = int(2 * rows.sum()) - 1
        n_at_max = float(theta[i] * SIGMA_UNIT * coef[i][2] * model.peak_dose(vals0, i))
        fits.append(
            CrossSectionFit(
                compound=rc.name,
                laser=name,
                wavelength_m=la.wavelength.value,
                cross_section=sigma_u,
                mean_photons_at_max=n_at_max,
                chi2=sol.chi2 if fit_q else chi_l,
                ndof=sol.ndof if fit_q else nu_l,
                pulse_energies=model.energy[rows],
                phases=model.phase[rows],
                phase_errors=model.phase_err[rows],
                visibility_ratios=model.vis[rows],
                visibility_errors=model.vis_err[rows],
                model_phases=ph_m[rows],
                model_visibility=vi_m[rows],
            )
        )
        fit = fits[-1]
        if fit.ndof > 0 and not fit_q and stats.chi2.sf(chi_l, nu_l) < 0.01:
            warnings.append(
                f"{name}: reduced χ² = {fit.reduced_chi2:.2f} (p < 0.01); the stated point errors "
                "may be too small, or a stated input (laser position, velocity) off by more than "
                "its error"
            )
        if sigma_u.nominal_value <= 2 * sigma_u.std_dev:
            warnings.append(f"{name}: σ is not significant (less than 2 standard errors)")
        vmin = float(np.min(modulus[rows]))
        if vmin < 0.1:
            warnings.append(
                f"{name}: the fringe visibility drops to {vmin:.0%} of laser-off at the largest "
                "pulse energy; the phase there is poorly defined"
            )
        height = la.beam_height_rms
        if height.value == 0 and height.error > 0:
            warnings.append(
                f"{name}: beam_height_rms 0 ± {height.error:g} m is compatible with 0; its error "
                "is second order and is not propagated"
            )
        if la.waist is not None and la.beam_offset.error > abs(la.beam_offset.value):
            warnings.append(
                f"{name}: beam_offset {la.beam_offset.value:g} ± {la.beam_offset.error:g} m is "
                "compatible with 0; the area error from it is second order and is not propagated"
            )
    if fit_q and sol.ndof > 0 and stats.chi2.sf(sol.chi2, sol.ndof) < 0.01:
        warnings.append(
            f"reduced χ² = {sol.chi2 / sol.ndof:.2f} (p < 0.01); the stated point errors may be "
            "too small, or a stated input (laser position, velocity) off by more than its error"
        )
    return fits, warnings


def _fluorescence_yield(rc, sol: _Solution, fit_u, nl: int, warnings: list[str]):
    """The fitted (with a range warning) or stated fluorescence yield."""
    q_stated = rc.fluorescence_yield
    if rc.fit_yield:
        q_u = fit_u[nl]
        if not 0 <= q_u.nominal_value <= 1:
            warnings.append(
                f"fitted fluorescence yield {q_u.nominal_value:.2f} lies outside 0..1 "
                "(unconstrained fit; the data barely determine it)"
            )
        return q_u
    return (
        ufloat(q_stated.value, q_stated.error, tag=f"fluorescence yield: {rc.name}")
        if q_stated.error > 0
        else q_stated.value
    )


def _messages(rc, q_u, error_scale: float) -> list[str]:
    """What the compound's message says besides its warnings."""
    messages = []
    if rc.fit_yield or rc.fluorescence_yield.value > 0:
        lam_e = (
            f"{rc.emission_wavelength * 1e9:g} nm"
            if rc.emission_wavelength
            else "the laser wavelength"
        )
        what = "fitted" if rc.fit_yield else "stated"
        messages.append(
            f"isotropic re-emission included ({what} fluorescence yield "
            f"{format_value_error(nominal_values(q_u), std_devs(q_u))}, emission at {lam_e})"
        )
    if error_scale > 1:
        messages.append(f"fit errors scaled by √(χ²/ν) = {error_scale:.2f} (Birge)")
    return messages


def analyze_recoil(c) -> RecoilResult:
    """Cross-sections of every compound of a loaded campaign that has ``[data] recoil``.

    Never raises for bad data: a compound with bad rows or a failed fit is ``failed``.
    """
    rd: RecoilData = c.recoil
    if rd is None:
        raise InputError(f"{c.path.name}: no [data] recoil in this campaign")
    ctx = _build_context(c)
    compounds = tuple(_analyze_compound(rc, ctx) for rc in rd.compounds)
    stated = {}
    for la in rd.lasers:
        for k, m in la.stated().items():
            stated[k] = {"value": m.value, "error": m.error}
    notes = []
    if any(r.uses_reemission for r in compounds):
        notes.append(
            "isotropic re-emission is modelled for the compounds with a fluorescence_yield: each "
            "absorbed photon's factor e^{iφ1} is multiplied by (1 − q) + q·sin φ_e/φ_e"
        )
    return RecoilResult(
        layout=c.layout,
        source=str(rd.path),
        lasers=rd.lasers,
        compounds=compounds,
        stated_inputs=stated,
        notes=tuple(notes),
    )


# --------------------------------------------------------------------------------------------
# results and their renderings (no physics below this line, apart from the simulator)
# --------------------------------------------------------------------------------------------


# --------------------------------------------------------------------------------------------
# simulator: campaigns in the input contract with a known truth
# --------------------------------------------------------------------------------------------
