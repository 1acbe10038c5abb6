"""The ``numerical`` deflector model of ``campaign.toml``: parsing, and the solved model.

Parses the electrode cross-section of ``[deflector]`` (the two-wire pair by its line-charge
parameters or radii, or ``[[deflector.electrodes]]`` inside a grounded ``boundary``) into a
:class:`~polarbeam.instrument.numerical.NumericalSpec` and the stated inputs, then solves it once
per geometry (cached) with the tolerance sensitivities and end-field treatment.
"""

from __future__ import annotations

import json
import math
from collections import OrderedDict
from functools import lru_cache
from pathlib import Path
from typing import Any

from polarbeam.contract.paths import resolve_data_file
from polarbeam.errors import InputError, QuantityError
from polarbeam.instrument import fields as fs
from polarbeam.instrument.numerical import (
    FIELD_ERROR_KEY,
    FRINGE_ERROR_KEY,
    TWO_WIRE_LINES,
    TWO_WIRE_RADII,
    ElectrodeSpec,
    NumericalDeflector,
    NumericalModel,
    NumericalSpec,
    field_factor_cached,
    solve_spec,
)
from polarbeam.quantities import Measured, parse_quantity

__all__ = [
    "NUMERICAL_KEYS",
    "clear_model_cache",
    "numerical_deflector",
    "numerical_error_inputs",
    "numerical_model",
    "numerical_stated_inputs",
    "parse_numerical_spec",
]

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
    path = resolve_data_file(Path(base or "."), raw, _where(fname, "fringe_map"))
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
        "two-wire": any(k in defl for k in TWO_WIRE_LINES),
        "two-wire radii": any(k in defl for k in TWO_WIRE_RADII),
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
        need = TWO_WIRE_LINES if kind == "two-wire" else TWO_WIRE_RADII
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
        sol, fld = solve_spec(spec, nominal, box)
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
            return field_factor_cached(spec, tuple(sorted({**nominal, **vals}.items())), box)

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


def clear_model_cache() -> None:
    """Forget every solved model (the next campaign solves its cross-section afresh)."""
    _MODEL_CACHE.clear()
    field_factor_cached.cache_clear()
