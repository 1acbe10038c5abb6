"""Figures of the other kinds of data in a campaign: photon-recoil cross-sections, visibility
(optical) fits and the reference-phase drift of raw scans.

Same style, palette and rules as :mod:`polarbeam.report.figures`: each function reads result
objects and returns a matplotlib figure (or ``None`` when there is nothing to show); nothing here
computes physics.  The drift line is the linear interpolation between bracketing references that
the reduction itself uses (:func:`polarbeam.reduction.drift.interpolation_weights`), drawn through
the stored reference phases.
"""

from __future__ import annotations

import math

import numpy as np

from polarbeam.report.figures import MARKERS, OKABE_ITO, PALETTE, new_figure, plain_text, styled

__all__ = ["drift_figure", "optical_figure", "recoil_fit_figure", "recoil_spectrum_figure"]


@styled
def recoil_spectrum_figure(recoil):
    """Absorption cross-section against laser wavelength, one series of points per compound."""
    comps = [c for c in recoil.compounds if c.fits]
    if not comps:
        return None
    fig, ax = new_figure(5.6, 3.6)
    for i, c in enumerate(comps):
        fits = sorted(c.fits, key=lambda f: f.wavelength_m)
        ax.errorbar(
            [f.wavelength_m * 1e9 for f in fits],
            [f.cross_section_cm2 / 1e-16 for f in fits],
            yerr=[f.cross_section_err_cm2 / 1e-16 for f in fits],
            fmt=MARKERS[i % len(MARKERS)],
            ls="-" if len(fits) > 1 else "none",
            color=PALETTE[i % len(PALETTE)],
            ms=4,
            capsize=3,
            lw=0.8,
            label=plain_text(c.compound),
        )
    ax.axhline(0.0, color="#aaaaaa", lw=0.8)
    ax.set_xlabel("wavelength (nm)")
    ax.set_ylabel("absorption cross-section (10⁻¹⁶ cm²)")
    ax.set_title("photon-recoil cross-sections (1σ)")
    ax.legend(frameon=False, loc="best")
    return fig


@styled
def recoil_fit_figure(c):
    """Fringe phase and visibility ratio against pulse energy (or power) for each laser of one
    recoil compound, with the fitted model at the measured doses."""
    if not c.fits:
        return None
    fig, (ax, vax) = new_figure(5.6, 4.4, rows=2, sharex=False)
    for i, f in enumerate(c.fits):
        col, mk = PALETTE[i % len(PALETTE)], MARKERS[i % len(MARKERS)]
        order = np.argsort(f.pulse_energies)
        e = np.asarray(f.pulse_energies)[order]
        ax.errorbar(
            e,
            np.asarray(f.phases)[order],
            yerr=np.asarray(f.phase_errors)[order],
            fmt=mk,
            ls="none",
            color=col,
            ms=4,
            capsize=2,
            lw=0.8,
            label=f"{plain_text(f.laser)} ({f.wavelength_m * 1e9:g} nm)",
        )
        ax.plot(e, np.asarray(f.model_phases)[order], "-", color=col, lw=1.0)
        vax.errorbar(
            e,
            np.asarray(f.visibility_ratios)[order],
            yerr=np.asarray(f.visibility_errors)[order],
            fmt=mk,
            ls="none",
            color=col,
            ms=4,
            capsize=2,
            lw=0.8,
        )
        vax.plot(e, np.asarray(f.model_visibility)[order], "-", color=col, lw=1.0)
    ax.set_ylabel("fringe phase (rad)")
    ax.set_title(f"{plain_text(c.compound)}: photon recoil, measured (1σ) and fitted (lines)")
    ax.legend(frameon=False, loc="best")
    vax.set_ylabel("visibility ratio")
    vax.set_xlabel("pulse energy (J) or power (W)")
    return fig


@styled
def optical_figure(c):
    """Visibility against laser power for one compound: data, quantum (solid) and classical
    (dotted) model curves, and the residuals from the quantum model."""
    if not c.curves:
        return None
    fig, (ax, rax) = new_figure(5.6, 4.4, rows=2, ratios=(3, 1.2), sharex=True)
    for k, s in enumerate(c.curves):
        col, mk = PALETTE[k % len(PALETTE)], MARKERS[k % len(MARKERS)]
        ax.errorbar(
            s.powers,
            s.visibilities,
            yerr=s.errors,
            fmt=mk,
            ls="none",
            ms=4,
            color=col,
            capsize=2,
            lw=0.8,
            label=f"{s.temperature_K:g} K, {s.velocity_m_s:g} m/s",
        )
        ax.plot(s.dense_powers, s.dense_quantum, "-", color=col, lw=1.2)
        ax.plot(s.dense_powers, s.dense_classical, ":", color=col, lw=1.2)
        rax.plot(
            s.powers, (s.visibilities - s.quantum) / s.errors, mk, ls="none", ms=3.5, color=col
        )
    ax.plot([], [], "-", color=OKABE_ITO["black"], label="quantum model")
    ax.plot([], [], ":", color=OKABE_ITO["black"], label="classical model")
    ax.set_ylabel("visibility")
    ax.set_title(f"{plain_text(c.compound)}: visibility (preferred model: {c.preferred_model})")
    ax.legend(frameon=False, loc="best")
    rax.axhline(0.0, color="#555555", lw=0.8)
    rax.set_ylabel("residual / σ")
    rax.set_xlabel("laser power (W)")
    return fig


def _series_refs(reduction, key):
    r = reduction.references
    sel = (r["compound"] == key[0]) & (r["temperature_K"] == key[1])
    return r.loc[sel].sort_values("time_s")


@styled
def drift_figure(reduction, key):
    """Reference phase against time for one series (compound, temperature): the references
    (1σ), the linear interpolation between them that corrects the signal scans, and the signal
    scans' times marked on it."""
    refs = _series_refs(reduction, key)
    ph = "phase_rad" if "phase_rad" in refs.columns else None
    if ph is None or len(refs) == 0:
        return None
    err = refs["phase_err_rad"].to_numpy() if "phase_err_rad" in refs.columns else None
    good = np.isfinite(refs[ph].to_numpy())
    t = refs["time_s"].to_numpy()[good]
    y = refs[ph].to_numpy()[good]
    if t.size == 0:
        return None
    fig, ax = new_figure(5.6, 3.2)
    ax.errorbar(
        t,
        y,
        yerr=None if err is None else err[good],
        fmt="o",
        ls="none",
        ms=4,
        color=OKABE_ITO["vermillion"],
        capsize=2,
        lw=0.8,
        label="reference scans (1σ)",
    )
    ax.plot(t, y, "-", color=OKABE_ITO["blue"], lw=1.0, label="linear interpolation (drift)")
    tab = reduction.table
    sel = (tab["compound"] == key[0]) & (tab["temperature_K"] == key[1])
    ts = tab.loc[sel, "time_s"].to_numpy(dtype=float)
    ts = ts[(ts >= t.min()) & (ts <= t.max())]
    if ts.size:
        ax.plot(
            ts,
            np.interp(ts, t, y),
            "|",
            color=OKABE_ITO["bluish green"],
            ms=8,
            label="signal scans",
        )
    noise = reduction.noise.get(key)
    if noise is not None and noise.model != "none" and math.isfinite(noise.level):
        unit = "rad²/s" if noise.model == "random-walk" else "rad²"
        ax.plot(
            [],
            [],
            ls="none",
            label=f"excess noise ({noise.model}): {noise.level:.3g} ± {noise.level_err:.2g} {unit}",
        )
    ax.set_xlabel("time (s)")
    ax.set_ylabel("reference phase (rad)")
    ax.set_title(f"{plain_text(key[0])} at {key[1]:g} K: reference-phase drift")
    ax.legend(frameon=False, loc="best")
    return fig
