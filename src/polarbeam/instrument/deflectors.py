"""Deflector field models: the field factor g = (E·∂E/∂x)/V² and where along the flight it acts.

The force on a polarizable particle is F = α_eff·E·∂E/∂x = α_eff·g·V², with x the direction in
which |E| grows (so g > 0 and a positive α_eff deflects towards +x).

Models
------
``uniform``    a stated field factor g over [entrance, entrance + length].
``two-wire``   the classic convex-cylinder / concave-trough pair.  With w = x + i·z (z = height on
               the symmetry axis) the potential is K·arg((w − a)/(w + a)) of two line charges at
               (±a, 0); the electrodes are the equipotential arcs through (±a, 0) that cross the
               axis at z1 < a (convex) and z2 > a (concave).  On the axis
               E = 2aK/(a² + z²), K = V / (2[arctan(a/z1) − arctan(a/z2)]), so
               g = E_V² · 2z/(a² + z²) with E_V = E/V.
``field-map``  a measured or computed profile g(z) along the beam (CSV ``z_m, field_factor_m3``,
               z measured from ``entrance``), optionally scaled by a stated ``field_scale``.

For the ``time-domain`` layout the same field factor acts between ``t1 + field_on`` and
``t1 + field_on + field_duration``, times measured from the first pulse t1 (or with a waveform of
relative amplitude a(t), linear between its knots, F ∝ a(t)²).

:func:`overlap` returns ∫ w(s) g(s) ds for a layout's weight w: the single number that turns
α_eff·V² into a shift (divided by m v² for spatial layouts, by m for the time domain).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from polarbeam.errors import InputError

__all__ = [
    "DEFLECTOR_MODELS",
    "UNCALIBRATED_FIELD_FACTOR",
    "Deflector",
    "FieldMapDeflector",
    "SwitchedField",
    "TwoWireDeflector",
    "UniformDeflector",
    "overlap",
    "two_wire_axis_field_per_volt",
    "two_wire_field_factor",
    "two_wire_potential",
]

DEFLECTOR_MODELS = ("uniform", "two-wire", "field-map", "numerical")  # numerical: fieldmodel.py
#: Stand-in g (m⁻³) of a ``uniform`` deflector without ``field_factor`` until the reference
#: compounds calibrate it (calibration.py); α_eff depends on g only through α_eff·C/m.
UNCALIBRATED_FIELD_FACTOR = 1.0e8


def two_wire_potential(x, z, a: float, z1: float, z2: float, voltage: float = 1.0):
    """Potential K·arg((w − a)/(w + a)), w = x + iz; the electrodes differ by ``voltage``."""
    k = voltage / (2.0 * (math.atan(a / z1) - math.atan(a / z2)))
    w = np.asarray(x, dtype=float) + 1j * np.asarray(z, dtype=float)
    return k * np.angle((w - a) / (w + a))


def two_wire_axis_field_per_volt(a: float, z1: float, z2: float, height: float) -> float:
    """|E|/V on the symmetry axis at ``height`` (m⁻¹)."""
    k = 1.0 / (2.0 * (math.atan(a / z1) - math.atan(a / z2)))
    return 2.0 * a * k / (a * a + height * height)


def two_wire_field_factor(a: float, z1: float, z2: float, height: float) -> float:
    """g = |E ∂E/∂z|/V² on the axis (m⁻³): E_V² · 2z/(a² + z²)."""
    ev = two_wire_axis_field_per_volt(a, z1, z2, height)
    return ev * ev * 2.0 * height / (a * a + height * height)


@dataclass(frozen=True)
class UniformDeflector:
    """A stated field factor over [entrance, entrance + length]."""

    field_factor: float
    entrance: float
    length: float
    field_per_volt: float | None = None
    model = "uniform"

    def __post_init__(self):
        if not self.length > 0:
            raise InputError(f"[deflector] length: expected > 0, found {self.length!r}")
        if not self.field_factor > 0:
            raise InputError(
                f"[deflector] field_factor: expected > 0 (a magnitude), found {self.field_factor!r}"
            )

    def profile(self):
        """Knots (s, g) of the field factor along the flight, or None for a constant block."""
        return None

    @property
    def span(self) -> tuple[float, float]:
        return self.entrance, self.entrance + self.length


@dataclass(frozen=True)
class TwoWireDeflector:
    """The two-wire (cylinder / trough) deflector of line-charge geometry."""

    line_half_spacing: float
    convex_crossing: float
    concave_crossing: float
    beam_height: float
    entrance: float
    length: float
    model = "two-wire"

    def __post_init__(self):
        a, z1, z2, h = (
            self.line_half_spacing,
            self.convex_crossing,
            self.concave_crossing,
            self.beam_height,
        )
        if not a > 0:
            raise InputError(f"[deflector] line_half_spacing: expected > 0, found {a!r}")
        if not 0 < z1 < a:
            raise InputError(
                f"[deflector] convex_crossing: expected 0 < z1 < line_half_spacing ({a!r}), "
                f"found {z1!r}"
            )
        if not z2 > a:
            raise InputError(
                f"[deflector] concave_crossing: expected > line_half_spacing ({a!r}), found {z2!r}"
            )
        if not z1 < h < z2:
            raise InputError(
                f"[deflector] beam_height: expected between the electrodes ({z1!r}, {z2!r}), "
                f"found {h!r}"
            )
        if not self.length > 0:
            raise InputError(f"[deflector] length: expected > 0, found {self.length!r}")

    @property
    def field_factor(self) -> float:
        return two_wire_field_factor(
            self.line_half_spacing, self.convex_crossing, self.concave_crossing, self.beam_height
        )

    @property
    def field_per_volt(self) -> float:
        return two_wire_axis_field_per_volt(
            self.line_half_spacing, self.convex_crossing, self.concave_crossing, self.beam_height
        )

    def profile(self):
        return None

    @property
    def span(self) -> tuple[float, float]:
        return self.entrance, self.entrance + self.length


@dataclass(frozen=True)
class FieldMapDeflector:
    """A tabulated field factor g(z) along the beam, z measured from ``entrance``."""

    z: tuple[float, ...]
    g: tuple[float, ...]
    entrance: float
    length: float | None = None
    field_scale: float = 1.0
    field_per_volt: float | None = None
    source: str = "field map"
    model = "field-map"

    def __post_init__(self):
        z = np.asarray(self.z)
        if z.size < 2 or np.any(np.diff(z) <= 0):
            raise InputError(
                f"{self.source}: expected at least two rows with increasing z_m, found {z.size}"
            )
        if not self.field_scale > 0:
            raise InputError(f"[deflector] field_scale: expected > 0, found {self.field_scale!r}")

    @property
    def field_factor(self) -> float:
        """Peak field factor (m⁻³) after scaling."""
        return float(np.max(np.abs(self.g))) * self.field_scale

    def profile(self):
        z = np.asarray(self.z, dtype=float)
        g = np.asarray(self.g, dtype=float) * self.field_scale
        if self.length is not None:
            keep = (z >= 0) & (z <= self.length)
            z, g = z[keep], g[keep]
        return self.entrance + z, g

    @property
    def span(self) -> tuple[float, float]:
        s, _ = self.profile()
        return float(s[0]), float(s[-1])


@dataclass(frozen=True)
class SwitchedField:
    """A field factor switched on in time (time-domain layout): F = α g V² a(t)².

    Times are measured from the first grating pulse ``origin`` (t1): the field is on over
    [origin + field_on, origin + field_on + field_duration] for rectangular switching.  With a
    ``waveform`` (knots of t relative to ``origin + field_on`` and relative amplitude a, linear
    between knots, 0 outside) the force follows a(t)² and ``field_duration`` is not used.
    """

    field_factor: float
    field_on: float
    field_duration: float | None
    waveform: tuple[tuple[float, ...], tuple[float, ...]] | None = None
    field_per_volt: float | None = None
    origin: float = 0.0
    source: str = "waveform"
    model = "uniform"

    def __post_init__(self):
        if not self.field_factor > 0:
            raise InputError(
                f"[deflector] field_factor: expected > 0 (a magnitude), found {self.field_factor!r}"
            )
        if self.waveform is None:
            if not (self.field_duration and self.field_duration > 0):
                raise InputError(
                    "[deflector] field_duration: expected > 0 for rectangular switching, "
                    f"found {self.field_duration!r}"
                )
            return
        t, amp = (np.asarray(v, dtype=float) for v in self.waveform)
        if t.size < 2 or t.size != amp.size or np.any(np.diff(t) <= 0):
            raise InputError(
                f"{self.source}: expected at least two rows with strictly increasing t_s, "
                f"found {t.size} row(s)"
                + (" with repeated or decreasing t_s" if t.size >= 2 else "")
            )
        if not (np.all(np.isfinite(amp)) and np.all(amp >= 0) and np.all(amp <= 1)):
            raise InputError(
                f"{self.source}: column 'amplitude' expected values in 0..1, found "
                f"{float(amp[~((amp >= 0) & (amp <= 1))][0])!r}"
            )

    @property
    def start(self) -> float:
        """Absolute time at which the switching (or the waveform's t = 0) begins (s)."""
        return self.origin + self.field_on

    def profile(self):
        """Knots (t, g·a²) of the switched field factor, or None for rectangular switching."""
        if self.waveform is None:
            return None
        t, amp = (np.asarray(v, dtype=float) for v in self.waveform)
        return self.start + t, self.field_factor * amp**2

    def field_factor_at(self, t):
        """g·a(t)² at absolute times ``t`` (a linear between the waveform knots, 0 outside)."""
        t = np.asarray(t, dtype=float)
        if self.waveform is None:
            a, b = self.span
            return np.where((t >= a) & (t <= b), self.field_factor, 0.0)
        tw, amp = (np.asarray(v, dtype=float) for v in self.waveform)
        a_t = np.interp(t, self.start + tw, amp, left=0.0, right=0.0)
        return self.field_factor * a_t * a_t

    @property
    def span(self) -> tuple[float, float]:
        if self.waveform is None:
            return self.start, self.start + float(self.field_duration)
        s, _ = self.profile()
        return float(s[0]), float(s[-1])


Deflector = UniformDeflector | TwoWireDeflector | FieldMapDeflector | SwitchedField


def overlap(layout, deflector) -> float:
    """∫ w(s) g(s) ds: the layout weight against the deflector's field-factor profile.

    Units: m⁻¹ for spatial layouts (m · m⁻³ · m), s²·m⁻³ for the time domain.
    """
    prof = deflector.profile()
    if prof is None:
        a, b = deflector.span
        return deflector.field_factor * layout.weight_integral(a, b)
    s, g = prof
    # A piecewise-linear weight times a piecewise-linear profile is piecewise quadratic, and times
    # the square of a piecewise-linear waveform amplitude piecewise cubic: Simpson's rule on a grid
    # holding every knot of both (plus midpoints) is exact in either case.
    value_at = getattr(deflector, "field_factor_at", None)
    if value_at is None:

        def value_at(x):
            return np.interp(x, s, g)

    knots = np.unique(np.concatenate([s, np.asarray(layout.knots()[0], dtype=float)]))
    knots = knots[(knots >= s[0]) & (knots <= s[-1])]
    mids = 0.5 * (knots[1:] + knots[:-1])
    gk, gm = value_at(knots), value_at(mids)
    fk, fm = layout.weight(knots) * gk, layout.weight(mids) * gm
    h = np.diff(knots)
    return float(np.sum(h / 6.0 * (fk[:-1] + 4.0 * fm + fk[1:])))


def coupling(layout, deflector) -> float:
    """C = (layout scale)·∫ w g ds: observable per (α_eff·V²/m) before velocity averaging."""
    return layout.scale * overlap(layout, deflector)
