"""Measured against predicted and computed: the structure cross-check and the computed-chemistry
comparison tables attached to results.

:func:`cross_check` sets the additive α and the force-field ⟨μ²⟩ of a compound's structure against
each measured α_eff and the measured α (z-scores and a verdict); :func:`computed_comparison`
reads computed values (``computed.csv``, quantum-chemistry outputs) and builds comparison.csv,
comparison_series.csv and the parity table.
"""

from __future__ import annotations

from dataclasses import replace

from polarbeam import chemistry as cc
from polarbeam._util.text import finite_or_none, join_message
from polarbeam.comparison.structure_check import (
    PLAUSIBLE_RATIO,
    implausible_ratio,
    predict_for_compound,
    stated_mass_check,
    verdict,
    z_score,
)
from polarbeam.constants import alpha_a3_from_si
from polarbeam.contract.campaign import Campaign, CompoundData
from polarbeam.errors import CompoundError
from polarbeam.results.objects import CampaignResult, CompoundResult
from polarbeam.separation.compound import PLAUSIBILITY_HINT

__all__ = [
    "computed_comparison",
    "cross_check",
]


def _structure_source(cd: CompoundData, c: Campaign):
    """(smiles, mol) of a compound: an SDF record by name wins over the smiles column."""
    rec = c.structures.get(cd.name)
    if isinstance(rec, str):
        raise CompoundError(f"structures file: record {cd.name!r} could not be read ({rec})")
    smiles = (cd.extra.get("smiles") or "").strip() or None
    return smiles, rec


def cross_check(result: CompoundResult, cd: CompoundData, c: Campaign) -> CompoundResult:
    """Attach structure-based predictions, z-scores and the verdict to a compound result."""
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
            message=join_message(result.message, note),
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
    ratio, note = _implausible(result, series, pred.alpha_additive_A3)
    if note:
        warnings.append(note)
    words = verdict(alpha_z, eff_z, has_dipole, ratio)
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
        message = join_message(message, w)
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


def _implausible(result: CompoundResult, series, alpha_pred_A3: float):
    """(ratio, warning) when α (or, without α, an α_eff) is far from the structure estimate."""
    lo, hi = PLAUSIBLE_RATIO
    if result.alpha is not None:
        a, p = alpha_a3_from_si(result.alpha.nominal_value), alpha_pred_A3
        r = implausible_ratio(a, p)
        if r is not None:
            return r, (
                f"α = {a:.4g} Å³ is {r:.3g} × the structure estimate {p:.4g} Å³ (expected "
                f"{lo:g}–{hi:g} ×): {PLAUSIBILITY_HINT}"
            )
        return None, None
    for s in series:
        p = s.extra["alpha_eff_pred_A3"]
        r = implausible_ratio(s.alpha_eff_A3, p)
        if r is not None:
            return r, (
                f"{s.compound} @ {s.temperature_K:g} K: α_eff = {s.alpha_eff_A3:.4g} Å³ is "
                f"{r:.3g} × the structure estimate {p:.4g} Å³ (expected {lo:g}–{hi:g} ×): "
                f"{PLAUSIBILITY_HINT}"
            )
    return None, None


def computed_comparison(c: Campaign, result: CampaignResult) -> CampaignResult:
    """Attach ``comparison.csv`` tables (measured versus computed chemistry) to a result."""
    if not (c.computed_paths or c.computed_patterns):
        return result
    import pandas as pd

    frames, notes = [], []
    for path in c.computed_paths:
        failures: list[str] = []
        frames.append(cc.read_computed(path, failures, notes))
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
                "dipole_computed_D": finite_or_none(first[cr.compound].get("dipole_computed_D")),
                "computed_method": str(first[cr.compound]["qc_method"]),
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
