"""Flight layouts: how a transverse force along the beam turns into a detected shift.

A particle of mass m and speed v crossing a force F(z) is displaced at the detection plane by

    Δx = (1 / (m v²)) ∫ w(z) F(z) dz,

with a weight w(z) (unit m) fixed by the layout:

``talbot-lau``  gratings at z1 < z2 < z3 (L1 = z2 − z1, L2 = z3 − z2)::

    w(z) = (z − z1)·L2/L1   on [z1, z2]
    w(z) = z3 − z           on [z2, z3],   0 elsewhere.

  The observable is the fringe phase φ = 2π Δx / d with d the period at the third grating.
  A uniform acceleration a over the device with L1 = L2 = L gives Δx = a L²/v² (the gravity phase).

``beam-profile``  a position-sensitive detector at z_D: w(z) = z_D − z upstream of it; a deflector
  of length L1 followed by a drift L2 gives Δx = F/(m v²)·(L1²/2 + L1 L2) (the textbook result).
  The observable is the centroid shift itself (metres).

``time-domain``  pulsed gratings at t1 < t2 < t3 act on the whole cloud; the weights are the time
  analogue, Δx = (1/m) ∫ w(t) F(t) dt, independent of velocity.  See :class:`TimeDomain`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np

from polarbeam.errors import InputError

__all__ = [
    "LAYOUTS",
    "BeamProfile",
    "Layout",
    "TalbotLau",
    "TimeDomain",
    "piecewise_linear_integral",
]

LAYOUTS = ("talbot-lau", "beam-profile", "time-domain")


def piecewise_linear_integral(knots_x, knots_w, a: float, b: float) -> float:
    """Exact ∫_a^b w(x) dx of a piecewise-linear w given at increasing ``knots_x`` (0 outside)."""
    if b < a:
        return -piecewise_linear_integral(knots_x, knots_w, b, a)
    xs = np.asarray(knots_x, dtype=float)
    ws = np.asarray(knots_w, dtype=float)
    pts = np.unique(np.clip(np.concatenate([xs, [a, b]]), a, b))
    vals = np.interp(pts, xs, ws, left=0.0, right=0.0)
    return float(np.sum(0.5 * (vals[1:] + vals[:-1]) * np.diff(pts)))


class _TriangleWeight:
    """The three-grating weight: 0 at the first grating (or pulse), rising linearly to L2 at the
    second, falling to 0 at the third (L2 = third − second); fringe phase 2π Δx / period."""

    def _points(self) -> tuple[float, float, float]:
        raise NotImplementedError

    def _check(self, key: str, names: str) -> None:
        a, b, c = self._points()
        if not (a < b < c):
            raise InputError(f"[instrument] {key}: expected {names}, found {a!r}, {b!r}, {c!r}")
        if not self.period > 0:
            raise InputError(f"[instrument] grating_period: expected > 0, found {self.period!r}")

    def knots(self):
        a, b, c = self._points()
        return (a, b, c), (0.0, c - b, 0.0)

    def weight(self, s):
        """Weight w(s) (m for positions, s for times)."""
        xs, ws = self.knots()
        return np.interp(np.asarray(s, dtype=float), xs, ws, left=0.0, right=0.0)

    def weight_integral(self, a: float, b: float) -> float:
        """∫_a^b w ds, exact (m² for positions, s² for times)."""
        xs, ws = self.knots()
        return piecewise_linear_integral(xs, ws, a, b)

    @property
    def scale(self) -> float:
        """Observable per metre of shift: 2π/d."""
        return 2.0 * math.pi / self.period


@dataclass(frozen=True)
class TalbotLau(_TriangleWeight):
    """Three-grating near-field interferometer; observable: fringe phase (rad)."""

    z1: float
    z2: float
    z3: float
    period: float
    name: Literal["talbot-lau"] = "talbot-lau"
    velocity_dependent = True
    observable = "phase_rad"

    def __post_init__(self):
        self._check("grating_positions", "z1 < z2 < z3")

    def _points(self):
        return self.z1, self.z2, self.z3

    @property
    def L1(self) -> float:
        return self.z2 - self.z1

    @property
    def L2(self) -> float:
        return self.z3 - self.z2


@dataclass(frozen=True)
class BeamProfile:
    """Classical beam with a position-sensitive detector; observable: centroid shift (m)."""

    detector: float
    name: Literal["beam-profile"] = "beam-profile"
    velocity_dependent = True
    observable = "shift_m"

    def weight(self, z):
        z = np.asarray(z, dtype=float)
        return np.where(z < self.detector, self.detector - z, 0.0)

    def knots(self):
        """Knot of the piecewise-linear weight (its kink at the detector), as ``overlap`` needs."""
        return (self.detector,), (0.0,)

    def weight_integral(self, a: float, b: float) -> float:
        lo, hi = min(a, self.detector), min(b, self.detector)
        if hi <= lo:
            return 0.0
        # ∫ (zD − z) dz from lo to hi
        return float((hi - lo) * (self.detector - 0.5 * (hi + lo)))

    @property
    def scale(self) -> float:
        return 1.0


@dataclass(frozen=True)
class TimeDomain(_TriangleWeight):
    """Pulsed three-grating interferometer in the time domain; observable: fringe phase (rad).

    Weights in time with T1 = t2 − t1, T2 = t3 − t2: w(t) = (t − t1)·T2/T1 on [t1, t2],
    w(t) = t3 − t on [t2, t3]; Δx = (1/m) ∫ w(t) F(t) dt, φ = 2π Δx/d.  Velocity plays no part.
    """

    t1: float
    t2: float
    t3: float
    period: float
    name: Literal["time-domain"] = "time-domain"
    velocity_dependent = False
    observable = "phase_rad"

    def __post_init__(self):
        self._check("pulse_times", "t1 < t2 < t3")

    def _points(self):
        return self.t1, self.t2, self.t3


Layout = TalbotLau | BeamProfile | TimeDomain
