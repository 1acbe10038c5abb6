"""Reporting: results folder (CSV, JSON, Markdown) and the terminal table.

Reads :class:`~polarbeam.results.objects.CampaignResult` objects; computes no physics.
"""

from __future__ import annotations

import io
import json
import math
from pathlib import Path

import numpy as np

from polarbeam._util.atomic import write_text_atomic
from polarbeam._util.cautions import CAUTIONS, MAGNETIC_CAUTIONS
from polarbeam.chemistry import ELECTRONIC_VS_VIBRATIONAL_NOTE
from polarbeam.quantities import value_error_text
from polarbeam.report.latex import latex_table
from polarbeam.report.magnetic import (
    MAGNETIC_METHOD_LINES,
    MAGNETIC_PROPERTY_COLUMNS,
    MAGNETIC_SERIES_COLUMNS,
    magnetic_compound_markdown,
    magnetic_markdown_lines,
    magnetic_summary,
    magnetic_tables,
    magnetic_terminal_lines,
)
from polarbeam.report.markdown_sections import (
    inputs_lines,
    mu_lines,
    noise_lines,
    provenance_lines,
)
from polarbeam.report.recoil import (
    recoil_markdown_lines,
    recoil_terminal_lines,
    render_recoil_only,
    write_recoil_results,
)
from polarbeam.report.text import guarded_frame, md_code, md_escape, terminal_safe
from polarbeam.report.visibility import (
    optical_markdown_lines,
    optical_terminal_lines,
    write_optical_results,
)
from polarbeam.results.objects import CampaignResult
from polarbeam.uncertain import variance_budget

__all__ = ["profile_markdown_lines", "render_markdown", "render_terminal", "write_results"]

SERIES_COLUMNS = (
    "compound",
    "temperature_K",
    "n_points",
    "alpha_eff_A3",
    "alpha_eff_err_A3",
    "reduced_chi2",
)
PROPERTY_COLUMNS = (
    "compound",
    "alpha_A3",
    "alpha_err_A3",
    "dipole_D",
    "dipole_err_D",
    "dipole_upper_D",
    "status",
    "message",
)


def _clean(obj):
    """JSON-safe: NaN/inf → None, numpy scalars → Python."""
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_clean(v) for v in obj]
    if isinstance(obj, np.generic):
        obj = obj.item()
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


def _csv(df, first: tuple[str, ...]) -> str:
    cols = list(first) + [c for c in df.columns if c not in first]
    for c in first:
        if c not in df.columns:
            df[c] = None
    buf = io.StringIO()
    guarded_frame(df[cols]).to_csv(buf, index=False, float_format="%.10g", lineterminator="\n")
    return buf.getvalue()


def write_results(result: CampaignResult, out: str | Path) -> None:
    """Write ``series.csv``, ``properties.csv``, ``results.json`` and ``report.md`` atomically.

    A campaign without deflection compounds (recoil or visibility data only) gets no
    ``series.csv`` / ``properties.csv``: its tables are ``recoil.csv`` / ``optical.csv``."""
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    only_other = not result.compounds and (
        getattr(result, "recoil", None) is not None or getattr(result, "optical", None) is not None
    )
    magnetic = getattr(result, "deflector_field", "electric") == "magnetic"  # report/magnetic.py
    if not only_other and magnetic:
        series, props = magnetic_tables(result.series, result.properties)  # report/magnetic.py
        write_text_atomic(out / "series.csv", _csv(series, MAGNETIC_SERIES_COLUMNS))
        write_text_atomic(out / "properties.csv", _csv(props, MAGNETIC_PROPERTY_COLUMNS))
    elif not only_other:
        write_text_atomic(out / "series.csv", _csv(result.series, SERIES_COLUMNS))
        write_text_atomic(out / "properties.csv", _csv(result.properties, PROPERTY_COLUMNS))
    write_text_atomic(
        out / "results.json",
        json.dumps(
            _clean(magnetic_summary(result) if magnetic else result.summary()),
            indent=1,
            ensure_ascii=False,
            allow_nan=False,
        )
        + "\n",
    )
    if result.comparison is not None and len(result.comparison):
        write_text_atomic(out / "comparison.csv", _csv(result.comparison.copy(), ()))
    if result.series_comparison is not None and len(result.series_comparison):
        write_text_atomic(out / "comparison_series.csv", _csv(result.series_comparison.copy(), ()))
    write_text_atomic(out / "report.md", render_markdown(result))
    if any(c.status != "failed" for c in result.compounds):
        write_text_atomic(out / "report.tex", latex_table(result))
    recoil = getattr(result, "recoil", None)  # photon-recoil results (polarbeam.extraction.recoil)
    if recoil is not None:
        write_recoil_results(recoil, out)
    optical = getattr(result, "optical", None)  # visibility fits (polarbeam.extraction.visibility)
    if optical is not None:
        write_optical_results(optical, out)


def render_markdown(result: CampaignResult) -> str:
    """The human-readable report: summary table, per-compound fits and budgets, cautions."""
    recoil = getattr(result, "recoil", None)  # photon-recoil results (polarbeam.extraction.recoil)
    optical = getattr(result, "optical", None)  # visibility fits (polarbeam.extraction.visibility)
    if (recoil is not None or optical is not None) and not result.compounds:
        text = (
            render_recoil_only(result) if recoil is not None else f"# {md_escape(result.title)}\n"
        )
        if optical is not None:
            text += "\n" + "\n".join(optical_markdown_lines(optical)) + "\n"
        return text + "\n".join([*inputs_lines(result), *provenance_lines(result)]) + "\n"
    obs = "phase (rad)" if result.layout in ("talbot-lau", "time-domain") else "shift (m)"
    head = [
        f"# {md_escape(result.title)}",
        "",
        f"polarbeam {result.version} · layout `{result.layout}` · deflector `{result.model}` · "
        f"source {md_code(result.source)}",
        "",
    ]
    if getattr(result, "deflector_field", "electric") == "magnetic":  # report/magnetic.py
        return _magnetic_markdown(result, head, obs)
    lines = [
        *head,
        "## Summary",
        "",
        "| compound | α (Å³) | μ (D) | status | message |",
        "|---|---|---|---|---|",
    ]
    for c in result.compounds:
        r = c.row()
        if r["dipole_D"] is not None:
            dip = value_error_text(r["dipole_D"], r["dipole_err_D"])
        elif r["dipole_upper_D"] is not None:
            dip = f"< {r['dipole_upper_D']:.2f} (95 % CL)"
        else:
            dip = "—"
        lines.append(
            f"| {md_escape(c.compound)} | "
            f"{value_error_text(r['alpha_A3'], r['alpha_err_A3'])} | {dip} | "
            f"{c.status} | {md_escape(c.message)} |"
        )
    for note in result.notes:
        lines += ["", f"> {md_escape(note)}"]
    for c in result.compounds:
        lines += ["", f"## {md_escape(c.compound)}", ""]
        if c.status == "failed":
            lines += [f"**failed:** {md_escape(c.message)}"]
            continue
        timed = result.layout == "time-domain"  # no velocity enters: no velocity column
        lines += [
            f"mass {c.mass_u:.4f} u · method: {c.method}",
            "",
            "| T (K) | points | α_eff (Å³) | χ²/ν |" + ("" if timed else " velocity (m/s) |"),
            "|---|---|---|---|" + ("" if timed else "---|"),
        ]
        for s in c.series:
            lines.append(
                f"| {value_error_text(s.temperature_K, s.temperature_err_K)} | {s.n_points} | "
                f"{value_error_text(s.alpha_eff_A3, s.alpha_eff_err_A3)} | {s.reduced_chi2:.2f} |"
                + (
                    ""
                    if timed
                    else f" {value_error_text(s.velocity_m_s, s.velocity_err_m_s)} ± σ "
                    f"{s.velocity_spread_m_s:g} |"
                )
            )
        for s in c.series:
            lines += [
                "",
                f"Fit at {s.temperature_K:g} K — {obs} versus voltage:",
                "",
                "| V (V) | measured | error | model | residual/σ |",
                "|---|---|---|---|---|",
            ]
            for v, y, e, m in zip(s.voltages, s.values, s.errors, s.model, strict=True):
                lines.append(f"| {v:g} | {y:.5g} | {e:.2g} | {m:.5g} | {(y - m) / e:+.2f} |")
        lines += profile_markdown_lines(c)
        r = c.row()
        if c.alpha is not None:
            lines += ["", f"**α = {value_error_text(r['alpha_A3'], r['alpha_err_A3'])} Å³**"]
        if c.dipole is not None:
            lines += [f"**μ = {value_error_text(r['dipole_D'], r['dipole_err_D'])} D**"]
        elif c.dipole_upper_si is not None:
            lines += [f"**μ < {r['dipole_upper_D']:.2f} D** (no significant dipole)"]
        if c.dipole_interval_si is not None and c.dipole_cl is not None:
            lines += [
                "",
                f"{c.dipole_cl[0]:.1%} interval for μ: [{r['dipole_lo_D']:.3g}, "
                f"{r['dipole_hi_D']:.3g}] D (unified intervals, Feldman–Cousins)",
            ]
        target = c.alpha if c.alpha is not None else (c.series[0].alpha_eff if c.series else None)
        what = "α" if c.alpha is not None else "α_eff (first series)"
        budget = variance_budget(target)
        if budget:
            lines += ["", f"Uncertainty budget of {what} (share of variance):", ""]
            lines += ["| input | share |", "|---|---|"]
            lines += [f"| {md_escape(k)} | {v:.1%} |" for k, v in budget.items()]
        lines += mu_lines(c)
        lines += _crosscheck_lines(c)
        if c.warnings:
            lines += ["", "Warnings:", ""] + [f"- {md_escape(w)}" for w in c.warnings]
    lines += _parity_lines(result)
    lines += noise_lines(getattr(result, "reduction", None))
    if recoil is not None:
        lines += ["", *recoil_markdown_lines(recoil)]
    if optical is not None:
        lines += ["", *optical_markdown_lines(optical)]
    lines += [
        "",
        "## Notes on the method",
        "",
        "- α_eff = α + ⟨μ²⟩/(3kT) (Langevin–Debye, weak-field high-temperature limit); "
        "α is the static polarizability including vibrational contributions.",
        "- Errors are 1σ standard uncertainties propagated linearly from every stated input and "
        "the fit covariances; shared instrument inputs are correlated across series.",
        "",
        "## Cautions",
        "",
    ]
    lines += [f"- {c}" for c in CAUTIONS]
    lines += inputs_lines(result) + provenance_lines(result)
    return "\n".join(lines) + "\n"


def _magnetic_markdown(result: CampaignResult, head: list[str], obs: str) -> str:
    """report.md of a magnetic campaign: the same layout in χ, moments and currents."""
    lines = [*head, *magnetic_markdown_lines(result, md_escape)]
    for note in result.notes:
        lines += ["", f"> {md_escape(note)}"]
    for c in result.compounds:
        lines += magnetic_compound_markdown(c, md_escape, obs)
    lines += ["", "## Notes on the method", ""] + [f"- {m}" for m in MAGNETIC_METHOD_LINES]
    lines += ["", "## Cautions", ""] + [f"- {c}" for c in MAGNETIC_CAUTIONS]
    lines += inputs_lines(result) + provenance_lines(result)
    return "\n".join(lines) + "\n"


def _parity_lines(result: CampaignResult) -> list[str]:
    par, cmp_ = result.parity, result.comparison
    if par is None or len(par) == 0:
        return []
    out = [
        "",
        "## Measured versus computed chemistry",
        "",
        "| method | n | mean signed dev. (Å³) | (%) | mean abs. dev. (Å³) | (%) | verdict |",
        "|---|---|---|---|---|---|---|",
    ]
    for r in par.to_dict(orient="records"):
        out.append(
            f"| {md_escape(r['qc_method'])} | {r['n_compounds']} | "
            f"{r['mean_signed_dev_A3']:+.2f} | "
            f"{r['mean_signed_dev_pct']:+.1f} | {r['mean_abs_dev_A3']:.2f} | "
            f"{r['mean_abs_dev_pct']:.1f} | {md_escape(r['verdict'])} |"
        )
    out += [
        "",
        "Deviations in this table are computed − measured. In comparison.csv, alpha_diff_A3 is "
        "measured − computed and its error is the experimental one only.",
        "",
        f"> {md_escape(ELECTRONIC_VS_VIBRATIONAL_NOTE)}",
    ]
    if cmp_ is not None and len(cmp_):
        out += [
            "",
            "| compound | method | α computed (Å³) | α measured (Å³) | diff (Å³) |",
            "|---|---|---|---|---|",
        ]
        for r in cmp_.to_dict(orient="records"):
            out.append(
                f"| {md_escape(r['compound'])} | {md_escape(r['qc_method'])} | "
                f"{r['alpha_computed_A3']:.2f} | "
                f"{value_error_text(r['alpha_measured_A3'], r['alpha_measured_err_A3'])} | "
                f"{r['alpha_diff_A3']:+.2f} |"
            )
    return out


def _crosscheck_lines(c) -> list[str]:
    x = c.extra
    if "verdict" not in x:
        note = x.get("crosscheck")
        return ["", f"Structure cross-check: {md_escape(note)}"] if note else []
    out = [
        "",
        f"Structure cross-check: **{md_escape(x['verdict'])}**",
        "",
        "| additive scheme | α (Å³) |",
        "|---|---|",
    ]
    for k in ("ahp", "ahc", "bs", "llmr", "d4"):
        if x.get(f"alpha_{k}_A3") is not None:
            out.append(f"| {k} | {x[f'alpha_{k}_A3']:.2f} |")
    out.append(
        f"| default | {value_error_text(x['alpha_additive_A3'], x['alpha_additive_err_A3'])} |"
    )
    if x.get("alpha_z") is not None and math.isfinite(x["alpha_z"]):
        out += ["", f"measured α − additive: z = {x['alpha_z']:+.1f}"]
    if x.get("dipole_rms_D") is not None:
        out += [
            "",
            f"force-field conformer dipole √⟨μ²⟩ ≈ {x['dipole_rms_D']:.2f} D "
            "(force-field charges give rough dipoles: expect tens of percent)",
        ]
    rows = [s for s in c.series if "alpha_eff_pred_A3" in s.extra]
    if rows:
        out += ["", "| T (K) | α_eff measured (Å³) | predicted (Å³) | z |", "|---|---|---|---|"]
        for s in rows:
            e = s.extra
            out.append(
                f"| {s.temperature_K:g} | {value_error_text(s.alpha_eff_A3, s.alpha_eff_err_A3)} | "
                f"{value_error_text(e['alpha_eff_pred_A3'], e['alpha_eff_pred_err_A3'])} | "
                f"{e['alpha_eff_z']:+.1f} |"
            )
    return out


def render_terminal(result: CampaignResult) -> str:
    """A compact fixed-width table for the terminal."""
    recoil = getattr(result, "recoil", None)  # photon-recoil results (polarbeam.extraction.recoil)
    title = terminal_safe(result.title)
    optical = getattr(result, "optical", None)  # visibility fits (polarbeam.extraction.visibility)
    extra = optical_terminal_lines(optical) if optical is not None else []
    if (recoil is not None or optical is not None) and not result.compounds:
        lines = recoil_terminal_lines(recoil) if recoil is not None else []
        return "\n".join([title, *lines, *([""] if lines and extra else []), *extra])
    magnetic = getattr(result, "deflector_field", "electric") == "magnetic"
    head = f"{'compound':<24} {'α (Å³)':>18} {'μ (D)':>16}  status"
    out = [title, head, "-" * len(head)]
    for c in () if magnetic else result.compounds:
        r = c.row()
        a = value_error_text(r["alpha_A3"], r["alpha_err_A3"])
        if r["dipole_D"] is not None:
            d = value_error_text(r["dipole_D"], r["dipole_err_D"])
        elif r["dipole_upper_D"] is not None:
            d = f"< {r['dipole_upper_D']:.2f}"
        else:
            d = "—"
        name = terminal_safe(c.compound)
        name = name if len(name) <= 24 else name[:23] + "…"
        out.append(f"{name:<24} {a:>18} {d:>16}  {terminal_safe(c.status)}")
    if magnetic:  # report/magnetic.py
        out = magnetic_terminal_lines(result, terminal_safe)
    if recoil is not None:
        out += ["", *recoil_terminal_lines(recoil)]
    if extra:
        out += ["", *extra]
    return "\n".join(out)


def profile_markdown_lines(c) -> list[str]:
    """Centroid and rms width of every recorded profile, measured and modelled (µm)."""
    recs = getattr(c, "profiles", ()) or ()
    if not recs:
        return []
    lines = [
        "",
        "Whole profiles — centroid and rms width per voltage (µm; model: the fitted profile):",
        "",
        "| T (K) | V (V) | centroid | model | width | model | T_rot (K) | R vs Langevin–Debye |",
        "|---|---|---|---|---|---|---|---|",
    ]
    for p in recs:
        ratio = "—" if p.ld_ratio is None else f"{p.ld_ratio:.3f}"
        trot = (
            value_error_text(p.rotational_temperature_K, p.rotational_temperature_err_K)
            if p.rotational_temperature_err_K > 0
            else f"{p.rotational_temperature_K:g} (stated)"
        )
        lines.append(
            f"| {p.temperature_K:g} | {p.voltage_V:g} | "
            f"{value_error_text(p.centroid_m * 1e6, p.centroid_err_m * 1e6)} | "
            f"{p.model_centroid_m * 1e6:.4g} | "
            f"{value_error_text(p.width_m * 1e6, p.width_err_m * 1e6)} | "
            f"{p.model_width_m * 1e6:.4g} | {trot} | {ratio} |"
        )
    return lines
