"""Renderers of the visibility (optical) results: optical.csv, Markdown, terminal, figure."""

from __future__ import annotations

import io
import math
from pathlib import Path

from polarbeam._util.atomic import write_bytes_atomic, write_text_atomic
from polarbeam._util.optional import has
from polarbeam.quantities import value_error_text
from polarbeam.report.figures import PALETTE, PNG_DPI
from polarbeam.report.text import guarded_frame, md_escape, terminal_safe
from polarbeam.results.visibility import OpticalResult

__all__ = [
    "VISIBILITY_PLOT",
    "optical_markdown_lines",
    "optical_terminal_lines",
    "write_optical_results",
]

VISIBILITY_PLOT = "visibility.png"


def write_optical_results(optical: OpticalResult, out: str | Path) -> list[str]:
    """Write ``optical.csv`` and ``figures/visibility.png`` (the latter needs
    ``polarbeam[plots]``)."""
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    buf = io.StringIO()
    guarded_frame(optical.table).to_csv(buf, index=False, float_format="%.10g", lineterminator="\n")
    write_text_atomic(out / "optical.csv", buf.getvalue())
    written = ["optical.csv"]
    if any(c.curves for c in optical.compounds):
        png = _figure_png(optical)
        if png is not None:
            (out / "figures").mkdir(exist_ok=True)
            write_bytes_atomic(out / "figures" / VISIBILITY_PLOT, png)
            written.append(f"figures/{VISIBILITY_PLOT}")
    return written


def _figure_png(optical: OpticalResult) -> bytes | None:
    """Data, quantum and classical curves (top) and the residuals (bottom) per compound."""
    if not has("matplotlib"):  # optional extra polarbeam[plots]
        return None
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    shown = [c for c in optical.compounds if c.curves][:8]
    fig = Figure(figsize=(4.2 * len(shown), 5.2), dpi=110)
    grid = fig.add_gridspec(2, len(shown), height_ratios=(3, 1))
    for j, c in enumerate(shown):
        top = fig.add_subplot(grid[0, j])
        bottom = fig.add_subplot(grid[1, j], sharex=top)
        for k, s in enumerate(c.curves):
            color = PALETTE[k % len(PALETTE)]
            top.errorbar(
                s.powers,
                s.visibilities,
                yerr=s.errors,
                fmt="o",
                ms=3,
                color=color,
                label=f"{s.temperature_K:g} K, {s.velocity_m_s:g} m/s",
            )
            top.plot(s.dense_powers, s.dense_quantum, "-", color=color, lw=1.2)
            top.plot(s.dense_powers, s.dense_classical, ":", color=color, lw=1.2)
            bottom.errorbar(
                s.powers, (s.visibilities - s.quantum) / s.errors, fmt="o", ms=3, color=color
            )
        top.set_title(f"{c.compound} (preferred: {c.preferred_model})", fontsize="small")
        top.set_ylabel("visibility")
        top.plot([], [], "k-", label="quantum")
        top.plot([], [], "k:", label="classical")
        top.legend(fontsize="x-small")
        bottom.axhline(0.0, color="0.6", lw=0.8)
        bottom.set_xlabel("laser power (W)")
        bottom.set_ylabel("residual (σ), quantum")
    fig.tight_layout()
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=PNG_DPI)
    return buf.getvalue()


def _num(x: float) -> str:
    return "—" if x is None or not math.isfinite(x) else f"{x:.1f}"


def optical_markdown_lines(optical: OpticalResult) -> list[str]:
    """The report section (Markdown lines)."""
    g = optical.gratings
    out = [
        "## Fringe visibility: optical polarizability and absorption",
        "",
        f"gratings: {g['first']} / {g['second']} / {g['third']} · absorbed molecules "
        f"{g['absorbed_molecules']} · model preference from 2 ln(likelihood ratio) beyond "
        f"±{optical.threshold:.2f}",
        "",
        "| compound | α_opt (Å³) | σ_abs (m²) | χ² quantum | χ² classical | ν | preferred "
        "| status |",
        "|---|---|---|---|---|---|---|---|",
    ]
    for c in optical.compounds:
        r = c.row()
        a = value_error_text(r["alpha_opt_A3"], r["alpha_opt_err_A3"]) if c.alpha_opt else "—"
        s = f"{r['sigma_abs_m2']:.3g} ± {r['sigma_abs_err_m2']:.2g}" if c.sigma_abs else "—"
        out.append(
            f"| {md_escape(c.compound)} | {a} | {s} | {_num(c.chi2_quantum)} | "
            f"{_num(c.chi2_classical)} | {c.ndof if c.ndof is not None else '—'} | "
            f"{c.preferred_model if c.status == 'ok' else '—'} | {c.status} |"
        )
    for c in optical.compounds:
        if c.status == "failed":
            out += ["", f"- {md_escape(c.compound)} failed: {md_escape(c.message)}"]
            continue
        for what, budget in c.budget.items():
            if budget:
                shares = ", ".join(f"{md_escape(k)} {v:.0%}" for k, v in budget.items())
                out += ["", f"- {md_escape(c.compound)} {what} budget: {shares}"]
        for w in c.warnings:
            out += ["", f"- {md_escape(w)}"]
    out += [
        "",
        "Visibilities fitted with the Rician likelihood (χ² is its deviance); power scale and "
        "waist scale α_opt and σ_abs exactly, the open fraction and velocities are propagated "
        "by implicit derivatives (docs/visibility.md).",
    ]
    return out


def optical_terminal_lines(optical: OpticalResult) -> list[str]:
    head = f"{'compound':<20} {'α_opt (Å³)':>16} {'σ_abs (m²)':>20}  preferred  status"
    out = ["fringe visibility (optical)", head, "-" * len(head)]
    for c in optical.compounds:
        name = terminal_safe(c.compound)
        name = name if len(name) <= 20 else name[:19] + "…"
        r = c.row()
        a = value_error_text(r["alpha_opt_A3"], r["alpha_opt_err_A3"]) if c.alpha_opt else "—"
        s = f"{r['sigma_abs_m2']:.3g} ± {r['sigma_abs_err_m2']:.2g}" if c.sigma_abs else "—"
        pref = c.preferred_model if c.status == "ok" else "—"
        out.append(f"{name:<20} {a:>16} {s:>20}  {pref:<9}  {c.status}")
    return out
