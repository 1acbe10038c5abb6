"""Rigid compounds: the ratio R to Langevin–Debye of every series, from the rotor model.

A rigid molecule's α_eff = α + R(T, E)·μ²/(3kT) (:mod:`polarbeam.beam.rotors`). Each series is
fitted for one α_eff (a V² line through the velocity average); when R changes along the voltage
ladder the fitted value is the least-squares combination Σ cᵢ α_eff(Vᵢ) of the per-voltage
values, with cᵢ the row of the linear estimator (offset included) — exact for the beam-profile
and time-domain layouts, first order for Talbot–Lau phases. So R_s = Σ cᵢ xᵢ R(T_s, E·|Vᵢ|)
(xᵢ ∝ Vᵢ², Σ cᵢ xᵢ = 1), and the Debye line of the separation becomes α_eff = α + β·R_s/T_s:
the temperatures handed to it are T_s/R_s.

R depends on μ through μE (the pendular saturation), so μ is iterated: Langevin–Debye first,
then R at the current μ until μ changes by less than 10⁻⁴ of itself. Where R depends on μ the
slope R μ² grows as μⁿ with n = 2 + d ln R/d ln μ < 2; the dipole's error, computed as if R were
fixed, is scaled by 2/n̄ (:func:`dipole_exponent`).
"""

from __future__ import annotations

import math

import numpy as np

from polarbeam.constants import BOLTZMANN, si_from_debye
from polarbeam.separation.debye import debye_fit, dipole_from_known_alpha

__all__ = ["dipole_exponent", "response_ratio", "rotor_temperatures"]

#: μ used for the weak-field ratio when nothing is known about μ (R does not depend on μ there)
_PROBE_DIPOLE = si_from_debye(1.0)


def _ratio(response, mu: float, t: float, field: float) -> float:
    if mu <= 0:
        mu, field = _PROBE_DIPOLE, 0.0
    ld = mu**2 / (3.0 * BOLTZMANN * t)
    return response.alpha_eff(0.0, mu, t, field) / ld


def estimator_weights(voltages, errors, fit_offset: bool) -> np.ndarray:
    """cᵢ·xᵢ of the linear least-squares estimator of α_eff (Σ = 1)."""
    x = np.asarray(voltages, float) ** 2
    w = 1.0 / np.asarray(errors, float) ** 2
    a = np.column_stack([x, np.ones_like(x)]) if fit_offset else x[:, None]
    c = np.linalg.solve(a.T @ (w[:, None] * a), (a * w[:, None]).T)[0]
    cx = c * x
    return cx / cx.sum()


def response_ratio(response, mu, t, field_per_volt, voltages, errors, fit_offset) -> float:
    """R_s of one series at rotational temperature ``t`` (see the module docstring)."""
    fpv = field_per_volt or 0.0
    weights = estimator_weights(voltages, errors, fit_offset)
    fields = fpv * np.abs(np.asarray(voltages, float))
    cache: dict[float, float] = {}
    total = 0.0
    for wi, e in zip(weights, fields, strict=True):
        key = round(float(e), 6)
        if key not in cache:
            cache[key] = _ratio(response, mu, t, float(e))
        total += wi * cache[key]
    return float(total)


def _nominal(x) -> float:
    return float(getattr(x, "nominal_value", x))


def rotor_temperatures(response, results, temps, field_per_volt, fit_offset, cd):
    """(temperatures T_s/R_s for the separation, ratios R_s, μ used) of a rigid compound."""
    alpha_eff = [r.alpha_eff for r in results]
    known = cd.dipole_known
    mu = known.value if known is not None else 0.0
    ratios = [1.0] * len(results)
    for _ in range(12):
        ratios = [
            response_ratio(
                response, mu, _nominal(t), field_per_volt, r.voltages, r.errors, fit_offset
            )
            for r, t in zip(results, temps, strict=True)
        ]
        scaled = [t / q for t, q in zip(temps, ratios, strict=True)]
        if known is not None:
            break
        if len(results) >= 2:
            mu2 = debye_fit(alpha_eff, scaled).mu2.nominal_value
        elif cd.alpha_known is not None:
            mu2 = _nominal(dipole_from_known_alpha(alpha_eff[0], scaled[0], cd.alpha_known.value))
        else:
            break
        new = math.sqrt(max(mu2, 0.0))
        if abs(new - mu) <= 1e-4 * max(new, 1e-40):
            mu = new
            break
        mu = new
    scaled = [t / q for t, q in zip(temps, ratios, strict=True)]
    return scaled, ratios, mu


def dipole_exponent(response, mu, results, temps, field_per_volt, fit_offset) -> float:
    """n̄ = mean over series of d ln(R_s μ²)/d ln μ at μ (2 where R does not depend on μ)."""
    if mu <= 0:
        return 2.0
    ns = []
    for r, t in zip(results, temps, strict=True):
        args = (_nominal(t), field_per_volt, r.voltages, r.errors, fit_offset)
        up = response_ratio(response, mu * 1.02, *args)
        down = response_ratio(response, mu / 1.02, *args)
        ns.append(2.0 + (math.log(up) - math.log(down)) / (2.0 * math.log(1.02)))
    return float(np.mean(ns))
