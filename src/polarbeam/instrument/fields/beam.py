"""Averaging the field over the beam rectangle.

The field factor ``g = E dE/dy / V**2`` is averaged with Gauss-Legendre quadrature over the
beam's cross-section (:func:`beam_points`); its spread across the beam comes from the quadrature
nodes plus a 9 x 9 grid reaching the beam edges.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from polarbeam.errors import InputError
from polarbeam.instrument.fields.geometry import Beam
from polarbeam.instrument.fields.grid import FieldSolution

__all__ = ["BeamField", "beam_field", "beam_points"]


@dataclass(frozen=True)
class BeamField:
    """Beam-averaged field on one grid (signed values; SI)."""

    h: float
    E: float
    dE_dx: float
    dE_dy: float
    E_dE_dy: float
    field_factor: float
    field_factor_min: float
    field_factor_max: float
    field_factor_rms: float

    @property
    def rel_variation(self) -> float:
        """(max - min) / |mean| of the field factor across the beam."""
        m = abs(self.field_factor)
        return (self.field_factor_max - self.field_factor_min) / m if m > 0 else math.inf


def beam_points(beam: Beam, n: int):
    """Gauss-Legendre nodes and weights (summing to 1) over the beam rectangle.

    ``n`` points per axis (one on an axis where the beam has zero extent); returns flat arrays
    ``(x, y, w)`` so that ``sum(w * f(x, y))`` is the beam average of ``f``.
    """
    xg, wg = np.polynomial.legendre.leggauss(n)
    xs = beam.x0 + 0.5 * beam.width * xg if beam.width > 0 else np.array([beam.x0])
    wx = 0.5 * wg if beam.width > 0 else np.array([1.0])
    ys = beam.y0 + 0.5 * beam.height * xg if beam.height > 0 else np.array([beam.y0])
    wy = 0.5 * wg if beam.height > 0 else np.array([1.0])
    X, Y = np.meshgrid(xs, ys)
    W = np.outer(wy, wx)
    return X.ravel(), Y.ravel(), W.ravel()


def _beam_average(field_fn: Callable, beam: Beam, voltage: float, h: float, nq: int) -> BeamField:
    X, Y, W = beam_points(beam, nq)
    f = field_fn(X, Y)
    g = f["E_dE_dy"] / voltage**2
    x0, x1, y0, y1 = beam.corners()
    ne = 9
    XE, YE = np.meshgrid(
        np.linspace(x0, x1, ne if beam.width > 0 else 1),
        np.linspace(y0, y1, ne if beam.height > 0 else 1),
    )
    ge = field_fn(XE.ravel(), YE.ravel())["E_dE_dy"] / voltage**2
    gm = float(np.sum(W * g))
    allg = np.concatenate([g, ge])
    return BeamField(
        h=h,
        E=float(np.sum(W * f["E"])),
        dE_dx=float(np.sum(W * f["dE_dx"])),
        dE_dy=float(np.sum(W * f["dE_dy"])),
        E_dE_dy=float(np.sum(W * f["E_dE_dy"])),
        field_factor=gm,
        field_factor_min=float(allg.min()),
        field_factor_max=float(allg.max()),
        field_factor_rms=float(np.sqrt(np.sum(W * (g - gm) ** 2))),
    )


def beam_field(solution: FieldSolution, beam: Beam, *, quadrature: int = 6) -> BeamField:
    """Average ``E``, ``dE/dy``, ``E dE/dy`` and ``g`` over the beam rectangle on one grid.

    Gauss-Legendre quadrature with ``quadrature`` points per axis; min/max of ``g`` from the
    quadrature nodes plus a 9 x 9 grid including the beam edges.
    """
    cs = solution.cross_section
    cs.check_beam(beam)
    V = cs.voltage
    if V == 0:
        raise InputError("field factor: the electrodes are all at the same potential (V = 0)")
    return _beam_average(solution.field_at, beam, V, max(solution.hx, solution.hy), quadrature)
