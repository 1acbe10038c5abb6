"""Magnetic deflectors: the field factor g_B = (B·∂B/∂x)/I² (T²/(m A²)) of an electromagnet
driven by a current I, and where along the flight it acts.

A magnet is one more :class:`~polarbeam.instrument.protocols.DeflectorModel`: the force on a
particle is F = a_eff·g_B·I² with a_eff = χ_m/μ0 + m²/(3kT) (polarbeam.beam.magnetic), exactly as
F = α_eff·g·V² for an electric deflector, so :func:`~polarbeam.instrument.deflectors.coupling`
and every layout work unchanged.  ``field_per_volt`` (the protocol's name for |field| per unit
drive) holds ``field_per_ampere`` = |B|/I (T/A) when stated: m·B/kT is then the Zeeman-regime
parameter, as μE/kT is for the electric case.

Models: ``uniform`` (a stated g_B over [entrance, entrance + length]) and ``field-map`` (a
profile g_B(z) per A², z measured from ``entrance``; CSV ``z_m, field_factor_T2_m_A2``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from polarbeam.constants import MAGNETIC_FIT_SCALE
from polarbeam.errors import InputError

__all__ = ["MAGNET_MODELS", "MagneticDeflector"]

MAGNET_MODELS = ("uniform", "field-map")


@dataclass(frozen=True)
class MagneticDeflector:
    """An electromagnet: a block of ``gradient_factor`` (T²/(m A²)) or a tabulated map of it.

    ``field_factor`` (the protocol's g) is ``gradient_factor`` in units of 10⁻¹² T²/(m A²):
    the fits then see the force constant in units of 10¹² J/T² (constants.MAGNETIC_FIT_SCALE).
    """

    gradient_factor: float
    entrance: float
    length: float | None
    field_per_ampere: float | None = None
    model: str = "uniform"
    z: tuple[float, ...] | None = None
    g: tuple[float, ...] | None = None
    source: str = "field map"
    field = "magnetic"

    def __post_init__(self):
        if self.model not in MAGNET_MODELS:
            raise InputError(
                f"[deflector] model: expected one of {', '.join(MAGNET_MODELS)} for a magnetic "
                f"deflector, found {self.model!r}"
            )
        if self.model == "uniform":
            if not (self.length is not None and self.length > 0):
                raise InputError(f"[deflector] length: expected > 0, found {self.length!r}")
            if not self.gradient_factor > 0:
                raise InputError(
                    "[deflector] field_factor: expected > 0 (a magnitude), found "
                    f"{self.gradient_factor!r}"
                )
        else:
            z = np.asarray(self.z if self.z is not None else (), dtype=float)
            if z.size < 2 or np.any(np.diff(z) <= 0):
                raise InputError(
                    f"{self.source}: expected at least two rows with increasing z_m, found {z.size}"
                )
        if self.field_per_ampere is not None and not self.field_per_ampere > 0:
            raise InputError(
                f"[deflector] field_per_ampere: expected > 0, found {self.field_per_ampere!r}"
            )

    @property
    def field_factor(self) -> float:
        """g in the fits' internal unit (10⁻¹² T²/(m A²)); a scale for field maps."""
        return self.gradient_factor * MAGNETIC_FIT_SCALE

    @property
    def field_per_volt(self) -> float | None:
        """|B| per unit drive (T/A): the protocol's field magnitude per unit of the drive."""
        return self.field_per_ampere

    def profile(self):
        """Knots (s, g_B) along the flight, or None for a constant block."""
        if self.model == "uniform":
            return None
        z = np.asarray(self.z, dtype=float)
        g = np.asarray(self.g, dtype=float) * self.field_factor
        if self.length is not None:
            keep = (z >= 0) & (z <= self.length)
            z, g = z[keep], g[keep]
        return self.entrance + z, g

    @property
    def span(self) -> tuple[float, float]:
        if self.model == "uniform":
            return self.entrance, self.entrance + float(self.length)
        s, _ = self.profile()
        return float(s[0]), float(s[-1])
