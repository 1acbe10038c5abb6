"""One compound: α_eff of every series (extraction), then α and ⟨μ²⟩ from the temperature series.

:func:`separate` never raises for bad data: a :class:`~polarbeam.errors.CompoundError` or a
numerical failure marks only that compound ``failed``. The structure cross-check is not done here
(it belongs to :mod:`polarbeam.comparison`); the pipeline adds it.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np
from uncertainties import ufloat

from polarbeam._util.provenance import provenance
from polarbeam.beam.response import LangevinDebye
from polarbeam.constants import AMU, BOLTZMANN, alpha_a3_from_si, debye_from_si
from polarbeam.contract.campaign import Campaign, CompoundData
from polarbeam.contract.paths import input_files
from polarbeam.contract.time_of_flight import uncertain_velocity
from polarbeam.contract.velocity import velocity_curve, velocity_extra, velocity_warnings
from polarbeam.errors import CompoundError
from polarbeam.extraction.context import Context
from polarbeam.extraction.series import alpha_eff_with_errors, fit_series
from polarbeam.extraction.visibility_check import visibility_departures
from polarbeam.results.objects import CampaignResult, CompoundResult, SeriesResult
from polarbeam.results.velocity import VelocityRecord
from polarbeam.separation.debye import (
    alpha_with_known_dipole,
    debye_fit,
    dipole_from_known_alpha,
)
from polarbeam.separation.dipole import INTERVAL_CL, DipoleStatement, dipole_statement
from polarbeam.separation.profiles import profile_result
from polarbeam.separation.rotors import dipole_exponent, rotor_temperatures

__all__ = [
    "DIPOLE_PLAUSIBLE_MAX_D",
    "PLAUSIBILITY_HINT",
    "make_result",
    "orientation_temperature_K",
    "separate",
    "series_temperature",
]

#: Above this a dipole is implausible for a molecule in a beam (the largest molecular dipoles
#: measured are ~10–15 D, e.g. zwitterions; from memory): a unit or geometry slip is likelier.
DIPOLE_PLAUSIBLE_MAX_D = 20.0
#: The words every result-plausibility warning carries.
PLAUSIBILITY_HINT = "check units and geometry"


def _failed(cd: CompoundData, message: str, mass_u=None) -> CompoundResult:
    return CompoundResult(cd.name, "failed", message, mass_u=mass_u)


def separate(cd: CompoundData, c: Campaign, ctx: Context) -> CompoundResult:
    """α_eff per series, then α and μ for one compound; never raises for bad data."""
    if cd.problem:
        return _failed(cd, cd.problem)
    if cd.mass is None:
        return _failed(cd, f"compound {cd.name!r}: no mass")
    mass_u = cd.mass.value / AMU
    try:
        if cd.profiles:  # whole beam profiles: the Poisson profile fit (separation/profiles.py)
            return profile_result(cd, c, ctx, mass_u)
        return _separate(cd, c, ctx, mass_u)
    except CompoundError as exc:
        return _failed(cd, str(exc), mass_u)
    except (ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
        return _failed(cd, f"compound {cd.name!r}: numerical failure ({exc})", mass_u)


def _separate(cd: CompoundData, c: Campaign, ctx: Context, mass_u: float) -> CompoundResult:
    st = c.settings
    warnings: list[str] = list(cd.notes)
    mass_ratio = (
        ufloat(1.0, cd.mass.error / cd.mass.value, tag=f"mass: {cd.name}")
        if cd.mass.error > 0
        else 1.0
    )
    results: list[SeriesResult] = []
    temps = []
    units: dict = {}  # shared time-of-flight inputs (flight length, time offset) of the compound
    for s in cd.series:
        fit = fit_series(
            s,
            ctx.coupling,
            cd.mass.value,
            c.layout,
            fit_offset=st.fit_offset,
            nodes=st.velocity_nodes,
            scale_errors=st.scale_errors,
            kappa_zero=float(getattr(ctx.kappa_zero, "nominal_value", ctx.kappa_zero)),
        )
        vel_u = (
            ufloat(s.velocity.value, s.velocity.error, tag=f"velocity: {s.label}")
            if s.velocity.error > 0 and c.layout != "time-domain"
            else s.velocity.value
        )
        if s.velocity_terms and c.layout != "time-domain":  # errors of a fitted trace
            vel_u = uncertain_velocity(vel_u, s.velocity.value, s.velocity_terms, units)
        spread_u = (
            ufloat(float(np.mean(s.spreads)), s.spread_error, tag=f"velocity spread: {s.label}")
            if s.spread_error > 0 and c.layout != "time-domain"
            else None
        )
        a_eff, _ = alpha_eff_with_errors(
            fit, s.label, ctx.coupling_ratio, mass_ratio, vel_u, spread_u, ctx.kappa_zero
        )
        sw = velocity_warnings(s, c.layout)
        if c.layout == "talbot-lau":
            sw.extend(visibility_departures(s, fit.modulus))
        if fit.ndof > 0 and fit.p_value < 0.01:
            sw.append(
                f"{s.label}: reduced χ² = {fit.reduced_chi2:.2f} (p = {fit.p_value:.1e}); "
                "the stated point errors may be too small"
            )
        cmin = float(np.min(fit.modulus))
        if cmin < 0.3:
            sw.append(
                f"{s.label}: the velocity spread washes the fringe out to {cmin:.0%} contrast at "
                "the largest voltage; the phase there is poorly defined"
            )
        temps.append(series_temperature(s, ctx.temperature_offset, sw))
        warnings.extend(sw)
        results.append(
            SeriesResult(
                compound=cd.name,
                temperature_K=s.temperature.value,
                temperature_err_K=s.temperature.error,
                observable=c.observable,
                voltages=s.voltages,
                values=s.values,
                errors=s.errors,
                model=fit.model,
                modulus=fit.modulus,
                curve_voltages=fit.curve_voltages,
                curve=fit.curve,
                alpha_eff=a_eff,
                offset=fit.offset,
                chi2=fit.chi2,
                ndof=fit.ndof,
                p_value=fit.p_value,
                # the time-domain layout reads no velocities: NaN (null in JSON, blank in CSV)
                velocity_m_s=math.nan if c.layout == "time-domain" else s.velocity.value,
                velocity_err_m_s=(
                    math.nan
                    if c.layout == "time-domain"
                    else float(getattr(vel_u, "std_dev", s.velocity.error))
                ),
                velocity_spread_m_s=(
                    math.nan if c.layout == "time-domain" else float(np.mean(s.spreads))
                ),
                error_scale=fit.error_scale,
                warnings=tuple(sw),
                visibility=s.visibility,
                visibility_err=s.visibility_err,
                time_of_flight=(
                    VelocityRecord.from_trace_fit(s.time_of_flight)
                    if s.time_of_flight is not None
                    else None
                ),
                extra=(
                    {
                        "rotational_temperature_K": s.rotational.value,
                        "rotational_temperature_err_K": s.rotational.error,
                    }
                    if s.rotational is not None
                    else {}
                )
                | velocity_extra(s, c.layout),
                velocity_curve=velocity_curve(s, c.layout),
            )
        )
    if not results:
        raise CompoundError(f"compound {cd.name!r}: no series to analyse")

    alpha = dipole = mu2 = upper = None
    chi2 = ndof = None
    method = "none"
    messages: list[str] = []
    distinct = {float(getattr(t, "nominal_value", t)) for t in temps}
    if len(results) >= 2 and len(distinct) < 2:
        raise CompoundError(
            f"compound {cd.name!r}: every series states the same rotational temperature "
            f"({distinct.pop():g} K); expected at least two different temperatures to separate "
            "α and μ"
        )
    response = cd.response if cd.response is not None else LangevinDebye()
    rigid = response.name != "ergodic"
    reason = getattr(cd, "response_reason", None)  # rotor = auto: the derived choice
    if reason:
        messages.append(reason)
    t_orient = temps  # the rotational temperatures (temps become T_s/R_s for a rigid rotor)
    if rigid:  # α_eff = α + R_s μ²/(3kT_s): the Debye line in R_s/T_s (separation/rotors.py)
        temps, ratios, _mu = rotor_temperatures(
            response, results, temps, ctx.field_per_volt, st.fit_offset, cd
        )
        results = [
            dataclasses.replace(r, extra={**r.extra, "ld_ratio": q})
            for r, q in zip(results, ratios, strict=True)
        ]
        messages.append(
            f"rigid {response.name} rotor: α_eff = α + R·μ²/3kT with R = "
            + ", ".join(f"{q:.3f}" for q in ratios)
            + " (ratio to Langevin–Debye per series)"
            + (
                ""
                if ctx.field_per_volt
                else f"; the field magnitude is unknown for the '{c.model}' deflector: R in the "
                "weak-field limit (state field_per_volt)"
            )
        )
    if len(results) >= 2:
        fit = debye_fit([r.alpha_eff for r in results], temps)
        alpha, mu2, chi2, ndof = fit.alpha, fit.mu2, fit.chi2, fit.ndof
        method = "temperature series"
        if len(results) == 2:
            messages.append("two temperatures: α and μ determined exactly, no consistency check")
        elif fit.p_value < 0.01:
            warnings.append(
                f"Debye fit χ² = {fit.chi2:.1f} for {fit.ndof} dof (p = {fit.p_value:.1e}): "
                "α_eff does not follow α + ⟨μ²⟩/3kT; likely causes: conformer populations "
                "changing with temperature, a rotational temperature different from the source "
                "temperature, a field too strong for the weak-field limit, or clusters"
            )
    elif cd.alpha_known is not None:
        r = results[0]
        known = ufloat(cd.alpha_known.value, cd.alpha_known.error, tag=f"known α: {cd.name}")
        mu2 = dipole_from_known_alpha(r.alpha_eff, temps[0], known)
        method = "known alpha"
        messages.append("single temperature: μ from α_eff minus the stated alpha_known_A3")
    else:
        warnings.append(
            "single source temperature: α and μ cannot be separated (α_eff is in series.csv); "
            "measure at more temperatures or give alpha_known_A3"
        )
    statement = None
    if cd.dipole_known is not None:  # α from every series with the stated μ
        alpha, dipole, mu2, method, note, warn = _with_known_dipole(cd, results, temps, mu2)
        messages.append(note)
        warnings.extend(warn)
        statement = DipoleStatement(
            max(dipole.nominal_value - dipole.std_dev, 0.0),
            dipole.nominal_value + dipole.std_dev,
            dipole,
            None,
            INTERVAL_CL,
            st.upper_limit_cl,
        )
    elif mu2 is not None:
        statement = dipole_statement(mu2, limit_cl=st.upper_limit_cl)
        if rigid and statement.value is not None:  # R depends on μ: slope ∝ μⁿ, n ≤ 2
            statement = _rescaled(statement, response, results, t_orient, ctx, st)
        dipole, upper = statement.value, statement.limit
        if upper is not None:
            messages.append(
                f"no significant dipole: μ < {debye_from_si(upper):.2f} D "
                f"({st.upper_limit_cl:.0%} CL)"
            )
            if alpha is not None and len(results) >= 2:
                messages.append(_nonpolar_hint(results, temps, alpha))
    for r in results:
        a, da = r.alpha_eff.nominal_value, r.alpha_eff.std_dev
        if a <= 0:
            beyond = "; negative beyond 2σ" if da > 0 and a < -2.0 * da else ""
            warnings.append(
                f"{r.compound} @ {r.temperature_K:g} K: α_eff = "
                f"{alpha_a3_from_si(a):.4g} ± {alpha_a3_from_si(da):.2g} Å³ ≤ 0 (a "
                f"polarizability pulls into the field{beyond}; is x the way the field magnitude "
                f"grows?): {PLAUSIBILITY_HINT}"
            )
    if dipole is not None and debye_from_si(dipole.nominal_value) > DIPOLE_PLAUSIBLE_MAX_D:
        warnings.append(
            f"μ = {debye_from_si(dipole.nominal_value):.4g} D is above "
            f"{DIPOLE_PLAUSIBLE_MAX_D:g} D, implausible for a molecule: {PLAUSIBILITY_HINT}"
        )
    if alpha is not None and alpha.nominal_value < 0:
        warnings.append(
            f"intercept α = {alpha_a3_from_si(alpha.nominal_value):.1f} Å³ is negative: "
            "check the temperature range and the systematics"
        )
    # orientation: the Langevin–Debye (high-T, weak-field) limit needs μE/kT ≪ 1
    orientation, note = orientation_ratio(ctx, c.model, results, dipole, upper, statement)
    if note:
        messages.append(note)
    if orientation is not None and orientation > st.orientation_warning and not rigid:
        vmax = max(float(np.max(np.abs(r.voltages))) for r in results)
        tmin = min(orientation_temperature_K(r) for r in results)
        warnings.append(
            f"μE/kT = {orientation:.2f} at {vmax:g} V and {tmin:g} K: the weak-field "
            "Langevin–Debye limit is not well satisfied; strong field: use a rotor model"
        )
    status = "warning" if warnings else "ok"
    message = "; ".join(messages + warnings) or "ok"
    return CompoundResult(
        compound=cd.name,
        status=status,
        message=message,
        mass_u=mass_u,
        series=tuple(results),
        alpha=alpha,
        dipole=dipole,
        dipole_upper_si=upper,
        dipole_interval_si=((statement.lower, statement.upper) if statement is not None else None),
        dipole_cl=(statement.interval_cl, statement.limit_cl) if statement is not None else None,
        mu2=mu2,
        method=method,
        debye_chi2=chi2,
        debye_ndof=ndof,
        warnings=tuple(warnings),
        extra={
            "mu_E_over_kT": orientation,
            "response": response.name,
            **({"response_reason": reason} if reason else {}),
        },
    )


def _rescaled(statement, response, results, temps, ctx, st):
    """The dipole statement with its errors scaled by 2/n̄ (separation/rotors.py)."""
    mu = statement.value.nominal_value
    n = dipole_exponent(response, mu, results, temps, ctx.field_per_volt, st.fit_offset)
    if not (n > 0.1 and abs(n - 2.0) > 1e-3):
        return statement
    f = 2.0 / n
    return dataclasses.replace(
        statement,
        lower=max(mu - f * (mu - statement.lower), 0.0),
        upper=mu + f * (statement.upper - mu),
        value=mu + (statement.value - mu) * f,
    )


def stated_in(doc: dict, key: str) -> bool:
    """Whether the stated-input ``key`` (``"section.name"`` or ``"section.name[i]"``) was written
    in the campaign file ``doc``; False means the value is a default."""
    node: Any = doc
    for part in key.split("."):
        name = part.partition("[")[0]
        if not isinstance(node, dict) or name not in node:
            return False
        node = node[name]
    return True


def make_result(c: Campaign, compounds, ctx: Context) -> CampaignResult:
    stated = {
        k: {
            "value": m.value,
            "error": m.error,
            "dlnC_dp": ctx.sensitivities.get(k),
            "default": not stated_in(c.raw, k),
        }
        for k, m in c.stated.items()
    }
    if c.thermometer_offset is not None:  # not an input of the coupling: no dlnC_dp
        m = c.thermometer_offset
        stated["source.thermometer_offset"] = {
            "value": m.value,
            "error": m.error,
            "dlnC_dp": None,
            "default": not stated_in(c.raw, "source.thermometer_offset"),
        }
    notes = list(c.warnings)  # implausible inputs first: the likely unit slips
    notes += c.table_notes
    if c.layout == "time-domain":
        notes.append(
            "time-domain layout: the fringe shift does not depend on velocity; "
            + (
                f"the velocity columns of shifts.csv ({', '.join(c.ignored_columns)}) were ignored"
                if c.ignored_columns
                else "no velocity columns needed (none were given)"
            )
        )
    if c.unmeasured:
        notes.append(
            f"{len(c.unmeasured)} compound(s) listed but not measured: "
            + ", ".join(c.unmeasured[:20])
            + ("…" if len(c.unmeasured) > 20 else "")
        )
    from dataclasses import asdict

    return CampaignResult(
        title=c.title,
        source=str(c.path),
        layout=c.layout,
        model=c.model,
        compounds=compounds,
        stated_inputs=stated,
        settings=asdict(c.settings),
        unmeasured=c.unmeasured,
        notes=tuple(notes),
        input_warnings=c.warnings,
        provenance=provenance(input_files(c.path, c.raw)),
        reduction=c.reduction,
        deflector_field="magnetic" if getattr(c, "magnetic", None) is not None else "electric",
    )


def series_temperature(s, offset, warnings: list[str], variables: dict | None = None):
    """The temperature T of the orientational term ⟨μ²⟩/(3kT) for one series, uncertain.

    The rotational temperature in the deflector when the series states one (its own error,
    tagged per series), else the source temperature plus the campaign's shared thermometer
    offset ``offset`` (one uncertain number common to every series, or 0.0). A rotational
    temperature above the source temperature by more than its error adds a warning: rotational
    cooling in an expansion cannot heat the molecules.

    ``variables`` (tag → uncertain variable, e.g. those of a compound's Debye fit) are reused
    for the temperature variables of the same tag, so that a result built from this temperature
    stays correlated with that fit.
    """
    rot = s.rotational
    if rot is not None:
        if rot.value - s.temperature.value > rot.error:
            warnings.append(
                f"{s.label}: rotational temperature {rot.value:g} ± {rot.error:g} K is above the "
                f"source temperature by more than its error (rotational cooling cannot heat); "
                "check rotational_temperature_K"
            )
        return _variable(rot, f"rotational temperature: {s.label}", variables)
    t = _variable(s.temperature, f"temperature: {s.label}", variables)
    if isinstance(offset, float) and offset == 0.0:
        return t
    return t + offset


def _variable(m, tag: str, variables: dict | None):
    """``m`` (value ± error) as an uncertain variable tagged ``tag`` (the one in ``variables``
    when there is one), or its value when the error is 0."""
    if m.error <= 0:
        return m.value
    if variables and tag in variables:
        return variables[tag]
    return ufloat(m.value, m.error, tag=tag)


def orientation_temperature_K(r) -> float:
    """The temperature of the orientational term for a series result: the rotational one when
    stated, else the source temperature."""
    return float(r.extra.get("rotational_temperature_K", r.temperature_K))


def orientation_ratio(ctx: Context, model: str, results, dipole, upper, statement):
    """(μE/kT at the largest field and lowest temperature, or None; a note when it is skipped).

    μ is the quoted value, else the upper limit, else the upper edge of the interval; E is
    ``field_per_volt`` × the largest |V| (known for the two-wire and numerical models, or stated).
    """
    if dipole is not None:
        mu = dipole.nominal_value
    elif upper is not None:
        mu = upper
    elif statement is not None:
        mu = statement.upper
    else:
        return None, None  # nothing known about μ (one temperature, no known α)
    if not ctx.field_per_volt:
        return None, (
            f"μE/kT check skipped: the field magnitude is unknown for the '{model}' deflector "
            "(state field_per_volt to enable it)"
        )
    vmax = max(float(np.max(np.abs(r.voltages))) for r in results)
    tmin = min(orientation_temperature_K(r) for r in results)
    return mu * ctx.field_per_volt * vmax / (BOLTZMANN * tmin), None


def _nonpolar_hint(results, temps, alpha) -> str:
    """What α would be if the molecule is nonpolar by symmetry (stated, not inferred).

    The intercept of a free Debye line is an extrapolation to 1/T = 0 and keeps its full error
    even when the slope is zero: any estimate of α that stays unbiased whatever the true
    ⟨μ²⟩ ≥ 0 has at least that error (README, "Dipole statements"). Only a
    dipole known from outside the data (symmetry, microwave spectra) buys the smaller error.
    """
    fixed = alpha_with_known_dipole([r.alpha_eff for r in results], temps, 0.0)
    return (
        f"if the molecule is nonpolar by symmetry, state dipole_known_D = 0: α would be "
        f"{alpha_a3_from_si(fixed.nominal_value):.4g} ± {alpha_a3_from_si(fixed.std_dev):.2g} Å³ "
        f"instead of ± {alpha_a3_from_si(alpha.std_dev):.2g} Å³ from the free Debye line"
    )


def _with_known_dipole(cd, results, temps, mu2_fitted):
    """(α, μ, ⟨μ²⟩, method, note, warnings) with the stated dipole of compounds.csv.

    The Debye slope, when there is one, is kept as a consistency check against the stated μ.
    """
    k = cd.dipole_known
    mu = ufloat(k.value, k.error, tag=f"known μ: {cd.name}") if k.error > 0 else ufloat(k.value, 0)
    alpha = alpha_with_known_dipole([r.alpha_eff for r in results], temps, mu)
    note = (
        f"α from every series with the stated dipole μ = {debye_from_si(k.value):.4g} "
        f"± {debye_from_si(k.error):.2g} D (dipole_known_D)"
    )
    warnings = []
    if mu2_fitted is not None and mu2_fitted.std_dev > 0:
        diff = mu2_fitted - mu**2
        z = diff.nominal_value / diff.std_dev if diff.std_dev > 0 else math.nan
        d2 = 1.0 / debye_from_si(1.0) ** 2  # C²m² per D²
        note += (
            f"; the Debye slope gives ⟨μ²⟩ = {mu2_fitted.nominal_value / d2:.3g} ± "
            f"{mu2_fitted.std_dev / d2:.2g} D² (z = {z:+.1f} against the stated value)"
        )
        if abs(z) > 3:
            warnings.append(
                f"the Debye slope disagrees with the stated dipole_known_D (z = {z:+.1f}): "
                "a wrong stated value, a rotational temperature different from the source "
                "temperature, or conformers"
            )
    return alpha, mu, mu**2, "known dipole", note, warnings
