"""What a flight layout and a deflector must offer: the two plug points of the instrument.

A new layout or deflector model is a new class with these members; :func:`coupling` and the
pipeline need nothing else. ``tests/instrument/test_instrument_protocols.py`` runs one
conformance check over every implementation.
"""

from __future__ import annotations

from typing import Protocol, runtime_checkable

import numpy as np

__all__ = ["DeflectorModel", "LayoutModel"]


@runtime_checkable
class LayoutModel(Protocol):
    """A flight layout: the weight w(s) turning a force along the beam into a detected shift.

    ``s`` is the position along the beam (m) or, for time-domain layouts, the time (s).
    """

    scale: float

    def weight(self, s) -> np.ndarray:
        """w(s) at the points ``s`` (zero outside the layout)."""
        ...

    def weight_integral(self, a: float, b: float) -> float:
        """∫ w ds over [a, b]."""
        ...

    def knots(self) -> tuple[np.ndarray, np.ndarray]:
        """(positions, weights) where w is piecewise linear between them."""
        ...


@runtime_checkable
class DeflectorModel(Protocol):
    """A deflector: the field factor g = E·∂E/∂x / V² along the beam.

    ``field_per_volt`` is E/V at the beam (m⁻¹) where the model knows it (for the μE/kT check),
    else None.
    """

    model: str
    field_per_volt: float | None

    @property
    def span(self) -> tuple[float, float]:
        """Where the field acts, (start, end) along the beam (or in time)."""
        ...

    def profile(self) -> tuple[np.ndarray, np.ndarray] | None:
        """(positions, g) of the field factor, piecewise linear between the points; None for a
        constant block of ``field_factor`` over ``span``."""
        ...
