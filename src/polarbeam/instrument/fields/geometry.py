"""Cross-sections: electrodes in a box, validated, and the beam between them.

:class:`CrossSection` checks on construction that the electrodes stay inside the box and do not
overlap; :class:`Beam` is the rectangle over which the field factor is averaged;
:func:`two_wire_cross_section` builds the convex-cylinder / concave-trough pair of the analytic
two-wire field.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np

from polarbeam.errors import InputError
from polarbeam.instrument.fields.analytic import two_wire_constant
from polarbeam.instrument.fields.checks import finite, fmt_mm
from polarbeam.instrument.fields.shapes import ArcRegion, BoundaryBox, Circle, Electrode, Polygon

__all__ = ["Beam", "CrossSection", "two_wire_cross_section"]


@dataclass(frozen=True)
class Beam:
    """The beam cross-section: centre ``(x0, y0)`` (m), ``height`` along y, ``width`` along x."""

    x0: float
    y0: float
    height: float = 0.0
    width: float = 0.0

    def __post_init__(self):
        for k in ("x0", "y0", "height", "width"):
            object.__setattr__(self, k, finite(getattr(self, k), f"beam {k}"))
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
            f"beam at ({fmt_mm(self.x0)}, {fmt_mm(self.y0)}) mm, height {fmt_mm(self.height)}"
            f" mm, width {fmt_mm(self.width)} mm"
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
    a = finite(a, "two-wire a")
    y1 = finite(y1, "two-wire y1")
    y2 = finite(y2, "two-wire y2")
    if not (0 < y1 < a < y2):
        raise InputError(
            f"two-wire geometry: expected 0 < y1 < a < y2, found y1={fmt_mm(y1)} mm, "
            f"a={fmt_mm(a)} mm, y2={fmt_mm(y2)} mm"
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
        m = 0.25 * a if margin is None else finite(margin, "two-wire margin")
        half = max(r1, r2) + m
        box = BoundaryBox(-half, half, c1 - r1 - m, max(c2 + r2, y2) + m)
    convex = Circle((0.0, c1), r1, v1, name="convex")
    trough = ArcRegion((0.0, c2), r2, v2, side="outside", clip_offset=trough_clip, name="trough")
    return CrossSection((convex, trough), box)
