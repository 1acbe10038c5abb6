"""``report.html``: one self-contained page (inline SVG figures, inline CSS and JS) that opens
offline, plus the same figures as PNG and SVG files in ``figures/`` for papers.

The page holds a sortable summary table of the campaign, a parity plot when predicted or computed
values are stored with the compounds, one section per compound (fit and residuals, visibility,
Debye plot, comparison, uncertainty budget) and the cautions.  Every user string (title, source,
compound names, messages, tags) is escaped with :func:`html.escape`.  Reads result objects only.

Figures need matplotlib (extra ``polarbeam[plots]``); without it the page is written with its
tables and a note.
"""

from __future__ import annotations

import html
import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path

from polarbeam._util.atomic import write_bytes_atomic, write_text_atomic
from polarbeam._util.cautions import CAUTIONS, MAGNETIC_CAUTIONS
from polarbeam._util.text import safe_name
from polarbeam.chemistry import ELECTRONIC_VS_VIBRATIONAL_NOTE as ELECTRONIC_NOTE
from polarbeam.constants import alpha_a3_from_si, debye_from_si
from polarbeam.quantities import format_value_error
from polarbeam.report.campaign_figures import (
    drift_figure,
    optical_figure,
    recoil_fit_figure,
    recoil_spectrum_figure,
)
from polarbeam.report.figure_cache import content_key, store_key, stored_figures
from polarbeam.report.figures import (
    compound_figures,
    have_matplotlib,
    parity_figure,
    predictions,
    to_pdf,
    to_png,
    to_svg,
)
from polarbeam.report.magnetic_html import (
    MAGNETIC_CAPTIONS,
    MAGNETIC_METHOD_HTML,
    magnetic_compound_figures,
    magnetic_compound_section,
    magnetic_summary_table,
)
from polarbeam.report.sections import (
    compound_section_head,
    computed_section,
    correlation_line,
    dipole_budget_table,
    drift_section,
    inputs_section,
    optical_section,
    point_tables,
    provenance_section,
    recoil_section,
)
from polarbeam.results.objects import CampaignResult, CompoundResult
from polarbeam.uncertain import variance_budget

__all__ = [
    "DEFAULT_DETAILS",
    "compound_figure_files",
    "detail_indices",
    "render_html",
    "write_html",
]

#: Compounds given a section with figures by default (the table always lists every compound).
DEFAULT_DETAILS = 20

_CAPTIONS = {
    "series": "Measured points (1σ) with the fitted model drawn as a smooth curve over the "
    "voltage range; below, the residuals in units of their error.",
    "visibility": "Fringe visibility relative to the zero-field references, as in series.csv and "
    "results.json: the velocity-averaging contrast factor of the fitted model (line) and the "
    "measured visibility where recorded.",
    "velocity": "Velocity distribution of each series as analysed (density; a measured table's "
    "classes as steps) and, dotted on the right axis, the relative fringe contrast of its classes "
    "where the table states one.",
    "debye": "α_eff of each series against 10³/T with the fitted line α + ⟨μ²⟩/(3kT) and α at "
    "1/T = 0; the band is ±1σ from the full α–⟨μ²⟩ covariance, the error bars include the shared "
    "scale errors; below, the residuals from the line in units of their error.",
    "comparison": "Measured value (band: 1σ) against the predicted and computed values stored "
    "with the compound.",
    "budget": "Share of each stated input in the variance (fit statistics pooled).",
    "profiles": "Whole beam profiles: measured counts per detector bin (steps) and the fitted "
    "model (lines, the sum over rotational states and velocity classes of the displaced "
    "undeflected beam) at every voltage; below, the residuals (n − m)/√m.",
    "time_of_flight": "Time-of-flight trace of each series (counts per bin) with the fitted "
    "gate-convolved model; its distribution is in velocities.csv.",
}

_CSS = """
:root{--ink:#1b1b1b;--muted:#5a5a5a;--line:#d9d9d9;--bg:#ffffff;--band:#f4f6f8;
--ok:#009E73;--warn:#E69F00;--fail:#D55E00;--link:#0072B2}
*{box-sizing:border-box}
body{margin:0;font:15px/1.5 system-ui,-apple-system,"Segoe UI",Roboto,sans-serif;color:var(--ink);
background:var(--bg)}
header,main,footer{max-width:1100px;margin:0 auto;padding:0 20px}
header{padding-top:24px;border-bottom:1px solid var(--line)}
h1{font-size:1.6rem;margin:0 0 4px}
h2{font-size:1.25rem;margin:32px 0 8px;border-bottom:1px solid var(--line);padding-bottom:4px}
h3{font-size:1.1rem;margin:28px 0 6px}
.meta,.note,figcaption{color:var(--muted);font-size:.9rem}
nav a{margin-right:14px;color:var(--link)}
a{color:var(--link)}
table{border-collapse:collapse;margin:8px 0 16px;font-size:.9rem}
#summary-table{width:100%}
th,td{border-bottom:1px solid var(--line);padding:4px 8px;text-align:left;vertical-align:top}
td.num,th.num{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
thead th{background:var(--band);position:sticky;top:0}
table.sortable th{cursor:pointer;user-select:none}
table.sortable th[aria-sort=ascending]::after{content:" \\25B2";font-size:.7em}
table.sortable th[aria-sort=descending]::after{content:" \\25BC";font-size:.7em}
.status{font-weight:600;white-space:nowrap}
.status-ok{color:var(--ok)}.status-warning{color:#9a6a00}.status-failed{color:var(--fail)}
.counts span{margin-right:16px}
figure{margin:12px 0 20px}
figure svg{max-width:100%;height:auto;display:block}
.figs{display:grid;grid-template-columns:repeat(auto-fill,minmax(440px,1fr));gap:8px 24px}
.compound{border-top:2px solid var(--band);margin-top:24px}
.values{font-size:1.05rem}
ul.warn li{color:#7a5200}
.failed-msg{color:var(--fail)}
.wrap{overflow-x:auto}
@media print{thead th{position:static}.figs{display:block}}
"""

_JS = """
(function(){
  function key(cell, num){
    var v = cell.getAttribute('data-v');
    if (v === null) v = cell.textContent.trim();
    if (!num) return v.toLowerCase();
    var x = parseFloat(v);
    return isNaN(x) ? null : x;
  }
  function sortBy(table, col, dir){
    var th = table.tHead.rows[0].cells[col], num = th.getAttribute('data-type') === 'num';
    var body = table.tBodies[0], rows = Array.prototype.slice.call(body.rows);
    rows.sort(function(a, b){
      var x = key(a.cells[col], num), y = key(b.cells[col], num);
      if (x === null || x === '') return (y === null || y === '') ? 0 : 1;
      if (y === null || y === '') return -1;
      return dir * (num ? x - y : x.localeCompare(y));
    });
    rows.forEach(function(r){ body.appendChild(r); });
    Array.prototype.forEach.call(table.tHead.rows[0].cells, function(h){
      h.removeAttribute('aria-sort'); });
    th.setAttribute('aria-sort', dir > 0 ? 'ascending' : 'descending');
  }
  Array.prototype.forEach.call(document.querySelectorAll('table.sortable'), function(table){
    Array.prototype.forEach.call(table.tHead.rows[0].cells, function(th, col){
      th.tabIndex = 0;
      th.title = 'sort';
      function go(){
        sortBy(table, col, th.getAttribute('aria-sort') === 'ascending' ? -1 : 1); }
      th.addEventListener('click', go);
      th.addEventListener('keydown', function(e){ if (e.key === 'Enter') go(); });
    });
    table.setAttribute('data-sortable', 'ready');
  });
  var m = /^#sort=(-?)(\\d+)$/.exec(location.hash);
  var t = document.getElementById('summary-table');
  if (m && t && +m[2] < t.tHead.rows[0].cells.length) sortBy(t, +m[2], m[1] ? -1 : 1);
})();
"""


def _e(s) -> str:
    return html.escape(str(s), quote=True)


def _num_attr(v) -> str:
    if v is None:
        return ""
    try:
        f = float(v)
    except (TypeError, ValueError):
        return ""
    return f"{f:.10g}" if math.isfinite(f) else ""


def _td_num(v, shown: str) -> str:
    return f'<td class="num" data-v="{_num_attr(v)}">{_e(shown)}</td>'


def _fmt(v, e) -> str:
    return format_value_error(v, e) if v is not None and e is not None else "—"


def _anchor(i: int) -> str:
    return f"c{i}"


def _summary_table(result: CampaignResult, detailed: set[int]) -> str:
    head = (
        '<table class="sortable" id="summary-table"><thead><tr>'
        '<th data-type="num" class="num">#</th><th>compound</th><th>status</th>'
        '<th data-type="num" class="num">α (Å³)</th><th data-type="num" class="num">σ α</th>'
        '<th data-type="num" class="num">μ (D)</th><th data-type="num" class="num">σ μ</th>'
        '<th data-type="num" class="num">μ limit (D)</th>'
        '<th data-type="num" class="num">series</th><th>method</th><th>message</th>'
        "</tr></thead><tbody>"
    )
    rows = []
    for i, c in enumerate(result.compounds):
        r = c.row()
        name = _e(c.compound)
        if i in detailed:
            name = f'<a href="#{_anchor(i)}">{name}</a>'
        a, da = r["alpha_A3"], r["alpha_err_A3"]
        d, dd = r["dipole_D"], r["dipole_err_D"]
        up = r["dipole_upper_D"]
        rows.append(
            "<tr>"
            + _td_num(i + 1, str(i + 1))
            + f"<td>{name}</td>"
            + f'<td class="status status-{_e(c.status)}">{_e(c.status)}</td>'
            + _td_num(a, _fmt(a, da).partition(" ± ")[0] if a is not None else "—")
            + _td_num(da, _fmt(a, da).partition(" ± ")[2] if a is not None and da else "")
            + _td_num(d, _fmt(d, dd).partition(" ± ")[0] if d is not None else "—")
            + _td_num(dd, _fmt(d, dd).partition(" ± ")[2] if d is not None and dd else "")
            + _td_num(up, f"< {up:.2f}" if up is not None else "")
            + _td_num(len(c.series), str(len(c.series)))
            + f"<td>{_e(c.method)}</td><td>{_e(c.message)}</td></tr>"
        )
    return head + "".join(rows) + "</tbody></table>"


def _values_line(c: CompoundResult) -> str:
    parts = []
    if c.alpha is not None:
        parts.append(
            "α = "
            + _e(_fmt(alpha_a3_from_si(c.alpha.nominal_value), alpha_a3_from_si(c.alpha.std_dev)))
            + " Å³"
        )
    if c.dipole is not None:
        parts.append(
            "μ = "
            + _e(_fmt(debye_from_si(c.dipole.nominal_value), debye_from_si(c.dipole.std_dev)))
            + " D"
        )
    elif c.dipole_upper_si is not None:
        parts.append(f"μ &lt; {debye_from_si(c.dipole_upper_si):.2f} D (no significant dipole)")
    return " · ".join(parts)


def _series_table(c: CompoundResult) -> str:
    rows = []
    for s in c.series:
        rows.append(
            "<tr>"
            + _td_num(s.temperature_K, _fmt(s.temperature_K, s.temperature_err_K))
            + _td_num(s.n_points, str(s.n_points))
            + _td_num(s.alpha_eff_A3, _fmt(s.alpha_eff_A3, s.alpha_eff_err_A3))
            + _td_num(s.reduced_chi2, f"{s.reduced_chi2:.2f}")
            + _td_num(s.p_value, f"{s.p_value:.2g}" if math.isfinite(s.p_value) else "—")
            + _td_num(
                s.velocity_m_s,
                f"{_fmt(s.velocity_m_s, s.velocity_err_m_s)} (σ {s.velocity_spread_m_s:g})",
            )
            + "</tr>"
        )
    return (
        '<div class="wrap"><table><thead><tr><th class="num">T (K)</th><th class="num">points</th>'
        '<th class="num">α_eff (Å³)</th><th class="num">χ²/ν</th><th class="num">p</th>'
        '<th class="num">velocity (m/s)</th></tr></thead><tbody>'
        + "".join(rows)
        + "</tbody></table></div>"
    )


def _budget_table(c: CompoundResult) -> str:
    target = c.alpha if c.alpha is not None else (c.series[0].alpha_eff if c.series else None)
    budget = variance_budget(target)
    if not budget:
        return ""
    rows = "".join(
        f'<tr><td>{_e(k)}</td><td class="num" data-v="{v:.6g}">{v:.1%}</td></tr>'
        for k, v in budget.items()
    )
    what = "α" if c.alpha is not None else "α_eff (first series)"
    return (
        f"<details><summary>uncertainty budget of {what} as a table</summary>"
        '<table><thead><tr><th>input</th><th class="num">share of variance</th></tr></thead>'
        f"<tbody>{rows}</tbody></table></details>"
    )


def _predictions_table(c: CompoundResult) -> str:
    pred = predictions(c)
    rows = []
    for kind, unit in (("alpha", "Å³"), ("dipole", "D")):
        for label, v, e in pred[kind]:
            shown = _fmt(v, e) if e else f"{v:.4g}"
            sym = "α" if kind == "alpha" else "μ"
            rows.append(
                f"<tr><td>{sym} {_e(label)}</td><td class='num'>{_e(shown)} {unit}</td></tr>"
            )
    if not rows:
        return ""
    return (
        "<table><thead><tr><th>predicted / computed</th><th class='num'>value</th></tr></thead>"
        f"<tbody>{''.join(rows)}</tbody></table>"
    )


def _figure_html(kind: str, svg: str, files: tuple[str, str] | None, captions=None) -> str:
    links = ""
    if files:
        links = f' Files: <a href="{_e(files[0])}">SVG</a>, <a href="{_e(files[1])}">PNG</a>.'
    cap = (captions or _CAPTIONS).get(kind, "")
    return f"<figure>{svg}<figcaption>{_e(cap)}{links}</figcaption></figure>"


def _magnetic_figure_html(kind: str, svg: str, files: tuple[str, str] | None) -> str:
    return _figure_html(kind, svg, files, MAGNETIC_CAPTIONS)


def _compound_section(i, c, figs: dict[str, tuple[str, tuple[str, str] | None]]) -> str:
    out, closed = compound_section_head(_anchor(i), c, lambda: _values_line(c))
    if closed:
        return "".join(out)
    out.append(correlation_line(c))
    out.append(_series_table(c))
    out.append(point_tables(c))
    out.append(_predictions_table(c))
    if figs:
        out.append('<div class="figs">')
        out += [_figure_html(k, svg, files) for k, (svg, files) in figs.items()]
        out.append("</div>")
    out.append(_budget_table(c))
    out.append(dipole_budget_table(c))
    if c.warnings:
        out.append('<ul class="warn">' + "".join(f"<li>{_e(w)}</li>" for w in c.warnings) + "</ul>")
    out.append("</section>")
    return "".join(out)


def detail_indices(n_compounds: int, details: int | None) -> list[int]:
    """Indices of the compounds given a section with figures (the first ``details``)."""
    n = DEFAULT_DETAILS if details is None else details
    return list(range(n_compounds if n < 0 else min(n, n_compounds)))


@dataclass(frozen=True)
class _Renderers:
    """The parts of the page that depend on the campaign's field kind (electric or magnetic)."""

    summary_table: Callable[[CampaignResult, set[int]], str]
    section: Callable[..., str]
    figures: Callable[[CompoundResult], dict]
    method: tuple[str, ...]
    limits: str
    cautions: tuple[str, ...]


_ELECTRIC = _Renderers(
    _summary_table,
    _compound_section,
    compound_figures,
    (
        "<li>α_eff = α + ⟨μ²⟩/(3kT) (Langevin–Debye, weak-field high-temperature limit); α is "
        "the static polarizability including vibrational contributions.</li>",
        "<li>Errors are 1σ standard uncertainties propagated linearly from every stated input "
        "and the fit covariances; shared instrument inputs are correlated across series.</li>",
    ),
    "μ limits are upper limits at the stated confidence level.",
    CAUTIONS,
)
_MAGNETIC = _Renderers(  # report/magnetic_html.py: χ (cm³/mol), moments (μ_B), currents (A)
    lambda result, detailed: magnetic_summary_table(result, detailed, _anchor),
    lambda i, c, figs: magnetic_compound_section(i, c, figs, _anchor, _magnetic_figure_html),
    magnetic_compound_figures,
    (MAGNETIC_METHOD_HTML,),
    "moment limits are upper limits at the stated confidence level.",
    MAGNETIC_CAUTIONS,
)


def _renderers(result: CampaignResult) -> _Renderers:
    """The one place the page branches on the field kind ([deflector] field)."""
    return _MAGNETIC if getattr(result, "deflector_field", "electric") == "magnetic" else _ELECTRIC


def compound_figure_files(
    c: CompoundResult, pdf_stem: Path | None = None, *, magnetic: bool = False
) -> dict[str, tuple[str, bytes]]:
    """{kind: (SVG text, PNG bytes)} of one compound's figures ({} without matplotlib);
    ``magnetic``: the figures of a magnetic campaign (report/magnetic_html.py); with
    ``pdf_stem`` each is also written as ``<pdf_stem>-<kind>.pdf`` (atomically)."""
    if not have_matplotlib() or c.status == "failed":
        return {}
    out = {}
    make = magnetic_compound_figures if magnetic else compound_figures
    for kind, fig in make(c).items():
        out[kind] = (to_svg(fig), to_png(fig))
        if pdf_stem is not None:
            write_bytes_atomic(pdf_stem.with_name(f"{pdf_stem.name}-{kind}.pdf"), to_pdf(fig))
        fig.clear()
    return out


def render_html(
    result: CampaignResult,
    *,
    details: int | None = None,
    figure_dir: str | Path | None = None,
    rendered: Mapping[int, Mapping[str, tuple[str, bytes]]] | None = None,
    written: set[str] | None = None,
    pdf: bool = False,
) -> str:
    """The report page as a string.

    Parameters
    ----------
    details
        How many compounds (in input order) get a section with figures; None for
        :data:`DEFAULT_DETAILS`, -1 for all.
    figure_dir
        When given, each figure is also written there as SVG and PNG (atomically) and linked.
    rendered
        Figures already made (by :func:`compound_figure_files`, e.g. in worker processes), by
        compound index, with ``magnetic=True`` for a magnetic campaign; the others are made here.
    written
        When given, the names of the files written to ``figure_dir`` are added to it.
    pdf
        Also write every figure as PDF in ``figure_dir`` (on request: ``analyze --pdf``); a
        figure whose PDF is missing is drawn again rather than read back.
    """
    plots = have_matplotlib()
    kind = _renderers(result)
    fdir = Path(figure_dir) if figure_dir is not None else None
    rel = fdir.name if fdir is not None else None
    rendered = rendered or {}

    def place(svg: str, png: bytes, stem: str):
        files = None
        if fdir is not None:
            write_text_atomic(fdir / f"{stem}.svg", svg)
            write_bytes_atomic(fdir / f"{stem}.png", png)
            if written is not None:
                written.update((f"{stem}.svg", f"{stem}.png"))
            files = (f"{rel}/{stem}.svg", f"{rel}/{stem}.png")
        return svg, files

    pdf = pdf and fdir is not None

    def has_pdfs(stems) -> bool:
        return not pdf or all((fdir / f"{s}.pdf").is_file() for s in stems)

    def note_pdfs(stems) -> None:
        if pdf and written is not None:
            written.update(f"{s}.pdf" for s in stems)

    def render(fig, stem):
        svg, png = to_svg(fig), (to_png(fig) if fdir is not None else b"")
        if pdf:
            write_bytes_atomic(fdir / f"{stem}.pdf", to_pdf(fig))
        fig.clear()
        return place(svg, png, stem)

    idx = detail_indices(len(result.compounds), details)
    counts = {s: sum(c.status == s for c in result.compounds) for s in ("ok", "warning", "failed")}
    recoil = getattr(result, "recoil", None)  # photon-recoil results (results.recoil)
    optical = getattr(result, "optical", None)  # visibility fits (results.visibility)
    reduction = getattr(result, "reduction", None)  # raw-scan reduction (reduction.result)
    deflection = bool(result.compounds) or (recoil is None and optical is None)

    def drawn(make, stem, *args):
        if not plots:
            return None
        key = content_key(make.__name__, *args) if fdir is not None else None
        stored = stored_figures(fdir, stem, key) if key is not None else None
        if stored is not None and "figure" in stored and has_pdfs([stem]):
            note_pdfs([stem])
            return place(*stored["figure"], stem)  # same inputs as on disk: not redrawn
        try:
            fig = make(*args)
        except Exception:  # a figure that cannot be drawn must not cost the whole report
            return None
        if fig is None:
            return None
        out = render(fig, stem)
        note_pdfs([stem])
        if key is not None:
            store_key(fdir, stem, key, {"figure": stem})
        return out

    nav = ['<a href="#summary">Summary</a>']
    if deflection:
        nav.append('<a href="#compounds">Compounds</a>')
    if result.comparison is not None or result.parity is not None:
        nav.append('<a href="#computed">Computed chemistry</a>')
    if reduction is not None:
        nav.append('<a href="#drift">Raw scans</a>')
    if recoil is not None:
        nav.append('<a href="#recoil">Photon recoil</a>')
    if optical is not None:
        nav.append('<a href="#optical">Visibility</a>')
    nav += [
        '<a href="#inputs">Inputs</a>',
        '<a href="#provenance">Provenance</a>',
        '<a href="#method">Method</a>',
        '<a href="#cautions">Cautions</a>',
    ]
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{_e(result.title)} — polarbeam report</title>",
        f"<style>{_CSS}</style></head><body>",
        f"<header><h1>{_e(result.title)}</h1>",
        f'<p class="meta">polarbeam {_e(result.version)} · layout {_e(result.layout)} · '
        f"deflector {_e(result.model)} · source {_e(result.source)}</p>",
        f"<nav>{''.join(nav)}</nav></header><main>",
        '<section id="summary"><h2>Summary</h2>',
    ]
    if deflection:
        parts += [
            f'<p class="counts"><span>{len(result.compounds)} compound(s)</span>'
            f'<span class="status-ok">{counts["ok"]} ok</span>'
            f'<span class="status-warning">{counts["warning"]} with warnings</span>'
            f'<span class="status-failed">{counts["failed"]} failed</span></p>',
            '<p class="note">Click a column heading to sort. Errors are 1σ standard '
            f"uncertainties; {kind.limits}</p>",
            f'<div class="wrap">{kind.summary_table(result, set(idx))}</div>',
        ]
    else:
        kinds = []
        if recoil is not None:
            kinds.append(
                f'<span><a href="#recoil">{len(recoil.compounds)} compound(s) with photon-recoil '
                "data</a></span>"
            )
        if optical is not None:
            kinds.append(
                f'<span><a href="#optical">{len(optical.compounds)} compound(s) with visibility '
                "data</a></span>"
            )
        parts.append(f'<p class="counts">{"".join(kinds)}</p>')
        parts.append(
            '<p class="note">This campaign has no deflection data: its results are in the '
            "sections below. Errors are 1σ standard uncertainties.</p>"
        )
    parts += [f'<p class="note">{_e(n)}</p>' for n in result.notes]
    parts.append("</section>")
    if deflection:
        parts.append('<section id="compounds"><h2>Compounds</h2>')
        if not plots:
            parts.append(
                '<p class="note">Figures need matplotlib: pip install "polarbeam[plots]".</p>'
            )
        if len(idx) < len(result.compounds):
            parts.append(
                f'<p class="note">Sections with figures for the first {len(idx)} of '
                f"{len(result.compounds)} compounds (all compounds are in the table above and in "
                "properties.csv / results.json).</p>"
            )
        for i in idx:
            c = result.compounds[i]
            stem = safe_name(c.compound)
            key = content_key("compound_figures", c) if plots and fdir is not None else None
            stored = stored_figures(fdir, stem, key) if key is not None else None
            if stored is not None and not has_pdfs(f"{stem}-{kind}" for kind in stored):
                stored = None  # PDFs asked for and missing: draw again
            if i in rendered and not pdf:
                made = rendered[i]
            elif stored is not None:
                made = stored  # same inputs as the figures on disk: not redrawn
            else:
                try:
                    magnetic = kind is _MAGNETIC
                    if not plots:
                        made = {}
                    elif pdf:
                        made = compound_figure_files(c, fdir / stem, magnetic=magnetic)
                    elif magnetic:
                        made = compound_figure_files(c, magnetic=True)
                    else:
                        made = compound_figure_files(c)
                except Exception:  # a figure that cannot be drawn must not cost the whole report
                    made = {}
            note_pdfs(f"{stem}-{kind}" for kind in made)
            figs = {kind: place(svg, png, f"{stem}-{kind}") for kind, (svg, png) in made.items()}
            if key is not None and made:
                store_key(fdir, stem, key, {kind: f"{stem}-{kind}" for kind in made})
            parts.append(kind.section(i, c, figs))
        parts.append("</section>")
    elif not plots:
        parts.append('<p class="note">Figures need matplotlib: pip install "polarbeam[plots]".</p>')
    parts.append(computed_section(result, drawn(parity_figure, "parity", result), ELECTRONIC_NOTE))
    if reduction is not None:
        parts.append(
            drift_section(
                reduction,
                lambda key: drawn(
                    drift_figure, f"drift-{safe_name(key[0])}-{key[1]:g}K", reduction, key
                ),
            )
        )
    if recoil is not None:
        spectrum = drawn(recoil_spectrum_figure, "recoil_spectrum", recoil)
        per = {
            c.compound: drawn(recoil_fit_figure, f"{safe_name(c.compound)}-recoil", c)
            for c in recoil.compounds
            if c.status != "failed"
        }
        parts.append(recoil_section(recoil, spectrum, {k: v for k, v in per.items() if v}))
    if optical is not None:
        per = {
            c.compound: drawn(optical_figure, f"{safe_name(c.compound)}-visibility-power", c)
            for c in optical.compounds
            if c.status != "failed"
        }
        parts.append(optical_section(optical, {k: v for k, v in per.items() if v}))
    parts.append(inputs_section(result))
    parts.append(provenance_section(result))
    parts += [
        '<section id="method"><h2>Method</h2><ul>',
        *kind.method,
        "</ul></section>",
        '<section id="cautions"><h2>Cautions</h2><ul>',
        *[f"<li>{_e(c)}</li>" for c in kind.cautions],
        "</ul></section></main>",
        f'<footer><p class="meta">Written by polarbeam {_e(result.version)}; this page needs no '
        "network connection.</p></footer>",
        f"<script>{_JS}</script></body></html>",
    ]
    return "\n".join(parts) + "\n"


def write_html(
    result: CampaignResult,
    out: str | Path,
    *,
    details: int | None = None,
    figure_files: bool = True,
    rendered: Mapping[int, Mapping[str, tuple[str, bytes]]] | None = None,
    pdf: bool = False,
) -> Path:
    """Write ``out/report.html`` (and ``out/figures/*.svg|png`` unless ``figure_files=False``;
    with ``pdf`` also ``*.pdf``)."""
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    fdir = out / "figures"
    # figures of compounds no longer shown are the results folder's business: the manifest of
    # polarbeam's files (polarbeam._util.outfolder) removes only those it wrote
    text = render_html(
        result,
        details=details,
        figure_dir=fdir if figure_files else None,
        rendered=rendered,
        pdf=pdf,
    )
    target = out / "report.html"
    write_text_atomic(target, text)
    return target
