"""Electrode shapes and the grounded box around them.

Each electrode is a frozen dataclass that knows its signed distance (negative inside) and where a
grid link leaving a free node first enters it (:meth:`first_hit`, the fraction of the link the
Shortley-Weller stencil needs).  :class:`Circle` is a cylinder, :class:`ArcRegion` the inside or
outside of a circle clipped to a half-plane (a trough), :class:`Polygon` any prism;
:class:`BoundaryBox` is the outer Dirichlet wall.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Literal, Union

import numpy as np

from polarbeam.errors import InputError
from polarbeam.instrument.fields.checks import finite, fmt_mm, point

__all__ = ["ArcRegion", "BoundaryBox", "Circle", "Electrode", "Polygon"]

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
        object.__setattr__(self, "center", point(self.center, f"electrode '{self.name}' center"))
        r = finite(self.radius, f"electrode '{self.name}' radius")
        if r <= 0:
            raise InputError(f"electrode '{self.name}' radius: expected > 0, found {r!r}")
        object.__setattr__(self, "radius", r)
        object.__setattr__(
            self, "potential", finite(self.potential, f"electrode '{self.name}' potential")
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
        return f"Circle center ({fmt_mm(cx)}, {fmt_mm(cy)}) mm, radius {fmt_mm(self.radius)} mm"


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
        object.__setattr__(self, "center", point(self.center, f"electrode '{self.name}' center"))
        r = finite(self.radius, f"electrode '{self.name}' radius")
        if r <= 0:
            raise InputError(f"electrode '{self.name}' radius: expected > 0, found {r!r}")
        object.__setattr__(self, "radius", r)
        object.__setattr__(
            self, "potential", finite(self.potential, f"electrode '{self.name}' potential")
        )
        if self.side not in ("inside", "outside"):
            raise InputError(
                f"electrode '{self.name}' side: expected 'inside' or 'outside', found {self.side!r}"
            )
        nx, ny = point(self.clip_normal, f"electrode '{self.name}' clip_normal")
        nn = math.hypot(nx, ny)
        if nn == 0:
            raise InputError(
                f"electrode '{self.name}' clip_normal: expected non-zero, found (0, 0)"
            )
        object.__setattr__(self, "clip_normal", (nx / nn, ny / nn))
        object.__setattr__(
            self, "clip_offset", finite(self.clip_offset, f"electrode '{self.name}' clip_offset")
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
            f"ArcRegion ({self.side} of circle center ({fmt_mm(cx)}, {fmt_mm(cy)}) mm, radius "
            f"{fmt_mm(self.radius)} mm, clipped to n.p >= {fmt_mm(self.clip_offset)} mm with "
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
                point(v, f"electrode '{self.name}' vertex {i}") for i, v in enumerate(self.vertices)
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
            self, "potential", finite(self.potential, f"electrode '{self.name}' potential")
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
            f"Polygon with {len(self.vertices)} vertices spanning x [{fmt_mm(x0)}, {fmt_mm(x1)}]"
            f" mm, y [{fmt_mm(y0)}, {fmt_mm(y1)}] mm"
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
            object.__setattr__(self, k, finite(getattr(self, k), f"boundary box {k}"))
        if not (self.xmin < self.xmax and self.ymin < self.ymax):
            raise InputError(
                f"boundary box: expected xmin < xmax and ymin < ymax, found x [{self.xmin}, "
                f"{self.xmax}], y [{self.ymin}, {self.ymax}]"
            )
        if not callable(self.potential):
            object.__setattr__(self, "potential", finite(self.potential, "boundary potential"))

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
            f"x [{fmt_mm(self.xmin)}, {fmt_mm(self.xmax)}] mm, "
            f"y [{fmt_mm(self.ymin)}, {fmt_mm(self.ymax)}] mm"
        )
