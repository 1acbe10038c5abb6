"""The analysis pipeline: campaign → per-series α_eff → per-compound α and μ.

:func:`analyze` is the public entry point; :func:`analyze_campaign` works on a loaded
:class:`~polarbeam.campaign.Campaign` and :func:`analyze_compound` on one compound, so a batch can
spread compounds over processes.  A :class:`~polarbeam.errors.CompoundError` (or any numerical
failure) inside one compound marks only that compound ``failed``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import uncertainties
from uncertainties import ufloat

from .campaign import Campaign, CompoundData, load_campaign
from .constants import BOLTZMANN, alpha_a3_from_si, debye_from_si
from .debye import debye_fit, dipole_from_known_alpha, dipole_from_mu2
from .deflectors import overlap
from .errors import CompoundError, InputError
from .extraction import alpha_eff_with_errors, fit_series
from .results import CampaignResult, CompoundResult, SeriesResult

__all__ = ["Context", "analyze", "analyze_campaign", "analyze_compound", "coupling"]


def coupling(layout, deflector) -> float:
    """C = (layout scale)·∫ w g ds: observable per (α_eff·V²/m) before velocity averaging."""
    return layout.scale * overlap(layout, deflector)


def _label(key: str) -> str:
    table, _, name = key.partition(".")
    return f"{table}: {name}"


@dataclass(frozen=True)
class Context:
    """Campaign-wide pieces shared by every compound: nominal set-up and uncertain coupling."""

    layout: object
    deflector: object
    coupling: float
    coupling_ratio: object  # C_nominal / C as an uncertain number
    sensitivities: dict[str, float]  # ∂ln C/∂p per stated input
    field_per_volt: float | None


def build_context(c: Campaign) -> Context:
    """Nominal layout and deflector, and C with every stated input attached (tagged)."""
    layout, deflector = c.build()
    c0 = coupling(layout, deflector)
    if not (math.isfinite(c0) and c0 > 0):
        raise InputError(
            f"{c.path.name}: the deflector does not overlap the flight layout (coupling {c0!r}); "
            "check [deflector] entrance/length (or field_on) against the grating or detector "
            "positions"
        )
    nominal = c.nominal()
    sens: dict[str, float] = {}
    shift = 0.0
    for key, m in c.stated.items():
        if m.error <= 0:
            continue
        h = max(m.error * 1e-3, abs(m.value) * 1e-9, 1e-300)
        vals = []
        for sgn in (+1, -1):
            v = dict(nominal)
            v[key] = m.value + sgn * h
            try:
                vals.append(coupling(*c.build(v)))
            except InputError:
                vals.append(None)
        if vals[0] is not None and vals[1] is not None:
            d = (vals[0] - vals[1]) / (2 * h)
        elif vals[0] is not None:
            d = (vals[0] - c0) / h
        elif vals[1] is not None:
            d = (c0 - vals[1]) / h
        else:
            continue
        sens[key] = d / c0
        u = ufloat(m.value, m.error, tag=_label(key))
        shift = shift + sens[key] * (u - m.value)
    ratio = 1.0 / (1.0 + shift)
    fpv = getattr(deflector, "field_per_volt", None)
    return Context(layout, deflector, c0, ratio, sens, fpv)


def _failed(cd: CompoundData, message: str, mass_u=None) -> CompoundResult:
    return CompoundResult(cd.name, "failed", message, mass_u=mass_u)


def analyze_compound(cd: CompoundData, c: Campaign, ctx: Context) -> CompoundResult:
    """α_eff per series, then α and μ for one compound; never raises for bad data."""
    if cd.problem:
        return _failed(cd, cd.problem)
    if cd.mass is None:
        return _failed(cd, f"compound {cd.name!r}: no mass")
    from .constants import AMU

    mass_u = cd.mass.value / AMU
    try:
        return _analyze_compound(cd, c, ctx, mass_u)
    except CompoundError as exc:
        return _failed(cd, str(exc), mass_u)
    except (ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
        return _failed(cd, f"compound {cd.name!r}: numerical failure ({exc})", mass_u)


def _analyze_compound(cd: CompoundData, c: Campaign, ctx: Context, mass_u: float):
    st = c.settings
    warnings: list[str] = []
    mass_ratio = (
        ufloat(1.0, cd.mass.error / cd.mass.value, tag=f"mass: {cd.name}")
        if cd.mass.error > 0
        else 1.0
    )
    results: list[SeriesResult] = []
    temps = []
    for s in cd.series:
        fit = fit_series(
            s,
            ctx.coupling,
            cd.mass.value,
            c.layout,
            fit_offset=st.fit_offset,
            nodes=st.velocity_nodes,
            scale_errors=st.scale_errors,
        )
        vel_u = (
            ufloat(s.velocity.value, s.velocity.error, tag=f"velocity: {s.label}")
            if s.velocity.error > 0 and c.layout != "time-domain"
            else s.velocity.value
        )
        a_eff, _ = alpha_eff_with_errors(fit, s.label, ctx.coupling_ratio, mass_ratio, vel_u)
        sw = []
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
                alpha_eff=a_eff,
                offset=fit.offset,
                chi2=fit.chi2,
                ndof=fit.ndof,
                p_value=fit.p_value,
                velocity_m_s=s.velocity.value,
                velocity_err_m_s=s.velocity.error,
                velocity_spread_m_s=float(np.mean(s.spreads)),
                error_scale=fit.error_scale,
                warnings=tuple(sw),
            )
        )
        temps.append(
            ufloat(s.temperature.value, s.temperature.error, tag=f"temperature: {s.label}")
            if s.temperature.error > 0
            else uncertainties.ufloat(s.temperature.value, 0.0)
        )
    if not results:
        raise CompoundError(f"compound {cd.name!r}: no series to analyse")

    alpha = dipole = mu2 = upper = None
    chi2 = ndof = None
    method = "none"
    messages: list[str] = []
    if len(results) >= 2:
        fit = debye_fit([r.alpha_eff for r in results], temps)
        alpha, mu2, chi2, ndof = fit.alpha, fit.mu2, fit.chi2, fit.ndof
        method = "temperature series"
        if len(results) == 2:
            messages.append("two temperatures: α and μ determined exactly, no consistency check")
        elif fit.p_value < 0.01:
            warnings.append(
                f"Debye fit χ² = {fit.chi2:.1f} for {fit.ndof} dof (p = {fit.p_value:.1e}): "
                "α_eff does not follow α + ⟨μ²⟩/3kT (conformers, clusters or drifting systematics?)"
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
    if mu2 is not None:
        dipole, upper = dipole_from_mu2(mu2, st.dipole_significance, st.upper_limit_cl)
        if upper is not None:
            messages.append(
                f"no significant dipole: μ < {debye_from_si(upper):.2f} D "
                f"({st.upper_limit_cl:.0%} CL)"
            )
    if alpha is not None and alpha.nominal_value < 0:
        warnings.append(
            f"intercept α = {alpha_a3_from_si(alpha.nominal_value):.1f} Å³ is negative: "
            "check the temperature range and the systematics"
        )
    # orientation: the Langevin–Debye (high-T, weak-field) limit needs μE/kT ≪ 1
    mu_for_check = dipole.nominal_value if dipole is not None else (upper or 0.0)
    if ctx.field_per_volt and mu_for_check > 0:
        vmax = max(float(np.max(np.abs(r.voltages))) for r in results)
        tmin = min(r.temperature_K for r in results)
        ratio = mu_for_check * ctx.field_per_volt * vmax / (BOLTZMANN * tmin)
        if ratio > st.orientation_warning:
            warnings.append(
                f"μE/kT = {ratio:.2f} at {vmax:g} V and {tmin:g} K: the weak-field "
                "Langevin–Debye limit is not well satisfied"
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
        mu2=mu2,
        method=method,
        debye_chi2=chi2,
        debye_ndof=ndof,
        warnings=tuple(warnings),
    )


def analyze_campaign(c: Campaign) -> CampaignResult:
    """Analyse every compound of a loaded campaign."""
    from .calibration import analyze_with_references, calibration_required

    if calibration_required(c):  # reference compounds, or a uniform g left to calibrate
        return analyze_with_references(c)
    ctx = build_context(c)
    compounds = tuple(analyze_compound(cd, c, ctx) for cd in c.compounds)
    return make_result(c, compounds, ctx)


def make_result(c: Campaign, compounds, ctx: Context) -> CampaignResult:
    stated = {
        k: {"value": m.value, "error": m.error, "dlnC_dp": ctx.sensitivities.get(k)}
        for k, m in c.stated.items()
    }
    notes = []
    if c.layout == "time-domain":
        notes.append(
            "time-domain layout: the fringe shift does not depend on velocity; velocity columns "
            "were ignored"
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
    )


def analyze(path: str | Path, out: str | Path | None = None) -> CampaignResult:
    """Load ``campaign.toml``, analyse it and (optionally) write the results folder ``out``.

    Raises :class:`~polarbeam.errors.InputError` for structural problems; per-compound problems are
    reported in the result with status ``failed``.
    """
    result = analyze_campaign(load_campaign(path))
    if out is not None:
        result.to_report(out)
    return result
