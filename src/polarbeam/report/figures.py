"""Figures of a campaign result, for the HTML report and for papers (PNG and SVG).

Each function takes result objects and returns a :class:`matplotlib.figure.Figure` (or ``None``
when the figure has nothing to show).  Figures are built without :mod:`matplotlib.pyplot`, so no
global state or GUI backend is involved (PNG through Agg, SVG through matplotlib's SVG writer), and
SVG output is deterministic (fixed id salt, no date).  matplotlib is imported lazily: it is the
optional extra ``polarbeam[plots]``.

Colours are the Okabe–Ito palette (distinguishable with the common colour-vision deficiencies);
series are told apart by marker shape as well.  Like the rest of the reporting, nothing here
computes physics: the curves drawn are the values the analysis stored.
"""

from __future__ import annotations

import functools
import io
import math
from html import escape as html_escape
from typing import Any

import numpy as np

from polarbeam._util.optional import has
from polarbeam.constants import BOLTZMANN, alpha_a3_from_si, debye_from_si
from polarbeam.quantities import format_value_error
from polarbeam.results.objects import CampaignResult, CompoundResult
from polarbeam.uncertain import variance_budget

__all__ = [
    "MARKERS",
    "OKABE_ITO",
    "PALETTE",
    "PNG_DPI",
    "budget_figure",
    "comparison_figure",
    "compound_figures",
    "debye_figure",
    "have_matplotlib",
    "new_figure",
    "parity_figure",
    "plain_text",
    "profile_figure",
    "series_figure",
    "styled",
    "time_of_flight_figure",
    "to_pdf",
    "to_png",
    "to_svg",
    "velocity_figure",
    "visibility_figure",
]

#: Okabe & Ito (2008), "Color Universal Design": colour-blind-safe qualitative palette.
OKABE_ITO = {
    "black": "#000000",
    "orange": "#E69F00",
    "sky blue": "#56B4E9",
    "bluish green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "reddish purple": "#CC79A7",
}
_CYCLE = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000")
_MARKERS = ("o", "s", "^", "D", "v", "P", "X")
#: The colour cycle of every polarbeam figure (Okabe–Ito order) and the matching marker shapes.
PALETTE = _CYCLE
MARKERS = _MARKERS
#: Resolution of the PNG files written for papers.
PNG_DPI = 300

#: (extra key, error key or None, label) of α values to compare with the measurement.
ALPHA_PREDICTIONS = (
    ("alpha_additive_A3", "alpha_additive_err_A3", "additive estimate"),
    ("alpha_computed_A3", "alpha_computed_err_A3", "computed"),
    ("alpha_d4_A3", "alpha_d4_err_A3", "D4 model"),
)
#: (extra key, error key or None, label) of dipole values to compare with the measurement.
DIPOLE_PREDICTIONS = (
    ("dipole_rms_D", "dipole_rms_err_D", "conformer ensemble"),
    ("dipole_computed_D", "dipole_computed_err_D", "computed"),
)

_STYLE = {
    "font.size": 9,
    "axes.titlesize": 10,
    "axes.labelsize": 9,
    "legend.fontsize": 8,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "grid.color": "#dddddd",
    "grid.linewidth": 0.6,
    "svg.fonttype": "none",
    "svg.hashsalt": "polarbeam",
    "axes.prop_cycle": None,  # set below once matplotlib is imported
}


def have_matplotlib() -> bool:
    """Whether the optional plotting dependency is installed (extra ``polarbeam[plots]``)."""
    return has("matplotlib")


def _mpl():
    import matplotlib
    from cycler import cycler
    from matplotlib.figure import Figure

    style = dict(_STYLE)
    style["axes.prop_cycle"] = cycler(color=list(_CYCLE))
    return matplotlib, Figure, style


def _styled(make):
    """Run a figure builder with the report style (rcParams are read while artists are made)."""

    @functools.wraps(make)
    def wrapper(*args, **kwargs):
        matplotlib, _, style = _mpl()
        with matplotlib.rc_context(style):
            fig = make(*args, **kwargs)
        if fig is not None:
            fig._polarbeam_style = style  # re-applied when saving
        return fig

    return wrapper


def _new(width=5.6, height=3.4, rows=1, ratios=None, sharex=False, left=0.8):
    """A figure with fixed margins in inches (no layout engine: drawing twice stays cheap)."""
    _, Figure, _ = _mpl()
    fig = Figure(figsize=(width, height))
    kw: dict[str, Any] = {"sharex": sharex}
    if ratios:
        kw["gridspec_kw"] = {"height_ratios": ratios}
    axes = fig.subplots(rows, 1, **kw)
    fig.subplots_adjust(
        left=left / width,
        right=1 - 0.15 / width,
        bottom=0.5 / height,
        top=1 - 0.3 / height,
        hspace=0.45 if rows > 1 and not sharex else 0.08,
    )
    return fig, axes


def to_svg(fig) -> str:
    """The figure as an SVG document (text; deterministic)."""
    import matplotlib

    buf = io.StringIO()
    with matplotlib.rc_context(getattr(fig, "_polarbeam_style", {})):
        fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": "polarbeam"})
    text = buf.getvalue()
    for gid, tip in getattr(fig, "_polarbeam_tips", {}).items():  # hover labels (<title>)
        tag = f'<g id="{gid}">'
        text = text.replace(tag, f"{tag}<title>{html_escape(tip)}</title>", 1)
    return text[text.index("<svg") :]  # drop the XML prolog and DOCTYPE for inline use


def to_png(fig, dpi: int = PNG_DPI) -> bytes:
    """The figure as PNG bytes."""
    import matplotlib

    buf = io.BytesIO()
    with matplotlib.rc_context(getattr(fig, "_polarbeam_style", {})):
        fig.savefig(buf, format="png", dpi=dpi, metadata={"Software": "polarbeam"})
    return buf.getvalue()


def to_pdf(fig) -> bytes:
    """The figure as PDF bytes (vector; no creation date, so a redraw gives the same file)."""
    import matplotlib

    buf = io.BytesIO()
    with matplotlib.rc_context(getattr(fig, "_polarbeam_style", {})):
        fig.savefig(buf, format="pdf", metadata={"Creator": "polarbeam", "CreationDate": None})
    return buf.getvalue()


def plain_text(name) -> str:
    """A user string (compound name, laser) safe as figure text: control characters dropped,
    ``$`` escaped so that it is never read as mathtext."""
    text = "".join(ch for ch in str(name) if ch.isprintable())
    return text.replace("$", r"\$")


# Public names of the figure helpers, for the other figure modules of the report stage.
def styled(make):
    """Decorator: build a figure with the report style (palette, fonts, deterministic SVG)."""
    return _styled(make)


def new_figure(width=5.6, height=3.4, rows=1, ratios=None, sharex=False, left=0.8):
    """A styled-layout figure with fixed margins in inches (see :func:`styled`)."""
    return _new(width, height, rows, ratios, sharex, left)


def _obs_label(observable: str) -> tuple[str, float]:
    if observable.startswith("shift"):
        return "beam shift (µm)", 1e6
    return "fringe phase (rad)", 1.0


def _tname(s) -> str:
    return f"{s.temperature_K:g} K"


@_styled
def series_figure(c: CompoundResult):
    """Observable versus voltage per series with the fitted model, and the normalised residuals.

    The model is the smooth curve the fit stored (``SeriesResult.curve``, evaluated on a dense
    voltage grid); a series without one falls back to the model at the measured voltages."""
    if not c.series:
        return None
    ylab, scale = _obs_label(c.series[0].observable)
    fig, (ax, rax) = _new(5.6, 4.2, rows=2, ratios=(3, 1.3), sharex=True)
    for i, s in enumerate(c.series):
        col, mk = _CYCLE[i % len(_CYCLE)], _MARKERS[i % len(_MARKERS)]
        order = np.argsort(s.voltages)
        v = s.voltages[order]
        ax.errorbar(
            v,
            s.values[order] * scale,
            yerr=s.errors[order] * scale,
            fmt=mk,
            ls="none",
            ms=4,
            color=col,
            capsize=2,
            lw=0.8,
            label=f"{_tname(s)}  α_eff = {s.alpha_eff_A3:.4g} Å³",
        )
        cv, cm = getattr(s, "curve_voltages", None), getattr(s, "curve", None)
        if cv is None or cm is None or len(cv) < 2:
            cv, cm = v, s.model[order]
        ax.plot(cv, np.asarray(cm) * scale, "-", color=col, lw=1.1, alpha=0.85, gid="model")
        rax.plot(
            v,
            (s.values[order] - s.model[order]) / s.errors[order],
            mk,
            ls="none",
            color=col,
            ms=3.5,
        )
    ax.set_ylabel(ylab)
    ax.set_title(f"{plain_text(c.compound)}: measured (points, 1σ) and fitted model (lines)")
    ax.legend(frameon=False, loc="best")
    rax.axhline(0.0, color="#555555", lw=0.8)
    for y in (-2, 2):
        rax.axhline(y, color="#999999", lw=0.6, ls=":")
    rax.set_ylabel("residual / σ")
    rax.set_xlabel("deflector voltage (V)")
    return fig


def _visibility(s):
    vis = getattr(s, "visibility", None)
    err = getattr(s, "visibility_err", None)
    if vis is None:
        vis = s.extra.get("visibility")
        err = s.extra.get("visibility_err")
    if vis is None:
        return None, None
    vis = np.asarray(vis, dtype=float)
    if vis.shape != s.voltages.shape:
        return None, None
    err = None if err is None else np.asarray(err, dtype=float)
    return vis, err


@_styled
def visibility_figure(c: CompoundResult):
    """Fringe visibility versus voltage relative to the zero-field references: the measured
    values exactly as in results.json (``relative_visibility``) and series.csv, and the
    velocity-averaging contrast factor of the fitted model, |Z(κ + κ₀)|/|Z(κ₀)|, as in
    ``min_velocity_contrast`` and ``velocity_contrast``. Nothing is rescaled for the figure."""
    rows = []
    for s in c.series:
        vis, err = _visibility(s)
        mod = np.asarray(s.modulus, dtype=float)
        varies = mod.size and float(np.min(mod)) < 0.995
        if vis is None and not varies:
            continue
        rows.append((s, vis, err, mod))
    if not rows:
        return None
    fig, ax = _new(5.6, 3.0)
    for i, (s, vis, err, mod) in enumerate(rows):
        col, mk = _CYCLE[i % len(_CYCLE)], _MARKERS[i % len(_MARKERS)]
        order = np.argsort(s.voltages)
        v = s.voltages[order]
        if vis is not None:
            ax.errorbar(
                v,
                vis[order],
                yerr=None if err is None else err[order],
                fmt=mk,
                ms=4,
                color=col,
                capsize=2,
                lw=0.8,
                label=f"{_tname(s)} measured",
            )
        ax.plot(v, mod[order], "-", color=col, lw=1.1, label=f"{_tname(s)} model (velocity spread)")
    ax.set_xlabel("deflector voltage (V)")
    ax.set_ylabel("visibility / zero-field visibility")
    ax.set_title(f"{plain_text(c.compound)}: visibility relative to the zero-field references")
    ax.legend(frameon=False, loc="lower center")
    return fig


def _debye_band(c: CompoundResult, x: np.ndarray):
    from uncertainties import covariance_matrix

    cov = np.asarray(covariance_matrix([c.alpha, c.mu2]), dtype=float)
    k3 = 3.0 * BOLTZMANN
    a, b = c.alpha.nominal_value, c.mu2.nominal_value / k3
    var = cov[0, 0] + 2 * x * cov[0, 1] / k3 + x**2 * cov[1, 1] / k3**2
    line = a + b * x
    sd = np.sqrt(np.clip(var, 0.0, None))
    return alpha_a3_from_si(line), alpha_a3_from_si(sd)


def _mu_label(c: CompoundResult) -> str:
    if c.dipole is not None:
        d = debye_from_si(c.dipole.nominal_value)
        return f"μ = {format_value_error(d, debye_from_si(c.dipole.std_dev))} D"
    if c.dipole_upper_si is not None:
        return f"μ < {debye_from_si(c.dipole_upper_si):.2f} D"
    return "μ: none"


@_styled
def debye_figure(c: CompoundResult):
    """α_eff versus 10³/T with the fitted line α + ⟨μ²⟩/(3kT), its 1σ band, α at 1/T = 0 with its
    error bar, and the residuals of each series from the line in units of their error."""
    if c.alpha is None or c.mu2 is None or len(c.series) < 2:
        return None
    xs = np.array([1.0 / s.temperature_K for s in c.series])
    xerr = np.array([s.temperature_err_K / s.temperature_K**2 for s in c.series])
    ys = np.array([s.alpha_eff_A3 for s in c.series])
    yerr = np.array([s.alpha_eff_err_A3 for s in c.series])
    grid = np.linspace(0.0, 1.08 * float(xs.max()), 120)
    line, sd = _debye_band(c, grid)
    at_x, _ = _debye_band(c, xs)
    fig, (ax, rax) = _new(5.6, 4.4, rows=2, ratios=(3, 1.2), sharex=True)
    k = 1e3  # plot 1000/T
    ax.fill_between(
        grid * k,
        line - sd,
        line + sd,
        color=OKABE_ITO["sky blue"],
        alpha=0.35,
        lw=0,
        label="fit ± 1σ (full covariance)",
    )
    ax.plot(grid * k, line, "-", color=OKABE_ITO["blue"], lw=1.3, label="α + ⟨μ²⟩/(3kT)")
    ax.errorbar(
        xs * k,
        ys,
        xerr=xerr * k,
        yerr=yerr,
        fmt="o",
        ls="none",
        color=OKABE_ITO["vermillion"],
        ms=5,
        capsize=2,
        lw=0.9,
        label="α_eff per series (1σ)",
    )
    pred = [s.extra.get("alpha_eff_pred_A3") for s in c.series]
    lows, highs = [line - sd, ys - yerr], [line + sd, ys + yerr]
    if all(p is not None and np.isfinite(p) for p in pred):
        # the structure cross-check's α_additive + ⟨μ²⟩(T)/3kT at each measured temperature
        order = np.argsort(xs)
        perr = np.array([s.extra.get("alpha_eff_pred_err_A3", np.nan) for s in c.series])
        pv = np.asarray(pred, dtype=float)
        ax.errorbar(
            xs[order] * k,
            pv[order],
            yerr=perr[order],
            fmt="s--",
            mfc="none",
            color=OKABE_ITO["bluish green"],
            ms=5,
            capsize=2,
            lw=0.9,
            label="structure prediction α_add + ⟨μ²⟩(T)/(3kT) (1σ)",
        )
        pe = np.nan_to_num(perr, nan=0.0)
        lows.append(pv - pe)
        highs.append(pv + pe)
    a0 = alpha_a3_from_si(c.alpha.nominal_value)
    a0e = alpha_a3_from_si(c.alpha.std_dev)
    ax.errorbar(
        [0.0],
        [a0],
        yerr=[a0e],
        fmt="D",
        ls="none",
        color=OKABE_ITO["black"],
        ms=5,
        capsize=3,
        lw=1.0,
        clip_on=False,
        label=f"α = {format_value_error(a0, a0e)} Å³ (1/T = 0)",
    )
    ax.plot([], [], ls="none", label=_mu_label(c))  # μ (or its limit) in the legend
    lo = min(float(np.min(x)) for x in lows)
    hi = max(float(np.max(x)) for x in highs)
    pad = 0.06 * (hi - lo if hi > lo else max(abs(hi), 1.0))
    ax.set_ylim(lo - pad, hi + pad)
    ax.set_xlim(-0.04 * float(grid[-1]) * k, float(grid[-1]) * k)
    ax.set_ylabel("α_eff (Å³)")
    ax.set_title(f"{plain_text(c.compound)}: Debye plot")
    ax.legend(frameon=True, framealpha=0.85, edgecolor="none", loc="best", fontsize=7)
    rax.errorbar(
        xs * k,
        (ys - at_x) / yerr,
        yerr=1.0,
        fmt="o",
        ls="none",
        color=OKABE_ITO["vermillion"],
        ms=4,
        capsize=2,
        lw=0.8,
    )
    rax.axhline(0.0, color="#555555", lw=0.8)
    rax.set_ylabel("residual / σ")
    rax.set_xlabel("10³/T (K⁻¹)")
    return fig


@_styled
def budget_figure(c: CompoundResult, top: int = 10):
    """Share of each input in the variance of α (or of the first α_eff) as horizontal bars."""
    target = c.alpha if c.alpha is not None else (c.series[0].alpha_eff if c.series else None)
    what = "α" if c.alpha is not None else f"α_eff at {c.series[0].temperature_K:g} K"
    budget = variance_budget(target)
    if not budget:
        return None
    items = list(budget.items())
    if len(items) > top:
        rest = sum(v for _, v in items[top - 1 :])
        items = [*items[: top - 1], (f"{len(items) - top + 1} other inputs", rest)]
    labels = [k for k, _ in items][::-1]
    vals = np.array([v for _, v in items][::-1]) * 100
    longest = max(len(k) for k in labels)
    fig, ax = _new(6.0, 0.9 + 0.28 * len(items), left=min(3.2, 0.3 + 0.065 * longest))
    ax.barh(range(len(vals)), vals, color=OKABE_ITO["blue"], height=0.65)
    for i, v in enumerate(vals):
        ax.text(v + 0.8, i, f"{v:.1f} %", va="center", fontsize=8)
    ax.set_yticks(range(len(vals)), labels)
    ax.set_xlim(0, min(100.0, float(vals.max()) * 1.25 + 5))
    ax.set_xlabel(f"share of the variance of {what} (%)")
    ax.grid(axis="y", visible=False)
    ax.set_title(f"{plain_text(c.compound)}: uncertainty budget")
    return fig


def _num(v) -> float | None:
    try:
        f = float(v)
    except (TypeError, ValueError):
        return None
    return f if math.isfinite(f) else None


def predictions(c: CompoundResult) -> dict[str, list[tuple[str, float, float | None]]]:
    """{'alpha': [(label, value, err)], 'dipole': [...]} found in ``c.extra`` (Å³, D)."""
    out: dict[str, list[tuple[str, float, float | None]]] = {"alpha": [], "dipole": []}
    for kind, table in (("alpha", ALPHA_PREDICTIONS), ("dipole", DIPOLE_PREDICTIONS)):
        for key, ekey, label in table:
            v = _num(c.extra.get(key))
            if v is not None:
                out[kind].append((label, v, _num(c.extra.get(ekey)) if ekey else None))
    return out


@_styled
def comparison_figure(c: CompoundResult):
    """Measured α (and μ) next to the predicted and computed values stored with the compound."""
    pred = predictions(c)
    panels = []
    if c.alpha is not None and pred["alpha"]:
        m = (alpha_a3_from_si(c.alpha.nominal_value), alpha_a3_from_si(c.alpha.std_dev))
        panels.append(("α (Å³)", m, pred["alpha"]))
    if c.dipole is not None and pred["dipole"]:
        m = (debye_from_si(c.dipole.nominal_value), debye_from_si(c.dipole.std_dev))
        panels.append(("μ (D)", m, pred["dipole"]))
    if not panels:
        return None
    n_rows = sum(len(p[2]) + 1 for p in panels)
    fig, axes = _new(5.6, 0.9 + 0.6 * len(panels) + 0.3 * n_rows, rows=len(panels), left=1.5)
    axes = np.atleast_1d(axes)
    for ax, (label, (mv, me), rows) in zip(axes, panels, strict=True):
        names = ["measured"] + [r[0] for r in rows]
        vals = [mv] + [r[1] for r in rows]
        errs = [me] + [r[2] if r[2] is not None else 0.0 for r in rows]
        ys = np.arange(len(names))[::-1]
        cols = [OKABE_ITO["vermillion"]] + [_CYCLE[(i + 2) % len(_CYCLE)] for i in range(len(rows))]
        for y, v, e, col, mk in zip(ys, vals, errs, cols, _MARKERS, strict=False):
            ax.errorbar([v], [y], xerr=[e], fmt=mk, color=col, ms=5, capsize=3, lw=1)
        ax.axvspan(mv - me, mv + me, color=OKABE_ITO["vermillion"], alpha=0.12, lw=0)
        ax.set_yticks(ys, names)
        ax.set_ylim(-0.7, len(names) - 0.3)
        ax.set_xlabel(label)
        ax.grid(axis="y", visible=False)
    axes[0].set_title(f"{plain_text(c.compound)}: measured versus predicted / computed (1σ)")
    return fig


@_styled
def parity_figure(result: CampaignResult):
    """Measured α versus each kind of predicted or computed α over the campaign: every point
    labelled with its compound, equal aspect, limits that hold every error bar."""
    groups: dict[str, list[tuple[float, float, float, float | None, str]]] = {}
    for c in result.compounds:
        if c.alpha is None:
            continue
        m = alpha_a3_from_si(c.alpha.nominal_value)
        me = alpha_a3_from_si(c.alpha.std_dev)
        for label, v, e in predictions(c)["alpha"]:
            method = c.extra.get("computed_method") if label == "computed" else None
            key = f"{label} ({method})" if isinstance(method, str) and method else label
            groups.setdefault(key, []).append((v, m, me, e, c.compound))
    if not groups:
        return None
    fig, ax = _new(4.8, 4.8, left=0.7)
    tips: dict[str, str] = {}
    fig._polarbeam_tips = tips  # SVG hover labels, added by to_svg
    lo, hi = math.inf, -math.inf
    for i, (label, pts) in enumerate(groups.items()):
        arr = np.array([(p[0], p[1], p[2], p[3] if p[3] is not None else 0.0) for p in pts])
        ax.errorbar(
            arr[:, 0],
            arr[:, 1],
            yerr=arr[:, 2],
            xerr=arr[:, 3],
            fmt=_MARKERS[i % 7],
            color=_CYCLE[i % len(_CYCLE)],
            ms=4,
            capsize=1.5,
            lw=0.7,
            ls="none",
            label=f"{label} ({len(pts)})",
        )
        for x, y, me_, e_, name in pts:
            ax.annotate(
                plain_text(name),
                (x, y),
                xytext=(4, 3),
                textcoords="offset points",
                fontsize=7,
                gid="label",
            )
            gid = f"pb-tip-{len(tips)}"  # an unseen marker whose SVG <title> shows on hover
            ax.plot([x], [y], "o", ms=9, alpha=0.0, gid=gid)
            tips[gid] = (
                f"{plain_text(name)}: measured {format_value_error(y, me_)} Å³, {label} "
                f"{format_value_error(x, e_ or 0.0)} Å³"
            )
        lo = min(lo, float((arr[:, 0] - arr[:, 3]).min()), float((arr[:, 1] - arr[:, 2]).min()))
        hi = max(hi, float((arr[:, 0] + arr[:, 3]).max()), float((arr[:, 1] + arr[:, 2]).max()))
    pad = 0.08 * (hi - lo if hi > lo else max(abs(hi), 1.0))
    ax.plot(
        [lo - pad, hi + pad],
        [lo - pad, hi + pad],
        "-",
        color="#777777",
        lw=0.8,
        label="measured = predicted",
    )
    ax.set_xlim(lo - pad, hi + pad)
    ax.set_ylim(lo - pad, hi + pad)
    ax.set_aspect("equal")
    ax.set_xlabel("predicted / computed α (Å³)")
    ax.set_ylabel("measured α (Å³)")
    ax.set_title("parity: measured against predicted α")
    ax.legend(frameon=False, loc="upper left")
    return fig


@_styled
def time_of_flight_figure(c: CompoundResult):
    """Each series' time-of-flight trace (counts per bin) with the fitted model, one panel each."""
    recs = [s.time_of_flight for s in c.series if s.time_of_flight is not None]
    if not recs:
        return None
    fig, axes = _new(5.6, 1.2 + 1.9 * len(recs), rows=len(recs))
    axes = np.atleast_1d(axes)
    for i, (ax, r) in enumerate(zip(axes, recs, strict=True)):
        col = _CYCLE[i % len(_CYCLE)]
        t = (r.starts + 0.5 * r.width) * 1e3
        ax.step(t, r.counts, where="mid", color="#777777", lw=0.7, label="measured counts")
        ax.plot(t, r.model, "-", color=col, lw=1.3, label="fitted model")
        ax.set_ylabel("counts / bin")
        ax.set_title(
            f"{plain_text(c.compound)} at {r.temperature_K:g} K: ⟨v⟩ = {r.mean_m_s:.4g} m/s, "
            f"rms {r.spread_m_s:.3g} m/s; "
            f"deviance {r.deviance:.0f} / {r.ndof}",
            fontsize=8,
        )
        ax.legend(frameon=False, loc="upper right")
    axes[-1].set_xlabel("time after the gate opens (ms)")
    return fig


@_styled
def velocity_figure(c: CompoundResult):
    """The velocity distribution of every series (density; a table's classes as steps) and its
    relative fringe contrast where stated. Drawn when some series is not the default Gaussian."""
    rows = [s for s in c.series if getattr(s, "velocity_curve", None) is not None]
    if not rows or not any("velocity_distribution" in s.extra for s in c.series):
        return None
    fig, ax = _new(5.6, 3.0)
    twin = None
    for i, s in enumerate(rows):
        v, p, con = (
            np.asarray(x, dtype=float) if x is not None else None for x in s.velocity_curve
        )
        col = _CYCLE[i % len(_CYCLE)]
        kind = s.extra.get("velocity_distribution", "gaussian")
        if not np.all(np.isfinite(p)):
            ax.axvline(float(v[0]), color=col, lw=1.1, label=f"{_tname(s)} (one velocity)")
            continue
        style = {"where": "mid"} if kind == "table" else {}
        draw = ax.step if kind == "table" else ax.plot
        draw(v, p * 1e3, color=col, lw=1.1, label=f"{_tname(s)} ({kind})", **style)
        if con is not None:
            twin = twin or ax.twinx()
            twin.plot(v, con, ":", color=col, lw=1.0)
    ax.set_xlabel("velocity (m/s)")
    ax.set_ylabel("density (per km/s)")
    if twin is not None:
        twin.set_ylabel("relative contrast (dotted)")
        twin.grid(False)
        fig.subplots_adjust(right=1 - 0.75 / 5.6)
    ax.set_title(f"{plain_text(c.compound)}: velocity distribution of each series")
    ax.legend(frameon=False, loc="upper right")
    return fig


@_styled
def profile_figure(c: CompoundResult):
    """Whole beam profiles of a profile compound: measured counts per bin (steps) and the fitted
    model (lines) at every voltage, and below each series the residuals (n − m)/√m."""
    recs = list(getattr(c, "profiles", ()) or ())
    if not recs:
        return None
    temps = list(dict.fromkeys(r.temperature_K for r in recs))
    fig, axes = _new(5.6, 0.6 + 3.6 * len(temps), rows=2 * len(temps), ratios=(3, 1.2) * len(temps))
    axes = np.atleast_1d(axes)
    for j, t in enumerate(temps):
        ax, rax = axes[2 * j], axes[2 * j + 1]
        rows = [r for r in recs if r.temperature_K == t]
        for i, r in enumerate(rows):
            col, mk = _CYCLE[i % len(_CYCLE)], _MARKERS[i % len(_MARKERS)]
            x = np.asarray(r.positions) * 1e3
            ax.step(x, r.counts, where="mid", color=col, lw=0.6, alpha=0.55)
            ax.plot(x, r.model, "-", color=col, lw=1.2, gid="model", label=f"{r.voltage_V:g} V")
            m = np.maximum(np.asarray(r.model, dtype=float), 1e-12)
            rax.plot(x, (r.counts - m) / np.sqrt(m), mk, ls="none", ms=1.6, color=col)
        trot = rows[0].rotational_temperature_K
        ttxt = "" if not math.isfinite(t) else f" at {t:g} K"
        ax.set_title(
            f"{plain_text(c.compound)}{ttxt}: measured profiles (steps) and fitted model "
            f"(lines); T_rot = {trot:.3g} K",
            fontsize=8,
        )
        ax.set_ylabel("counts / bin")
        ax.legend(frameon=False, loc="upper right", title="voltage")
        rax.axhline(0.0, color="#555555", lw=0.8)
        for y in (-2, 2):
            rax.axhline(y, color="#999999", lw=0.6, ls=":")
        rax.set_ylabel("(n − m)/√m")
        rax.set_xlabel("detector position (mm)")
    return fig


def compound_figures(c: CompoundResult) -> dict[str, Any]:
    """The figures of one compound, in report order: {kind: Figure} (absent kinds left out)."""
    out = {}
    for kind, make in (
        ("series", series_figure),
        ("profiles", profile_figure),
        ("visibility", visibility_figure),
        ("velocity", velocity_figure),
        ("debye", debye_figure),
        ("comparison", comparison_figure),
        ("budget", budget_figure),
        ("time_of_flight", time_of_flight_figure),
    ):
        fig = make(c)
        if fig is not None:
            out[kind] = fig
    return out
