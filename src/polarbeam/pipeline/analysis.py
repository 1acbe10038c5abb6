"""The analysis pipeline: campaign → per-series α_eff → per-compound α and μ.

:func:`analyze` is the public entry point; :func:`analyze_campaign` works on a loaded
:class:`~polarbeam.contract.campaign.Campaign` and :func:`analyze_compound` on one compound, so a
batch can spread compounds over processes.  A :class:`~polarbeam.errors.CompoundError` (or any
numerical failure) inside one compound marks only that compound ``failed``.
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

from polarbeam.calibration.calibrate import (
    CalibrationOutcome,
    calibrate_campaign,
    calibration_required,
    check_calibration_inputs,
    field_factor_missing,
    first_pass,
    reference_result,
    reference_values,
)
from polarbeam.comparison.checks import computed_comparison, cross_check
from polarbeam.comparison.magnetic import magnetic_structure_check
from polarbeam.contract.campaign import Campaign, CompoundData, build_layout, load_campaign
from polarbeam.extraction.context import Context, build_context
from polarbeam.extraction.recoil import analyze_recoil
from polarbeam.extraction.visibility import analyze_visibilities
from polarbeam.pipeline.outputs import write_outputs
from polarbeam.results.objects import CampaignResult, CompoundResult
from polarbeam.results.recoil import with_recoil
from polarbeam.results.visibility import with_optical
from polarbeam.separation.compound import make_result, separate
from polarbeam.separation.magnetic import magnetic_compound

__all__ = [
    "analyze",
    "analyze_campaign",
    "analyze_compound",
    "analyze_with_references",
]


def analyze_compound(cd: CompoundData, c: Campaign, ctx: Context) -> CompoundResult:
    """α_eff per series, α and μ, then (unless switched off) the structure cross-check."""
    result = separate(cd, c, ctx)
    if c.magnetic is not None:  # χ and moments from the same fits (separation/magnetic.py)
        result = magnetic_compound(result, ctx.field_per_volt, c.settings)
        if c.settings.structure_check:  # Pascal's χ_dia, spin-only moments
            result = magnetic_structure_check(result, cd, c)
        return result
    if c.settings.structure_check and result.status != "failed":
        result = cross_check(result, cd, c)
    return result


def analyze_campaign(c: Campaign) -> CampaignResult:
    """Analyse every compound of a loaded campaign."""
    if c.model != "none" and calibration_required(c):  # references, or g left to calibrate
        result = analyze_with_references(c)
    elif (
        c.model == "none"
    ):  # no deflector: a photon-recoil-only campaign (polarbeam.extraction.recoil)
        ctx = Context(build_layout(c.layout, c.nominal()), None, math.nan, 1.0, {}, None)
        compounds = ()
        result = make_result(c, compounds, ctx)
    else:
        ctx = build_context(c)
        compounds = tuple(analyze_compound(cd, c, ctx) for cd in c.compounds)
        result = make_result(c, compounds, ctx)
    if (
        c.recoil is not None
    ):  # photon-recoil cross-sections ([data] recoil, polarbeam.extraction.recoil)
        result = with_recoil(result, analyze_recoil(c))
    if c.visibility is not None:  # [data] visibilities (polarbeam.extraction.visibility)
        result = with_optical(result, analyze_visibilities(c))
    return result


def analyze(path: str | Path, out: str | Path | None = None) -> CampaignResult:
    """Load ``campaign.toml``, analyse it and (optionally) write the results folder ``out``.

    Raises :class:`~polarbeam.errors.InputError` for structural problems; per-compound problems are
    reported in the result with status ``failed``.
    """
    campaign = load_campaign(path)
    result = computed_comparison(campaign, analyze_campaign(campaign))
    if out is not None:
        write_outputs(result, out, reduction=campaign.reduction)
    return result


def analyze_with_references(c) -> CampaignResult:
    """Analyse a campaign with reference compounds (``[analysis] calibration``).

    ``"auto"``: the references calibrate the coupling and every other compound is analysed with
    it; ``"check"``: the stated field is used and the references are compared with their known
    values.  Raises :class:`~polarbeam.errors.InputError` when a ``uniform`` deflector has no
    ``field_factor`` and nothing can calibrate it.
    """
    check_calibration_inputs(c)
    mode = c.settings.calibration
    missing = field_factor_missing(c)
    if mode == "auto":
        out = calibrate_campaign(c, analyze_compound)
    else:  # check: references against the stated field
        values, problems = reference_values(c)
        ctx = build_context(c)
        first, known = first_pass(c, ctx, values, problems, analyze_compound)
        out = CalibrationOutcome(ctx, None, first, known, values, problems)
    cal = out.calibration
    ctx = out.context
    notes = []
    if cal is not None:
        ratio = cal.scale.nominal_value / cal.scale
        ctx = replace(
            ctx,
            coupling=ctx.coupling * cal.scale.nominal_value,
            coupling_ratio=ctx.coupling_ratio * ratio,
        )
        notes.append(cal.note())
        notes.extend(cal.warnings)
    elif mode == "auto" and not missing:
        notes.append(
            f"calibration not possible ({out.reason}); the stated '{c.model}' field was used"
        )
    compounds = []
    own = {r.compound: r for r in cal.references} if cal is not None else {}
    for cd in c.compounds:
        if cd.name in out.first_pass:
            compounds.append(
                reference_result(
                    out.first_pass[cd.name],
                    out.values[cd.name],
                    out.known[cd.name],
                    cal.scale if cal is not None else None,
                    c.settings,
                    own.get(cd.name),
                    mode,
                )
            )
        elif cd.name in out.problems:
            compounds.append(CompoundResult(cd.name, "failed", out.problems[cd.name]))
        elif missing and cal is None:
            compounds.append(
                CompoundResult(
                    cd.name,
                    "failed",
                    f"compound {cd.name!r}: the field factor is not calibrated: no usable "
                    f"reference compound ({out.reason})",
                )
            )
        else:
            compounds.append(analyze_compound(cd, c, ctx))
    result = make_result(c, tuple(compounds), ctx)
    return replace(
        result,
        notes=(*result.notes, *notes),
        calibration=cal.summary() if cal is not None else None,
    )
