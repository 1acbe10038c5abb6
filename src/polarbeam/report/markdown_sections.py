"""Markdown lines of the report sections that ``report.html`` also has: the instrument inputs,
provenance, the μ budget with the α–⟨μ²⟩ correlation of a compound, and the raw-scan excess
phase noise.  Reads result objects only."""

from __future__ import annotations

import math

from polarbeam.quantities import value_error_text
from polarbeam.report.text import md_code, md_escape
from polarbeam.uncertain import variance_budget

__all__ = ["inputs_lines", "mu_lines", "noise_lines", "provenance_lines"]


def _g(v, fmt: str = ".6g") -> str:
    try:
        f = float(v)
    except (TypeError, ValueError):
        return "—"
    return format(f, fmt) if math.isfinite(f) else "—"


def inputs_lines(result) -> list[str]:
    """The stated instrument inputs (SI), their errors, source keys and origin."""
    stated = dict(result.stated_inputs)
    recoil = getattr(result, "recoil", None)
    for key, d in (getattr(recoil, "stated_inputs", None) or {}).items():
        stated.setdefault(key, d)
    if not stated:
        return []
    out = [
        "",
        "## Instrument inputs",
        "",
        "| source key | value (SI) | error (1σ) | ∂lnC/∂p | origin |",
        "|---|---|---|---|---|",
    ]
    for key, d in sorted(stated.items()):
        default = d.get("default")
        origin = "default" if default else ("stated" if default is not None else "—")
        sens = d.get("dlnC_dp")
        out.append(
            f"| {md_code(key)} | {_g(d.get('value'))} | {_g(d.get('error'), '.3g')} | "
            f"{_g(sens, '.4g') if sens is not None else '—'} | {origin} |"
        )
    return out


def provenance_lines(result) -> list[str]:
    """Date, software versions, command line and the SHA-256 of each input file."""
    p = result.provenance or {}
    if not p:
        return []
    soft = ", ".join(f"{k} {v}" for k, v in (p.get("software") or {}).items() if v is not None)
    out = [
        "",
        "## Provenance",
        "",
        f"date (UTC) {p.get('date_utc', '—')} · command {md_code(p.get('command', '—'))}",
        "",
        f"software: {soft}",
    ]
    files = p.get("inputs") or []
    if files:
        out += ["", "| input file | SHA-256 |", "|---|---|"]
        out += [f"| {md_code(f.get('file'))} | `{f.get('sha256') or 'missing'}` |" for f in files]
    return out


def mu_lines(c) -> list[str]:
    """The α–⟨μ²⟩ correlation and the uncertainty budget of μ (or ⟨μ²⟩) of one compound."""
    out = []
    r = c.alpha_mu2_correlation
    if r is not None and math.isfinite(r):
        out += ["", f"Correlation of α and ⟨μ²⟩ (Debye-line intercept and slope): {r:+.2f}"]
    target = c.dipole if c.dipole is not None else c.mu2
    budget = variance_budget(target)
    if budget:
        what = "μ" if c.dipole is not None else "⟨μ²⟩"
        out += ["", f"Uncertainty budget of {what} (share of variance):", ""]
        out += ["| input | share |", "|---|---|"]
        out += [f"| {md_escape(k)} | {v:.1%} |" for k, v in budget.items()]
    return out


def noise_lines(reduction) -> list[str]:
    """Raw scans: the estimated excess phase noise of each series."""
    if reduction is None or not reduction.noise:
        return []
    out = [
        "",
        "## Raw scans: excess phase noise",
        "",
        "| compound | T (K) | model | level | chord residuals | scope |",
        "|---|---|---|---|---|---|",
    ]
    for key, nz in reduction.noise.items():
        unit = {"random-walk": " rad²/s", "jitter": " rad²"}.get(nz.model, "")
        level = (
            value_error_text(float(nz.level), float(nz.level_err))
            if nz.level_err > 0
            else _g(nz.level, ".3g")
        )
        out.append(
            f"| {md_escape(key[0])} | {key[1]:g} | {nz.model} | {level}{unit} | "
            f"{nz.n_residuals} | {nz.scope} |"
        )
    return out
