"""The 2π branch of each drift-corrected phase.

A branch is chosen from an expected phase, from the known sign of the shift or, by default,
from a smooth trend in V² built up from the lowest voltages (:func:`choose_branches`);
:func:`grouped_branches` applies the trend rule to every series at once.
"""

from __future__ import annotations

import itertools
from collections.abc import Callable

import numpy as np
from numpy.typing import ArrayLike

from polarbeam.errors import InputError
from polarbeam.reduction.groups import TWO_PI, group_heads

__all__ = ["choose_branches", "grouped_branches"]


def choose_branches(
    phase: ArrayLike,
    voltage: ArrayLike,
    phase_err: ArrayLike | None = None,
    *,
    expected: Callable[[np.ndarray], np.ndarray] | None = None,
    shift_sign: int | None = None,
) -> np.ndarray:
    """Pick the 2π branch of each drift-corrected phase.

    Parameters
    ----------
    phase : array_like, shape (n,)
        Corrected phases, any branch, rad.
    voltage : array_like, shape (n,)
        Deflector voltages, V.
    phase_err : array_like, optional
        1σ errors used to weight the trend (equal weights when omitted).
    expected : callable, optional
        ``expected(voltage) -> phase``: each phase is moved to the branch nearest to it.
    shift_sign : {+1, -1}, optional
        Known sign of the shift: the points at the lowest ``|V|`` are placed in
        ``sign·phase ∈ [-π/2, 3π/2)`` instead of nearest zero.

    Returns
    -------
    ndarray
        Phases moved by whole multiples of 2π.

    Notes
    -----
    Without ``expected`` the points are visited in order of increasing ``|V|``; each group of
    equal ``|V|`` is put on the branch nearest ``β V²``, where ``β`` is the weighted least-squares
    slope of the points already placed (zero before any, i.e. the reference phase).
    """
    phi = np.asarray(phase, dtype=float).copy()
    v = np.asarray(voltage, dtype=float)
    if expected is not None:
        target = np.asarray(expected(v), dtype=float) * np.ones_like(phi)
        return phi + TWO_PI * np.round((target - phi) / TWO_PI)
    if shift_sign not in (None, 1, -1):
        raise InputError(f"shift_sign must be +1, -1 or None, found {shift_sign!r}")
    w = np.ones_like(phi) if phase_err is None else 1.0 / np.asarray(phase_err, float) ** 2
    return grouped_branches(phi, v, w, np.zeros(phi.size, dtype=np.int64), 1, shift_sign)


def grouped_branches(
    phi: np.ndarray,
    v: np.ndarray,
    w: np.ndarray,
    group: np.ndarray,
    n_groups: int,
    shift_sign: int | None,
) -> np.ndarray:
    """:func:`choose_branches` (trend rule) for every group (series) at once.

    Level ``k`` of every group (its k-th smallest ``|V|``) is placed in one vectorised step, on
    the branch nearest ``β_g V²`` with ``β_g`` the weighted slope of the group's levels below.
    """
    phi = np.array(phi, dtype=float)
    if phi.size == 0:
        return phi
    a = np.abs(v)
    order = np.lexsort((a, group))
    g, ao = group[order], a[order]
    new_level = np.r_[True, (g[1:] != g[:-1]) | (ao[1:] != ao[:-1])]
    level = np.cumsum(new_level) - 1
    rank = level - level[group_heads(g)]  # 0 for each group's lowest |V|
    by_rank = order[np.argsort(rank, kind="stable")]
    bounds = np.r_[0, np.cumsum(np.bincount(rank))]
    v2 = v * v
    sxx = np.zeros(n_groups)
    sxy = np.zeros(n_groups)
    for k, (lo, hi) in enumerate(itertools.pairwise(bounds)):
        sel = by_rank[lo:hi]
        gs = group[sel]
        if k == 0 and shift_sign is not None:
            lo_edge = -0.5 * np.pi
            phi[sel] = shift_sign * (lo_edge + np.mod(shift_sign * phi[sel] - lo_edge, TWO_PI))
        else:
            with np.errstate(invalid="ignore", divide="ignore"):
                slope = np.where(sxx > 0, sxy / sxx, 0.0)
            target = slope[gs] * v2[sel]
            phi[sel] += TWO_PI * np.round((target - phi[sel]) / TWO_PI)
        sxx += np.bincount(gs, weights=w[sel] * v2[sel] ** 2, minlength=n_groups)
        sxy += np.bincount(gs, weights=w[sel] * v2[sel] * phi[sel], minlength=n_groups)
    return phi
