"""Deflector fields from electrode geometry, inside a campaign: the ``numerical`` model.

The ``numerical`` deflector model describes the electrode cross-section in ``campaign.toml``
(the two-wire pair by its parameters or radii, or any set of circles, clipped circles and
polygons with their potentials inside a grounded box), solves Laplace's equation for it with
:mod:`polarbeam.instrument.fields`, averages the field factor g = E·∂E/∂x / V² over the beam's
cross-section and hands the pipeline a deflector like any other model.

Cost and determinism
--------------------
:func:`polarbeam.extraction.context.build_context` differentiates the coupling with respect to
every stated input by finite differences of the *model*.  Solving Laplace's equation for every such
difference would be slow and, for steps far below the grid spacing, noisy.  Instead the
cross-section is solved once at the nominal geometry (three nested grids, Richardson-extrapolated)
and once at ``p ± max(σ, h/2)`` for every geometric input ``p`` that carries an error
(:func:`polarbeam.instrument.fields.propagate_tolerances`); the model the pipeline sees is the
first-order expansion ``g(p) = g0 (1 + Σ S_k (p_k − p0_k))`` with ``S_k = ∂ln g/∂p_k``.  The
pipeline's finite differences recover ``S_k`` exactly, the solves are cached per geometry, and the
direct solver makes every run bit-for-bit repeatable.

Numerical error and end effects
-------------------------------
The size of the Richardson correction (the estimated error of the finest grid, conservative for
the extrapolated value) becomes the stated input ``deflector: numerical field error``, a
multiplicative factor ``1 ± ε`` on g shared by every series.  End effects enter through an
effective length ``L_eff = L + c·gap`` (``fringe = "maxwell"``: c = 1/π, thin-plate edges;
``"coefficient"``: a stated c with its error; ``"numerical"``: c from a 2-D solve of the ends, its
grid error stated as ``deflector: fringe numerical error``), or through a measured map of the
relative field factor along the beam (``fringe = "map"``).

:func:`deflector_field` is the physics behind ``polarbeam field``: E, ∂E/∂x, E·∂E/∂x and g at
the beam for a given voltage, for every deflector model.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from polarbeam.errors import InputError
from polarbeam.instrument import fields as fs

__all__ = [
    "FIELD_ERROR_KEY",
    "FRINGE_ERROR_KEY",
    "NumericalDeflector",
    "NumericalModel",
    "NumericalSpec",
]

#: The two-wire cross-section by its line-charge parameters, or by its electrode radii and gap.
TWO_WIRE_LINES = ("line_half_spacing", "convex_crossing", "concave_crossing")
TWO_WIRE_RADII = ("convex_radius", "concave_radius", "gap")

#: Stated input carrying the mesh-refinement error of g (a factor 1 ± ε).
FIELD_ERROR_KEY = "deflector.numerical field error"
#: Stated input carrying the grid error of a numerically solved effective length (metres).
FRINGE_ERROR_KEY = "deflector.fringe numerical error"


# ---------------------------------------------------------------------------------------------
# The geometry description (parsed from [deflector])
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ElectrodeSpec:
    """One electrode of an ``electrodes`` cross-section; geometry read from stated keys."""

    shape: str
    name: str
    potential: float
    center: tuple[str, str] | None = None
    radius: str | None = None
    side: str = "outside"
    clip_normal: tuple[float, float] = (0.0, 1.0)
    clip_offset: str | None = None
    vertices: tuple[tuple[str, str], ...] = ()
    offset: tuple[str, str] | None = None

    def build(self, v: dict[str, float]) -> fs.Electrode:
        ox, oy = (v[self.offset[0]], v[self.offset[1]]) if self.offset else (0.0, 0.0)
        if self.shape == "polygon":
            verts = tuple((v[kx] + ox, v[ky] + oy) for kx, ky in self.vertices)
            return fs.Polygon(verts, self.potential, name=self.name)
        center = (v[self.center[0]] + ox, v[self.center[1]] + oy)
        if self.shape == "circle":
            return fs.Circle(center, v[self.radius], self.potential, name=self.name)
        nx, ny = self.clip_normal
        norm = math.hypot(nx, ny)
        clip = (v[self.clip_offset] if self.clip_offset else 0.0) + (nx * ox + ny * oy) / norm
        return fs.ArcRegion(
            center,
            v[self.radius],
            self.potential,
            side=self.side,
            clip_normal=self.clip_normal,
            clip_offset=clip,
            name=self.name,
        )


@dataclass(frozen=True)
class NumericalSpec:
    """What ``[deflector]`` of a ``numerical`` campaign says, with the stated keys to read.

    Every geometric number is read from the campaign's stated inputs by key (``deflector.…``),
    so the same spec builds the cross-section for any set of values.
    """

    source: str
    kind: str  # "two-wire", "two-wire radii" or "electrodes"
    potentials: str = "analytic"
    electrodes: tuple[ElectrodeSpec, ...] = ()
    boundary: tuple[str, str, str, str] | None = None
    grid_spacing: float | None = None
    grid_levels: int = 3
    fringe: str = "none"
    fringe_options: tuple[tuple[str, float], ...] = ()
    fringe_map: tuple[tuple[float, ...], tuple[float, ...]] | None = None
    geometry_keys: tuple[str, ...] = ()

    def two_wire(self, v: dict[str, float]) -> tuple[float, float, float]:
        """(a, y1, y2) of a two-wire cross-section."""
        if self.kind == "two-wire":
            return tuple(v[f"deflector.{k}"] for k in TWO_WIRE_LINES)
        r1, r2, gap = (v[f"deflector.{k}"] for k in TWO_WIRE_RADII)
        return fs.two_wire_from_radii(r1, r2, gap)

    def cross_section(self, v: dict[str, float], box: fs.BoundaryBox | None = None):
        """The electrodes (potentials in units of the applied voltage) inside the box."""
        if self.boundary is not None:
            box = fs.BoundaryBox(*(v[k] for k in self.boundary))
        if self.kind == "electrodes":
            return fs.CrossSection(tuple(e.build(v) for e in self.electrodes), box)
        a, y1, y2 = self.two_wire(v)
        return fs.two_wire_cross_section(a, y1, y2, 1.0, potentials=self.potentials, box=box)

    def beam(self, v: dict[str, float]) -> fs.Beam:
        if "deflector.beam_height" in v:
            y0 = v["deflector.beam_height"]
        else:  # two-wire default: 1.2 a, as for the analytic model
            y0 = 1.2 * self.two_wire(v)[0]
        return fs.Beam(
            v.get("deflector.beam_x", 0.0),
            y0,
            height=v.get("deflector.beam_thickness", 0.0),
            width=v.get("deflector.beam_width", 0.0),
        )

    def h(self, v: dict[str, float], box: fs.BoundaryBox) -> float:
        """Finest grid spacing: stated, else a/40 (two-wire) or 1/160 of the smaller box side."""
        if self.grid_spacing is not None:
            return self.grid_spacing
        if self.kind != "electrodes":
            return self.two_wire(v)[0] / 40.0
        return min(box.width, box.height) / 160.0

    def fringe_gap(self, v: dict[str, float]) -> float:
        if "deflector.fringe_gap" in v:
            return v["deflector.fringe_gap"]
        _a, y1, y2 = self.two_wire(v)
        return y2 - y1


# ---------------------------------------------------------------------------------------------
# Solving and the first-order model
# ---------------------------------------------------------------------------------------------


def solve_spec(spec: NumericalSpec, v: dict[str, float], box: fs.BoundaryBox | None):
    cs = spec.cross_section(v, box)
    beam = spec.beam(v)
    sol = fs.solve_deflector(cs, beam, spec.h(v, cs.box), levels=spec.grid_levels, solver="direct")
    return sol, fs.field_at_beam(sol)


@lru_cache(maxsize=512)
def field_factor_cached(spec: NumericalSpec, items: tuple, box) -> float:
    """g (m⁻³, per V² of applied voltage) for the geometry ``items`` (cached)."""
    _sol, d = solve_spec(spec, dict(items), box)
    return float(d["E_dE_dx_V2_per_m3"])


@dataclass(frozen=True, eq=False)
class NumericalModel:
    """The solved cross-section and its first-order expansion in the stated geometry.

    ``field_factor`` is g = E·∂E/∂x for a unit applied voltage (m⁻³), beam-averaged and
    Richardson-extrapolated; ``sensitivities`` are ∂ln g/∂p for the geometric inputs with an
    error; ``numerical_error`` is the mesh-refinement estimate on g (m⁻³).
    """

    spec: NumericalSpec
    nominal: dict[str, float]
    field: dict
    solution: fs.DeflectorSolution
    sensitivities: dict[str, float]
    steps: dict[str, float]
    fringe_coefficient: float = 0.0
    fringe_error: float = 0.0  # on L_eff (m), numerical end-field solve
    fringe_method: str = "none: the stated length is the effective length"

    @property
    def field_factor(self) -> float:
        return float(self.field["E_dE_dx_V2_per_m3"])

    @property
    def field_per_volt(self) -> float:
        return float(self.field["E_V_per_m"])

    @property
    def numerical_error(self) -> float:
        v0 = self.solution.cross_section.voltage
        return float(self.field["numerical_error_per_m3"]) * v0 * v0

    def field_factor_at(self, v: dict[str, float]) -> float:
        """First-order g at the values ``v`` (missing keys at nominal), times the error factor."""
        rel = 1.0 + sum(
            s * (v.get(k, self.nominal[k]) - self.nominal[k]) for k, s in self.sensitivities.items()
        )
        return self.field_factor * rel * v.get(FIELD_ERROR_KEY, 1.0)

    def deflector(self, v: dict[str, float]) -> NumericalDeflector:
        g = self.field_factor_at(v)
        if not g > 0:
            raise InputError(f"[deflector] numerical field factor: expected > 0, found {g!r}")
        entrance = v["deflector.entrance"]
        prof = None
        if self.spec.fringe == "map":
            z, rel = self.spec.fringe_map
            prof = (tuple(entrance + np.asarray(z)), tuple(np.asarray(rel) * g))
            length, ext = float(z[-1] - z[0]), 0.0
        else:
            length = v["deflector.length"]
            ext = 0.0
            if self.spec.fringe in ("maxwell", "numerical"):
                ext = 0.5 * self.fringe_coefficient * self.spec.fringe_gap(v)
            elif self.spec.fringe == "coefficient":
                ext = 0.5 * v["deflector.fringe_coefficient"] * self.spec.fringe_gap(v)
            ext += 0.5 * v.get(FRINGE_ERROR_KEY, 0.0)
        return NumericalDeflector(g, entrance, length, ext, self.field_per_volt, prof)


@dataclass(frozen=True)
class NumericalDeflector:
    """A solved cross-section acting over the effective length (or along a measured map)."""

    field_factor: float
    entrance: float
    length: float
    extension: float  # per end (m): L_eff = length + 2 extension
    field_per_volt: float
    map_profile: tuple[tuple[float, ...], tuple[float, ...]] | None = None
    model = "numerical"

    def __post_init__(self):
        if self.map_profile is None and not self.length + 2 * self.extension > 0:
            raise InputError(
                f"[deflector] length: expected an effective length > 0, found "
                f"{self.length + 2 * self.extension!r}"
            )

    @property
    def effective_length(self) -> float:
        return self.length + 2 * self.extension

    def profile(self):
        if self.map_profile is None:
            return None
        return tuple(np.asarray(p, dtype=float) for p in self.map_profile)

    @property
    def span(self) -> tuple[float, float]:
        if self.map_profile is not None:
            return float(self.map_profile[0][0]), float(self.map_profile[0][-1])
        return self.entrance - self.extension, self.entrance + self.length + self.extension
