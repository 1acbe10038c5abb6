"""Sections of ``report.html`` beyond the summary and the compound sections: the instrument
inputs, provenance, per-compound μ budget and α–⟨μ²⟩ correlation, per-point fit tables, the
computed-chemistry comparison, raw-scan drift, photon recoil and visibility (optical) results.

Each function returns an HTML fragment (a string, every user string escaped) from result objects;
none computes physics.  Figures are passed in already rendered (``(svg, files)`` pairs) by
:mod:`polarbeam.report.html`, which owns the files of ``figures/``.
"""

from __future__ import annotations

import html
import math
from collections.abc import Callable

from polarbeam.quantities import format_value_error
from polarbeam.uncertain import variance_budget

__all__ = [
    "compound_section_head",
    "computed_section",
    "correlation_line",
    "dipole_budget_table",
    "drift_section",
    "figure_block",
    "inputs_section",
    "optical_section",
    "point_tables",
    "provenance_section",
    "recoil_section",
]

#: (svg, (svg file, png file) or None) of one rendered figure.
Rendered = tuple[str, tuple[str, str] | None]


def _e(s) -> str:
    return html.escape(str(s), quote=True)


def compound_section_head(anchor: str, c, values_line: Callable[[], str]) -> tuple[list[str], bool]:
    """The opening of a compound's section of report.html, for every campaign kind: heading,
    status, mass, method, then the values line and the message. ``closed`` is True for a failed
    compound, whose section ends with its message."""
    out = [f'<section class="compound" id="{anchor}"><h3>{_e(c.compound)}</h3>']
    meta = [f'<span class="status status-{_e(c.status)}">{_e(c.status)}</span>']
    if c.mass_u is not None:
        meta.append(f"mass {c.mass_u:.4f} u")
    meta.append(f"method: {_e(c.method)}")
    out.append(f'<p class="meta">{" · ".join(meta)}</p>')
    if c.status == "failed":
        out.append(f'<p class="failed-msg">{_e(c.message)}</p></section>')
        return out, True
    line = values_line()
    if line:
        out.append(f'<p class="values">{line}</p>')
    if c.message and c.message != "ok":
        out.append(f'<p class="note">{_e(c.message)}</p>')
    return out, False


def _g(v, fmt: str = ".6g") -> str:
    try:
        f = float(v)
    except (TypeError, ValueError):
        return "—"
    return format(f, fmt) if math.isfinite(f) else "—"


def _ve(v, e) -> str:
    try:
        if e is not None and float(e) > 0:
            return format_value_error(float(v), float(e))
    except (TypeError, ValueError):
        pass
    return _g(v)


def figure_block(fig: Rendered | None, caption: str) -> str:
    """One ``<figure>`` with its caption and the links to its SVG/PNG files."""
    if fig is None:
        return ""
    svg, files = fig
    links = ""
    if files:
        links = f' Files: <a href="{_e(files[0])}">SVG</a>, <a href="{_e(files[1])}">PNG</a>.'
    return f"<figure>{svg}<figcaption>{_e(caption)}{links}</figcaption></figure>"


def inputs_section(result) -> str:
    """Every stated instrument input (SI value, 1σ error, source key, default or stated), the
    per-series temperatures and velocities, and the analysis settings."""
    stated = dict(result.stated_inputs)
    for extra in (getattr(result, "recoil", None),):  # the lasers' stated inputs
        for key, d in (getattr(extra, "stated_inputs", None) or {}).items():
            stated.setdefault(key, d)
    rows = []
    for key, d in sorted(stated.items()):
        value, err = d.get("value"), d.get("error")
        rel = abs(err / value) if value and err else None
        sens = d.get("dlnC_dp")
        default = d.get("default")
        rows.append(
            f"<tr><td><code>{_e(key)}</code></td>"
            f'<td class="num">{_g(value)}</td><td class="num">{_g(err, ".3g")}</td>'
            f'<td class="num">{_g(rel * 100, ".3g") + " %" if rel else "—"}</td>'
            f'<td class="num">{_g(sens, ".4g") if sens is not None else "—"}</td>'
            f"<td>{'default' if default else ('stated' if default is not None else '—')}</td>"
            "</tr>"
        )
    out = ['<section id="inputs"><h2>Instrument inputs</h2>']
    if rows:
        out.append(
            '<p class="note">Stated inputs in SI units with their 1σ errors, by their key in '
            "campaign.toml; <em>default</em> marks values polarbeam assumed because the file did "
            "not state them. ∂lnC/∂p is the sensitivity of the coupling to each input.</p>"
            '<div class="wrap"><table id="inputs-table"><thead><tr><th>source key</th>'
            '<th class="num">value (SI)</th><th class="num">error (1σ)</th>'
            '<th class="num">relative</th><th class="num">∂lnC/∂p</th><th>origin</th></tr>'
            "</thead><tbody>" + "".join(rows) + "</tbody></table></div>"
        )
    else:
        out.append('<p class="note">No stated instrument inputs (see the sections below).</p>')
    srows = []
    for c in result.compounds:
        for s in c.series:
            srows.append(
                f"<tr><td>{_e(c.compound)}</td>"
                f'<td class="num">{_ve(s.temperature_K, s.temperature_err_K)}</td>'
                f'<td class="num">{_ve(s.velocity_m_s, s.velocity_err_m_s)}</td>'
                f'<td class="num">{_g(s.velocity_spread_m_s, ".4g")}</td></tr>'
            )
    if srows:
        out.append(
            "<h3>Temperatures and velocities (data tables)</h3>"
            '<div class="wrap"><table id="series-inputs"><thead><tr><th>compound</th>'
            '<th class="num">T (K)</th><th class="num">velocity (m/s)</th>'
            '<th class="num">velocity spread σ (m/s)</th></tr></thead><tbody>'
            + "".join(srows)
            + "</tbody></table></div>"
        )
    if result.settings:
        items = "".join(
            f"<tr><td><code>{_e(k)}</code></td><td>{_e(v)}</td></tr>"
            for k, v in result.settings.items()
        )
        out.append(
            '<h3>Analysis settings</h3><table id="settings-table"><thead><tr><th>setting</th>'
            f"<th>value</th></tr></thead><tbody>{items}</tbody></table>"
        )
    out.append("</section>")
    return "".join(out)


def provenance_section(result) -> str:
    """Date, software versions, command line and the SHA-256 of each input file."""
    p = result.provenance or {}
    out = ['<section id="provenance"><h2>Provenance</h2>']
    if not p:
        out.append('<p class="note">No provenance recorded with this result.</p></section>')
        return "".join(out)
    out.append(
        f'<p class="meta">date (UTC) {_e(p.get("date_utc", "—"))} · polarbeam '
        f"{_e(result.version)} · command <code>{_e(p.get('command', '—'))}</code></p>"
    )
    soft = p.get("software") or {}
    if soft:
        out.append(
            '<table id="software-table"><thead><tr><th>package</th><th>version</th></tr></thead>'
            "<tbody>"
            + "".join(
                f"<tr><td>{_e(k)}</td><td>{_e(v if v is not None else 'not installed')}</td></tr>"
                for k, v in soft.items()
            )
            + "</tbody></table>"
        )
    files = p.get("inputs") or []
    if files:
        out.append(
            '<div class="wrap"><table id="inputs-hash-table"><thead><tr><th>input file</th>'
            "<th>SHA-256</th></tr></thead><tbody>"
            + "".join(
                f"<tr><td><code>{_e(f.get('file'))}</code></td>"
                f"<td><code>{_e(f.get('sha256') or 'missing')}</code></td></tr>"
                for f in files
            )
            + "</tbody></table></div>"
        )
    out.append("</section>")
    return "".join(out)


def dipole_budget_table(c) -> str:
    """The uncertainty budget of μ (or of ⟨μ²⟩ when μ is a limit), as a table."""
    target = c.dipole if c.dipole is not None else c.mu2
    budget = variance_budget(target)
    if not budget:
        return ""
    what = "μ" if c.dipole is not None else "⟨μ²⟩"
    rows = "".join(
        f'<tr><td>{_e(k)}</td><td class="num" data-v="{v:.6g}">{v:.1%}</td></tr>'
        for k, v in budget.items()
    )
    return (
        f'<details class="budget-mu"><summary>uncertainty budget of {what} as a table</summary>'
        '<table><thead><tr><th>input</th><th class="num">share of variance</th></tr></thead>'
        f"<tbody>{rows}</tbody></table></details>"
    )


def correlation_line(c) -> str:
    """The α–⟨μ²⟩ correlation coefficient of the Debye fit (empty without both)."""
    r = c.alpha_mu2_correlation
    if r is None or not math.isfinite(r):
        return ""
    return (
        f'<p class="correlation">correlation of α and ⟨μ²⟩ (intercept and slope of the Debye '
        f"line, all shared inputs included): <strong>{r:+.2f}</strong></p>"
    )


def point_tables(c) -> str:
    """Per-point fit tables of every series, collapsed (``<details>``)."""
    out = []
    for s in c.series:
        shift = s.observable.startswith("shift")
        scale, unit = (1e6, "µm") if shift else (1.0, "rad")
        rows = "".join(
            f'<tr><td class="num">{v:g}</td><td class="num">{y * scale:.5g}</td>'
            f'<td class="num">{e * scale:.2g}</td><td class="num">{m * scale:.5g}</td>'
            f'<td class="num">{(y - m) / e:+.2f}</td></tr>'
            for v, y, e, m in zip(s.voltages, s.values, s.errors, s.model, strict=True)
        )
        out.append(
            f'<details class="points"><summary>fit at {s.temperature_K:g} K: {s.n_points} '
            f"points ({_e(s.observable)} versus voltage)</summary>"
            f'<table><thead><tr><th class="num">V (V)</th><th class="num">measured ({unit})</th>'
            f'<th class="num">error</th><th class="num">model</th>'
            f'<th class="num">residual/σ</th></tr></thead><tbody>{rows}</tbody></table></details>'
        )
    return "".join(out)


def computed_section(result, parity_fig: Rendered | None, note: str) -> str:
    """Measured against computed chemistry: per-method statistics and per-compound values."""
    par, cmp_ = result.parity, result.comparison
    has_par = par is not None and len(par)
    has_cmp = cmp_ is not None and len(cmp_)
    if not (has_par or has_cmp or parity_fig):
        return ""
    out = ['<section id="computed"><h2>Measured versus computed chemistry</h2>']
    out.append(
        figure_block(
            parity_fig,
            "Measured α against each kind of predicted or computed α (1σ), every compound "
            "labelled; the line is equality.",
        )
    )
    if has_par:
        rows = "".join(
            f"<tr><td>{_e(r['qc_method'])}</td><td class='num'>{r['n_compounds']}</td>"
            f"<td class='num'>{_g(r['mean_signed_dev_A3'], '+.2f')}</td>"
            f"<td class='num'>{_g(r['mean_signed_dev_pct'], '+.1f')}</td>"
            f"<td class='num'>{_g(r['mean_abs_dev_A3'], '.2f')}</td>"
            f"<td class='num'>{_g(r['mean_abs_dev_pct'], '.1f')}</td>"
            f"<td>{_e(r['verdict'])}</td></tr>"
            for r in par.to_dict(orient="records")
        )
        out.append(
            '<div class="wrap"><table id="parity-table"><thead><tr><th>method</th>'
            '<th class="num">n</th><th class="num">mean signed dev. (Å³)</th>'
            '<th class="num">(%)</th><th class="num">mean abs. dev. (Å³)</th>'
            '<th class="num">(%)</th><th>verdict</th></tr></thead><tbody>'
            + rows
            + "</tbody></table></div>"
            '<p class="note">Deviations in this table are computed − measured. In comparison.csv, '
            "alpha_diff_A3 is measured − computed and its error is the experimental one only.</p>"
        )
    if has_cmp:
        rows = "".join(
            f"<tr><td>{_e(r['compound'])}</td><td>{_e(r['qc_method'])}</td>"
            f"<td class='num'>{_g(r['alpha_computed_A3'], '.2f')}</td>"
            f"<td class='num'>{_ve(r['alpha_measured_A3'], r['alpha_measured_err_A3'])}</td>"
            f"<td class='num'>{_g(r['alpha_diff_A3'], '+.2f')}</td></tr>"
            for r in cmp_.to_dict(orient="records")
        )
        out.append(
            '<div class="wrap"><table id="computed-table"><thead><tr><th>compound</th>'
            '<th>method</th><th class="num">α computed (Å³)</th>'
            '<th class="num">α measured (Å³)</th><th class="num">diff (Å³)</th></tr></thead>'
            f"<tbody>{rows}</tbody></table></div>"
        )
    if has_par or has_cmp:
        out.append(f'<p class="note">{_e(note)}</p>')
    out.append("</section>")
    return "".join(out)


def drift_section(reduction, figure: Callable[[tuple[str, float]], Rendered | None]) -> str:
    """Raw scans: per series the reference-phase drift figure and the estimated excess noise."""
    if reduction is None:
        return ""
    out = [
        '<section id="drift"><h2>Raw scans: reference drift and excess phase noise</h2>',
        f'<p class="meta">{_e(reduction.source)}: '
        f"{int(reduction.table['phase_rad'].notna().sum())} of {len(reduction.table)} scans kept, "
        f"{len(reduction.references)} references</p>",
    ]
    rows = []
    for key, nz in reduction.noise.items():
        unit = "rad²/s" if nz.model == "random-walk" else ("rad²" if nz.model == "jitter" else "")
        vis = reduction.reference_visibility.get(key, (math.nan, math.nan))
        rows.append(
            f"<tr><td>{_e(key[0])}</td><td class='num'>{key[1]:g}</td><td>{_e(nz.model)}</td>"
            f"<td class='num'>{_ve(nz.level, nz.level_err)} {unit}</td>"
            f"<td class='num'>{nz.n_residuals}</td><td>{_e(nz.scope)}</td>"
            f"<td class='num'>{_ve(vis[0], vis[1])}</td></tr>"
        )
    if rows:
        out.append(
            '<div class="wrap"><table id="noise-table"><thead><tr><th>compound</th>'
            '<th class="num">T (K)</th><th>excess-noise model</th>'
            '<th class="num">estimated level</th><th class="num">chord residuals</th>'
            '<th>scope</th><th class="num">reference visibility</th></tr></thead><tbody>'
            + "".join(rows)
            + "</tbody></table></div>"
        )
    figs = []
    for key in reduction.covariance:
        fig = figure(key)
        figs.append(
            figure_block(
                fig,
                f"{key[0]} at {key[1]:g} K: unwrapped reference phase against time (1σ) and the "
                "linear interpolation between references subtracted from each signal scan.",
            )
        )
    if any(figs):
        out.append('<div class="figs">' + "".join(figs) + "</div>")
    if reduction.messages:
        out.append(
            "<details><summary>reduction messages</summary><ul>"
            + "".join(f"<li>{_e(m)}</li>" for m in reduction.messages)
            + "</ul></details>"
        )
    out.append("</section>")
    return "".join(out)


def recoil_section(recoil, spectrum: Rendered | None, per_compound: dict[str, Rendered]) -> str:
    """Photon-recoil cross-sections: table, spectrum, per-compound fits (points collapsed)."""
    rows = []
    for c in recoil.compounds:
        if not c.fits:
            rows.append(
                f"<tr><td>{_e(c.compound)}</td><td>—</td><td class='num'>—</td>"
                f"<td class='num'>—</td><td class='num'>—</td><td class='num'>—</td>"
                f'<td class="status status-{_e(c.status)}">{_e(c.status)}</td></tr>'
            )
        for f in c.fits:
            sig = _ve(f.cross_section_cm2 / 1e-16, f.cross_section_err_cm2 / 1e-16)
            rows.append(
                f"<tr><td>{_e(c.compound)}</td><td>{_e(f.laser)}</td>"
                f"<td class='num'>{f.wavelength_m * 1e9:g}</td><td class='num'>{sig}"
                f"</td><td class='num'>{f.mean_photons_at_max:.3g}</td>"
                f"<td class='num'>{_g(f.reduced_chi2, '.2f')}</td>"
                f'<td class="status status-{_e(c.status)}">{_e(c.status)}</td></tr>'
            )
    lasers = ", ".join(f"{_e(la.name)} ({la.wavelength.value * 1e9:g} nm)" for la in recoil.lasers)
    out = [
        '<section id="recoil"><h2>Photon-recoil absorption cross-sections</h2>',
        f'<p class="meta">source {_e(recoil.source)} · lasers: {lasers}</p>',
        '<div class="wrap"><table class="sortable" id="recoil-table"><thead><tr>'
        '<th>compound</th><th>laser</th><th data-type="num" class="num">λ (nm)</th>'
        '<th data-type="num" class="num">σ (10⁻¹⁶ cm²)</th>'
        '<th data-type="num" class="num">n̄ at max</th>'
        '<th data-type="num" class="num">χ²/ν</th><th>status</th></tr></thead><tbody>'
        + "".join(rows)
        + "</tbody></table></div>",
    ]
    out += [f'<p class="note">{_e(n)}</p>' for n in recoil.notes]
    out.append(
        figure_block(spectrum, "Absorption cross-section against wavelength, per compound (1σ).")
    )
    for c in recoil.compounds:
        out.append(f'<div class="compound"><h3>{_e(c.compound)} (photon recoil)</h3>')
        if c.status == "failed":
            out.append(f'<p class="failed-msg">{_e(c.message)}</p></div>')
            continue
        out.append(
            figure_block(
                per_compound.get(c.compound),
                "Fringe phase and visibility ratio against dose per laser (1σ) with the fit.",
            )
        )
        for f in c.fits:
            budget = variance_budget(f.cross_section)
            shown = {k: v for k, v in budget.items() if v >= 5e-4}
            if shown:
                out.append(
                    f"<details><summary>uncertainty budget of σ ({_e(f.laser)})</summary><table>"
                    + "".join(
                        f"<tr><td>{_e(k)}</td><td class='num'>{v:.1%}</td></tr>"
                        for k, v in shown.items()
                    )
                    + "</table></details>"
                )
            prow = "".join(
                f"<tr><td class='num'>{e:.4g}</td><td class='num'>{_ve(p, pe)}</td>"
                f"<td class='num'>{pm:.4f}</td><td class='num'>{_ve(v, ve)}</td>"
                f"<td class='num'>{vm:.4f}</td></tr>"
                for e, p, pe, pm, v, ve, vm in zip(
                    f.pulse_energies,
                    f.phases,
                    f.phase_errors,
                    f.model_phases,
                    f.visibility_ratios,
                    f.visibility_errors,
                    f.model_visibility,
                    strict=True,
                )
            )
            out.append(
                f'<details class="points"><summary>points of laser {_e(f.laser)}</summary>'
                '<table><thead><tr><th class="num">dose</th><th class="num">phase (rad)</th>'
                '<th class="num">model</th><th class="num">visibility ratio</th>'
                f'<th class="num">model</th></tr></thead><tbody>{prow}</tbody></table></details>'
            )
        if c.warnings:
            out.append(
                '<ul class="warn">' + "".join(f"<li>{_e(w)}</li>" for w in c.warnings) + "</ul>"
            )
        out.append("</div>")
    out.append("</section>")
    return "".join(out)


def optical_section(optical, per_compound: dict[str, Rendered]) -> str:
    """Visibility fits: α_opt, σ_abs, model preference; figure and budgets per compound."""
    rows = []
    for c in optical.compounds:
        r = c.row()
        a = _ve(r["alpha_opt_A3"], r["alpha_opt_err_A3"]) if c.alpha_opt else "—"
        s = f"{r['sigma_abs_m2']:.3g} ± {r['sigma_abs_err_m2']:.2g}" if c.sigma_abs else "—"
        rows.append(
            f"<tr><td>{_e(c.compound)}</td><td class='num'>{a}</td><td class='num'>{s}</td>"
            f"<td class='num'>{_g(c.chi2_quantum, '.1f')}</td>"
            f"<td class='num'>{_g(c.chi2_classical, '.1f')}</td>"
            f"<td class='num'>{c.ndof if c.ndof is not None else '—'}</td>"
            f"<td>{_e(c.preferred_model if c.status == 'ok' else '—')}</td>"
            f'<td class="status status-{_e(c.status)}">{_e(c.status)}</td></tr>'
        )
    g = optical.gratings
    out = [
        '<section id="optical"><h2>Fringe visibility: optical polarizability and absorption</h2>',
        f'<p class="meta">gratings: {_e(g.get("first"))} / {_e(g.get("second"))} / '
        f"{_e(g.get('third'))} · absorbed molecules {_e(g.get('absorbed_molecules'))} · model "
        f"preference from 2 ln(likelihood ratio) beyond ±{optical.threshold:.2f}</p>",
        '<div class="wrap"><table class="sortable" id="optical-table"><thead><tr>'
        '<th>compound</th><th data-type="num" class="num">α_opt (Å³)</th>'
        '<th data-type="num" class="num">σ_abs (m²)</th>'
        '<th data-type="num" class="num">χ² quantum</th>'
        '<th data-type="num" class="num">χ² classical</th><th class="num">ν</th>'
        "<th>preferred</th><th>status</th></tr></thead><tbody>"
        + "".join(rows)
        + "</tbody></table></div>",
    ]
    out += [f'<p class="note">{_e(n)}</p>' for n in optical.notes]
    for c in optical.compounds:
        out.append(f'<div class="compound"><h3>{_e(c.compound)} (visibility)</h3>')
        if c.status == "failed":
            out.append(f'<p class="failed-msg">{_e(c.message)}</p></div>')
            continue
        out.append(
            figure_block(
                per_compound.get(c.compound),
                "Visibility against laser power (1σ) with the quantum (solid) and classical "
                "(dotted) models; below, residuals from the quantum model.",
            )
        )
        for what, budget in c.budget.items():
            if budget:
                out.append(
                    f"<details><summary>uncertainty budget of {_e(what)}</summary><table>"
                    + "".join(
                        f"<tr><td>{_e(k)}</td><td class='num'>{v:.1%}</td></tr>"
                        for k, v in budget.items()
                    )
                    + "</table></details>"
                )
        if c.warnings:
            out.append(
                '<ul class="warn">' + "".join(f"<li>{_e(w)}</li>" for w in c.warnings) + "</ul>"
            )
        out.append("</div>")
    out.append(
        '<p class="note">Visibilities fitted with the Rician likelihood (χ² is its deviance); '
        "power scale and waist scale α_opt and σ_abs exactly, the open fraction and velocities "
        "are propagated by implicit derivatives.</p></section>"
    )
    return "".join(out)
