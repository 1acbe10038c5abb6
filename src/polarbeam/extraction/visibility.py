"""Optical polarizability and absorption cross-section from visibility-versus-power curves.

Per compound the real and imaginary polarizability volumes at the laser wavelength (Re α, Im α
in Å³; σ_abs = k Im α/ε₀) are fitted to every series (temperature, velocity) of
``visibilities.csv`` by maximising the **Rician** likelihood of the measured visibilities
(a visibility is the modulus of a fitted fringe amplitude: never negative, biased upward near
zero, docs/visibility.md §8). The visibility curve oscillates with power, so a grid of starting
points precedes the local fit. The open fraction scales every visibility and no α can absorb
it, so it is fitted too, with its stated value ± error as a Gaussian prior; the covariance
Σ = H⁻¹ of −ln L splits into the data's part Σ H_data Σ ("fit statistics") and the prior's
(the response Σ·P to the stated open fraction). Power scale and vertical waist enter only as
α·P·s/w_y and scale α and σ exactly; each series' velocity calibration and the grating spacing
are propagated by the implicit derivative of the optimum. All enter as tagged
:mod:`uncertainties` variables, shared by all compounds where the input is shared, so
``variance_budget`` splits the variance.

The same fit with the classical (straight-ray) model gives a second deviance; their difference
is 2 ln(likelihood ratio) and names the preferred model (``quantum``, ``classical`` or
``undecided`` within ±2 ln 100).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np
from uncertainties import correlated_values, ufloat

from polarbeam._util.optional import lazy
from polarbeam.beam.distributions import GaussianVelocity
from polarbeam.beam.talbot import absorption_cross_section
from polarbeam.constants import AMU, ANGSTROM3_SI
from polarbeam.contract.visibility import GratingSpec, VisibilityCompound, VisibilityData
from polarbeam.errors import CompoundError, FitError
from polarbeam.results.visibility import (
    OpticalCompoundResult,
    OpticalResult,
    VisibilityCurve,
)

optimize = lazy("scipy.optimize", "numerical routines")
special = lazy("scipy.special", "numerical routines")

__all__ = [
    "LIKELIHOOD_THRESHOLD",
    "analyze_visibilities",
    "fit_compound",
    "rician_deviance",
    "rician_nll",
    "saturated_amplitude",
    "series_distribution",
]

#: |2 ln LR| above which one model is preferred (a likelihood ratio of 100).
LIKELIHOOD_THRESHOLD = 2.0 * math.log(100.0)

_BUDGET_TAGS = {
    "gratings.power_scale": "gratings: power_scale",
    "gratings.laser_waist_vertical": "gratings: laser_waist_vertical",
    "gratings.open_fraction": "gratings: open_fraction",
    "gratings.spacing": "instrument: grating spacing",
}


#: −ln L returned where the model overflows (far outside the physical region).
_FAR = 1e30

# d ln(fitted α)/d ln(input) for the inputs that enter only through α·P·s/w_y
_SCALE_KEYS = {"gratings.power_scale": -1.0, "gratings.laser_waist_vertical": 1.0}


def rician_nll(v, nu, s):
    """−ln p(V | ν, σ) of the Rician distribution, without the ν-independent ln(V/σ²) term."""
    v, nu, s = np.asarray(v, float), np.asarray(nu, float), np.asarray(s, float)
    z = v * nu / s**2
    return (v**2 + nu**2) / (2 * s**2) - (np.log(special.i0e(z)) + z)


def saturated_amplitude(v, s):
    """The ν ≥ 0 that maximises the Rician likelihood of one measured V (0 when V² ≤ 2σ²)."""
    v, s = np.broadcast_arrays(np.asarray(v, float), np.asarray(s, float))
    out = np.zeros(v.shape)
    live = v**2 > 2 * s**2
    vv, ss = v[live], s[live]
    lo, hi = np.zeros(vv.shape), vv.copy()  # the root of ν = V I₁/I₀(Vν/σ²) lies in (0, V]
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        z = vv * mid / ss**2
        g = vv * special.i1e(z) / special.i0e(z) - mid
        lo = np.where(g > 0, mid, lo)
        hi = np.where(g > 0, hi, mid)
    out[live] = 0.5 * (lo + hi)
    return out


def rician_deviance(v, nu, s) -> float:
    """2 Σ [−ln L(ν) + ln L(ν_sat)]: the Rician χ² (Σ((V−ν)/σ)² when ν ≫ σ)."""
    sat = saturated_amplitude(v, s)
    return float(2.0 * np.sum(rician_nll(v, nu, s) - rician_nll(v, sat, s)))


@dataclass
class _Problem:
    """One compound's data and the interferometer, for given values of the stated inputs."""

    vc: VisibilityCompound
    spec: GratingSpec
    nodes: int
    _built: dict = field(default_factory=dict)  # interferometers by input values (a cache)

    @property
    def profiled(self) -> tuple[tuple[str, float, float], ...]:
        """(key, stated value, error) of the inputs fitted with their stated error as a prior:
        the open fraction and each series' velocity (light grating, error > 0)."""
        if not self.spec.light:
            return ()
        out = []
        f = self.spec.open_fraction
        if f is not None and f.error > 0:
            out.append(("gratings.open_fraction", f.value, f.error))
        for k, s in enumerate(self.vc.series):
            if s.velocity.error > 0:
                out.append((f"velocity[{k}]", s.velocity.value, s.velocity.error))
        return tuple(out)

    def prior(self, x) -> float:
        """−ln of the Gaussian priors of the profiled inputs (x[2:])."""
        return sum(
            0.5 * ((xi - c) / e) ** 2 for xi, (_, c, e) in zip(x[2:], self.profiled, strict=False)
        )

    def predict(self, x, model: str, values: dict[str, float] | None = None):
        """Model visibilities per series for x = (Re α, Im α, *profiled inputs), α in Å³."""
        values = dict(values or {})
        for xi, (key, _, _) in zip(x[2:], self.profiled, strict=False):
            values[key] = float(xi)
        key = tuple(sorted((k, v) for k, v in values.items() if k.startswith("gratings")))
        tl = self._built.get(key)
        if tl is None:
            tl = self._built[key] = self.spec.build(values)
        mass = values.get("mass", self.vc.mass.value)
        re_si = x[0] * ANGSTROM3_SI
        sigma = 0.0
        if tl.light:
            sigma = float(absorption_cross_section(x[1] * ANGSTROM3_SI, tl.second.wavelength))
        out = []
        for k, s in enumerate(self.vc.series):
            dist = series_distribution(s, values.get(f"velocity[{k}]", s.velocity.value))
            out.append(
                tl.visibility(mass, dist, s.powers, re_si, sigma, model=model, nodes=self.nodes)
            )
        return out

    def nll(self, x, model: str, values=None) -> float:
        """−ln L of the data plus the Gaussian priors of the profiled inputs.

        Far outside the physical region (a strongly negative Im α is a gain) the model overflows;
        −ln L is then a large finite number so that the optimiser turns back.
        """
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            pred = self.predict(x, model, values)
            data = sum(
                np.sum(rician_nll(s.visibilities, p, s.errors))
                for s, p in zip(self.vc.series, pred, strict=True)
            )
        out = float(data + self.prior(x))
        return out if math.isfinite(out) else _FAR

    def nll_grid(self, re, im, model: str) -> np.ndarray:
        """−ln L (prior at its centre) for arrays of Re α and Im α at once (the start grid)."""
        tl = self.spec.build({})
        re, im = np.asarray(re, float), np.asarray(im, float)
        sigma = absorption_cross_section(im * ANGSTROM3_SI, tl.second.wavelength)
        total = np.zeros(re.shape)
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            self._grid_terms(tl, re, sigma, model, total)
        return np.where(np.isfinite(total), total, _FAR)

    def _grid_terms(self, tl, re, sigma, model, total) -> None:
        for s in self.vc.series:
            dist = series_distribution(s, s.velocity.value)
            v, w = tl.velocity_nodes(
                self.vc.mass.value, dist, s.powers, float(np.max(re)) * ANGSTROM3_SI, self.nodes
            )
            c1, c0 = tl.harmonics(
                self.vc.mass.value,
                v[None, :, None],
                s.powers[None, None, :],
                (re * ANGSTROM3_SI)[:, None, None],
                sigma[:, None, None],
                model,
            )
            shape = (re.size, v.size, s.powers.size)
            c1, c0 = np.broadcast_to(c1, shape), np.broadcast_to(c0, shape)
            vis = 2.0 * np.abs(np.einsum("v,avp->ap", w, c1)) / np.einsum("v,avp->ap", w, c0)
            total += np.sum(rician_nll(s.visibilities, vis, s.errors), axis=1)

    def deviance(self, x, model: str, values=None) -> float:
        pred = self.predict(x, model, values)
        return float(
            sum(
                rician_deviance(s.visibilities, p, s.errors)
                for s, p in zip(self.vc.series, pred, strict=True)
            )
        )


def series_distribution(s, velocity: float):
    """The velocity distribution of a visibility series at mean ``velocity``: its measured table
    scaled to that mean (the table's calibration is a common scale), else the Gaussian of the
    stated spread."""
    if s.distribution is not None:
        return s.distribution.scaled(velocity / s.velocity.value)
    return GaussianVelocity(velocity, s.spread)


def _start_grid(prob: _Problem, model: str, light: bool):
    """Best (Re α, Im α) on a coarse grid: the curve oscillates, a local fit alone may stall."""
    if not light:
        return np.zeros(2)
    tail = [c for _, c, _ in prob.profiled]
    # Re α from a phase of 0.05 rad to 60 rad at the highest power and the slowest series
    tl = prob.spec.build({})
    slow = min(s.velocity.value for s in prob.vc.series)
    pmax = max(float(np.max(s.powers)) for s in prob.vc.series)
    per_a3 = float(tl.second.strengths(ANGSTROM3_SI, 0.0, max(pmax, 1e-9), slow)[0])
    res = np.repeat(np.geomspace(0.05 / per_a3, 60.0 / per_a3, 60), 3)
    ims = res * np.tile([0.0, 0.03, 0.1], 60)
    # in chunks: the velocity grid resolves the oscillation of the chunk's largest α only
    nll = np.concatenate(
        [
            prob.nll_grid(r, i, model)
            for r, i in zip(np.split(res, 10), np.split(ims, 10), strict=True)
        ]
    )
    k = int(np.argmin(nll))
    return np.array([res[k], ims[k], *tail])


def _local_fit(prob: _Problem, x0, model: str, values=None):
    a = max(abs(x0[0]), 1.0)
    scale = np.array([a, a, *(c for _, c, _ in prob.profiled)][: len(x0)])
    # Im α may come out negative (within its error) when absorption is weak: bounding it at 0
    # would bias the estimate and leave no usable curvature at the bound
    bounds = [
        (0.0, None),
        (-0.3, None),
        *(
            (0.02 / c, 0.98 / c) if k.startswith("gratings") else (0.5, 1.5)
            for k, c, _ in prob.profiled
        ),
    ][: len(x0)]

    def f(y):
        return prob.nll(y * scale, model, values)

    res = optimize.minimize(
        f,
        np.asarray(x0) / scale,
        method="L-BFGS-B",
        bounds=bounds,
        options={"ftol": 1e-11, "gtol": 1e-7, "maxiter": 500},
    )
    return res.x * scale, float(res.fun)


def _positive_definite(h) -> bool:
    return bool(np.all(np.isfinite(h)) and np.all(np.linalg.eigvalsh(0.5 * (h + h.T)) > 0))


def _polish(prob: _Problem, x0, model: str):
    """Nelder–Mead from ``x0`` (in the scaled coordinates of :func:`_local_fit`)."""
    scale = np.array([max(abs(x0[0]), 1.0), max(abs(x0[0]), 1.0), *x0[2:]])

    def f(y):
        return prob.nll(y * scale, model)

    res = optimize.minimize(
        f,
        x0 / scale,
        method="Nelder-Mead",
        options={"xatol": 1e-8, "fatol": 1e-10, "maxiter": 4000},
    )
    return res.x * scale if res.fun <= f(x0 / scale) else np.asarray(x0)


def _nll_at(prob: _Problem, key: str, value: float):
    """The quantum −ln L as a function of θ with one stated input set to ``value``."""
    return lambda y: prob.nll(y, "quantum", {key: value})


def _gradient(fun, x, steps):
    g = np.zeros(x.size)
    for i in range(x.size):
        e = np.zeros(x.size)
        e[i] = steps[i]
        g[i] = (fun(x + e) - fun(x - e)) / (2 * steps[i])
    return g


def _hessian(fun, x, steps):
    n = x.size
    h = np.zeros((n, n))
    f0 = fun(x)
    for i in range(n):
        ei = np.zeros(n)
        ei[i] = steps[i]
        h[i, i] = (fun(x + ei) - 2 * f0 + fun(x - ei)) / steps[i] ** 2
        for j in range(i + 1, n):
            ej = np.zeros(n)
            ej[j] = steps[j]
            h[i, j] = h[j, i] = (
                fun(x + ei + ej) - fun(x + ei - ej) - fun(x - ei + ej) + fun(x - ei - ej)
            ) / (4 * steps[i] * steps[j])
    return h


def _nuisances(spec: GratingSpec, vc: VisibilityCompound) -> dict[str, float]:
    """Stated inputs with their 1σ errors that enter this compound's fit."""
    out = {k: m.error for k, m in spec.stated().items() if k in _BUDGET_TAGS and m.error > 0}
    out.pop("gratings.open_fraction", None)  # profiled with its prior (fit_compound)
    return out


def _shared_variables(spec: GratingSpec) -> dict[str, object]:
    """One tagged zero-mean variable per shared stated input (the same for every compound)."""
    return {
        k: ufloat(0.0, m.error, tag=_BUDGET_TAGS[k])
        for k, m in spec.stated().items()
        if k in _BUDGET_TAGS and m.error > 0
    }


def fit_compound(
    vc: VisibilityCompound, spec: GratingSpec, nodes: int = 48, shared: dict | None = None
) -> OpticalCompoundResult:
    """Fit one compound (quantum and classical); raises :class:`CompoundError` on failure."""
    if vc.problem is not None:
        raise CompoundError(vc.problem)
    npts = sum(s.powers.size for s in vc.series)
    prob = _Problem(vc, spec, nodes)
    light = spec.light
    mass_u = vc.mass.value / AMU
    wavelength = spec.laser_wavelength.value if light else None
    nfree = 2 if light else 0
    if npts < nfree + 1:
        raise CompoundError(
            f"compound {vc.name!r}: expected at least {nfree + 1} visibilities, found {npts}"
        )
    fits = {}
    for model in ("quantum", "classical"):
        x0 = _start_grid(prob, model, light)
        x, _ = _local_fit(prob, x0, model) if light else (x0, 0.0)
        fits[model] = x
    xq, xc = fits["quantum"], fits["classical"]
    chi_q = prob.deviance(xq, "quantum")
    chi_c = prob.deviance(xc, "classical")
    alpha = sigma = None
    if light:
        steps = np.maximum(1e-3 * np.abs(xq), 1e-3 * max(xq[0], 1.0))
        steps[2:] = [1e-2 * e for _, _, e in prob.profiled]
        h = _hessian(lambda y: prob.nll(y, "quantum"), xq, steps)
        if not _positive_definite(h):  # stopped short of the minimum: polish, then try again
            xq = _polish(prob, xq, "quantum")
            chi_q = prob.deviance(xq, "quantum")
            h = _hessian(lambda y: prob.nll(y, "quantum"), xq, steps)
        if not _positive_definite(h):
            raise FitError(
                f"compound {vc.name!r}: the visibility fit found no minimum with usable errors "
                "(the Hessian of −ln L is not positive definite)"
            )
        cov = np.linalg.inv(h)
        shared = shared if shared is not None else _shared_variables(spec)
        # the data's share of the covariance, Σ H_data Σ, and the response to the prior's centre
        prior_h = np.diag([0.0, 0.0, *(e**-2 for _, _, e in prob.profiled)])
        cov_data = cov @ (h - prior_h) @ cov
        # symmetric and positive semi-definite (a noisy Hessian may leave tiny negative modes)
        eig, vec = np.linalg.eigh(0.5 * (cov_data + cov_data.T))
        cov_data = (vec * np.clip(eig, 0.0, None)) @ vec.T
        stat = correlated_values(
            list(xq[:2]),
            cov_data[:2, :2],
            tags=[f"fit statistics|{vc.name}|re", f"fit statistics|{vc.name}|im"],
        )
        alpha_u, im_u = stat[0], stat[1]
        for i, (key, _, err) in enumerate(prob.profiled, start=2):
            if key.startswith("velocity["):
                var = ufloat(0.0, err, tag=f"velocity: {vc.series[int(key[9:-1])].label}")
            else:
                var = shared.get(key) or ufloat(0.0, err, tag=_BUDGET_TAGS[key])
            jac = cov[:, i] * prior_h[i, i]  # the response of the optimum to the prior's centre
            alpha_u = alpha_u + jac[0] * var
            im_u = im_u + jac[1] * var
        nominal = {k: m.value for k, m in spec.stated().items()}
        for key, err in _nuisances(spec, vc).items():
            base = nominal[key]
            var = shared.get(key) or ufloat(0.0, err, tag=_BUDGET_TAGS[key])
            if key in _SCALE_KEYS:  # the model depends on α·P·s/w_y only: exact derivative
                jac = _SCALE_KEYS[key] * np.array([xq[0], xq[1]]) / base
            else:  # implicit derivative of the optimum: dθ/dη = −H⁻¹ ∂(∇_θ nll)/∂η
                dg = (
                    _gradient(_nll_at(prob, key, base + err), xq, steps)
                    - _gradient(_nll_at(prob, key, base - err), xq, steps)
                ) / (2 * err)
                jac = -cov @ dg
            alpha_u = alpha_u + jac[0] * var
            im_u = im_u + jac[1] * var
        alpha = alpha_u
        sigma = im_u * float(absorption_cross_section(ANGSTROM3_SI, wavelength))
    # 2 ln(likelihood ratio), the priors of the profiled inputs included
    diff = chi_c + 2 * prob.prior(xc) - chi_q - 2 * prob.prior(xq)
    preferred = (
        "quantum"
        if diff > LIKELIHOOD_THRESHOLD
        else "classical"
        if diff < -LIKELIHOOD_THRESHOLD
        else "undecided"
    )
    curves = []
    pq, pc = prob.predict(xq, "quantum"), prob.predict(xc, "classical")
    grids = [np.linspace(0.0, 1.05 * float(np.max(s.powers)), 160) for s in vc.series]
    dense_vc = replace(
        vc, series=tuple(_with_powers(s, g) for s, g in zip(vc.series, grids, strict=True))
    )
    dense = _Problem(dense_vc, spec, nodes)
    dq, dc = dense.predict(xq, "quantum"), dense.predict(xc, "classical")
    for k, s in enumerate(vc.series):
        curves.append(
            VisibilityCurve(
                s.label,
                s.temperature_K,
                s.velocity.value,
                s.powers,
                s.visibilities,
                s.errors,
                pq[k],
                pc[k],
                grids[k],
                dq[k],
                dc[k],
            )
        )
    warnings = []
    if light and xq[0] <= 1e-9:
        warnings.append(f"compound {vc.name!r}: Re α at its bound 0 (no optical phase seen)")
    return OpticalCompoundResult(
        compound=vc.name,
        status="ok",
        message="",
        mass_u=mass_u,
        wavelength_m=wavelength,
        alpha_opt=alpha,
        sigma_abs=sigma,
        chi2_quantum=chi_q,
        chi2_classical=chi_c,
        ndof=npts - nfree,
        preferred_model=preferred,
        classical_alpha_A3=float(xc[0]) if light else None,
        classical_sigma_m2=(
            float(xc[1] * absorption_cross_section(ANGSTROM3_SI, wavelength)) if light else None
        ),
        curves=tuple(curves),
        warnings=tuple(warnings),
    )


def _with_powers(s, powers):
    n = powers.size
    return replace(s, powers=powers, visibilities=np.zeros(n), errors=np.ones(n))


def analyze_visibilities(c) -> OpticalResult:
    """Fit every compound of a campaign's ``[data] visibilities`` (``c.visibility``)."""
    data: VisibilityData = c.visibility
    spec = data.gratings
    nodes = getattr(getattr(c, "settings", None), "velocity_nodes", 48)
    shared = _shared_variables(spec)
    out = []
    for vc in data.compounds:
        try:
            out.append(fit_compound(vc, spec, nodes, shared))
        except CompoundError as exc:
            mass_u = vc.mass.value / AMU if vc.mass is not None else None
            out.append(OpticalCompoundResult(vc.name, "failed", str(exc), mass_u))
    gratings = {
        "first": spec.kinds[0],
        "second": spec.kinds[1],
        "third": spec.kinds[2],
        "absorbed_molecules": spec.absorbed,
        "stated_inputs": {
            k: {"value": m.value, "error": m.error} for k, m in spec.stated().items()
        },
    }
    return OpticalResult(gratings, tuple(out), LIKELIHOOD_THRESHOLD)
