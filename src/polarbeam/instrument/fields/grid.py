"""The potential on a uniform grid, and derivatives of it at arbitrary points.

:class:`FieldSolution` holds ``phi`` on the nodes of the box together with which nodes are free
and which are *regular* (no grid link cut by an electrode); ``E`` and ``dE/dy`` come from nodal
central differences interpolated by bicubic splines, refused where an electrode is too close for
the grid.  :func:`grid_shape` turns a target spacing into whole cells across the box.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from polarbeam._util.optional import lazy
from polarbeam.errors import InputError
from polarbeam.instrument.fields.checks import finite, fmt_mm
from polarbeam.instrument.fields.geometry import CrossSection
from polarbeam.instrument.fields.shapes import BoundaryBox

_interpolate = lazy("scipy.interpolate", "numerical routines")

__all__ = ["FieldSolution", "grid_shape"]


@dataclass(frozen=True, eq=False)
class FieldSolution:
    """Potential on a uniform grid: ``phi[j, i]`` at ``(x[i], y[j])``.

    ``regular[j, i]`` is True at free nodes whose four grid links cross no boundary, where
    central differences of ``phi`` are valid.
    """

    cross_section: CrossSection
    x: np.ndarray
    y: np.ndarray
    phi: np.ndarray
    free: np.ndarray
    regular: np.ndarray
    boundary: str
    solver: str
    n_unknowns: int
    seconds: float
    info: dict = field(default_factory=dict)

    @property
    def hx(self) -> float:
        return float(self.x[1] - self.x[0])

    @property
    def hy(self) -> float:
        return float(self.y[1] - self.y[0])

    @property
    def shape(self) -> tuple[int, int]:
        """Grid size as (nx, ny) nodes."""
        return (self.x.size, self.y.size)

    def derivatives_at(self, px, py, margin: int = 2) -> dict:
        """``phi_x, phi_y, phi_xy, phi_yy, phi_xx`` at points, from nodal central differences.

        The differences are taken at the nodes of a patch reaching ``margin`` nodes beyond the
        points (at least 4 per axis) and interpolated by bicubic splines.  Every patch node must
        be regular (no grid link cut by an electrode), its outer ring free.  Raises
        :class:`InputError` otherwise: the points are too close to an electrode for this grid.
        """
        px = np.atleast_1d(np.asarray(px, dtype=float))
        py = np.atleast_1d(np.asarray(py, dtype=float))
        hx, hy = self.hx, self.hy
        nx, ny = self.shape

        def span(lo, hi, origin, step):
            k0 = int(np.floor((lo - origin) / step + 1e-9)) - margin + 1
            k1 = int(np.ceil((hi - origin) / step - 1e-9)) + margin - 1
            while k1 - k0 + 1 < 4:
                k0, k1 = k0 - 1, k1 + 1
            return k0 - 1, k1 + 1  # plus the ring of stencil neighbours

        i0, i1 = span(px.min(), px.max(), self.x[0], hx)
        j0, j1 = span(py.min(), py.max(), self.y[0], hy)
        if i0 < 0 or j0 < 0 or i1 >= nx or j1 >= ny:
            raise InputError(
                "field evaluation: the points are within "
                f"{margin} grid spacings of the boundary box; enlarge the box"
            )
        inner = self.regular[j0 + 1 : j1, i0 + 1 : i1]
        ring_free = self.free[j0 : j1 + 1, i0 : i1 + 1]
        if not (np.all(inner) and np.all(ring_free)):
            bad = ~ring_free
            bad[1:-1, 1:-1] |= ~inner
            jj, ii = np.nonzero(bad)
            xb = self.x[i0 + ii[0]]
            yb = self.y[j0 + jj[0]]
            raise InputError(
                f"field evaluation: an electrode surface is within {margin} grid spacings "
                f"(h = {fmt_mm(max(hx, hy))} mm) of the evaluation region (e.g. node at "
                f"({fmt_mm(xb)}, {fmt_mm(yb)}) mm); use a finer grid or keep the beam further "
                "from the electrodes"
            )
        P = self.phi[j0 : j1 + 1, i0 : i1 + 1]
        c = P[1:-1, 1:-1]
        d = {
            "phi_x": (P[1:-1, 2:] - P[1:-1, :-2]) / (2 * hx),
            "phi_y": (P[2:, 1:-1] - P[:-2, 1:-1]) / (2 * hy),
            "phi_xx": (P[1:-1, 2:] - 2 * c + P[1:-1, :-2]) / (hx * hx),
            "phi_yy": (P[2:, 1:-1] - 2 * c + P[:-2, 1:-1]) / (hy * hy),
            "phi_xy": (P[2:, 2:] - P[2:, :-2] - P[:-2, 2:] + P[:-2, :-2]) / (4 * hx * hy),
        }
        xs = self.x[i0 + 1 : i1]
        ys = self.y[j0 + 1 : j1]
        out = {}
        for k, v in d.items():
            spl = _interpolate.RectBivariateSpline(ys, xs, v, kx=3, ky=3, s=0)
            out[k] = spl.ev(py, px)
        return out

    def field_at(self, px, py) -> dict:
        """``E`` (V/m), ``dE_dx``, ``dE_dy`` (V/m²) and ``E_dE_dy`` (V²/m³) at points (signed).

        Here ``x``, ``y`` are the cross-section axes (``y`` = deflection direction); the dict of
        :func:`field_at_beam` names the deflection direction ``dx`` instead.
        """
        d = self.derivatives_at(px, py)
        E = np.hypot(d["phi_x"], d["phi_y"])
        EdEy = d["phi_x"] * d["phi_xy"] + d["phi_y"] * d["phi_yy"]
        EdEx = d["phi_x"] * d["phi_xx"] + d["phi_y"] * d["phi_xy"]
        with np.errstate(divide="ignore", invalid="ignore"):
            return {
                "E": E,
                "dE_dx": np.where(E > 0, EdEx / E, 0.0),
                "dE_dy": np.where(E > 0, EdEy / E, 0.0),
                "E_dE_dy": EdEy,
            }

    def potential_at(self, px, py):
        """Bicubic interpolation of ``phi`` (use only away from electrodes)."""
        spl = _interpolate.RectBivariateSpline(self.y, self.x, self.phi, kx=3, ky=3, s=0)
        return spl.ev(np.asarray(py, dtype=float), np.asarray(px, dtype=float))


def grid_shape(box: BoundaryBox, h: float) -> tuple[int, int]:
    h = finite(h, "grid spacing h")
    if h <= 0:
        raise InputError(f"grid spacing h: expected > 0, found {h!r}")
    nx = max(math.ceil(box.width / h - 1e-9), 2) + 1
    ny = max(math.ceil(box.height / h - 1e-9), 2) + 1
    return nx, ny
