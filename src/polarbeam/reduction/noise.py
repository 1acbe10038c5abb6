"""Excess interferometer-phase noise, estimated from the reference scans of each series.

The interferometer phase is modelled as

    phi_I(t) = smooth drift + W(t)   (model "random-walk", the default)
    phi_I(t) = smooth drift + e_i    (model "jitter": white noise per scan)

where ``W`` is a random walk of diffusion ``D`` (variance ``D·Δt`` after a time ``Δt``).  ``D`` is
estimated per series (or pooled over all series) by the method of moments on the chord
residuals of consecutive references (each reference minus the straight line through its two
neighbours, which removes any locally linear drift): their summed square is compared with what
the statistical errors alone give, and the excess is divided by the bridge variance expected at
the actual time gaps (:func:`estimate_excess_noise`).  Curvature of the drift within two
reference gaps is not modelled; it raises the estimate, so it errs towards larger errors.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike

from polarbeam.errors import InputError
from polarbeam.reduction.groups import group_heads

__all__ = [
    "NOISE_MODELS",
    "NOISE_SCOPES",
    "NoiseEstimate",
    "NoiseModel",
    "NoiseScope",
    "estimate_excess_noise",
    "grouped_noise_moments",
    "noise_from_moments",
    "noise_moments",
]

NoiseModel = Literal["random-walk", "jitter", "none"]
NoiseScope = Literal["series", "pooled"]
NOISE_MODELS = ("random-walk", "jitter", "none")
NOISE_SCOPES = ("series", "pooled")


@dataclass(frozen=True)
class NoiseEstimate:
    """Excess phase noise of the interferometer estimated from the references of a series.

    Attributes
    ----------
    model : str
        ``"random-walk"`` (``level`` is a diffusion in rad²/s), ``"jitter"`` (``level`` is a
        variance in rad² added to every scan) or ``"none"``.
    level, level_err : float
        Method-of-moments estimate (clipped at 0) and its approximate 1σ error.
    n_residuals : int
        Number of chord residuals used (references minus 2).
    observed, expected_stat : float
        Sum of squared chord residuals, rad², and its expectation from statistical errors alone.
    scope : str
        ``"series"`` or ``"pooled"`` (estimated from all series together).
    """

    model: str
    level: float
    level_err: float
    n_residuals: int
    observed: float
    expected_stat: float
    scope: str = "series"

    def summary(self) -> dict:
        """Plain dict for JSON."""
        return dict(self.__dict__)


_MOMENTS = ("q", "trs", "trk", "ss", "sk", "kk")


def grouped_noise_moments(
    t_ref: np.ndarray,
    phase_ref: np.ndarray,
    var_ref: np.ndarray,
    group: np.ndarray,
    n_groups: int,
    model: str,
) -> dict[str, np.ndarray]:
    """Moments of the chord residuals ``r = P phi`` of every group (series) at once.

    The references of all groups come one after the other (sorted by group, then time).  Row
    ``q`` of ``P`` is reference q+1 minus the line through references q and q+2 of the same
    group; the moments are the observed |r|², tr(S'), tr(K') and the traces needed for
    Var(|r|²) = 2 tr((S' + level K')²), with S' = P S Pᵀ and K' = P K Pᵀ, per group.  P has three
    entries per row, so S' and K' are banded (bandwidth 2) and are evaluated band by band.
    """
    m = {name: np.zeros(n_groups) for name in _MOMENTS}
    m["n"] = np.zeros(n_groups, dtype=np.int64)
    if t_ref.size < 3 or model == "none":
        return m
    same = group[1:] == group[:-1]
    j = np.flatnonzero(same[:-1] & same[1:]) + 1  # chord centres with both neighbours in group
    if j.size == 0:
        return m
    t = t_ref - t_ref[group_heads(group)]  # time from the group's first reference
    g_row = group[j]
    gap = t[j + 1] - t[j - 1]
    coef = (-(t[j + 1] - t[j]) / gap, np.ones(j.size), -(t[j] - t[j - 1]) / gap)
    r = coef[0] * phase_ref[j - 1] + phase_ref[j] + coef[2] * phase_ref[j + 1]

    bands = []
    for d in range(3):
        # Band d, rows q and q+d of one group, columns j-1+α and j-1+d+β:
        # Σ_αβ P[q,α] P[q+d,β] kernel(j-1+α, j-1+d+β).  The statistical kernel is diagonal
        # (α = d+β), the jitter kernel the identity, the random-walk kernel min(t, t') =
        # t[j-1+min(α, d+β)] (times increase within a group).
        q = np.flatnonzero(g_row[d:] == g_row[: g_row.size - d])
        base = j[q] - 1
        pa = [c[q] for c in coef]
        pb = [c[q + d] for c in coef]
        diag_terms = [(al, pa[al] * pb[al - d]) for al in range(d, 3)]
        s_d = sum(w_ab * var_ref[base + al] for al, w_ab in diag_terms)
        if model == "random-walk":
            t_m = [t[base + m] for m in range(3)]
            k_d = sum(pa[al] * pb[be] * t_m[min(al, be + d)] for al in range(3) for be in range(3))
        else:
            k_d = sum(w_ab for _, w_ab in diag_terms)
        bands.append((g_row[q], s_d, k_d))

    def per_group(g, v):
        return np.bincount(g, weights=v, minlength=n_groups)

    def frob(x, y):  # Σ_ij X_ij Y_ij of two symmetric banded matrices, per group
        return sum(
            (1.0 if d == 0 else 2.0) * per_group(bands[d][0], bands[d][x] * bands[d][y])
            for d in range(3)
        )

    m.update(
        q=per_group(g_row, r * r),
        trs=per_group(bands[0][0], bands[0][1]),
        trk=per_group(bands[0][0], bands[0][2]),
        ss=frob(1, 1),
        sk=frob(1, 2),
        kk=frob(2, 2),
        n=np.bincount(g_row, minlength=n_groups),
    )
    return m


def noise_moments(
    t_ref: np.ndarray, phase_ref: np.ndarray, var_ref: np.ndarray, model: str
) -> dict[str, float]:
    """:func:`grouped_noise_moments` of one series, as plain numbers."""
    m = grouped_noise_moments(
        t_ref, phase_ref, var_ref, np.zeros(t_ref.size, dtype=np.int64), 1, model
    )
    return {name: (int(v[0]) if name == "n" else float(v[0])) for name, v in m.items()}


def noise_from_moments(model: str, m: dict[str, float], scope: str) -> NoiseEstimate:
    """Method-of-moments noise level (clipped at 0) and its error from chord-residual moments."""
    n_res = int(m["n"])
    if m["trk"] <= 0 or model == "none":
        return NoiseEstimate(model, 0.0, 0.0, n_res, m["q"], m["trs"], scope)
    level = max((m["q"] - m["trs"]) / m["trk"], 0.0)
    # Var(|r|²) = 2 tr(C²) for Gaussian residuals with covariance C = S' + level K'.
    var_q = 2.0 * (m["ss"] + 2.0 * level * m["sk"] + level**2 * m["kk"])
    return NoiseEstimate(model, level, math.sqrt(var_q) / m["trk"], n_res, m["q"], m["trs"], scope)


def estimate_excess_noise(
    t_reference: ArrayLike,
    phase_reference: ArrayLike,
    var_reference: ArrayLike,
    model: NoiseModel = "random-walk",
) -> NoiseEstimate:
    """Method-of-moments estimate of excess interferometer-phase noise from references.

    With the chord operator ``P`` (each reference minus the line through its two neighbours; it
    removes any locally linear drift), ``E[|P phi|²] = tr(P S Pᵀ) + level · tr(P K Pᵀ)``, where
    ``S`` holds the statistical variances and ``K`` is the random-walk kernel
    ``min(t, t') - t0`` (model ``"random-walk"``) or the identity (``"jitter"``).  Hence
    ``level = (|P phi|² - tr(P S Pᵀ)) / tr(P K Pᵀ)``, clipped at 0.  For one residual this is the
    square of the chord residual minus its statistical variance, divided by the bridge factor
    ``Δt₁Δt₂/(Δt₁+Δt₂)``.

    Parameters
    ----------
    t_reference : array_like, shape (m,)
        Reference times, s, strictly increasing.
    phase_reference : array_like, shape (m,)
        Unwrapped reference phases, rad.
    var_reference : array_like, shape (m,)
        Their statistical variances, rad².
    model : {"random-walk", "jitter", "none"}
        Noise model.

    Returns
    -------
    NoiseEstimate
        ``level = 0`` with ``n_residuals = 0`` when fewer than 3 references are given.
    """
    if model not in NOISE_MODELS:
        raise InputError(f"noise model must be one of {', '.join(NOISE_MODELS)}, found {model!r}")
    tr = np.asarray(t_reference, dtype=float)
    if tr.size > 1 and np.any(np.diff(tr) <= 0):
        raise InputError("estimate_excess_noise: reference times must be strictly increasing")
    m = noise_moments(
        tr, np.asarray(phase_reference, float), np.asarray(var_reference, float), model
    )
    return noise_from_moments(model, m, "series")
