"""Deflector fields from electrode geometry, inside a campaign: the ``numerical`` model.

The ``numerical`` deflector model describes the electrode cross-section in ``campaign.toml``
(the two-wire pair by its parameters or radii, or any set of circles, clipped circles and
polygons with their potentials inside a grounded box), solves Laplace's equation for it with
:mod:`polarbeam.instrument.fields`, averages the field factor g = E·∂E/∂x / V² over the beam's
cross-section and hands the pipeline a deflector like any other model.

Cost and determinism
--------------------
:func:`polarbeam.pipeline.analysis.build_context` differentiates the coupling with respect to every stated
input by finite differences of the *model*.  Solving Laplace's equation for every such
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

import json
import math
from collections import OrderedDict
from dataclasses import dataclass, field, replace
from functools import lru_cache
from pathlib import Path
from typing import Any

import numpy as np

from polarbeam.instrument import fields as fs
from polarbeam.errors import InputError, QuantityError
from polarbeam.quantities import Measured, parse_quantity

__all__ = [
    "FIELD_ERROR_KEY",
    "FRINGE_ERROR_KEY",
    "NUMERICAL_KEYS",
    "FieldReport",
    "NumericalDeflector",
    "NumericalModel",
    "NumericalSpec",
    "deflector_field",
    "field_factor_sensitivities",
    "numerical_deflector",
    "numerical_error_inputs",
    "numerical_model",
    "numerical_stated_inputs",
    "parse_numerical_spec",
]

#: Stated input carrying the mesh-refinement error of g (a factor 1 ± ε).
FIELD_ERROR_KEY = "deflector.numerical field error"
#: Stated input carrying the grid error of a numerically solved effective length (metres).
FRINGE_ERROR_KEY = "deflector.fringe numerical error"

#: ``[deflector]`` keys of the numerical model → SI unit (None: not a quantity).
NUMERICAL_KEYS: dict[str, str | None] = {
    "line_half_spacing": "m",
    "convex_crossing": "m",
    "concave_crossing": "m",
    "convex_radius": "m",
    "concave_radius": "m",
    "gap": "m",
    "potentials": None,
    "electrodes": None,
    "boundary": "m",
    "beam_height": "m",
    "beam_x": "m",
    "beam_width": "m",
    "beam_thickness": "m",
    "grid_spacing": "m",
    "grid_levels": None,
    "fringe": None,
    "fringe_gap": "m",
    "fringe_coefficient": "",
    "fringe_map": None,
    "fringe_thickness": "m",
    "fringe_shield_distance": "m",
    "fringe_shield_aperture": "m",
    "fringe_grid_spacing": "m",
}

_TWO_WIRE_LINES = ("line_half_spacing", "convex_crossing", "concave_crossing")
_TWO_WIRE_RADII = ("convex_radius", "concave_radius", "gap")
_POTENTIALS = ("analytic", "symmetric", "trough-grounded")
_FRINGES = ("none", "maxwell", "coefficient", "numerical", "map")
_SHAPES = ("circle", "arc", "polygon")
_ELECTRODE_KEYS = {
    "circle": {"shape", "name", "potential", "center", "radius", "offset"},
    "arc": {
        "shape",
        "name",
        "potential",
        "center",
        "radius",
        "side",
        "clip_normal",
        "clip_offset",
        "offset",
    },
    "polygon": {"shape", "name", "potential", "vertices", "offset"},
}
#: Options of the numerical end-field solve (exact values: the solve is cached), TOML key →
#: argument of :func:`polarbeam.instrument.fields.fringe_extension_numerical`.
_FRINGE_OPTIONS = {
    "fringe_thickness": "thickness",
    "fringe_shield_distance": "shield_distance",
    "fringe_shield_aperture": "shield_aperture",
    "fringe_grid_spacing": "h",
}
#: Length of the plate pair in the numerical end-field solve, in gaps: the per-end extension no
#: longer depends on the length once it exceeds a few gaps.
_FRINGE_MODEL_LENGTH = 6.0
_MODEL_CACHE: OrderedDict[tuple, NumericalModel] = OrderedDict()
_MODEL_CACHE_SIZE = 16


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
            return tuple(v[f"deflector.{k}"] for k in _TWO_WIRE_LINES)
        r1, r2, gap = (v[f"deflector.{k}"] for k in _TWO_WIRE_RADII)
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


def _where(fname: str, key: str) -> str:
    return f"{fname} [deflector] {key}"


def _quantity(raw, unit: str, where: str, exact: bool = False) -> Measured:
    m = parse_quantity(raw, unit, where=where)
    if exact and m.error > 0:
        raise QuantityError(f"{where}: expected an exact value (no ± error), found {raw!r}")
    return m


def _pair(raw, where: str) -> list:
    if not (isinstance(raw, list) and len(raw) == 2):
        raise InputError(f"{where}: expected a list of two quantities [x, y], found {raw!r}")
    return raw


def _parse_electrodes(raw, fname: str, stated: dict[str, Measured]) -> tuple[ElectrodeSpec, ...]:
    where0 = _where(fname, "electrodes")
    if not (isinstance(raw, list) and raw and all(isinstance(e, dict) for e in raw)):
        raise InputError(
            f"{where0}: expected an array of tables ([[deflector.electrodes]]) with at least one "
            f"electrode, found {raw!r}"
        )
    out, names = [], set()
    for i, tab in enumerate(raw):
        w = f"{where0}[{i}]"
        shape = tab.get("shape")
        if shape not in _SHAPES:
            raise InputError(f"{w} shape: expected one of {', '.join(_SHAPES)}, found {shape!r}")
        bad = sorted(set(tab) - _ELECTRODE_KEYS[shape])
        if bad:
            raise InputError(
                f"{w}: unknown key(s) {', '.join(repr(k) for k in bad)} for shape {shape!r}; "
                f"expected {', '.join(sorted(_ELECTRODE_KEYS[shape]))}"
            )
        name = tab.get("name", f"electrode{i + 1}")
        if not (isinstance(name, str) and name and not set(name) & set(".[]")):
            raise InputError(f"{w} name: expected a string without '.', '[' or ']', found {name!r}")
        if name in names:
            raise InputError(f"{w} name: electrode names must be unique, found {name!r} twice")
        names.add(name)
        if "potential" not in tab:
            raise InputError(f"{w} potential: required (in units of the applied voltage)")
        pot = _quantity(tab["potential"], "", f"{w} potential", exact=True).value
        w = f"{where0}[{i}] ({name})"

        def q(key, raw, unit="m", w=w, name=name):
            k = f"deflector.{name}.{key}"
            stated[k] = _quantity(raw, unit, f"{w} {key}")
            return k

        kw: dict[str, Any] = {}
        if "offset" in tab:
            ox, oy = _pair(tab["offset"], f"{w} offset")
            kw["offset"] = (q("offset[0]", ox), q("offset[1]", oy))
        if shape == "polygon":
            verts = tab.get("vertices")
            if not (isinstance(verts, list) and len(verts) >= 3):
                raise InputError(
                    f"{w} vertices: expected a list of at least three [x, y] points, found "
                    f"{verts!r}"
                )
            keys = []
            for j, pt in enumerate(verts):
                x, y = _pair(pt, f"{w} vertices[{j}]")
                keys.append((q(f"vertices[{j}][0]", x), q(f"vertices[{j}][1]", y)))
            kw["vertices"] = tuple(keys)
        else:
            for key in ("center", "radius"):
                if key not in tab:
                    raise InputError(f"{w} {key}: required for shape {shape!r}")
            cx, cy = _pair(tab["center"], f"{w} center")
            kw["center"] = (q("center[0]", cx), q("center[1]", cy))
            kw["radius"] = q("radius", tab["radius"])
        if shape == "arc":
            side = tab.get("side", "outside")
            if side not in ("inside", "outside"):
                raise InputError(f"{w} side: expected 'inside' or 'outside', found {side!r}")
            kw["side"] = side
            if "clip_normal" in tab:
                n = _pair(tab["clip_normal"], f"{w} clip_normal")
                if not all(isinstance(c, int | float) and not isinstance(c, bool) for c in n):
                    raise InputError(f"{w} clip_normal: expected two numbers, found {n!r}")
                if n[0] == 0 and n[1] == 0:
                    raise InputError(f"{w} clip_normal: expected a non-zero vector, found {n!r}")
                kw["clip_normal"] = (float(n[0]), float(n[1]))
            if "clip_offset" in tab:
                kw["clip_offset"] = q("clip_offset", tab["clip_offset"])
        out.append(ElectrodeSpec(shape, name, pot, **kw))
    pots = [e.potential for e in out]
    if len(out) < 1 or not math.isclose(max(pots) - min(pots), 1.0, rel_tol=1e-9):
        raise InputError(
            f"{where0}: potentials are fractions of the applied voltage V, so the highest and "
            f"lowest must differ by exactly 1 (e.g. 0.5 and -0.5, or 1 and 0); found "
            f"{sorted(set(pots))}"
        )
    return tuple(out)


def _fringe_map(raw, fname: str, base: Path | None):
    if not isinstance(raw, str):
        raise InputError(f"{_where(fname, 'fringe_map')}: expected a file path, found {raw!r}")
    path = (Path(base or ".") / raw).resolve()
    if not path.is_file():
        raise InputError(f"[deflector] fringe_map: file not found: {path}")
    z, g = fs.read_fringe_map_csv(path)
    res = fs.effective_length_from_map(z, g, where=str(path.name))  # validates the columns
    return tuple(float(x) for x in z), tuple(float(x) for x in res.g_rel)


def parse_numerical_spec(
    defl: dict, fname: str, base: Path | None = None
) -> tuple[NumericalSpec, dict[str, Measured]]:
    """Validate ``[deflector]`` of a numerical campaign; the spec and its stated inputs (SI).

    ``base`` is the folder of ``campaign.toml`` (for ``fringe_map``); without it the map file is
    not read.
    """
    stated: dict[str, Measured] = {}

    def q(key, exact=False):
        stated[f"deflector.{key}"] = _quantity(
            defl[key], NUMERICAL_KEYS[key] or "", _where(fname, key), exact=exact
        )

    present = {
        "two-wire": any(k in defl for k in _TWO_WIRE_LINES),
        "two-wire radii": any(k in defl for k in _TWO_WIRE_RADII),
        "electrodes": "electrodes" in defl,
    }
    chosen = [k for k, on in present.items() if on]
    if len(chosen) != 1:
        raise InputError(
            f"{_where(fname, 'model')}: 'numerical' expects exactly one cross-section: the "
            "two-wire parameters (line_half_spacing, convex_crossing, concave_crossing), the "
            "two-wire radii (convex_radius, concave_radius, gap) or a list of electrodes; found "
            + (" and ".join(chosen) if chosen else "none")
        )
    kind = chosen[0]
    spec_kw: dict[str, Any] = {"kind": kind, "source": fname}
    if kind in ("two-wire", "two-wire radii"):
        need = _TWO_WIRE_LINES if kind == "two-wire" else _TWO_WIRE_RADII
        for k in need:
            if k not in defl:
                given = ", ".join(k2 for k2 in need if k2 in defl)
                raise InputError(f"{_where(fname, k)}: required with {given}")
            q(k)
        pot = defl.get("potentials", "analytic")
        if pot not in _POTENTIALS:
            raise InputError(
                f"{_where(fname, 'potentials')}: expected one of {', '.join(_POTENTIALS)}, "
                f"found {pot!r}"
            )
        spec_kw["potentials"] = pot
    else:
        if "potentials" in defl:
            raise InputError(
                f"{_where(fname, 'potentials')}: not used with electrodes (each electrode has "
                "its own potential); remove it"
            )
        spec_kw["electrodes"] = _parse_electrodes(defl["electrodes"], fname, stated)
        if "boundary" not in defl:
            raise InputError(
                f"{_where(fname, 'boundary')}: required with electrodes (the grounded box as "
                '["xmin", "xmax", "ymin", "ymax"])'
            )
        if "beam_height" not in defl:
            raise InputError(
                f"{_where(fname, 'beam_height')}: required with electrodes (beam centre along "
                "the deflection direction)"
            )
    if "boundary" in defl:
        b = defl["boundary"]
        if not (isinstance(b, list) and len(b) == 4):
            raise InputError(
                f"{_where(fname, 'boundary')}: expected four quantities [xmin, xmax, ymin, ymax], "
                f"found {b!r}"
            )
        keys = []
        for i, raw in enumerate(b):
            k = f"deflector.boundary[{i}]"
            stated[k] = _quantity(raw, "m", f"{_where(fname, 'boundary')}[{i}]")
            keys.append(k)
        spec_kw["boundary"] = tuple(keys)
    for k in ("beam_height", "beam_x", "beam_width", "beam_thickness"):
        if k in defl:
            q(k)
    for k in ("beam_width", "beam_thickness"):
        if k in stated and stated[k].value < 0:
            raise InputError(f"{_where(fname, k)}: expected >= 0, found {defl[k]!r}")
    if "grid_spacing" in defl:
        q("grid_spacing", exact=True)
        spec_kw["grid_spacing"] = stated.pop("deflector.grid_spacing").value
        if not spec_kw["grid_spacing"] > 0:
            raise InputError(f"{_where(fname, 'grid_spacing')}: expected > 0")
    if "grid_levels" in defl:
        lv = defl["grid_levels"]
        if not (isinstance(lv, int) and not isinstance(lv, bool) and 2 <= lv <= 5):
            raise InputError(
                f"{_where(fname, 'grid_levels')}: expected an integer 2..5, found {lv!r}"
            )
        spec_kw["grid_levels"] = lv
    fr = defl.get("fringe", "none")
    if fr not in _FRINGES:
        raise InputError(
            f"{_where(fname, 'fringe')}: expected one of {', '.join(_FRINGES)}, found {fr!r}"
        )
    spec_kw["fringe"] = fr
    allowed = {
        "none": set(),
        "maxwell": {"fringe_gap"},
        "coefficient": {"fringe_gap", "fringe_coefficient"},
        "numerical": {"fringe_gap", *_FRINGE_OPTIONS},
        "map": {"fringe_map"},
    }[fr]
    fringe_keys = {k for k in NUMERICAL_KEYS if k.startswith("fringe_")}
    for k in sorted((fringe_keys - allowed) & set(defl)):
        raise InputError(f"{_where(fname, k)}: not used with fringe = {fr!r}; remove it")
    if fr == "coefficient" and "fringe_coefficient" not in defl:
        raise InputError(
            f"{_where(fname, 'fringe_coefficient')}: required with fringe = 'coefficient'"
        )
    if fr in ("maxwell", "coefficient", "numerical") and kind == "electrodes":
        if "fringe_gap" not in defl:
            raise InputError(
                f"{_where(fname, 'fringe_gap')}: required with electrodes and fringe = {fr!r} "
                "(the electrode gap the end field scales with)"
            )
    if "fringe_gap" in defl:
        q("fringe_gap")
    if "fringe_coefficient" in defl:
        q("fringe_coefficient")
    opts = []
    for k, arg in _FRINGE_OPTIONS.items():
        if k in defl:
            q(k, exact=True)
            opts.append((arg, stated.pop(f"deflector.{k}").value))
    spec_kw["fringe_options"] = tuple(opts)
    if fr == "map":
        if "length" in defl:
            raise InputError(
                f"{_where(fname, 'length')}: not used with fringe = 'map' (the map's extent "
                "replaces it); remove it"
            )
        if base is not None:
            spec_kw["fringe_map"] = _fringe_map(defl["fringe_map"], fname, base)
    elif "length" not in defl:
        raise InputError(f"{_where(fname, 'length')}: required for model 'numerical'")
    spec_kw["geometry_keys"] = tuple(
        k for k in stated if k not in ("deflector.fringe_gap", "deflector.fringe_coefficient")
    )
    return NumericalSpec(**spec_kw), stated


def numerical_stated_inputs(defl: dict, fname: str) -> dict[str, Measured]:
    """Stated inputs of a numerical ``[deflector]`` (called while the campaign is loaded)."""
    return parse_numerical_spec(defl, fname)[1]


# ---------------------------------------------------------------------------------------------
# Solving and the first-order model
# ---------------------------------------------------------------------------------------------


def _solve(spec: NumericalSpec, v: dict[str, float], box: fs.BoundaryBox | None):
    cs = spec.cross_section(v, box)
    beam = spec.beam(v)
    sol = fs.solve_deflector(cs, beam, spec.h(v, cs.box), levels=spec.grid_levels, solver="direct")
    return sol, fs.field_at_beam(sol)


@lru_cache(maxsize=512)
def _field_factor_cached(spec: NumericalSpec, items: tuple, box) -> float:
    """g (m⁻³, per V² of applied voltage) for the geometry ``items`` (cached)."""
    _sol, d = _solve(spec, dict(items), box)
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


def _model_key(c) -> tuple:
    defl = c.raw.get("deflector", {})
    derived = (FIELD_ERROR_KEY, FRINGE_ERROR_KEY)  # added after the solve: not part of the key
    geom = sorted(
        (k, m.value, m.error)
        for k, m in c.stated.items()
        if k.startswith("deflector.") and k not in derived
    )
    extra = ()
    fm = defl.get("fringe_map")
    if isinstance(fm, str):
        p = (c.path.parent / fm).resolve()
        st = p.stat() if p.is_file() else None
        extra = (str(p), st.st_mtime_ns if st else None, st.st_size if st else None)
    raw = json.dumps(defl, sort_keys=True, default=str)
    return (str(c.path.resolve().parent), raw, tuple(geom), extra)


def numerical_model(c) -> NumericalModel:
    """The solved :class:`NumericalModel` of a loaded ``numerical`` campaign (cached)."""
    key = _model_key(c)
    hit = _MODEL_CACHE.get(key)
    if hit is not None:
        _MODEL_CACHE.move_to_end(key)
        return hit
    fname = c.path.name
    spec, _ = parse_numerical_spec(c.raw.get("deflector", {}), fname, c.path.parent)
    nominal = {k: c.stated[k].value for k in spec.geometry_keys}
    where = "[deflector] numerical cross-section"
    try:
        box = None
        if spec.boundary is None:  # fix the two-wire default box at the nominal geometry
            box = spec.cross_section(nominal).box
        sol, fld = _solve(spec, nominal, box)
    except InputError as exc:
        raise InputError(f"{where}: {exc}{_grid_hint(spec, nominal, box)}") from None
    g0 = float(fld["E_dE_dx_V2_per_m3"])
    h = spec.h(nominal, sol.cross_section.box)
    params = {
        k: (nominal[k], max(c.stated[k].error, 0.5 * h))
        for k in spec.geometry_keys
        if c.stated[k].error > 0
    }
    sens: dict[str, float] = {}
    steps: dict[str, float] = {}
    if params:

        def builder(**vals):
            return _field_factor_cached(spec, tuple(sorted({**nominal, **vals}.items())), box)

        try:
            tb = fs.propagate_tolerances(builder, params, step=1.0)
        except InputError as exc:
            raise InputError(
                f"{where}: the geometry is not valid within nominal ± max(σ, h/2) of the stated "
                f"tolerances ({', '.join(params)}): {exc}{_grid_hint(spec, nominal, box)}; or "
                "reduce the stated errors"
            ) from None
        sens = {k: s / g0 for k, s in tb.sensitivities.items()}
        steps = dict(tb.steps)
    coef, ferr, method = 0.0, 0.0, "none: the stated length is the effective length"
    fgap = (
        spec.fringe_gap(c.nominal())
        if spec.fringe in ("maxwell", "coefficient", "numerical")
        else None
    )
    if spec.fringe == "maxwell":
        coef = 2.0 * fs.maxwell_fringe_extension(fgap) / fgap
        method = "Maxwell thin-plate edges: L_eff = L + gap/π"
    elif spec.fringe == "coefficient":
        coef = c.stated["deflector.fringe_coefficient"].value
        method = "stated coefficient: L_eff = L + c·gap"
    elif spec.fringe == "numerical":
        L = min(c.stated["deflector.length"].value, _FRINGE_MODEL_LENGTH * fgap)
        res = _fringe_solve(L, fgap, spec.fringe_options)
        coef, ferr = res.coefficient, res.numerical_error
        method = f"numerical end field: L_eff = L + {coef:.4f}·gap ({res.method})"
    elif spec.fringe == "map":
        method = "measured map of the relative field factor along the beam"
    model = NumericalModel(spec, nominal, fld, sol, sens, steps, coef, ferr, method)
    _MODEL_CACHE[key] = model
    while len(_MODEL_CACHE) > _MODEL_CACHE_SIZE:
        _MODEL_CACHE.popitem(last=False)
    return model


def _grid_hint(spec: NumericalSpec, v: dict[str, float], box) -> str:
    try:
        cs = spec.cross_section(v, box)
    except InputError:
        return ""
    h = spec.h(v, cs.box)
    coarse = h * 2 ** (spec.grid_levels - 1)
    return (
        f" (the coarsest of the {spec.grid_levels} refinement grids has h = {coarse * 1e3:.4g} mm"
        f" for grid_spacing {h * 1e3:.4g} mm: reduce grid_spacing or grid_levels, or keep the beam"
        " further from the electrodes)"
    )


@lru_cache(maxsize=16)
def _fringe_solve(length: float, gap: float, options: tuple) -> fs.FringeResult:
    """The 2-D end-field solve (cached: a few seconds; multigrid above the direct-solver size)."""
    return fs.fringe_extension_numerical(length, gap, **dict(options))


def numerical_deflector(c, v: dict[str, float]) -> NumericalDeflector:
    """The deflector of a numerical campaign at the values ``v`` (used by ``Campaign.build``)."""
    return numerical_model(c).deflector(v)


def numerical_error_inputs(c) -> dict[str, Measured]:
    """The stated inputs the solve adds: the numerical error of g (and of a solved L_eff)."""
    m = numerical_model(c)
    out = {FIELD_ERROR_KEY: Measured(1.0, abs(m.numerical_error / m.field_factor))}
    if m.fringe_error > 0:
        out[FRINGE_ERROR_KEY] = Measured(0.0, m.fringe_error)
    return out


# ---------------------------------------------------------------------------------------------
# Sensitivities of g for any model, and the `polarbeam field` report
# ---------------------------------------------------------------------------------------------


def field_factor_sensitivities(c) -> tuple[float, dict[str, float]]:
    """Nominal g of the campaign's deflector and ∂ln g/∂p for every stated input with an error.

    Central differences of the model, as :func:`polarbeam.pipeline.analysis.build_context` does for the
    coupling (for the numerical model they act on its first-order expansion, so they are exact).
    """
    _lay, d0 = c.build()
    g0 = float(d0.field_factor)
    nominal = c.nominal()
    sens = {}
    for key, m in c.stated.items():
        if m.error <= 0:
            continue
        h = max(m.error * 1e-3, abs(m.value) * 1e-9, 1e-300)
        vals = []
        for sgn in (+1, -1):
            try:
                vals.append(float(c.build({**nominal, key: m.value + sgn * h})[1].field_factor))
            except InputError:
                vals.append(None)
        if vals[0] is not None and vals[1] is not None:
            d = (vals[0] - vals[1]) / (2 * h)
        elif vals[0] is not None:
            d = (vals[0] - g0) / h
        elif vals[1] is not None:
            d = (g0 - vals[1]) / h
        else:
            continue
        if d != 0:
            sens[key] = d / g0
    return g0, sens


@dataclass(frozen=True)
class FieldReport:
    """The deflector field at the beam for one voltage (SI, magnitudes)."""

    model: str
    method: str
    voltage_V: float
    field_factor_per_m3: float
    E_V_per_m: float | None = None
    dE_dx_V_per_m2: float | None = None
    E_dE_dx_V2_per_m3: float | None = None
    field_factor_rel_variation: float | None = None
    field_factor_rel_rms: float | None = None
    numerical_error_per_m3: float | None = None
    numerical_error_note: str = ""
    tolerance_sigma_per_m3: float | None = None
    tolerance_budget: dict[str, float] = field(default_factory=dict)
    beam: dict[str, float] = field(default_factory=dict)
    grid_h_m: float | None = None
    observed_order: float | None = None
    effective_length_m: float | None = None
    fringe: str = ""
    calibration: dict[str, Any] | None = None
    notes: tuple[str, ...] = ()

    def summary(self) -> dict[str, Any]:
        """Plain dict for JSON (NaN → None)."""

        def clean(x):
            if isinstance(x, float) and not math.isfinite(x):
                return None
            if isinstance(x, dict):
                return {k: clean(v) for k, v in x.items()}
            if isinstance(x, list | tuple):
                return [clean(v) for v in x]
            return x

        return clean(
            {
                "model": self.model,
                "method": self.method,
                "voltage_V": self.voltage_V,
                "E_V_per_m": self.E_V_per_m,
                "dE_dx_V_per_m2": self.dE_dx_V_per_m2,
                "E_dE_dx_V2_per_m3": self.E_dE_dx_V2_per_m3,
                "field_factor_per_m3": self.field_factor_per_m3,
                "field_factor_rel_variation": self.field_factor_rel_variation,
                "field_factor_rel_rms": self.field_factor_rel_rms,
                "numerical_error_per_m3": self.numerical_error_per_m3,
                "numerical_error_note": self.numerical_error_note,
                "tolerance_sigma_per_m3": self.tolerance_sigma_per_m3,
                "tolerance_budget": dict(self.tolerance_budget),
                "beam": dict(self.beam),
                "grid_h_m": self.grid_h_m,
                "observed_order": self.observed_order,
                "effective_length_m": self.effective_length_m,
                "fringe": self.fringe,
                "calibration": self.calibration,
                "notes": list(self.notes),
            }
        )

    def to_text(self) -> str:
        """The terminal rendering."""

        def sci(x, unit):
            return "—" if x is None else f"{x:.5g} {unit}"

        lines = [
            f"deflector model '{self.model}' at {self.voltage_V:g} V ({self.method})",
            f"  E            = {sci(self.E_V_per_m, 'V/m')}",
            f"  dE/dx        = {sci(self.dE_dx_V_per_m2, 'V/m²')}",
            f"  E·dE/dx      = {sci(self.E_dE_dx_V2_per_m3, 'V²/m³')}",
            f"  g            = {sci(self.field_factor_per_m3, 'm⁻³')}",
        ]
        if self.tolerance_sigma_per_m3 is not None and self.field_factor_per_m3:
            rel = self.tolerance_sigma_per_m3 / self.field_factor_per_m3
            lines.append(
                f"  σ_g (stated inputs) = {sci(self.tolerance_sigma_per_m3, 'm⁻³')} ({rel:.2%})"
            )
            for k, share in sorted(self.tolerance_budget.items(), key=lambda kv: -kv[1]):
                lines.append(f"      {k}: {share:.1%}")
        if self.field_factor_rel_variation is not None:
            lines.append(
                f"  variation of g across the beam: (max − min)/mean = "
                f"{self.field_factor_rel_variation:.3g}, rms {self.field_factor_rel_rms:.3g}"
            )
        if self.numerical_error_per_m3 is not None:
            rel = (
                self.numerical_error_per_m3 / self.field_factor_per_m3
                if self.field_factor_per_m3
                else math.nan
            )
            lines.append(
                f"  numerical error of g: {self.numerical_error_per_m3:.3g} m⁻³ ({rel:.2e} "
                f"relative){'; ' + self.numerical_error_note if self.numerical_error_note else ''}"
            )
        if self.grid_h_m is not None:
            lines.append(
                f"  finest grid h = {self.grid_h_m * 1e3:.4g} mm, observed order "
                f"{self.observed_order:.3g}"
            )
        if self.effective_length_m is not None:
            lines.append(f"  effective length = {self.effective_length_m:.6g} m ({self.fringe})")
        lines += [f"  note: {n}" for n in self.notes]
        return "\n".join(lines)


def _parse_voltage(voltage) -> float:
    v = parse_quantity(voltage, "V", where="--voltage").value
    if not (math.isfinite(v) and v != 0):
        raise InputError(f"--voltage: expected a non-zero voltage, found {voltage!r}")
    return abs(v)


def _load(campaign):
    from polarbeam.contract.campaign import Campaign, load_campaign

    return campaign if isinstance(campaign, Campaign) else load_campaign(campaign)


def deflector_field(campaign, voltage) -> FieldReport:
    """The field at the beam of a campaign's deflector at ``voltage`` (V or ``"10 kV"``).

    Two-wire: the analytic line-charge field on the axis (no numerical error).  Numerical: the
    solved, beam-averaged, extrapolated field with its mesh-refinement error.  Uniform and
    field-map: the stated (or, without ``field_factor``, reference-calibrated) g; E only when
    ``field_per_volt`` is given.
    """
    c = _load(campaign)
    V = _parse_voltage(voltage)
    _lay, d = c.build()
    tol_sigma, budget = None, {}
    calib = None
    notes: list[str] = []
    g = float(d.field_factor)
    from polarbeam.calibration.calibrate import (
        calibrate_campaign,
        calibration_required,
        check_calibration_inputs,
        field_factor_missing,
    )
    from polarbeam.results.objects import variance_budget

    check_calibration_inputs(c)
    cal = None
    if calibration_required(c) and c.settings.calibration == "auto":
        cal = calibrate_campaign(c)
        if cal.calibration is not None:
            calib = cal.calibration.summary()
    if field_factor_missing(c):  # the references are the only source of g
        if cal is None or cal.calibration is None:
            raise InputError(
                f"{c.path.name}: the field factor cannot be calibrated: "
                f"{cal.reason if cal else 'no reference compound'}"
            )
        gcal = cal.calibration.field_factor
        g, tol_sigma = gcal.nominal_value, gcal.std_dev
        budget = variance_budget(gcal)
        notes.append(
            f"g calibrated from {len(cal.calibration.references)} reference compound(s); its "
            "error is the calibration's"
        )
    else:
        g_nom, sens = field_factor_sensitivities(c)
        from polarbeam.pipeline.analysis import _label

        contrib = {_label(k): abs(s * g_nom * c.stated[k].error) for k, s in sens.items()}
        var = sum(x * x for x in contrib.values())
        tol_sigma = math.sqrt(var)
        budget = {k: x * x / var for k, x in contrib.items()} if var > 0 else {}
        if calib is not None:
            notes.append(
                f"the reference compounds scale this g by {calib['field_scale']:.5g} ± "
                f"{calib['field_scale_err']:.2g} (see 'calibration'); the analysis uses the "
                "calibrated value"
            )
    E = dEdx = None
    variation = rms = num_err = h = order = Leff = None
    num_note, fringe, beam = "", "", {}
    if c.model == "two-wire" and c.layout != "time-domain":
        E = d.field_per_volt * V
        z, a = d.beam_height, d.line_half_spacing
        dEdx = E * 2 * z / (a * a + z * z)
        method = "analytic (line-charge model), on the symmetry axis"
        num_err, num_note = 0.0, "analytic: no numerical error"
        variation, rms = 0.0, 0.0
        notes.append("the two-wire model evaluates g on the axis at beam_height (a point beam)")
        beam = {"x_m": 0.0, "height_m": z, "width_m": 0.0, "thickness_m": 0.0}
    elif c.model == "numerical":
        m = numerical_model(c)
        f = m.field
        E = m.field_per_volt * V
        dEdx = f["dE_dx_V_per_m2"] * V
        variation, rms = f["field_factor_rel_variation"], f["field_factor_rel_rms"]
        num_err = m.numerical_error
        num_note = "size of the Richardson correction (estimated error of the finest grid)"
        h, order = f["grid_h_m"], f["observed_order"]
        method = f["method"]
        b = m.solution.beam
        beam = {"x_m": b.x0, "height_m": b.y0, "width_m": b.width, "thickness_m": b.height}
        Leff, fringe = d.effective_length, m.fringe_method
        if m.spec.fringe == "map":
            Leff = None
    else:
        fpv = getattr(d, "field_per_volt", None)
        if fpv:
            E = fpv * V
            dEdx = g * V * V / E
        else:
            notes.append("E and dE/dx need field_per_volt (E/V) in [deflector]")
        method = "stated field factor" if calib is None else "calibrated from reference compounds"
        if c.model == "field-map":
            method = "field map: peak of the scaled map" if calib is None else method
    return FieldReport(
        model=c.model,
        method=method,
        voltage_V=V,
        field_factor_per_m3=g,
        E_V_per_m=E,
        dE_dx_V_per_m2=dEdx,
        E_dE_dx_V2_per_m3=g * V * V,
        field_factor_rel_variation=variation,
        field_factor_rel_rms=rms,
        numerical_error_per_m3=num_err,
        numerical_error_note=num_note,
        tolerance_sigma_per_m3=tol_sigma,
        tolerance_budget=budget,
        beam=beam,
        grid_h_m=h,
        observed_order=order,
        effective_length_m=Leff,
        fringe=fringe,
        calibration=calib,
        notes=tuple(notes),
    )


def plot_deflector_field(campaign, path, voltage) -> Path:
    """Equipotentials, electrodes and the beam of the campaign's cross-section (``--plot``)."""
    c = _load(campaign)
    V = _parse_voltage(voltage)
    _lay, d = c.build()
    if c.model == "numerical":
        m = numerical_model(c)
        sol = m.solution.finest
        cs = sol.cross_section.scaled(V)
        sol = replace(sol, phi=sol.phi * V, cross_section=cs)
        beam = m.solution.beam
    elif c.model == "two-wire" and c.layout != "time-domain":
        a = d.line_half_spacing
        cs = fs.two_wire_cross_section(a, d.convex_crossing, d.concave_crossing, V)
        sol = fs.solve_laplace(cs, a / 40.0, solver="direct")
        beam = fs.Beam(0.0, d.beam_height)
    else:
        raise InputError(
            f"--plot: the {c.model!r} model has no electrode geometry to draw; use the "
            "'two-wire' or 'numerical' model"
        )
    return fs.plot_cross_section(sol, path, beam=beam)
