"""The analysis pipeline: campaign → per-series α_eff → per-compound α and μ.

:func:`analyze` is the public entry point; :func:`analyze_campaign` works on a loaded
:class:`~polarbeam.contract.campaign.Campaign` and :func:`analyze_compound` on one compound, so a batch can
spread compounds over processes.  A :class:`~polarbeam.errors.CompoundError` (or any numerical
failure) inside one compound marks only that compound ``failed``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
from uncertainties import ufloat

from polarbeam.contract.campaign import Campaign, CompoundData, load_campaign
from polarbeam.constants import BOLTZMANN, alpha_a3_from_si, debye_from_si
from polarbeam.separation.debye import debye_fit, dipole_from_known_alpha, dipole_from_mu2
from polarbeam.instrument.deflectors import overlap
from polarbeam.errors import CompoundError, InputError
from polarbeam.extraction.series import alpha_eff_with_errors, fit_series
from polarbeam.results.objects import CampaignResult, CompoundResult, SeriesResult

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
    if not (math.isfinite(c0) and c0 > 0) and c.layout == "time-domain":
        a, b = (t - layout.t1 for t in deflector.span)
        raise InputError(
            f"{c.path.name} [deflector] field_on/field_duration: the switched field "
            f"[{a * 1e6:.6g}, {b * 1e6:.6g}] us (from the first pulse) does not overlap the pulse "
            f"sequence [0, {(layout.t3 - layout.t1) * 1e6:.6g}] us; expected a field window inside "
            "it, so no phase can be produced"
        )
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
    from polarbeam.constants import AMU

    mass_u = cd.mass.value / AMU
    try:
        result = _analyze_compound(cd, c, ctx, mass_u)
    except CompoundError as exc:
        return _failed(cd, str(exc), mass_u)
    except (ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
        return _failed(cd, f"compound {cd.name!r}: numerical failure ({exc})", mass_u)
    if c.settings.structure_check:
        result = cross_check(result, cd, c)
    return result


def _structure_source(cd: CompoundData, c: Campaign):
    """(smiles, mol) of a compound: an SDF record by name wins over the smiles column."""
    rec = c.structures.get(cd.name)
    if isinstance(rec, str):
        raise CompoundError(f"structures file: record {cd.name!r} could not be read ({rec})")
    smiles = (cd.extra.get("smiles") or "").strip() or None
    return smiles, rec


def cross_check(result: CompoundResult, cd: CompoundData, c: Campaign) -> CompoundResult:
    """Attach structure-based predictions, z-scores and the verdict to a compound result."""
    from polarbeam.comparison.structure_check import predict_for_compound, stated_mass_check, verdict, z_score

    try:
        smiles, mol = _structure_source(cd, c)
        if smiles is None and mol is None:
            return replace(
                result, extra={**result.extra, "crosscheck": "skipped: no structure given"}
            )
        temps = tuple(s.temperature_K for s in result.series)
        pred = predict_for_compound(
            cd.name,
            smiles,
            mol,
            temperatures=temps,
            conformers=c.settings.conformers,
            seed=c.settings.conformer_seed,
        )
    except CompoundError as exc:
        note = f"structure cross-check skipped: {exc}"
        return replace(
            result,
            extra={**result.extra, "crosscheck": note},
            message=_join(result.message, note),
            status="warning" if result.status == "ok" else result.status,
            warnings=(*result.warnings, note),
        )
    warnings = list(result.warnings)
    mass_note = stated_mass_check(cd.mass.value, pred.mass_u, cd.name)
    if mass_note:
        warnings.append(mass_note)
    series = []
    eff_z = []
    for s in result.series:
        p, dp = pred.alpha_eff_pred_A3(s.temperature_K)
        z = z_score(s.alpha_eff_A3, s.alpha_eff_err_A3, p, dp)
        eff_z.append(z)
        series.append(
            replace(
                s,
                extra={
                    **s.extra,
                    "alpha_eff_pred_A3": p,
                    "alpha_eff_pred_err_A3": dp,
                    "alpha_eff_z": z,
                },
            )
        )
    alpha_z = None
    if result.alpha is not None:
        a = alpha_a3_from_si(result.alpha.nominal_value)
        da = alpha_a3_from_si(result.alpha.std_dev)
        alpha_z = z_score(a, da, pred.alpha_additive_A3, pred.alpha_additive_err_A3)
    has_dipole = bool(pred.dipole_rms_D and pred.dipole_rms_D > 0.3)
    words = verdict(alpha_z, eff_z, has_dipole)
    extra = {
        **result.extra,
        **pred.columns(),
        "alpha_z": alpha_z,
        "verdict": words,
    }
    if pred.flags:
        warnings.append("outside the additive schemes' domain: " + ", ".join(pred.flags))
    message = result.message
    for w in warnings[len(result.warnings) :]:
        message = _join(message, w)
    status = result.status
    if status == "ok" and len(warnings) > len(result.warnings):
        status = "warning"
    return replace(
        result,
        series=tuple(series),
        extra=extra,
        warnings=tuple(warnings),
        message=message,
        status=status,
    )


def _float_or_none(x):
    try:
        x = float(x)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def _join(message: str, note: str) -> str:
    return note if message in ("", "ok") else f"{message}; {note}"


def _analyze_compound(cd: CompoundData, c: Campaign, ctx: Context, mass_u: float):
    st = c.settings
    warnings: list[str] = list(cd.notes)
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
                # the time-domain layout reads no velocities: NaN (null in JSON, blank in CSV)
                velocity_m_s=math.nan if c.layout == "time-domain" else s.velocity.value,
                velocity_err_m_s=math.nan if c.layout == "time-domain" else s.velocity.error,
                velocity_spread_m_s=(
                    math.nan if c.layout == "time-domain" else float(np.mean(s.spreads))
                ),
                error_scale=fit.error_scale,
                warnings=tuple(sw),
                visibility=s.visibility,
                visibility_err=s.visibility_err,
            )
        )
        temps.append(
            ufloat(s.temperature.value, s.temperature.error, tag=f"temperature: {s.label}")
            if s.temperature.error > 0
            else s.temperature.value
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
    from polarbeam.calibration.calibrate import analyze_with_references, calibration_required

    if c.model != "none" and calibration_required(c):  # references, or g left to calibrate
        result = analyze_with_references(c)
    elif c.model == "none":  # no deflector: a photon-recoil-only campaign (polarbeam.extraction.recoil)
        from polarbeam.contract.campaign import build_layout

        ctx = Context(build_layout(c.layout, c.nominal()), None, math.nan, 1.0, {}, None)
        compounds = ()
        result = make_result(c, compounds, ctx)
    else:
        ctx = build_context(c)
        compounds = tuple(analyze_compound(cd, c, ctx) for cd in c.compounds)
        result = make_result(c, compounds, ctx)
    if c.recoil is not None:  # photon-recoil cross-sections ([data] recoil, polarbeam.extraction.recoil)
        from polarbeam.extraction.recoil import analyze_recoil, with_recoil

        result = with_recoil(result, analyze_recoil(c))
    return result


def computed_comparison(c: Campaign, result: CampaignResult) -> CampaignResult:
    """Attach ``comparison.csv`` tables (measured versus computed chemistry) to a result."""
    if not (c.computed_paths or c.computed_patterns):
        return result
    import pandas as pd

    from polarbeam import chemistry as cc

    frames, notes = [], []
    for path in c.computed_paths:
        failures: list[str] = []
        frames.append(cc.read_computed(path, failures))
        notes.extend(failures)
    if c.computed_patterns:
        df, more = cc.read_outputs(list(c.computed_patterns), c.path.parent)
        frames.append(df)
        notes.extend(more)
    frames = [f for f in frames if f is not None and len(f)]
    if not frames:
        return replace(result, notes=(*result.notes, *notes, "no computed values could be read"))
    computed = pd.concat(frames, ignore_index=True)
    props = result.properties
    measured = props[props["alpha_A3"].notna()] if "alpha_A3" in props else props.iloc[:0]
    comparison = cc.compare(measured, computed)
    series = result.series
    series_cmp = cc.compare_series(series, computed) if len(series) else pd.DataFrame()
    parity = cc.parity_table(comparison) if len(comparison) else pd.DataFrame()
    first = {}  # the first method per compound, shown beside the measured value in the reports
    for row in computed.to_dict(orient="records"):
        first.setdefault(str(row["compound"]), row)
    compounds = tuple(
        replace(
            cr,
            extra={
                **cr.extra,
                "alpha_computed_A3": float(first[cr.compound]["alpha_computed_A3"]),
                "dipole_computed_D": _float_or_none(first[cr.compound].get("dipole_computed_D")),
                "computed_method": str(first[cr.compound]["method"]),
            },
        )
        if cr.compound in first
        else cr
        for cr in result.compounds
    )
    return replace(
        result,
        compounds=compounds,
        comparison=comparison,
        series_comparison=series_cmp,
        parity=parity,
        notes=(*result.notes, *notes),
    )


def make_result(c: Campaign, compounds, ctx: Context) -> CampaignResult:
    stated = {
        k: {"value": m.value, "error": m.error, "dlnC_dp": ctx.sensitivities.get(k)}
        for k, m in c.stated.items()
    }
    notes = []
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
    )


def analyze(path: str | Path, out: str | Path | None = None) -> CampaignResult:
    """Load ``campaign.toml``, analyse it and (optionally) write the results folder ``out``.

    Raises :class:`~polarbeam.errors.InputError` for structural problems; per-compound problems are
    reported in the result with status ``failed``.
    """
    campaign = load_campaign(path)
    result = computed_comparison(campaign, analyze_campaign(campaign))
    if out is not None:
        result.to_report(out)
        if campaign.reduction is not None:  # the reduced phases, reusable as a shifts file
            from polarbeam.reduction import write_phases

            write_phases(campaign.reduction, Path(out) / "phases.csv")
    return result
