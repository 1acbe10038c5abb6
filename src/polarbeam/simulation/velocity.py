"""Simulated velocity distributions: measured tables of known shape for round trips and demos.

:func:`velocity_table` samples a shape (supersonic or effusive flux form, Gaussian, bimodal,
log-normal) on a uniform grid of velocity classes, with an optional linear contrast slope
c(v) = 1 + k·(v − v̄)/v̄ (kept ≥ 0.02). The table is the true distribution of the simulation;
:func:`stated_table` applies a time-of-flight calibration error (a common scale of every class)
to give the table a campaign states, and :func:`velocity_csv` writes ``velocities.csv``.
"""

from __future__ import annotations

import math

import numpy as np

from polarbeam.beam.distributions import EFFUSIVE_SPREAD_RATIO, FluxVelocity, TabulatedVelocity

__all__ = ["TABLE_SHAPES", "stated_table", "velocity_csv", "velocity_table"]

#: shapes :func:`velocity_table` can sample
TABLE_SHAPES = ("gaussian", "supersonic", "effusive", "bimodal", "lognormal")


def _density(shape: str, v: np.ndarray, mean: float, spread: float) -> np.ndarray:
    if shape in ("supersonic", "effusive"):
        d = FluxVelocity(mean, spread, effusive=shape == "effusive")
        u, a = d.parameters()
        return v**3 * np.exp(-(((v - u) / a) ** 2))
    if shape == "gaussian":
        return np.exp(-0.5 * ((v - mean) / spread) ** 2)
    if shape == "bimodal":  # two equal-width peaks at v̄(1 ∓ δ), populations 0.4 / 0.6
        w = 0.5 * spread
        delta = math.sqrt(max(spread**2 - w**2, 0.0)) / math.sqrt(0.24)
        lo, hi = mean - 0.6 * delta, mean + 0.4 * delta
        return 0.4 * np.exp(-0.5 * ((v - lo) / w) ** 2) + 0.6 * np.exp(-0.5 * ((v - hi) / w) ** 2)
    if shape == "lognormal":
        s2 = math.log(1 + (spread / mean) ** 2)
        mu = math.log(mean) - 0.5 * s2
        return np.exp(-((np.log(v) - mu) ** 2) / (2 * s2)) / v
    raise ValueError(f"expected one of {', '.join(TABLE_SHAPES)}, found {shape!r}")


def velocity_table(
    shape: str,
    mean: float,
    spread_frac: float,
    *,
    classes: int = 90,
    contrast_slope: float | None = None,
) -> TabulatedVelocity:
    """A table of ``classes`` velocity classes of ``shape`` with (about) this mean and relative
    spread (``effusive``: 0.363 always), weights ∝ density × class width, optional contrast."""
    spread = (EFFUSIVE_SPREAD_RATIO if shape == "effusive" else spread_frac) * mean
    lo = max(0.03 * mean, mean - 5.0 * spread)
    hi = mean + 6.0 * spread
    v = np.linspace(lo, hi, classes)
    w = _density(shape, v, mean, spread)
    w = w / w.sum()
    c = None
    if contrast_slope is not None:
        m = float(np.sum(w * v))
        c = np.maximum(1.0 + contrast_slope * (v - m) / m, 0.02)
    return TabulatedVelocity.from_arrays(v, w, c)


def stated_table(true: TabulatedVelocity, rel_err: float, rng: np.random.Generator):
    """(stated table, 1σ error of its mean in m/s): every class of the true table times one
    draw 1 + rel_err·N(0, 1) (a time-of-flight calibration error)."""
    factor = 1.0 + rel_err * float(rng.standard_normal())
    stated = TabulatedVelocity(
        tuple(np.asarray(true.velocities) * true.scale * factor),
        true.weights,
        true.contrasts,
    )
    return stated, rel_err * stated.mean


def velocity_csv(entries: list[tuple[str, float, TabulatedVelocity]]) -> str:
    """``velocities.csv`` text of (compound, temperature_K, table) entries."""
    with_c = any(t.contrasts is not None for _n, _t, t in entries)
    head = "compound,temperature_K,velocity_m_s,weight" + (",contrast" if with_c else "")
    lines = [head]
    for name, temp, t in entries:
        v, w = t.nodes()
        c = t.contrast() if t.contrasts is not None else np.ones_like(v)
        for k in range(v.size):
            row = f"{name},{temp:g},{v[k]:.10g},{w[k]:.10g}"
            lines.append(row + (f",{c[k]:.6g}" if with_c else ""))
    return "\n".join(lines) + "\n"
