"""report.html parts of a magnetic campaign: the summary table, one section per compound and its
figures, in χ (cm³/mol), χ_dia, the moment (μ_B), the current (A) and B·∂B/∂x.

A magnetic campaign is fitted with the electric machinery (polarbeam.separation.magnetic); these
renderers read the magnetic numbers it stored in ``extra`` (χ_eff per series, χ_dia, the moment
and its interval, the Curie constant) and never show the α/μ stand-ins.  The figures: the
observable against current² (the force goes as B·∂B/∂x = field factor × I²) with the fitted
curve, and the Curie plot χ_eff against 1/T with χ_dia at 1/T = 0.  Computes no physics.
"""

from __future__ import annotations

import html
import math

import numpy as np

from polarbeam.quantities import format_value_error
from polarbeam.report.figures import (
    MARKERS,
    OKABE_ITO,
    PALETTE,
    new_figure,
    plain_text,
    styled,
)
from polarbeam.report.sections import compound_section_head
from polarbeam.uncertain import variance_budget

__all__ = [
    "MAGNETIC_CAPTIONS",
    "MAGNETIC_METHOD_HTML",
    "curie_figure",
    "magnetic_compound_figures",
    "magnetic_compound_section",
    "magnetic_series_figure",
    "magnetic_summary_table",
]

MAGNETIC_CAPTIONS = {
    "series": "Measured points (1σ) against the squared magnet current I² (B·∂B/∂x = field "
    "factor × I²) with the fitted model drawn as a smooth curve; below, the residuals in units "
    "of their error.",
    "curie": "χ_eff of each series against 10³/T with the fitted Curie line χ_dia + C/T and χ_dia "
    "at 1/T = 0; the band is ±1σ from the χ_dia–C correlation.",
    "budget": "Share of each stated input in the variance (fit statistics pooled).",
}

MAGNETIC_METHOD_HTML = (
    "<li>χ_eff = χ_dia + C/T with C = N_A μ0 m²/(3k) = 0.12505 m² cm³ K/mol (m in μ_B; Curie "
    "law, weak field, thermal orientations); the force is (χ_m/μ0 + m²/(3kT)) B·∂B/∂x with "
    "B·∂B/∂x = field factor × current².</li>"
    "<li>Errors are 1σ standard uncertainties propagated linearly from every stated input and "
    "the fit covariances; shared instrument inputs are correlated across series.</li>"
)

_MICRO = 1e6  # tables and figures show χ in 10⁻⁶ cm³/mol


def _e(s) -> str:
    return html.escape(str(s), quote=True)


def _fmt(v, e, scale: float = 1.0) -> str:
    if v is None or e is None:
        return "—"
    return format_value_error(v * scale, e * scale)


def _td(v, shown: str) -> str:
    attr = f"{float(v):.10g}" if v is not None and math.isfinite(float(v)) else ""
    return f'<td class="num" data-v="{attr}">{_e(shown)}</td>'


def magnetic_summary_table(result, detailed: set[int], anchor) -> str:
    """The sortable summary table: χ_dia (10⁻⁶ cm³/mol), the moment (μ_B) or its limit."""
    head = (
        '<table class="sortable" id="summary-table"><thead><tr>'
        '<th data-type="num" class="num">#</th><th>compound</th><th>status</th>'
        '<th data-type="num" class="num">χ_dia (10⁻⁶ cm³/mol)</th>'
        '<th data-type="num" class="num">σ χ_dia</th>'
        '<th data-type="num" class="num">moment (μ_B)</th>'
        '<th data-type="num" class="num">σ moment</th>'
        '<th data-type="num" class="num">moment limit (μ_B)</th>'
        '<th data-type="num" class="num">series</th><th>method</th><th>message</th>'
        "</tr></thead><tbody>"
    )
    rows = []
    for i, c in enumerate(result.compounds):
        e = c.extra
        name = _e(c.compound)
        if i in detailed:
            name = f'<a href="#{anchor(i)}">{name}</a>'
        x, dx = e.get("chi_dia_cm3_mol"), e.get("chi_dia_err_cm3_mol")
        m, dm = e.get("moment_muB"), e.get("moment_err_muB")
        up = e.get("moment_upper_muB")
        xs = _fmt(x, dx, _MICRO).partition(" ± ")
        ms = _fmt(m, dm).partition(" ± ")
        rows.append(
            "<tr>"
            + _td(i + 1, str(i + 1))
            + f"<td>{name}</td>"
            + f'<td class="status status-{_e(c.status)}">{_e(c.status)}</td>'
            + _td(x * _MICRO if x is not None else None, xs[0])
            + _td(dx * _MICRO if dx is not None else None, xs[2])
            + _td(m, ms[0])
            + _td(dm, ms[2])
            + _td(up, f"< {up:.3g}" if up is not None else "")
            + _td(len(c.series), str(len(c.series)))
            + f"<td>{_e(c.method)}</td><td>{_e(c.message)}</td></tr>"
        )
    return head + "".join(rows) + "</tbody></table>"


def _values_line(c) -> str:
    e, parts = c.extra, []
    if e.get("chi_dia_cm3_mol") is not None:
        chi = _fmt(e["chi_dia_cm3_mol"], e["chi_dia_err_cm3_mol"], _MICRO)
        parts.append(f"χ_dia = {_e(chi)} ×10⁻⁶ cm³/mol")
    if e.get("moment_muB") is not None:
        parts.append(f"moment = {_e(_fmt(e['moment_muB'], e['moment_err_muB']))} μ_B")
    elif e.get("moment_upper_muB") is not None:
        parts.append(f"moment &lt; {e['moment_upper_muB']:.3g} μ_B (no significant moment)")
    if e.get("curie_constant_cm3_K_mol") is not None:
        cc = _fmt(e["curie_constant_cm3_K_mol"], e["curie_constant_err_cm3_K_mol"])
        parts.append(f"C = {_e(cc)} cm³ K/mol")
    return " · ".join(parts)


def _series_table(c) -> str:
    rows = []
    for s in c.series:
        x = s.extra
        chi, err = x.get("chi_eff_cm3_mol"), x.get("chi_eff_err_cm3_mol")
        rows.append(
            "<tr>"
            + _td(s.temperature_K, _fmt(s.temperature_K, s.temperature_err_K))
            + _td(s.n_points, str(s.n_points))
            + _td(chi * _MICRO if chi is not None else None, _fmt(chi, err, _MICRO))
            + _td(s.reduced_chi2, f"{s.reduced_chi2:.2f}")
            + _td(s.p_value, f"{s.p_value:.2g}" if math.isfinite(s.p_value) else "—")
            + _td(x.get("max_abs_current_A"), f"{x.get('max_abs_current_A', math.nan):.4g}")
            + _td(
                s.velocity_m_s,
                f"{_fmt(s.velocity_m_s, s.velocity_err_m_s)} (σ {s.velocity_spread_m_s:g})",
            )
            + "</tr>"
        )
    return (
        '<div class="wrap"><table><thead><tr><th class="num">T (K)</th><th class="num">points</th>'
        '<th class="num">χ_eff (10⁻⁶ cm³/mol)</th><th class="num">χ²/ν</th><th class="num">p</th>'
        '<th class="num">max current (A)</th><th class="num">velocity (m/s)</th></tr></thead>'
        "<tbody>" + "".join(rows) + "</tbody></table></div>"
    )


def _point_tables(c) -> str:
    out = []
    for s in c.series:
        scale, unit = (1e6, "µm") if s.observable.startswith("shift") else (1.0, "rad")
        rows = "".join(
            f'<tr><td class="num">{i:g}</td><td class="num">{y * scale:.5g}</td>'
            f'<td class="num">{e * scale:.2g}</td><td class="num">{m * scale:.5g}</td>'
            f'<td class="num">{(y - m) / e:+.2f}</td></tr>'
            for i, y, e, m in zip(s.voltages, s.values, s.errors, s.model, strict=True)
        )
        out.append(
            f'<details class="points"><summary>fit at {s.temperature_K:g} K: {s.n_points} '
            f"points ({_e(s.observable)} versus current)</summary>"
            f'<table><thead><tr><th class="num">I (A)</th><th class="num">measured ({unit})</th>'
            f'<th class="num">error</th><th class="num">model</th>'
            f'<th class="num">residual/σ</th></tr></thead><tbody>{rows}</tbody></table></details>'
        )
    return "".join(out)


def _targets(c):
    chi = c.alpha if c.alpha is not None else (c.series[0].alpha_eff if c.series else None)
    what = "χ_dia" if c.alpha is not None else "χ_eff (first series)"
    yield what, chi
    if c.alpha is not None:
        yield ("the moment", c.dipole) if c.dipole is not None else ("C (⟨m²⟩)", c.mu2)


def _budget_tables(c) -> str:
    out = []
    for what, target in _targets(c):
        budget = variance_budget(target)
        if not budget:
            continue
        rows = "".join(
            f'<tr><td>{_e(k)}</td><td class="num" data-v="{v:.6g}">{v:.1%}</td></tr>'
            for k, v in budget.items()
        )
        out.append(
            f"<details><summary>uncertainty budget of {what} as a table</summary>"
            '<table><thead><tr><th>input</th><th class="num">share of variance</th></tr>'
            f"</thead><tbody>{rows}</tbody></table></details>"
        )
    return "".join(out)


def magnetic_compound_section(i, c, figs, anchor, figure_html) -> str:
    """One compound's section of report.html in magnetic terms."""
    out, closed = compound_section_head(anchor(i), c, lambda: _values_line(c))
    if closed:
        return "".join(out)
    r = c.alpha_mu2_correlation  # the same coefficient as of χ_dia and C (positive scalings)
    if r is not None and math.isfinite(r):
        out.append(
            '<p class="correlation">correlation of χ_dia and C (intercept and slope of the Curie '
            f"line, all shared inputs included): <strong>{r:+.2f}</strong></p>"
        )
    out.append(_series_table(c))
    out.append(_point_tables(c))
    if figs:
        out.append('<div class="figs">')
        out += [figure_html(k, svg, files) for k, (svg, files) in figs.items()]
        out.append("</div>")
    out.append(_budget_tables(c))
    if c.warnings:
        out.append('<ul class="warn">' + "".join(f"<li>{_e(w)}</li>" for w in c.warnings) + "</ul>")
    out.append("</section>")
    return "".join(out)


# figures ------------------------------------------------------------------------------------------
@styled
def magnetic_series_figure(c):
    """The observable against current² per series with the fitted curve, and the residuals."""
    if not c.series:
        return None
    shift = c.series[0].observable.startswith("shift")
    ylab, scale = ("beam shift (µm)", 1e6) if shift else ("fringe phase (rad)", 1.0)
    fig, (ax, rax) = new_figure(5.6, 4.2, rows=2, ratios=(3, 1.3), sharex=True)
    for k, s in enumerate(c.series):
        col, mk = PALETTE[k % len(PALETTE)], MARKERS[k % len(MARKERS)]
        order = np.argsort(np.abs(s.voltages))
        i2 = s.voltages[order] ** 2
        chi = s.extra.get("chi_eff_cm3_mol")
        label = f"{s.temperature_K:g} K"
        if chi is not None:
            label += f"  χ_eff = {chi * _MICRO:.4g}×10⁻⁶ cm³/mol"
        ax.errorbar(
            i2,
            s.values[order] * scale,
            yerr=s.errors[order] * scale,
            fmt=mk,
            ls="none",
            ms=4,
            color=col,
            capsize=2,
            lw=0.8,
            label=label,
        )
        cv, cm = s.curve_voltages, s.curve
        if cv is None or cm is None or len(cv) < 2:
            cv, cm = s.voltages[order], s.model[order]
        cv, cm = np.asarray(cv, dtype=float), np.asarray(cm, dtype=float)
        keep = cv >= 0  # the model is even in I: one branch against I²
        co = np.argsort(cv[keep])
        ax.plot(cv[keep][co] ** 2, cm[keep][co] * scale, "-", color=col, lw=1.1, gid="model")
        rax.plot(
            i2,
            (s.values[order] - s.model[order]) / s.errors[order],
            mk,
            ls="none",
            color=col,
            ms=3.5,
        )
    ax.set_ylabel(ylab)
    ax.set_title(f"{plain_text(c.compound)}: measured (points, 1σ) and fitted model (lines)")
    ax.legend(frameon=False, loc="best", fontsize=7)
    rax.axhline(0.0, color="#555555", lw=0.8)
    rax.set_ylabel("residual / σ")
    rax.set_xlabel("magnet current² I² (A²)  [B·∂B/∂x = field factor × I²]")
    return fig


@styled
def curie_figure(c):
    """χ_eff against 10³/T with the Curie line χ_dia + C/T, its band and χ_dia at 1/T = 0."""
    e = c.extra
    x0, dx0 = e.get("chi_dia_cm3_mol"), e.get("chi_dia_err_cm3_mol")
    cc, dcc = e.get("curie_constant_cm3_K_mol"), e.get("curie_constant_err_cm3_K_mol")
    pts = [
        (s, s.extra.get("chi_eff_cm3_mol"), s.extra.get("chi_eff_err_cm3_mol")) for s in c.series
    ]
    if x0 is None or cc is None or len(pts) < 2 or any(p[1] is None for p in pts):
        return None
    xs = np.array([1.0 / s.temperature_K for s, _, _ in pts])
    ys = np.array([v for _, v, _ in pts]) * _MICRO
    yerr = np.array([err for _, _, err in pts]) * _MICRO
    grid = np.linspace(0.0, 1.08 * float(xs.max()), 120)
    rho = c.alpha_mu2_correlation or 0.0
    line = (x0 + cc * grid) * _MICRO
    sd = np.sqrt(np.clip(dx0**2 + 2 * grid * rho * dx0 * dcc + (grid * dcc) ** 2, 0, None)) * _MICRO
    k = 1e3
    fig, ax = new_figure(5.6, 3.8)
    ax.fill_between(grid * k, line - sd, line + sd, color=OKABE_ITO["sky blue"], alpha=0.35, lw=0)
    ax.plot(grid * k, line, "-", color=OKABE_ITO["blue"], lw=1.3, label="χ_dia + C/T")
    ax.errorbar(
        xs * k,
        ys,
        yerr=yerr,
        fmt="o",
        ls="none",
        color=OKABE_ITO["vermillion"],
        ms=5,
        capsize=2,
        lw=0.9,
        label="χ_eff per series (1σ)",
    )
    ax.errorbar(
        [0.0],
        [x0 * _MICRO],
        yerr=[dx0 * _MICRO],
        fmt="D",
        ls="none",
        color=OKABE_ITO["black"],
        ms=5,
        capsize=3,
        clip_on=False,
        label=f"χ_dia = {_fmt(x0, dx0, _MICRO)}×10⁻⁶ cm³/mol (1/T = 0)",
    )
    if e.get("moment_muB") is not None:
        mlab = f"moment = {_fmt(e['moment_muB'], e['moment_err_muB'])} μ_B"
    elif e.get("moment_upper_muB") is not None:
        mlab = f"moment < {e['moment_upper_muB']:.3g} μ_B"
    else:
        mlab = "moment: none"
    ax.plot([], [], ls="none", label=mlab)
    ax.set_xlim(-0.04 * float(grid[-1]) * k, float(grid[-1]) * k)
    ax.set_xlabel("10³/T (K⁻¹)")
    ax.set_ylabel("χ_eff (10⁻⁶ cm³/mol)")
    ax.set_title(f"{plain_text(c.compound)}: Curie plot")
    ax.legend(frameon=True, framealpha=0.85, edgecolor="none", loc="best", fontsize=7)
    return fig


@styled
def _budget_figure(c):
    what, target = next(iter(_targets(c)))
    budget = variance_budget(target)
    if not budget:
        return None
    items = list(budget.items())[:10]
    labels = [k for k, _ in items][::-1]
    vals = np.array([v for _, v in items][::-1]) * 100
    fig, ax = new_figure(
        6.0, 0.9 + 0.28 * len(items), left=min(3.2, 0.3 + 0.065 * max(map(len, labels)))
    )
    ax.barh(range(len(vals)), vals, color=OKABE_ITO["blue"], height=0.65)
    ax.set_yticks(range(len(vals)), labels)
    ax.set_xlabel(f"share of the variance of {what} (%)")
    ax.set_title(f"{plain_text(c.compound)}: uncertainty budget")
    return fig


def magnetic_compound_figures(c) -> dict:
    """{kind: Figure} of one compound of a magnetic campaign (absent kinds left out)."""
    out = {}
    for kind, make in (
        ("series", magnetic_series_figure),
        ("curie", curie_figure),
        ("budget", _budget_figure),
    ):
        fig = make(c)
        if fig is not None:
            out[kind] = fig
    return out
