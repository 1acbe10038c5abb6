"""Closed-form reference field: the two-wire deflector.

Two parallel line charges at ``(+-a, 0)`` give the potential ``phi = K arg((w - a)/(w + a))``
(``w = x + i y``); its equipotentials are circular arcs through ``(+-a, 0)``, so a convex cylinder
and a concave trough shaped like two of them carry exactly this field between them.  The
numerical solver is checked against it.
"""

from __future__ import annotations

import math

import numpy as np

from polarbeam.errors import InputError
from polarbeam.instrument.fields.checks import finite, fmt_mm

__all__ = ["two_wire_analytic", "two_wire_constant", "two_wire_from_radii"]


def two_wire_constant(a: float, y1: float, y2: float, voltage: float) -> float:
    """Strength ``K`` (V) of the two-wire potential ``phi = K arg((w - a)/(w + a))``.

    On the symmetry axis ``x = 0`` the potential is ``2 K arctan(a / y)``; the electrodes are
    the equipotential arcs through ``(+-a, 0)`` crossing the axis at ``y1`` (convex, ``y1 < a``)
    and ``y2`` (concave, ``y2 > a``), so ``V = 2 K [arctan(a/y1) - arctan(a/y2)]``.
    """
    if not (0 < y1 < y2):
        raise InputError(f"two-wire geometry: expected 0 < y1 < y2, found y1={y1!r}, y2={y2!r}")
    if a <= 0:
        raise InputError(f"two-wire geometry: expected a > 0, found a={a!r}")
    return voltage / (2.0 * (math.atan(a / y1) - math.atan(a / y2)))


def two_wire_analytic(x, y, a: float, y1: float, y2: float, voltage: float) -> dict:
    """Closed-form two-wire field at points ``(x, y)`` (arrays broadcast).

    The complex potential ``F(w) = K log((w - a)/(w + a))`` has ``phi = Im F``, so
    ``E = |F'| = 2 a K / |w**2 - a**2|`` and ``grad log E = (Re G, -Im G)`` with
    ``G = F''/F' = -2 w / (w**2 - a**2)``.  On the axis this gives ``E = 2 a K/(a**2 + y**2)``.

    Parameters
    ----------
    x, y
        Points (m).
    a
        Half-distance of the two singular lines at ``(+-a, 0)`` (m).
    y1, y2
        Where the convex (``y1 < a``) and concave (``y2 > a``) electrode arcs cross ``x = 0`` (m).
    voltage
        Voltage between the electrodes (V).

    Returns
    -------
    dict
        ``K``, ``potential`` (V), ``Ex``, ``Ey`` (V/m), ``E`` (V/m), ``dE_dx``, ``dE_dy`` (V/m²),
        ``E_dE_dy`` (V²/m³) and ``field_factor`` (= ``E dE/dy / V**2``, m⁻³), signed.
    """
    K = two_wire_constant(a, y1, y2, voltage)
    w = np.asarray(x, dtype=float) + 1j * np.asarray(y, dtype=float)
    d = w * w - a * a
    dF = 2.0 * a * K / d  # F'(w) = phi_y + i phi_x
    G = -2.0 * w / d
    E = np.abs(dF)
    dE_dx = E * G.real
    dE_dy = -E * G.imag
    phi = K * np.angle((w - a) / (w + a))
    return {
        "K": K,
        "potential": phi,
        "Ex": -dF.imag,
        "Ey": -dF.real,
        "E": E,
        "dE_dx": dE_dx,
        "dE_dy": dE_dy,
        "E_dE_dy": E * dE_dy,
        "field_factor": E * dE_dy / voltage**2,
    }


def two_wire_from_radii(r_convex: float, r_trough: float, gap: float) -> tuple[float, float, float]:
    """Two-wire parameters ``(a, y1, y2)`` from the electrode radii and the gap on the axis.

    Both circles pass through ``(+-a, 0)``: ``y1 = R1 - sqrt(R1² - a²)``,
    ``y2 = R2 + sqrt(R2² - a²)`` and ``gap = y2 - y1``; ``a`` is found by bisection (brentq).
    """
    from scipy.optimize import brentq

    r1 = finite(r_convex, "two-wire r_convex")
    r2 = finite(r_trough, "two-wire r_trough")
    g = finite(gap, "two-wire gap")
    if r1 <= 0 or r2 <= 0 or g <= 0:
        raise InputError(
            f"two-wire geometry: expected positive radii and gap, found r_convex={r1!r}, "
            f"r_trough={r2!r}, gap={g!r}"
        )

    def gap_of(a):
        return (
            r2 + math.sqrt(max(r2 * r2 - a * a, 0.0)) - (r1 - math.sqrt(max(r1 * r1 - a * a, 0.0)))
        )

    amax = min(r1, r2)
    # gap_of decreases from 2 r2 (a -> 0) to gap_of(amax)
    lo, hi = gap_of(amax), gap_of(0.0)
    if not (lo < g < hi):
        raise InputError(
            f"two-wire geometry: gap {fmt_mm(g)} mm is not reachable with r_convex="
            f"{fmt_mm(r1)} mm, r_trough={fmt_mm(r2)} mm (expected {fmt_mm(lo)} < gap < "
            f"{fmt_mm(hi)} mm)"
        )
    a = brentq(lambda t: gap_of(t) - g, 0.0, amax, xtol=1e-15 * amax, rtol=1e-14)
    y1 = r1 - math.sqrt(r1 * r1 - a * a)
    y2 = r2 + math.sqrt(r2 * r2 - a * a)
    return a, y1, y2
