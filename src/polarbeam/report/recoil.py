"""Renderers of photon-recoil results: Markdown, terminal lines, recoil.csv, spectrum plot."""

from __future__ import annotations

import io
from pathlib import Path

from polarbeam._util.atomic import write_bytes_atomic, write_text_atomic
from polarbeam._util.cautions import CAUTIONS
from polarbeam._util.optional import has
from polarbeam.quantities import value_error_text
from polarbeam.report.campaign_figures import recoil_spectrum_figure
from polarbeam.report.figures import to_png, to_svg
from polarbeam.report.text import guarded_frame, md_code, md_escape, terminal_safe
from polarbeam.results.recoil import (
    RecoilCampaignResult,
    RecoilResult,
    nominal_values,
    std_devs,
)
from polarbeam.uncertain import variance_budget

__all__ = [
    "SPECTRUM_PLOT",
    "recoil_markdown",
    "recoil_markdown_lines",
    "recoil_terminal_lines",
    "render_recoil_only",
    "write_recoil_results",
]


def render_recoil_only(result: RecoilCampaignResult) -> str:
    """Markdown report of a campaign with recoil data and no deflection data."""
    lines = [
        f"# {md_escape(result.title)}",
        "",
        f"polarbeam {result.version} · layout `{result.layout}` · source {md_code(result.source)}",
        "",
    ]
    for note in result.notes:
        lines += [f"> {md_escape(note)}", ""]
    lines += recoil_markdown_lines(result.recoil)
    lines += ["", "## Cautions", ""] + [f"- {c}" for c in CAUTIONS]
    return "\n".join(lines) + "\n"


def write_recoil_results(recoil: RecoilResult, out: str | Path) -> list[str]:
    """Write ``recoil.csv`` (and ``figures/recoil_spectrum.png`` / ``.svg`` when several lasers
    were used).

    Returns the names of the files written (relative to ``out``).  The plot needs matplotlib
    (``polarbeam[plots]``); without it the plot is skipped.
    """
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    buf = io.StringIO()
    guarded_frame(recoil.table).to_csv(buf, index=False, float_format="%.10g", lineterminator="\n")
    write_text_atomic(out / "recoil.csv", buf.getvalue())
    written = ["recoil.csv"]
    if len(recoil.lasers) >= 2 and any(len(c.fits) >= 1 for c in recoil.compounds):
        fig = recoil_spectrum_figure(recoil) if has("matplotlib") else None
        if fig is not None:
            (out / "figures").mkdir(exist_ok=True)
            write_bytes_atomic(out / "figures" / SPECTRUM_PLOT, to_png(fig))
            svg = SPECTRUM_PLOT.replace(".png", ".svg")
            write_text_atomic(out / "figures" / svg, to_svg(fig))
            written += [f"figures/{SPECTRUM_PLOT}", f"figures/{svg}"]
    return written


SPECTRUM_PLOT = "recoil_spectrum.png"


def recoil_markdown_lines(recoil: RecoilResult) -> list[str]:
    """The report section (Markdown lines)."""
    out = [
        "## Photon-recoil absorption cross-sections",
        "",
        f"source {md_code(recoil.source)} · lasers: "
        + ", ".join(
            f"{md_escape(la.name)} ({la.wavelength.value * 1e9:g} nm{_laser_modes(la)})"
            for la in recoil.lasers
        ),
        "",
        "| compound | laser | λ (nm) | σ (10⁻¹⁶ cm²) | n̄ at max | χ²/ν | status |",
        "|---|---|---|---|---|---|---|",
    ]
    for c in recoil.compounds:
        if not c.fits:
            out.append(f"| {md_escape(c.compound)} | — | — | — | — | — | {c.status} |")
        for f in c.fits:
            out.append(
                f"| {md_escape(c.compound)} | {md_escape(f.laser)} | {f.wavelength_m * 1e9:g} | "
                f"{_sigma_text(f)} | "
                f"{f.mean_photons_at_max:.3g} | {f.reduced_chi2:.2f} | {c.status} |"
            )
    for note in recoil.notes:
        out += ["", f"> {md_escape(note)}"]
    for c in recoil.compounds:
        out += ["", f"### {md_escape(c.compound)} (photon recoil)", ""]
        if c.status == "failed":
            out.append(f"**failed:** {md_escape(c.message)}")
            continue
        out.append(f"mass {c.mass_u:.4f} u")
        if c.uses_reemission:
            lam = (
                f"{c.emission_wavelength_m * 1e9:g} nm"
                if c.emission_wavelength_m
                else "the laser wavelength"
            )
            how = "fitted" if c.yield_fitted else "stated"
            q = c.fluorescence_yield
            out.append(
                f"Isotropic re-emission used: {how} fluorescence yield "
                f"{value_error_text(nominal_values(q), std_devs(q))}, emission at {lam}."
            )
        for f in c.fits:
            out += [
                "",
                f"Laser {md_escape(f.laser)} ({f.wavelength_m * 1e9:g} nm): "
                f"σ = ({_sigma_text(f)})"
                "·10⁻¹⁶ cm²",
                "",
                f"| {_dose_head(recoil, f.laser)} | phase (rad) | model | pull | "
                "visibility ratio | model | pull |",
                "|---|---|---|---|---|---|---|",
            ]
            for e, p, pe, pm, v, ve, vm in zip(
                f.pulse_energies,
                f.phases,
                f.phase_errors,
                f.model_phases,
                f.visibility_ratios,
                f.visibility_errors,
                f.model_visibility,
                strict=True,
            ):
                out.append(
                    f"| {e:.4g} | {p:.4f} ± {pe:.2g} | {pm:.4f} | {(p - pm) / pe:+.2f} | "
                    f"{v:.4f} ± {ve:.2g} | {vm:.4f} | {(v - vm) / ve:+.2f} |"
                )
            budget = variance_budget(f.cross_section)
            if budget:
                shown = {k: v for k, v in budget.items() if v >= 5e-4}
                out += ["", "Uncertainty budget of σ (share of variance):", ""]
                out += ["| input | share |", "|---|---|"]
                out += [f"| {md_escape(k)} | {v:.1%} |" for k, v in shown.items()]
                if len(shown) < len(budget):
                    rest = sum(v for k, v in budget.items() if k not in shown)
                    out.append(
                        f"| {len(budget) - len(shown)} more inputs, each < 0.05 % | {rest:.2%} |"
                    )
        if c.warnings:
            out += ["", "Warnings:", ""] + [f"- {md_escape(w)}" for w in c.warnings]
    out += [
        "",
        "Method: n̄ = σE/(Aħω) photons per molecule (Poisson; cw: σP/(vLħω)); fringe phasor "
        "R = ⟨exp(n̄(g e^{iφ1} − 1))⟩ over the velocity distribution, φ1 = 2π·(ħk/m)·w/(v d); "
        "σ fitted to arg R and |R| together; area and pulse-energy calibration scale σ "
        "exactly, the other inputs are propagated by implicit derivatives.",
    ]
    return out


def recoil_terminal_lines(recoil: RecoilResult) -> list[str]:
    head = f"{'compound':<20} {'laser':<10} {'λ (nm)':>8} {'σ (1e-16 cm²)':>18}  status"
    out = ["photon-recoil cross-sections", head, "-" * len(head)]
    for c in recoil.compounds:
        name = terminal_safe(c.compound)
        name = name if len(name) <= 20 else name[:19] + "…"
        if not c.fits:
            out.append(f"{name:<20} {'—':<10} {'—':>8} {'—':>18}  {c.status}")
        for f in c.fits:
            s = value_error_text(f.cross_section_cm2 / 1e-16, f.cross_section_err_cm2 / 1e-16)
            lname = terminal_safe(f.laser)
            lname = lname if len(lname) <= 10 else lname[:9] + "…"
            out.append(f"{name:<20} {lname:<10} {f.wavelength_m * 1e9:>8g} {s:>18}  {c.status}")
    return out


def recoil_markdown(recoil: RecoilResult) -> str:
    return "\n".join(recoil_markdown_lines(recoil)) + "\n"


def _laser_modes(la) -> str:
    """What differs from a travelling pulse seen by every molecule (empty for that)."""
    parts = []
    if la.mode != "pulsed":
        parts.append(la.mode)
    if la.illumination != "travelling":
        parts.append(f"{la.illumination} wave")
    if la.beam_height_rms.value > 0:
        parts.append(f"beam height {la.beam_height_rms.value * 1e3:g} mm rms")
    if la.hit_fraction.value != 1:
        parts.append(f"hit fraction {la.hit_fraction.value:g}")
    if la.visibility_errors != "rician":
        parts.append(f"{la.visibility_errors} visibility errors")
    return "".join(f", {p}" for p in parts)


def _dose_head(recoil: RecoilResult, laser: str) -> str:
    la = next((x for x in recoil.lasers if x.name == laser), None)
    return "P (W)" if la is not None and la.mode == "cw" else "E (J)"


def _sigma_text(fit) -> str:
    """σ of a fit as "value ± error" in units of 10⁻¹⁶ cm²."""
    return value_error_text(fit.cross_section_cm2 / 1e-16, fit.cross_section_err_cm2 / 1e-16)
