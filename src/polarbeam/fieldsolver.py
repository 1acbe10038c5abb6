"""Deflector fields: a 2-D electrostatic solver for electrode cross-sections.

An electric deflector is a long pair of electrodes.  In its cross-section plane (``x``
horizontal, ``y`` along the deflection direction) the potential obeys Laplace's equation, with the
electrodes held at fixed potentials inside a grounded rectangular box.  A polarizable particle
feels the force ``F_y = alpha * E * dE/dy``, so what the pipeline needs from this stage is the
*field factor*

    g = E * dE/dy / V**2        (m^-3)

with ``E = |grad phi|`` and ``V`` the voltage between the electrodes, averaged over the beam's
rectangular cross-section.  Magnitudes are reported; the deflection points the way ``|E|`` grows.

Contents, in pipeline order:

* :func:`two_wire_analytic` -- the classic two-wire field (potential ``K arg((w-a)/(w+a))``,
  ``w = x + i y``), used as the reference solution.
* Geometry primitives (frozen dataclasses): :class:`Circle`, :class:`ArcRegion` (a circle's
  inside or outside clipped to a half-plane, e.g. a trough), :class:`Polygon`, the grounded
  :class:`BoundaryBox`, the :class:`CrossSection` that validates them, and the :class:`Beam`.
  :func:`two_wire_cross_section` builds the two-wire pair.
* :func:`solve_laplace` -- finite differences on a uniform grid (5-point Laplacian) with the
  Shortley-Weller treatment of curved Dirichlet boundaries, assembled vectorised in
  :mod:`scipy.sparse` and solved by SuperLU or, for big grids, algebraic multigrid (pyamg).
* :func:`solve_deflector` -- solves at ``h``, ``2h`` and ``4h``, evaluates ``E`` and ``dE/dy`` at
  the beam, Richardson-extrapolates and reports the observed order; :func:`field_at_beam` turns
  the result into the plain dict the rest of the pipeline reads.
* Fringe fields: :func:`maxwell_fringe_extension` (closed form for thin semi-infinite plates),
  :func:`fringe_extension_numerical` (a 2-D solve in the ``(z, y)`` plane) and
  :func:`effective_length_from_map` / :func:`read_fringe_map_csv` for a measured map.
* Tolerances: :func:`propagate_tolerances` (central finite differences) and
  :func:`monte_carlo_tolerances`.
* :func:`plot_cross_section` (matplotlib, imported lazily).

Everything is SI (metres, volts); lengths are printed in mm only in error messages.
"""

from __future__ import annotations

import csv
import importlib.util
import math
import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Literal, Union

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from scipy.integrate import trapezoid as _trapezoid  # np.trapezoid needs numpy >= 2
from scipy.interpolate import RectBivariateSpline

from .errors import InputError

__all__ = [
    "ArcRegion",
    "Beam",
    "BeamField",
    "BoundaryBox",
    "Circle",
    "CrossSection",
    "DeflectorSolution",
    "Electrode",
    "FieldSolution",
    "FringeResult",
    "MonteCarloResult",
    "Polygon",
    "ToleranceBudget",
    "beam_field",
    "effective_length",
    "effective_length_from_map",
    "field_at_beam",
    "fringe_extension_numerical",
    "maxwell_edge_field",
    "maxwell_fringe_extension",
    "monte_carlo_tolerances",
    "plot_cross_section",
    "propagate_tolerances",
    "read_fringe_map_csv",
    "solve_deflector",
    "solve_laplace",
    "two_wire_analytic",
    "two_wire_constant",
    "two_wire_cross_section",
    "two_wire_from_radii",
]

_MM = 1e3  # metres -> mm, for messages only

BoundaryMode = Literal["shortley-weller", "staircase"]
SolverMode = Literal["auto", "direct", "amg"]
_BOUNDARY_MODES = ("shortley-weller", "staircase")
_SOLVER_MODES = ("auto", "direct", "amg")
#: Above this many unknowns ``solver="auto"`` switches from SuperLU to multigrid (if installed).
DIRECT_SOLVER_LIMIT = 250_000


def _fmt_mm(v: float) -> str:
    return f"{v * _MM:.6g}"


def _finite(value, what: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{what}: expected a finite number, found {value!r}") from None
    if not math.isfinite(v):
        raise InputError(f"{what}: expected a finite number, found {value!r}")
    return v


def _point(value, what: str) -> tuple[float, float]:
    try:
        x, y = value
    except (TypeError, ValueError):
        raise InputError(f"{what}: expected a point (x, y), found {value!r}") from None
    return (_finite(x, what), _finite(y, what))


# ---------------------------------------------------------------------------------------------
# Analytic reference: the two-wire field
# ---------------------------------------------------------------------------------------------


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

    r1 = _finite(r_convex, "two-wire r_convex")
    r2 = _finite(r_trough, "two-wire r_trough")
    g = _finite(gap, "two-wire gap")
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
            f"two-wire geometry: gap {_fmt_mm(g)} mm is not reachable with r_convex="
            f"{_fmt_mm(r1)} mm, r_trough={_fmt_mm(r2)} mm (expected {_fmt_mm(lo)} < gap < "
            f"{_fmt_mm(hi)} mm)"
        )
    a = brentq(lambda t: gap_of(t) - g, 0.0, amax, xtol=1e-15 * amax, rtol=1e-14)
    y1 = r1 - math.sqrt(r1 * r1 - a * a)
    y2 = r2 + math.sqrt(r2 * r2 - a * a)
    return a, y1, y2


# ---------------------------------------------------------------------------------------------
# Geometry
# ---------------------------------------------------------------------------------------------

_HIT_EPS = 1e-12


def _circle_hits(px, py, axis: int, sign: int, length: float, cx, cy, r):
    """Parameters s (fraction of ``length``) where an axis-aligned segment meets a circle."""
    if axis == 0:
        along, across, c_along, c_across = px, py, cx, cy
    else:
        along, across, c_along, c_across = py, px, cy, cx
    disc = r * r - (across - c_across) ** 2
    ok = disc >= 0
    root = np.sqrt(np.where(ok, disc, 0.0))
    s1 = np.where(ok, (c_along - root - along) * sign / length, np.nan)
    s2 = np.where(ok, (c_along + root - along) * sign / length, np.nan)
    return s1, s2


def _first_valid(cands, valid_masks):
    best = None
    for s, m in zip(cands, valid_masks, strict=True):
        s = np.where(m & (s > _HIT_EPS) & (s <= 1.0 + 1e-12), s, np.inf)
        best = s if best is None else np.minimum(best, s)
    return best


@dataclass(frozen=True)
class Circle:
    """A cylindrical electrode: the closed disk of ``radius`` about ``center`` (m)."""

    center: tuple[float, float]
    radius: float
    potential: float
    name: str = "circle"

    def __post_init__(self):
        object.__setattr__(self, "center", _point(self.center, f"electrode '{self.name}' center"))
        r = _finite(self.radius, f"electrode '{self.name}' radius")
        if r <= 0:
            raise InputError(f"electrode '{self.name}' radius: expected > 0, found {r!r}")
        object.__setattr__(self, "radius", r)
        object.__setattr__(
            self, "potential", _finite(self.potential, f"electrode '{self.name}' potential")
        )

    @property
    def bounded(self) -> bool:
        return True

    def bounds(self) -> tuple[float, float, float, float]:
        cx, cy = self.center
        r = self.radius
        return (cx - r, cx + r, cy - r, cy + r)

    def signed_distance(self, x, y):
        """Distance to the circle, negative inside (exact)."""
        cx, cy = self.center
        return np.hypot(np.asarray(x) - cx, np.asarray(y) - cy) - self.radius

    def first_hit(self, px, py, axis: int, sign: int, length: float):
        """First fraction ``s`` in (0, 1] of the grid link from an outside point where it enters."""
        cx, cy = self.center
        s1, s2 = _circle_hits(px, py, axis, sign, length, cx, cy, self.radius)
        true = np.ones_like(s1, dtype=bool)
        return _first_valid((s1, s2), (true, true))

    def outline(self, box: BoundaryBox, n: int = 361):
        t = np.linspace(0, 2 * np.pi, n)
        cx, cy = self.center
        return cx + self.radius * np.cos(t), cy + self.radius * np.sin(t)

    def describe(self) -> str:
        cx, cy = self.center
        return f"Circle center ({_fmt_mm(cx)}, {_fmt_mm(cy)}) mm, radius {_fmt_mm(self.radius)} mm"


@dataclass(frozen=True)
class ArcRegion:
    """The inside or outside of a circle, clipped to the half-plane ``n . p >= clip_offset``.

    ``side="outside"`` with ``clip_normal=(0, 1)`` is a trough: the solid above a concave
    circular groove.  ``side="inside"`` gives a circular segment (a cylinder with a flat face).
    Unbounded regions are clipped to the :class:`BoundaryBox`.
    """

    center: tuple[float, float]
    radius: float
    potential: float
    side: Literal["inside", "outside"] = "outside"
    clip_normal: tuple[float, float] = (0.0, 1.0)
    clip_offset: float = 0.0
    name: str = "arc region"

    def __post_init__(self):
        object.__setattr__(self, "center", _point(self.center, f"electrode '{self.name}' center"))
        r = _finite(self.radius, f"electrode '{self.name}' radius")
        if r <= 0:
            raise InputError(f"electrode '{self.name}' radius: expected > 0, found {r!r}")
        object.__setattr__(self, "radius", r)
        object.__setattr__(
            self, "potential", _finite(self.potential, f"electrode '{self.name}' potential")
        )
        if self.side not in ("inside", "outside"):
            raise InputError(
                f"electrode '{self.name}' side: expected 'inside' or 'outside', found {self.side!r}"
            )
        nx, ny = _point(self.clip_normal, f"electrode '{self.name}' clip_normal")
        nn = math.hypot(nx, ny)
        if nn == 0:
            raise InputError(
                f"electrode '{self.name}' clip_normal: expected non-zero, found (0, 0)"
            )
        object.__setattr__(self, "clip_normal", (nx / nn, ny / nn))
        object.__setattr__(
            self, "clip_offset", _finite(self.clip_offset, f"electrode '{self.name}' clip_offset")
        )

    @property
    def bounded(self) -> bool:
        return self.side == "inside"

    def bounds(self) -> tuple[float, float, float, float]:
        if self.side == "inside":
            cx, cy = self.center
            r = self.radius
            return (cx - r, cx + r, cy - r, cy + r)
        return (-math.inf, math.inf, -math.inf, math.inf)

    def _sd_circle(self, x, y):
        cx, cy = self.center
        d = np.hypot(np.asarray(x) - cx, np.asarray(y) - cy) - self.radius
        return d if self.side == "inside" else -d

    def _sd_plane(self, x, y):
        nx, ny = self.clip_normal
        return self.clip_offset - (nx * np.asarray(x) + ny * np.asarray(y))

    def signed_distance(self, x, y):
        """Signed distance, negative inside; outside it is a lower bound (max of the two parts)."""
        return np.maximum(self._sd_circle(x, y), self._sd_plane(x, y))

    def first_hit(self, px, py, axis: int, sign: int, length: float):
        cx, cy = self.center
        s1, s2 = _circle_hits(px, py, axis, sign, length, cx, cy, self.radius)
        nx, ny = self.clip_normal
        e = (sign * length, 0.0) if axis == 0 else (0.0, sign * length)
        ne = nx * e[0] + ny * e[1]
        tol = 1e-9 * length
        cands, masks = [], []
        for s in (s1, s2):
            qx = px + np.nan_to_num(s) * e[0]
            qy = py + np.nan_to_num(s) * e[1]
            cands.append(s)
            masks.append(np.isfinite(s) & (self._sd_plane(qx, qy) <= tol))
        if abs(ne) > 1e-15:
            s3 = (self.clip_offset - (nx * px + ny * py)) / ne
            qx = px + s3 * e[0]
            qy = py + s3 * e[1]
            cands.append(s3)
            masks.append(self._sd_circle(qx, qy) <= tol)
        return _first_valid(cands, masks)

    def outline(self, box: BoundaryBox, n: int = 721):
        """Polygon outline of the region clipped to ``box`` (for plotting)."""
        xs = np.linspace(box.xmin, box.xmax, n)
        ys = np.linspace(box.ymin, box.ymax, n)
        X, Y = np.meshgrid(xs, ys)
        return X, Y, self.signed_distance(X, Y)

    def describe(self) -> str:
        cx, cy = self.center
        return (
            f"ArcRegion ({self.side} of circle center ({_fmt_mm(cx)}, {_fmt_mm(cy)}) mm, radius "
            f"{_fmt_mm(self.radius)} mm, clipped to n.p >= {_fmt_mm(self.clip_offset)} mm with "
            f"n = ({self.clip_normal[0]:.3g}, {self.clip_normal[1]:.3g}))"
        )


def _segments_intersect(p1, p2, p3, p4) -> bool:
    def orient(a, b, c):
        return (b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0])

    d1, d2 = orient(p3, p4, p1), orient(p3, p4, p2)
    d3, d4 = orient(p1, p2, p3), orient(p1, p2, p4)
    return (d1 * d2 < 0) and (d3 * d4 < 0)


@dataclass(frozen=True)
class Polygon:
    """A prismatic electrode with a simple polygonal cross-section (vertices in m, in order)."""

    vertices: tuple[tuple[float, float], ...]
    potential: float
    name: str = "polygon"

    def __post_init__(self):
        try:
            verts = tuple(
                _point(v, f"electrode '{self.name}' vertex {i}")
                for i, v in enumerate(self.vertices)
            )
        except TypeError:
            raise InputError(
                f"electrode '{self.name}' vertices: expected a sequence of (x, y), "
                f"found {self.vertices!r}"
            ) from None
        if len(verts) < 3:
            raise InputError(
                f"electrode '{self.name}' vertices: expected at least 3, found {len(verts)}"
            )
        n = len(verts)
        for i in range(n):
            for j in range(i + 2, n):
                if i == 0 and j == n - 1:
                    continue
                if _segments_intersect(verts[i], verts[(i + 1) % n], verts[j], verts[(j + 1) % n]):
                    raise InputError(
                        f"electrode '{self.name}' vertices: polygon edges {i} and {j} cross "
                        "(expected a simple polygon)"
                    )
        v = np.array(verts)
        area = 0.5 * np.sum(v[:, 0] * np.roll(v[:, 1], -1) - np.roll(v[:, 0], -1) * v[:, 1])
        if abs(area) == 0:
            raise InputError(f"electrode '{self.name}' vertices: polygon has zero area")
        object.__setattr__(self, "vertices", verts)
        object.__setattr__(
            self, "potential", _finite(self.potential, f"electrode '{self.name}' potential")
        )

    @property
    def bounded(self) -> bool:
        return True

    def bounds(self) -> tuple[float, float, float, float]:
        v = np.array(self.vertices)
        return (v[:, 0].min(), v[:, 0].max(), v[:, 1].min(), v[:, 1].max())

    def _edges(self):
        v = np.array(self.vertices)
        return v, np.roll(v, -1, axis=0)

    def signed_distance(self, x, y):
        """Exact signed distance (negative inside, even-odd rule)."""
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        shape = np.broadcast(x, y).shape
        px = np.broadcast_to(x, shape).ravel()[:, None]
        py = np.broadcast_to(y, shape).ravel()[:, None]
        a, b = self._edges()
        ax, ay, bx, by = a[:, 0], a[:, 1], b[:, 0], b[:, 1]
        ex, ey = bx - ax, by - ay
        ll = ex * ex + ey * ey
        t = np.clip(((px - ax) * ex + (py - ay) * ey) / ll, 0.0, 1.0)
        dist = np.hypot(px - ax - t * ex, py - ay - t * ey).min(axis=1)
        cond = (ay > py) != (by > py)
        xint = ax + (py - ay) * ex / np.where(ey == 0, 1.0, ey)
        inside = (np.count_nonzero(cond & (px < xint), axis=1) % 2) == 1
        return np.where(inside, -dist, dist).reshape(shape)

    def first_hit(self, px, py, axis: int, sign: int, length: float):
        px = np.asarray(px, dtype=float)[:, None]
        py = np.asarray(py, dtype=float)[:, None]
        a, b = self._edges()
        if axis == 0:
            along, across = px, py
            a_al, a_ac, b_al, b_ac = a[:, 0], a[:, 1], b[:, 0], b[:, 1]
        else:
            along, across = py, px
            a_al, a_ac, b_al, b_ac = a[:, 1], a[:, 0], b[:, 1], b[:, 0]
        d_ac = b_ac - a_ac
        straddle = (a_ac - across) * (b_ac - across) <= 0
        parallel = d_ac == 0
        frac = (across - a_ac) / np.where(parallel, 1.0, d_ac)
        hit_al = a_al + frac * (b_al - a_al)
        s = np.where(straddle & ~parallel, (hit_al - along) * sign / length, np.nan)
        # a link running along an edge meets it at the nearer end point
        on_line = parallel & (a_ac == across)
        s_a = np.where(on_line, (a_al - along) * sign / length, np.nan)
        s_b = np.where(on_line, (b_al - along) * sign / length, np.nan)
        cands = [s, s_a, s_b]
        best = np.full(px.shape[0], np.inf)
        for c in cands:
            c = np.where((c > _HIT_EPS) & (c <= 1.0 + 1e-12), c, np.inf)
            best = np.minimum(best, c.min(axis=1))
        return best

    def outline(self, box: BoundaryBox, n: int = 0):
        v = np.array((*self.vertices, self.vertices[0]))
        return v[:, 0], v[:, 1]

    def describe(self) -> str:
        x0, x1, y0, y1 = self.bounds()
        return (
            f"Polygon with {len(self.vertices)} vertices spanning x [{_fmt_mm(x0)}, {_fmt_mm(x1)}]"
            f" mm, y [{_fmt_mm(y0)}, {_fmt_mm(y1)}] mm"
        )


Electrode = Union[Circle, ArcRegion, Polygon]  # noqa: UP007 -- a runtime alias


@dataclass(frozen=True)
class BoundaryBox:
    """The rectangular outer boundary (m), a Dirichlet wall.

    ``potential`` is a number (0 V: grounded) or a callable ``phi(x, y)`` of arrays -- the latter
    for validation runs where the wall carries a known analytic potential.
    """

    xmin: float
    xmax: float
    ymin: float
    ymax: float
    potential: float | Callable = 0.0

    def __post_init__(self):
        for k in ("xmin", "xmax", "ymin", "ymax"):
            object.__setattr__(self, k, _finite(getattr(self, k), f"boundary box {k}"))
        if not (self.xmin < self.xmax and self.ymin < self.ymax):
            raise InputError(
                f"boundary box: expected xmin < xmax and ymin < ymax, found x [{self.xmin}, "
                f"{self.xmax}], y [{self.ymin}, {self.ymax}]"
            )
        if not callable(self.potential):
            object.__setattr__(self, "potential", _finite(self.potential, "boundary potential"))

    @property
    def width(self) -> float:
        return self.xmax - self.xmin

    @property
    def height(self) -> float:
        return self.ymax - self.ymin

    def wall_potential(self, x, y):
        if callable(self.potential):
            return np.broadcast_to(np.asarray(self.potential(x, y), dtype=float), np.shape(x))
        return np.full(np.shape(x), float(self.potential))

    def describe(self) -> str:
        return (
            f"x [{_fmt_mm(self.xmin)}, {_fmt_mm(self.xmax)}] mm, "
            f"y [{_fmt_mm(self.ymin)}, {_fmt_mm(self.ymax)}] mm"
        )


@dataclass(frozen=True)
class Beam:
    """The beam cross-section: centre ``(x0, y0)`` (m), ``height`` along y, ``width`` along x."""

    x0: float
    y0: float
    height: float = 0.0
    width: float = 0.0

    def __post_init__(self):
        for k in ("x0", "y0", "height", "width"):
            object.__setattr__(self, k, _finite(getattr(self, k), f"beam {k}"))
        if self.height < 0 or self.width < 0:
            raise InputError(
                f"beam: expected height >= 0 and width >= 0, found height={self.height!r}, "
                f"width={self.width!r}"
            )

    def corners(self):
        hx, hy = 0.5 * self.width, 0.5 * self.height
        return (self.x0 - hx, self.x0 + hx, self.y0 - hy, self.y0 + hy)

    def describe(self) -> str:
        return (
            f"beam at ({_fmt_mm(self.x0)}, {_fmt_mm(self.y0)}) mm, height {_fmt_mm(self.height)}"
            f" mm, width {_fmt_mm(self.width)} mm"
        )


_OVERLAP_SAMPLES = 241


@dataclass(frozen=True)
class CrossSection:
    """Electrodes inside a Dirichlet box; validated on construction.

    Bounded electrodes (circles, polygons, circular segments) must lie inside the box; unbounded
    ones (the outside of a circle) are clipped to it and must reach into it.  Electrodes may
    touch but not overlap.  Electrode nodes take precedence over the box wall where they meet it.
    """

    electrodes: tuple[Electrode, ...]
    box: BoundaryBox

    def __post_init__(self):
        els = tuple(self.electrodes)
        if not els:
            raise InputError("cross-section: expected at least one electrode, found none")
        for e in els:
            if not isinstance(e, Circle | ArcRegion | Polygon):
                raise InputError(
                    f"cross-section: expected Circle, ArcRegion or Polygon electrodes, found "
                    f"{type(e).__name__}"
                )
        names = [e.name for e in els]
        dup = {n for n in names if names.count(n) > 1}
        if dup:
            raise InputError(f"cross-section: electrode names must be unique, found {sorted(dup)}")
        object.__setattr__(self, "electrodes", els)
        b = self.box
        tol = 1e-9 * max(b.width, b.height)
        for e in els:
            if e.bounded:
                x0, x1, y0, y1 = e.bounds()
                if x0 < b.xmin - tol or x1 > b.xmax + tol or y0 < b.ymin - tol or y1 > b.ymax + tol:
                    raise InputError(
                        f"electrode '{e.name}' ({e.describe()}) extends outside the boundary box "
                        f"({b.describe()})"
                    )
            else:
                X, Y = self._samples((b.xmin, b.xmax, b.ymin, b.ymax))
                if not np.any(e.signed_distance(X, Y) < 0):
                    raise InputError(
                        f"electrode '{e.name}' ({e.describe()}) lies outside the boundary box "
                        f"({b.describe()})"
                    )
        for i, e1 in enumerate(els):
            for e2 in els[i + 1 :]:
                if self._overlap(e1, e2, tol):
                    raise InputError(
                        f"electrodes '{e1.name}' and '{e2.name}' overlap ({e1.describe()}; "
                        f"{e2.describe()})"
                    )

    def _samples(self, rect, n: int = _OVERLAP_SAMPLES):
        x0, x1, y0, y1 = rect
        return np.meshgrid(np.linspace(x0, x1, n), np.linspace(y0, y1, n))

    def _overlap(self, e1, e2, tol) -> bool:
        if isinstance(e1, Circle) and isinstance(e2, Circle):
            d = math.dist(e1.center, e2.center)
            return d < e1.radius + e2.radius - tol
        b = self.box
        r1, r2 = e1.bounds(), e2.bounds()
        rect = (
            max(r1[0], r2[0], b.xmin),
            min(r1[1], r2[1], b.xmax),
            max(r1[2], r2[2], b.ymin),
            min(r1[3], r2[3], b.ymax),
        )
        if rect[0] >= rect[1] or rect[2] >= rect[3]:
            return False
        X, Y = self._samples(rect)
        return bool(np.any((e1.signed_distance(X, Y) < -tol) & (e2.signed_distance(X, Y) < -tol)))

    @property
    def voltage(self) -> float:
        """Voltage between the electrodes: highest minus lowest electrode potential (V)."""
        p = [e.potential for e in self.electrodes]
        return max(p) - min(p)

    def electrode(self, name: str) -> Electrode:
        for e in self.electrodes:
            if e.name == name:
                return e
        raise InputError(
            f"cross-section: no electrode named {name!r} (have {[e.name for e in self.electrodes]})"
        )

    def check_beam(self, beam: Beam) -> None:
        """Raise :class:`InputError` if the beam leaves the box or touches an electrode."""
        x0, x1, y0, y1 = beam.corners()
        b = self.box
        if x0 <= b.xmin or x1 >= b.xmax or y0 <= b.ymin or y1 >= b.ymax:
            raise InputError(f"{beam.describe()} is not inside the boundary box ({b.describe()})")
        X, Y = np.meshgrid(np.linspace(x0, x1, 21), np.linspace(y0, y1, 21))
        for e in self.electrodes:
            if np.any(e.signed_distance(X, Y) <= 0):
                raise InputError(
                    f"{beam.describe()} overlaps electrode '{e.name}' ({e.describe()})"
                )

    def scaled(self, factor: float) -> CrossSection:
        """The same geometry with every electrode potential multiplied by ``factor``."""
        from dataclasses import replace

        box = self.box
        if not callable(box.potential):
            box = replace(box, potential=box.potential * factor)
        else:
            pot = box.potential
            box = replace(box, potential=lambda x, y: factor * pot(x, y))
        return CrossSection(
            tuple(replace(e, potential=e.potential * factor) for e in self.electrodes), box
        )


def two_wire_cross_section(
    a: float,
    y1: float,
    y2: float,
    voltage: float,
    *,
    potentials: Literal["analytic", "symmetric", "trough-grounded"] = "analytic",
    box: BoundaryBox | None = None,
    margin: float | None = None,
    trough_clip: float = 0.0,
) -> CrossSection:
    """The two-wire deflector: convex cylinder and concave trough.

    The convex electrode is the disk through ``(+-a, 0)`` and ``(0, y1)``; the trough is the
    outside of the circle through ``(+-a, 0)`` and ``(0, y2)``, clipped to ``y >= trough_clip``.
    With ``trough_clip = 0`` the free space between them is exactly the lune bounded by the two
    equipotential arcs of the analytic field, so the analytic potential is the exact solution there
    whatever the box does: the comparison with :func:`two_wire_analytic` is fair.

    Parameters
    ----------
    a, y1, y2
        Two-wire parameters (m), ``0 < y1 < a < y2``.
    voltage
        Voltage between the electrodes (V).
    potentials
        ``"analytic"``: the line-pair values ``K theta1`` (convex) and ``K theta2`` (trough), with
        ``theta = 2 arctan(a/y)`` -- the analytic potential is 0 at infinity, so a grounded box far
        away is consistent with it; ``"symmetric"``: ``+-V/2``; ``"trough-grounded"``: convex at
        ``V``, trough at 0.
    box
        Dirichlet box; default: grounded, enclosing the convex cylinder with ``margin``.
    margin
        Box margin (m); default ``0.25 a``.
    trough_clip
        The trough occupies ``y >= trough_clip`` outside its circle.
    """
    a = _finite(a, "two-wire a")
    y1 = _finite(y1, "two-wire y1")
    y2 = _finite(y2, "two-wire y2")
    if not (0 < y1 < a < y2):
        raise InputError(
            f"two-wire geometry: expected 0 < y1 < a < y2, found y1={_fmt_mm(y1)} mm, "
            f"a={_fmt_mm(a)} mm, y2={_fmt_mm(y2)} mm"
        )
    K = two_wire_constant(a, y1, y2, voltage)
    r1 = (a * a + y1 * y1) / (2 * y1)
    r2 = (a * a + y2 * y2) / (2 * y2)
    c1 = y1 - r1
    c2 = y2 - r2
    if potentials == "analytic":
        v1, v2 = 2 * K * math.atan(a / y1), 2 * K * math.atan(a / y2)
    elif potentials == "symmetric":
        v1, v2 = 0.5 * voltage, -0.5 * voltage
    elif potentials == "trough-grounded":
        v1, v2 = voltage, 0.0
    else:
        raise InputError(
            f"two-wire potentials: expected one of 'analytic', 'symmetric', 'trough-grounded', "
            f"found {potentials!r}"
        )
    if box is None:
        m = 0.25 * a if margin is None else _finite(margin, "two-wire margin")
        half = max(r1, r2) + m
        box = BoundaryBox(-half, half, c1 - r1 - m, max(c2 + r2, y2) + m)
    convex = Circle((0.0, c1), r1, v1, name="convex")
    trough = ArcRegion((0.0, c2), r2, v2, side="outside", clip_offset=trough_clip, name="trough")
    return CrossSection((convex, trough), box)


# ---------------------------------------------------------------------------------------------
# Finite-difference solver
# ---------------------------------------------------------------------------------------------


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
                f"(h = {_fmt_mm(max(hx, hy))} mm) of the evaluation region (e.g. node at "
                f"({_fmt_mm(xb)}, {_fmt_mm(yb)}) mm); use a finer grid or keep the beam further "
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
            spl = RectBivariateSpline(ys, xs, v, kx=3, ky=3, s=0)
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
        spl = RectBivariateSpline(self.y, self.x, self.phi, kx=3, ky=3, s=0)
        return spl.ev(np.asarray(py, dtype=float), np.asarray(px, dtype=float))


def _grid_shape(box: BoundaryBox, h: float) -> tuple[int, int]:
    h = _finite(h, "grid spacing h")
    if h <= 0:
        raise InputError(f"grid spacing h: expected > 0, found {h!r}")
    nx = max(math.ceil(box.width / h - 1e-9), 2) + 1
    ny = max(math.ceil(box.height / h - 1e-9), 2) + 1
    return nx, ny


def _classify(cs: CrossSection, X, Y, hx, hy):
    """Owner index per node (-1 free), signed distances near electrodes."""
    owner = np.full(X.shape, -1, dtype=np.int64)
    near = []  # per electrode: flat indices of nodes within one link of its surface
    scale = max(cs.box.width, cs.box.height)
    tol = 1e-12 * scale
    hmax = max(hx, hy)
    x1d = X[0]
    y1d = Y[:, 0]
    for k, e in enumerate(cs.electrodes):
        bx0, bx1, by0, by1 = e.bounds()
        i0 = np.searchsorted(x1d, bx0 - 1.01 * hmax)
        i1 = np.searchsorted(x1d, bx1 + 1.01 * hmax, side="right")
        j0 = np.searchsorted(y1d, by0 - 1.01 * hmax)
        j1 = np.searchsorted(y1d, by1 + 1.01 * hmax, side="right")
        if i0 >= i1 or j0 >= j1:
            near.append(np.empty(0, dtype=np.int64))
            continue
        sub = (slice(j0, j1), slice(i0, i1))
        sd = e.signed_distance(X[sub], Y[sub])
        inside = sd <= tol
        o = owner[sub]
        o[inside & (o < 0)] = k
        owner[sub] = o
        jj, ii = np.nonzero((sd > tol) & (sd <= 1.01 * hmax))
        near.append((jj + j0) * X.shape[1] + (ii + i0))
    return owner, near


def _assemble(cs: CrossSection, x, y, boundary: str):
    nx, ny = x.size, y.size
    hx, hy = x[1] - x[0], y[1] - y[0]
    X, Y = np.meshgrid(x, y)
    owner, near = _classify(cs, X, Y, hx, hy)
    N = nx * ny
    owner_f = owner.ravel()
    edge = np.zeros((ny, nx), dtype=bool)
    edge[0, :] = edge[-1, :] = edge[:, 0] = edge[:, -1] = True
    edge_f = edge.ravel()
    known = np.full(N, np.nan)
    wall = edge_f & (owner_f < 0)
    known[wall] = cs.box.wall_potential(X.ravel()[wall], Y.ravel()[wall])
    pots = np.array([e.potential for e in cs.electrodes])
    inel = owner_f >= 0
    known[inel] = pots[owner_f[inel]]
    free = ~(edge_f | inel)

    # four directions: (axis, sign, flat offset, spacing)
    dirs = [(0, +1, 1, hx), (0, -1, -1, hx), (1, +1, nx, hy), (1, -1, -nx, hy)]
    s = np.ones((4, N))
    sval = np.full((4, N), np.nan)  # boundary value at the cut point (where s < 1 or hit)
    hit = np.zeros((4, N), dtype=bool)
    if boundary == "shortley-weller":
        Xf, Yf = X.ravel(), Y.ravel()
        for k, e in enumerate(cs.electrodes):
            cand = near[k]
            cand = cand[free[cand]]
            if cand.size == 0:
                continue
            for d, (axis, sign, _off, hd) in enumerate(dirs):
                t = e.first_hit(Xf[cand], Yf[cand], axis, sign, hd)
                better = (t <= 1.0) & (~hit[d, cand] | (t < s[d, cand]))
                idx = cand[better]
                s[d, idx] = np.minimum(t[better], 1.0)
                sval[d, idx] = e.potential
                hit[d, idx] = True
    # neighbours inside an electrode but missed by the hit test (round-off): cut at the node
    fidx = np.nonzero(free)[0]
    for d, (_axis, _sign, off, _hd) in enumerate(dirs):
        nb = fidx + off
        miss = inel[nb] & ~hit[d, fidx]
        if boundary == "staircase":
            miss = inel[nb]
        m = fidx[miss]
        s[d, m] = 1.0
        sval[d, m] = known[m + off]
        hit[d, m] = True
    # nodes sitting on a surface (s ~ 0): snap them to the electrode potential
    snap_tol = 1e-6
    smin = s[:, fidx].min(axis=0)
    snap = fidx[smin < snap_tol]
    if snap.size:
        dmin = np.argmin(s[:, snap], axis=0)
        known[snap] = sval[dmin, snap]
        free[snap] = False
        fidx = np.nonzero(free)[0]
    n = fidx.size
    index = np.full(N, -1, dtype=np.int64)
    index[fidx] = np.arange(n)
    rows, cols, vals = [], [], []
    diag = np.zeros(n)
    rhs = np.zeros(n)
    h2 = hx * hy
    for pair in ((0, 1), (2, 3)):
        hd = dirs[pair[0]][3]
        sp_ = s[pair[0], fidx] * hd
        sm_ = s[pair[1], fidx] * hd
        for d, hh, ho in ((pair[0], sp_, sm_), (pair[1], sm_, sp_)):
            coef = 2.0 * h2 / (hh * (hh + ho))
            diag += coef
            off = dirs[d][2]
            nb = fidx + off
            is_hit = hit[d, fidx]
            unknown = ~is_hit & free[nb]
            kn = ~is_hit & ~free[nb]
            rhs[is_hit] += coef[is_hit] * sval[d, fidx[is_hit]]
            rhs[kn] += coef[kn] * known[nb[kn]]
            r = np.nonzero(unknown)[0]
            rows.append(r)
            cols.append(index[nb[unknown]])
            vals.append(-coef[unknown])
    rows.append(np.arange(n))
    cols.append(np.arange(n))
    vals.append(diag)
    A = sp.csr_matrix(
        (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(n, n)
    )
    regular = free & ~hit.any(axis=0)
    # a node is regular only if its neighbours are unknowns too (no wall/electrode node)
    for _axis, _sign, off, _hd in dirs:
        nb = np.clip(np.arange(N) + off, 0, N - 1)
        regular &= free[nb]
    return A, rhs, known, free, fidx, regular.reshape(ny, nx)


def _solve_linear(A, b, solver: str, tol: float):
    n = A.shape[0]
    if solver == "auto":
        solver = "direct"
        if n > DIRECT_SOLVER_LIMIT and importlib.util.find_spec("pyamg") is not None:
            solver = "amg"
    if solver == "direct":
        lu = spla.splu(A.tocsc(), permc_spec="COLAMD")
        return lu.solve(b), "direct (SuperLU)", {}
    try:
        import pyamg
    except ImportError:
        raise InputError(
            "solver 'amg': the optional package pyamg is not installed (pip install pyamg); "
            "use solver='direct'"
        ) from None
    ml = pyamg.ruge_stuben_solver(A)
    res: list[float] = []
    x = ml.solve(b, tol=tol, maxiter=200, accel="bicgstab", residuals=res)
    rel = float(np.linalg.norm(b - A @ x) / max(np.linalg.norm(b), 1e-300))
    if not rel <= max(10 * tol, 1e-12):
        raise RuntimeError(f"AMG did not converge: relative residual {rel:.3g} (tolerance {tol})")
    return x, "amg (pyamg Ruge-Stuben + BiCGStab)", {"iterations": len(res), "residual": rel}


def solve_laplace(
    cross_section: CrossSection,
    h: float | None = None,
    *,
    shape: tuple[int, int] | None = None,
    boundary: BoundaryMode = "shortley-weller",
    solver: SolverMode = "auto",
    tol: float = 1e-13,
) -> FieldSolution:
    """Solve Laplace's equation on a uniform grid covering the boundary box.

    Parameters
    ----------
    cross_section
        Electrodes and box.
    h
        Target grid spacing (m); the box is divided into whole cells, so the actual spacings
        ``hx``, ``hy`` are at most ``h``.  Give either ``h`` or ``shape``.
    shape
        Grid size ``(nx, ny)`` in nodes, including the box walls.
    boundary
        ``"shortley-weller"``: curved Dirichlet surfaces cut the grid links at their true
        position and the 3-point second difference uses the unequal arms (second-order);
        ``"staircase"``: nodes inside an electrode are simply held at its potential (first-order,
        kept for comparison).
    solver
        ``"direct"`` (SuperLU), ``"amg"`` (pyamg, optional) or ``"auto"`` (direct up to
        ``DIRECT_SOLVER_LIMIT`` unknowns).
    tol
        Relative residual for the multigrid solver (``E dE/dy`` involves second differences
        of ``phi``, so the default is near round-off: 1e-11 already shifts ``g`` by ~1e-7).
    """
    if boundary not in _BOUNDARY_MODES:
        raise InputError(f"boundary: expected one of {list(_BOUNDARY_MODES)}, found {boundary!r}")
    if solver not in _SOLVER_MODES:
        raise InputError(f"solver: expected one of {list(_SOLVER_MODES)}, found {solver!r}")
    box = cross_section.box
    if shape is None:
        if h is None:
            raise InputError("solve_laplace: give the grid spacing h or the grid shape (nx, ny)")
        nx, ny = _grid_shape(box, h)
    else:
        try:
            nx, ny = (int(v) for v in shape)
        except (TypeError, ValueError):
            raise InputError(f"grid shape: expected (nx, ny), found {shape!r}") from None
        if nx < 3 or ny < 3:
            raise InputError(f"grid shape: expected at least 3 x 3 nodes, found {nx} x {ny}")
    x = np.linspace(box.xmin, box.xmax, nx)
    y = np.linspace(box.ymin, box.ymax, ny)
    t0 = time.perf_counter()
    A, rhs, known, free, fidx, regular = _assemble(cross_section, x, y, boundary)
    t1 = time.perf_counter()
    u, used, info = _solve_linear(A, rhs, solver, tol)
    t2 = time.perf_counter()
    phi = known.copy()
    phi[fidx] = u
    info = {"assemble_s": t1 - t0, "solve_s": t2 - t1, **info}
    return FieldSolution(
        cross_section=cross_section,
        x=x,
        y=y,
        phi=phi.reshape(ny, nx),
        free=free.reshape(ny, nx),
        regular=regular,
        boundary=boundary,
        solver=used,
        n_unknowns=int(fidx.size),
        seconds=t2 - t0,
        info=info,
    )


# ---------------------------------------------------------------------------------------------
# Field at the beam, refinement, Richardson extrapolation
# ---------------------------------------------------------------------------------------------


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


def _beam_points(beam: Beam, n: int):
    """Gauss-Legendre nodes and weights (summing to 1) over the beam rectangle."""
    xg, wg = np.polynomial.legendre.leggauss(n)
    xs = beam.x0 + 0.5 * beam.width * xg if beam.width > 0 else np.array([beam.x0])
    wx = 0.5 * wg if beam.width > 0 else np.array([1.0])
    ys = beam.y0 + 0.5 * beam.height * xg if beam.height > 0 else np.array([beam.y0])
    wy = 0.5 * wg if beam.height > 0 else np.array([1.0])
    X, Y = np.meshgrid(xs, ys)
    W = np.outer(wy, wx)
    return X.ravel(), Y.ravel(), W.ravel()


def _beam_average(field_fn: Callable, beam: Beam, voltage: float, h: float, nq: int) -> BeamField:
    X, Y, W = _beam_points(beam, nq)
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


@dataclass(frozen=True, eq=False)
class DeflectorSolution:
    """Solutions at ``4h, 2h, h`` (coarse to fine), their beam averages and the extrapolation."""

    cross_section: CrossSection
    beam: Beam
    solutions: tuple[FieldSolution, ...]
    levels: tuple[BeamField, ...]
    extrapolated: BeamField
    observed_order: float
    order_used: float
    numerical_error: float

    @property
    def finest(self) -> FieldSolution:
        return self.solutions[-1]

    def summary(self, voltage: float | None = None) -> dict:
        """Plain dict for JSON (see :func:`field_at_beam`)."""
        return field_at_beam(self, voltage)

    def to_markdown(self) -> str:
        d = self.summary()
        rows = [
            "| grid h (mm) | g (m⁻³) |",
            "|---|---|",
            *(f"| {lv.h * _MM:.4g} | {abs(lv.field_factor):.6e} |" for lv in self.levels),
            f"| extrapolated | {d['field_factor_per_m3']:.6e} "
            f"± {d['numerical_error_per_m3']:.2e} |",
        ]
        return (
            f"Field factor at the {self.beam.describe()}\n\n"
            + "\n".join(rows)
            + f"\n\nobserved order {self.observed_order:.3g}, relative variation across the beam "
            f"{d['field_factor_rel_variation']:.3g}\n"
        )

    def _repr_html_(self) -> str:
        import html

        return "<pre>" + html.escape(self.to_markdown()) + "</pre>"


def _richardson(levels: Sequence[BeamField], nominal: float = 2.0):
    """Observed order, order used, extrapolated BeamField and error of the finest level."""
    fine = levels[-1]
    if len(levels) == 1:
        return math.nan, math.nan, fine, math.nan
    g = [lv.field_factor for lv in levels]
    d_f = g[-1] - g[-2]
    p_obs = math.nan
    p_used = nominal
    oscillating = False
    if len(levels) >= 3:
        d_c = g[-2] - g[-3]
        if d_f != 0 and d_c != 0 and d_f * d_c > 0:
            p_obs = math.log2(abs(d_c / d_f))
            # never assume faster convergence than the scheme's nominal order
            p_used = min(max(p_obs, 0.5), nominal)
        elif d_f != 0 or d_c != 0:
            oscillating = True
    factor = 1.0 / (2.0**p_used - 1.0)

    def extrap(name):
        a, b = getattr(levels[-1], name), getattr(levels[-2], name)
        return a + (a - b) * factor

    names = ("E", "dE_dx", "dE_dy", "E_dE_dy", "field_factor")
    ex = BeamField(
        h=0.0,
        **{n: extrap(n) for n in names},
        field_factor_min=fine.field_factor_min,
        field_factor_max=fine.field_factor_max,
        field_factor_rms=fine.field_factor_rms,
    )
    err = abs(d_f) * factor
    if oscillating:
        err = max(abs(g[-1] - g[-2]), abs(g[-2] - g[-3]))
        ex = fine
    return p_obs, p_used, ex, err


def solve_deflector(
    cross_section: CrossSection,
    beam: Beam,
    h: float,
    *,
    levels: int = 3,
    boundary: BoundaryMode = "shortley-weller",
    solver: SolverMode = "auto",
    quadrature: int = 6,
) -> DeflectorSolution:
    """Field factor at the beam with a mesh-refinement error estimate.

    Solves on nested grids with spacings ``2**(levels-1) h, ..., 2h, h`` (the finest is ``h``),
    averages the field over the beam on each, and Richardson-extrapolates the two finest with
    the observed order ``p = log2((g_4h - g_2h)/(g_2h - g_h))`` capped at the nominal 2 (a
    smaller observed order gives a larger, more cautious correction).  The numerical error is
    the size of the extrapolation correction; if the sequence is not monotonic it is the
    largest change between levels and no extrapolation is applied.
    """
    cross_section.check_beam(beam)
    levels = int(levels)
    if levels < 1:
        raise InputError(f"levels: expected >= 1, found {levels}")
    box = cross_section.box
    nx, ny = _grid_shape(box, h)
    step = 2 ** (levels - 1)
    cx = max(math.ceil((nx - 1) / step), 2)
    cy = max(math.ceil((ny - 1) / step), 2)
    sols, bfs = [], []
    for lv in range(levels):
        m = 2**lv
        sol = solve_laplace(
            cross_section, shape=(cx * m + 1, cy * m + 1), boundary=boundary, solver=solver
        )
        sols.append(sol)
        bfs.append(beam_field(sol, beam, quadrature=quadrature))
    p_obs, p_used, ex, err = _richardson(bfs)
    return DeflectorSolution(
        cross_section=cross_section,
        beam=beam,
        solutions=tuple(sols),
        levels=tuple(bfs),
        extrapolated=ex,
        observed_order=p_obs,
        order_used=p_used,
        numerical_error=err,
    )


def field_at_beam(
    solution: DeflectorSolution | FieldSolution,
    voltage: float | None = None,
    *,
    beam: Beam | None = None,
) -> dict:
    """The deflector field at the beam as a plain dict (SI, magnitudes).

    Parameters
    ----------
    solution
        A :class:`DeflectorSolution` (refinement levels, extrapolated values) or a single
        :class:`FieldSolution` (then ``beam`` is required and no numerical error is known).
    voltage
        Voltage between the electrodes (V) to report the field at; the problem is linear, so the
        field scales with ``voltage / V_solved`` (all Dirichlet values, box included, scaled
        together).  Default: the solved voltage.  ``g`` does not depend on it.

    Returns
    -------
    dict
        ``E_V_per_m``, ``dE_dx_V_per_m2``, ``E_dE_dx_V2_per_m3``, ``field_factor_per_m3`` (the
        key names use ``dx`` for the deflection direction, the cross-section ``y`` here),
        ``field_factor_rel_variation`` ((max - min)/mean across the beam),
        ``field_factor_rel_rms``, ``numerical_error_per_m3``, ``observed_order``,
        ``field_factor_finest_per_m3``, ``grid_h_m``, ``voltage_V`` and ``method``.
    """
    if isinstance(solution, DeflectorSolution):
        ex = solution.extrapolated
        fine = solution.levels[-1]
        err = solution.numerical_error
        order = solution.observed_order
        cs = solution.cross_section
        h = fine.h
        method = (
            f"finite differences ({solution.finest.boundary}), {len(solution.levels)} levels, "
            "Richardson-extrapolated"
        )
    elif isinstance(solution, FieldSolution):
        if beam is None:
            raise InputError("field_at_beam: a single FieldSolution needs beam=Beam(...)")
        ex = fine = beam_field(solution, beam)
        err = math.nan
        order = math.nan
        cs = solution.cross_section
        h = fine.h
        method = f"finite differences ({solution.boundary}), single grid"
    else:
        raise InputError(
            f"field_at_beam: expected a DeflectorSolution or FieldSolution, found "
            f"{type(solution).__name__}"
        )
    V0 = cs.voltage
    V = V0 if voltage is None else _finite(voltage, "field_at_beam voltage")
    k = V / V0
    g = abs(ex.field_factor)
    return {
        "E_V_per_m": abs(ex.E * k),
        "dE_dx_V_per_m2": abs(ex.dE_dy * k),
        "E_dE_dx_V2_per_m3": abs(ex.E_dE_dy) * k * k,
        "field_factor_per_m3": g,
        "field_factor_rel_variation": fine.rel_variation,
        "field_factor_rel_rms": fine.field_factor_rms / g if g > 0 else math.inf,
        "numerical_error_per_m3": err,
        "observed_order": order,
        "field_factor_finest_per_m3": abs(fine.field_factor),
        "grid_h_m": h,
        "voltage_V": V,
        "method": method,
    }


# ---------------------------------------------------------------------------------------------
# Fringe fields
# ---------------------------------------------------------------------------------------------


def maxwell_fringe_extension(gap: float) -> float:
    """Per-end extension of the effective length for a ``E**2``-weighted force: ``gap / (2 pi)``.

    For two thin semi-infinite plates at ``+-V/2`` (gap ``d = 2a``) Maxwell's conformal map
    ``z = (a/pi) (1 + w + exp(w))`` gives on the mid-plane ``E/E0 = 1/(1 + exp(u))`` at
    ``z = (a/pi)(1 + u + exp(u))``, so ``integral (E/E0)**2 dz`` over the fringe equals
    ``(a/pi) integral du/(1 + e**u)``, which exceeds the geometric length up to the plate edge by
    exactly ``a/pi = d/(2 pi)``.  The deflecting force ``alpha E dE/dy`` scales as ``E**2`` when
    the transverse shape of the field is preserved, so ``L_eff = L + d/pi`` for a deflector with
    two such ends (no end shields; derivation in this docstring, map from J. C. Maxwell,
    *A Treatise on Electricity and Magnetism*, vol. 1, art. 195-196).
    """
    d = _finite(gap, "fringe gap")
    if d <= 0:
        raise InputError(f"fringe gap: expected > 0, found {d!r}")
    return d / (2.0 * math.pi)


def maxwell_edge_field(x, y, gap: float, voltage: float) -> dict:
    """Field of two thin semi-infinite plates (Maxwell's condenser edge), closed form.

    Plates at ``y = +-gap/2`` for ``x <= 0`` at potentials ``+-voltage/2``.  With ``a = gap/2``
    the map ``z = (a/pi)(1 + w + exp(w))`` takes the strip ``|Im w| < pi`` onto the plane cut
    along the plates and ``phi = voltage Im(w) / (2 pi)``; ``w(z)`` is found by Newton's method.

    Returns
    -------
    dict
        ``potential`` (V), ``Ex``, ``Ey``, ``E`` (V/m) and ``u``, ``v`` (the map coordinates).
    """
    a = 0.5 * _finite(gap, "Maxwell edge gap")
    z = np.asarray(x, dtype=float) + 1j * np.asarray(y, dtype=float)
    zz = np.pi * z / a
    inner = (z.real < 0.0) & (np.abs(z.imag) < a)  # between the plates: u < 0
    w = np.where(inner, zz - 1.0, np.log(np.where(zz == 0, 1e-300, zz) + 1.0 + 0j))
    # near the plate edges z = +-i a the map is quadratic: z -+ i a = -(a / 2 pi) (w -+ i pi)^2
    for sgn in (1.0, -1.0):
        zt = z - sgn * 1j * a
        near = np.abs(zt) < 0.5 * a
        dl = np.sqrt(-2.0 * np.pi * zt / a + 0j)
        dl = np.where(sgn * dl.imag > 0, -dl, dl)  # stay inside the strip |Im w| <= pi
        w = np.where(near, sgn * 1j * np.pi + dl, w)
    for _ in range(200):
        ew = np.exp(np.minimum(w.real, 700.0)) * np.exp(1j * w.imag)
        F = 1.0 + w + ew - zz
        step = F / (1.0 + ew)
        big = np.abs(step) > 0.5
        step = np.where(big, 0.5 * step / np.abs(np.where(big, step, 1.0)), step)
        w = w - step
        w = w.real + 1j * np.clip(w.imag, -np.pi, np.pi)
        if np.all(np.abs(step) < 1e-15 * (1.0 + np.abs(w))):
            break
    dzdw = (a / np.pi) * (1.0 + np.exp(w))
    dphidw = voltage / (2.0 * np.pi)  # phi = Im(Omega), Omega = voltage w / (2 pi)
    dOmega_dz = dphidw / dzdw  # = phi_y + i phi_x
    return {
        "potential": voltage * w.imag / (2.0 * np.pi),
        "Ex": -dOmega_dz.imag,
        "Ey": -dOmega_dz.real,
        "E": np.abs(dOmega_dz),
        "u": w.real,
        "v": w.imag,
    }


@dataclass(frozen=True, eq=False)
class FringeResult:
    """Effective length from a longitudinal profile of the relative field factor."""

    length: float
    effective_length: float
    extension_per_end: float
    coefficient: float  # L_eff = L + coefficient * gap (both ends)
    z: np.ndarray
    g_rel: np.ndarray
    method: str
    numerical_error: float = math.nan  # on effective_length (m), from grid refinement

    def summary(self) -> dict:
        return {
            "length_m": self.length,
            "effective_length_m": self.effective_length,
            "extension_per_end_m": self.extension_per_end,
            "coefficient_per_gap": self.coefficient,
            "numerical_error_m": self.numerical_error,
            "method": self.method,
        }


def _midplane_profile(cs: CrossSection, cells: tuple[int, int], solver: str):
    sol = solve_laplace(cs, shape=(cells[0] + 1, cells[1] + 1), solver=solver)
    j0 = cells[1] // 2  # cells[1] is even: a grid line on y = 0
    E = np.abs((sol.phi[j0 + 1] - sol.phi[j0 - 1]) / (2 * sol.hy))
    Ec = float(np.interp(0.0, sol.x, E))
    g_rel = (E / Ec) ** 2
    return sol.x, g_rel, float(_trapezoid(g_rel, sol.x))


def fringe_extension_numerical(
    length: float,
    gap: float,
    *,
    thickness: float | None = None,
    shield_distance: float | None = None,
    shield_aperture: float | None = None,
    box_margin: float | None = None,
    h: float | None = None,
    solver: SolverMode = "auto",
) -> FringeResult:
    """Effective length from a 2-D solve in the ``(z, y)`` plane along the beam.

    Models the deflector ends as a pair of plates (gap ``gap``, ``thickness`` (default
    ``gap/10``), length ``length``) at ``+-1/2`` V centred in a grounded box reaching
    ``box_margin`` (default ``8 gap``) beyond them, optionally with grounded end shields (plates
    ``shield_distance`` beyond each end with a slit ``shield_aperture`` (default ``gap``) on the
    axis).  The relative field factor on the mid-plane is ``g_rel(z) = (E(z)/E(0))**2``
    (transverse field shape assumed preserved, see :func:`maxwell_fringe_extension`) and
    ``L_eff = integral g_rel dz``.  Solved at ``2h`` and ``h`` (default ``h = gap/40``); the
    difference is the numerical error (the plate corners limit the convergence to order ~4/3, so
    it bounds the fine-grid error).  The default grid takes a few seconds.  A curved-electrode
    deflector approximated by plates of the
    same on-axis gap is an approximation; a 3-D solve would be needed for better.
    """
    L = _finite(length, "fringe length")
    d = _finite(gap, "fringe gap")
    if L <= 0 or d <= 0:
        raise InputError(f"fringe: expected length > 0 and gap > 0, found {L!r}, {d!r}")
    t = 0.1 * d if thickness is None else _finite(thickness, "fringe thickness")
    m = 8.0 * d if box_margin is None else _finite(box_margin, "fringe box_margin")
    h = d / 40.0 if h is None else _finite(h, "fringe h")
    if t <= 0 or m <= 0 or h <= 0:
        raise InputError(
            f"fringe: expected thickness, box_margin and h > 0, found {t!r}, {m!r}, {h!r}"
        )
    half = 0.5 * L
    zmax = half + m
    ymax = 0.5 * d + t + m
    box = BoundaryBox(-zmax, zmax, -ymax, ymax, 0.0)

    def rect(z0, z1, y0, y1, pot, name):
        return Polygon(((z0, y0), (z1, y0), (z1, y1), (z0, y1)), pot, name=name)

    els = [
        rect(-half, half, 0.5 * d, 0.5 * d + t, 0.5, "upper"),
        rect(-half, half, -0.5 * d - t, -0.5 * d, -0.5, "lower"),
    ]
    sd = math.nan
    if shield_distance is not None:
        sd = _finite(shield_distance, "fringe shield_distance")
        ap = d if shield_aperture is None else _finite(shield_aperture, "fringe shield_aperture")
        if sd <= 0 or sd + t >= m or not (0 < ap < 2 * ymax):
            raise InputError(
                f"fringe shields: expected 0 < shield_distance < box_margin - thickness and "
                f"0 < aperture, found distance {_fmt_mm(sd)} mm, aperture {_fmt_mm(ap)} mm"
            )
        for sgn, tag in ((1, "right"), (-1, "left")):
            z0, z1 = sgn * (half + sd), sgn * (half + sd + t)
            za, zb = min(z0, z1), max(z0, z1)
            els.append(rect(za, zb, 0.5 * ap, ymax, 0.0, f"shield {tag} upper"))
            els.append(rect(za, zb, -ymax, -0.5 * ap, 0.0, f"shield {tag} lower"))
    cs = CrossSection(tuple(els), box)
    cz = max(math.ceil(2 * zmax / (2 * h)), 4)
    cy = max(math.ceil(2 * ymax / (2 * h)), 4)
    cy += cy % 2
    _z, _g, Lc = _midplane_profile(cs, (cz, cy), solver)
    z, g_rel, Leff = _midplane_profile(cs, (2 * cz, 2 * cy), solver)
    ext = 0.5 * (Leff - L)
    method = (
        f"2-D (z, y) finite-difference solve, plates gap {_fmt_mm(d)} mm, thickness "
        f"{_fmt_mm(t)} mm, grounded box {_fmt_mm(m)} mm beyond"
        + ("" if shield_distance is None else f", grounded shields at {_fmt_mm(sd)} mm")
    )
    return FringeResult(L, Leff, ext, 2 * ext / d, z, g_rel, method, abs(Leff - Lc))


def effective_length(
    length: float,
    gap: float,
    *,
    method: Literal["maxwell", "numerical"] = "maxwell",
    **numerical_options,
) -> FringeResult:
    """Effective deflector length ``L_eff = L + c * gap`` for an ``E**2``-weighted force.

    ``method="maxwell"``: ``c = 1/pi`` (two open ends, thin plates, see
    :func:`maxwell_fringe_extension`); ``method="numerical"``: ``c`` from
    :func:`fringe_extension_numerical` (finite thickness, grounded box, optional shields; keyword
    options are passed on).
    """
    L = _finite(length, "effective length: length")
    d = _finite(gap, "effective length: gap")
    if L <= 0 or d <= 0:
        raise InputError(f"effective length: expected length > 0 and gap > 0, found {L!r}, {d!r}")
    if method == "maxwell":
        ext = maxwell_fringe_extension(d)
        z = np.array([-0.5 * L - ext, -0.5 * L - ext, 0.5 * L + ext, 0.5 * L + ext])
        return FringeResult(
            L,
            L + 2 * ext,
            ext,
            2 * ext / d,
            z,
            np.array([0.0, 1.0, 1.0, 0.0]),
            "Maxwell thin-plate edge, E**2 weighted: L + gap/pi",
        )
    if method == "numerical":
        return fringe_extension_numerical(L, d, **numerical_options)
    raise InputError(
        f"effective length method: expected 'maxwell' or 'numerical', found {method!r}"
    )


def effective_length_from_map(
    z, g_rel, *, reference: float | None = None, where: str = "fringe map"
) -> FringeResult:
    """Effective length ``integral g(z) dz / g_ref`` of a field-factor map (trapezoid rule).

    Parameters
    ----------
    z
        Positions along the beam (m), strictly increasing; the map must reach where ``g`` is
        negligible on both sides.
    g_rel
        Field factor (any unit; relative is fine) at ``z``.
    reference
        The field factor of the uniform inner region; default: the maximum of ``g_rel``.
    """
    z = np.asarray(z, dtype=float)
    g = np.asarray(g_rel, dtype=float)
    if z.ndim != 1 or z.shape != g.shape or z.size < 3:
        raise InputError(
            f"{where}: expected z and g columns of equal length >= 3, found {z.shape} and {g.shape}"
        )
    if not (np.all(np.isfinite(z)) and np.all(np.isfinite(g))):
        raise InputError(f"{where}: expected finite numbers, found NaN or inf")
    bad = np.nonzero(np.diff(z) <= 0)[0]
    if bad.size:
        raise InputError(
            f"{where}: expected strictly increasing z, found z[{bad[0] + 1}] <= z[{bad[0]}]"
        )
    ref = float(g.max()) if reference is None else _finite(reference, f"{where} reference")
    if ref <= 0:
        raise InputError(f"{where}: expected a positive reference field factor, found {ref!r}")
    Leff = float(_trapezoid(g, z)) / ref
    return FringeResult(math.nan, Leff, math.nan, math.nan, z, g / ref, f"map integral ({where})")


def read_fringe_map_csv(path: str | Path) -> tuple[np.ndarray, np.ndarray]:
    """Read a fringe map CSV with columns ``z_m`` (or ``z_mm``) and ``g_rel``.

    Returns ``(z, g_rel)`` with ``z`` in metres.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise InputError(f"{p}: cannot read fringe map ({exc.strerror})") from None
    rows = list(csv.reader(line for line in text.splitlines() if not line.startswith("#")))
    if not rows:
        raise InputError(f"{p}: empty fringe map, expected header 'z_m,g_rel'")
    header = [c.strip() for c in rows[0]]
    if "g_rel" not in header or not ({"z_m", "z_mm"} & set(header)):
        raise InputError(f"{p}: expected columns 'z_m' (or 'z_mm') and 'g_rel', found {header}")
    zcol = "z_m" if "z_m" in header else "z_mm"
    scale = 1.0 if zcol == "z_m" else 1e-3
    iz, ig = header.index(zcol), header.index("g_rel")
    z, g = [], []
    for n, row in enumerate(rows[1:], start=2):
        if not row or all(not c.strip() for c in row):
            continue
        try:
            zv, gv = float(row[iz]), float(row[ig])
        except (ValueError, IndexError):
            raise InputError(
                f"{p} row {n}: expected numbers in '{zcol}' and 'g_rel', found {row}"
            ) from None
        if not (math.isfinite(zv) and math.isfinite(gv)):
            raise InputError(f"{p} row {n}: expected finite numbers, found {row}")
        z.append(zv * scale)
        g.append(gv)
    return np.array(z), np.array(g)


# ---------------------------------------------------------------------------------------------
# Tolerance propagation
# ---------------------------------------------------------------------------------------------


def _value_of(result) -> float:
    if isinstance(result, Mapping):
        return float(result["field_factor_per_m3"])
    return float(result)


def _check_params(params: Mapping) -> dict[str, tuple[float, float]]:
    if not params:
        raise InputError("tolerances: expected at least one parameter, found none")
    out = {}
    for name, vs in params.items():
        try:
            v, s = vs
        except (TypeError, ValueError):
            raise InputError(
                f"tolerances: parameter {name!r}: expected (value, sigma), found {vs!r}"
            ) from None
        v = _finite(v, f"tolerances: parameter {name!r} value")
        s = _finite(s, f"tolerances: parameter {name!r} sigma")
        if s < 0:
            raise InputError(f"tolerances: parameter {name!r}: expected sigma >= 0, found {s!r}")
        out[str(name)] = (v, s)
    return out


def _correlation_matrix(names, correlations):
    n = len(names)
    C = np.eye(n)
    for (a, b), rho in (correlations or {}).items():
        if a not in names or b not in names:
            raise InputError(f"tolerances: correlation ({a!r}, {b!r}) names an unknown parameter")
        rho = _finite(rho, f"tolerances: correlation ({a!r}, {b!r})")
        if not -1 <= rho <= 1:
            raise InputError(f"tolerances: correlation ({a!r}, {b!r}): expected in [-1, 1]")
        i, j = names.index(a), names.index(b)
        C[i, j] = C[j, i] = rho
    return C


@dataclass(frozen=True)
class ToleranceBudget:
    """Linear propagation of parameter tolerances into one output (the field factor)."""

    nominal: float
    sigma: float
    sensitivities: dict[str, float]  # d output / d parameter
    contributions: dict[str, float]  # |sensitivity| * sigma_parameter
    budget: dict[str, float]  # share of the variance (uncorrelated part), sums to 1 without corr.
    steps: dict[str, float]

    @property
    def relative_sigma(self) -> float:
        return self.sigma / abs(self.nominal) if self.nominal else math.inf

    def summary(self) -> dict:
        return {
            "nominal": self.nominal,
            "sigma": self.sigma,
            "relative_sigma": self.relative_sigma,
            "sensitivities": dict(self.sensitivities),
            "contributions": dict(self.contributions),
            "budget": dict(self.budget),
        }


def propagate_tolerances(
    builder: Callable[..., float | Mapping],
    params: Mapping[str, tuple[float, float]],
    *,
    step: float = 1.0,
    correlations: Mapping[tuple[str, str], float] | None = None,
) -> ToleranceBudget:
    """First-order propagation of tolerances by central finite differences.

    Parameters
    ----------
    builder
        ``builder(**values)`` returns the output (a float, or a dict with
        ``field_factor_per_m3`` as from :func:`field_at_beam`).
    params
        ``{name: (value, sigma)}`` (SI).
    step
        Difference step in units of each sigma (``value +- step*sigma``); 1 is the usual
        one-at-a-time tolerance study.  With a numerical solver the step must be large compared
        with the grid-induced noise of the output.
    correlations
        Optional ``{(name_a, name_b): rho}``.

    Returns
    -------
    ToleranceBudget
        ``sigma**2 = J C J^T`` with ``J_i = (df/dp_i) sigma_i`` and correlation matrix ``C``.
    """
    p = _check_params(params)
    names = list(p)
    base = {k: v for k, (v, _s) in p.items()}
    f0 = _value_of(builder(**base))
    sens, steps = {}, {}
    for k, (v, s) in p.items():
        if s == 0:
            sens[k] = 0.0
            steps[k] = 0.0
            continue
        dk = step * s
        up = _value_of(builder(**{**base, k: v + dk}))
        dn = _value_of(builder(**{**base, k: v - dk}))
        sens[k] = (up - dn) / (2 * dk)
        steps[k] = dk
    J = np.array([sens[k] * p[k][1] for k in names])
    C = _correlation_matrix(names, correlations)
    var = float(J @ C @ J)
    sigma = math.sqrt(max(var, 0.0))
    contrib = {k: float(abs(J[i])) for i, k in enumerate(names)}
    tot = float(np.sum(J**2))
    budget = {k: (float(J[i] ** 2 / tot) if tot > 0 else 0.0) for i, k in enumerate(names)}
    return ToleranceBudget(f0, sigma, sens, contrib, budget, steps)


@dataclass(frozen=True, eq=False)
class MonteCarloResult:
    """Monte Carlo propagation: mean, standard deviation and the samples."""

    mean: float
    sigma: float
    samples: np.ndarray

    @property
    def sigma_of_sigma(self) -> float:
        """Approximate standard error of ``sigma`` (Gaussian): ``sigma / sqrt(2 (n - 1))``."""
        return self.sigma / math.sqrt(2 * (self.samples.size - 1))


def monte_carlo_tolerances(
    builder: Callable[..., float | Mapping],
    params: Mapping[str, tuple[float, float]],
    *,
    n: int = 1000,
    seed: int | None = 0,
    correlations: Mapping[tuple[str, str], float] | None = None,
) -> MonteCarloResult:
    """Propagate Gaussian tolerances by sampling ``builder`` ``n`` times (cross-check)."""
    p = _check_params(params)
    names = list(p)
    n = int(n)
    if n < 2:
        raise InputError(f"monte carlo: expected n >= 2 samples, found {n}")
    C = _correlation_matrix(names, correlations)
    sig = np.array([p[k][1] for k in names])
    mu = np.array([p[k][0] for k in names])
    rng = np.random.default_rng(seed)
    draws = rng.multivariate_normal(mu, C * np.outer(sig, sig), size=n, method="eigh")
    out = np.array([_value_of(builder(**dict(zip(names, row, strict=True)))) for row in draws])
    return MonteCarloResult(float(out.mean()), float(out.std(ddof=1)), out)


# ---------------------------------------------------------------------------------------------
# Plot
# ---------------------------------------------------------------------------------------------


def plot_cross_section(
    solution: FieldSolution | DeflectorSolution,
    path: str | Path,
    *,
    beam: Beam | None = None,
    levels: int = 40,
    dpi: int = 150,
) -> Path:
    """Save equipotentials, electrodes and the beam rectangle to ``path`` (PNG, PDF, SVG...).

    matplotlib is imported here only (optional dependency ``polarbeam[plots]``).
    """
    try:
        from matplotlib.figure import Figure
        from matplotlib.patches import Rectangle
    except ImportError:
        raise InputError(
            "plot_cross_section: matplotlib is not installed (pip install matplotlib)"
        ) from None
    if isinstance(solution, DeflectorSolution):
        beam = beam or solution.beam
        solution = solution.finest
    cs = solution.cross_section
    box = cs.box
    fig = Figure(figsize=(6, 6 * box.height / box.width + 0.6))
    ax = fig.add_subplot()
    X, Y = np.meshgrid(solution.x * _MM, solution.y * _MM)
    phi = np.where(solution.free, solution.phi, np.nan)
    cset = ax.contour(X, Y, phi, levels=levels, linewidths=0.6, cmap="viridis")
    fig.colorbar(cset, ax=ax, label="potential (V)", shrink=0.8)
    for e in cs.electrodes:
        out = e.outline(box)
        if len(out) == 3:
            ax.contourf(out[0] * _MM, out[1] * _MM, out[2], levels=[-np.inf, 0], colors=["0.6"])
            ax.contour(out[0] * _MM, out[1] * _MM, out[2], levels=[0], colors="k", linewidths=1)
        else:
            ax.fill(out[0] * _MM, out[1] * _MM, color="0.6", ec="k", lw=1)
        bx0, bx1, by0, by1 = e.bounds()
        cx = np.clip(0.5 * (bx0 + bx1) if e.bounded else 0.0, box.xmin, box.xmax)
        cy = np.clip(0.5 * (by0 + by1) if e.bounded else box.ymax, box.ymin, box.ymax)
        ax.annotate(
            f"{e.name}\n{e.potential:.4g} V",
            (cx * _MM, cy * _MM),
            fontsize=7,
            ha="center",
            va="top" if not e.bounded else "center",
        )
    if beam is not None:
        x0, x1, y0, y1 = beam.corners()
        ax.add_patch(
            Rectangle(
                (x0 * _MM, y0 * _MM),
                max(x1 - x0, 1e-9) * _MM,
                max(y1 - y0, 1e-9) * _MM,
                fill=False,
                ec="r",
                lw=1.5,
            )
        )
        ax.plot([beam.x0 * _MM], [beam.y0 * _MM], "r+")
    ax.set_xlim(box.xmin * _MM, box.xmax * _MM)
    ax.set_ylim(box.ymin * _MM, box.ymax * _MM)
    ax.set_aspect("equal")
    ax.set_xlabel("x (mm)")
    ax.set_ylabel("y, deflection direction (mm)")
    p = Path(path)
    fig.savefig(p, dpi=dpi, bbox_inches="tight")
    return p
