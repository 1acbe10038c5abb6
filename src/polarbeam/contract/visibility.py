"""The visibility contract: ``[gratings]`` and ``[data] visibilities`` (visibilities.csv).

.. code-block:: toml

    [gratings]                       # optional; what the three gratings are
    first = "material"               # "material" or "light" for each of first, second, third
    second = "light"
    third = "material"
    open_fraction = "0.42 ± 0.02"    # material gratings (slit width / period)
    laser_wavelength = "532 nm"      # light grating; its period must equal the grating period
    laser_waist_vertical = "900 ± 30 um"
    power_scale = "1 ± 0.03"         # calibration of the stated power at the molecules
    absorbed_molecules = "kept"      # or "lost"
    [data]
    visibilities = "visibilities.csv"

Structural problems raise :class:`~polarbeam.errors.InputError` naming the key; a bad value in a
row of ``visibilities.csv`` marks only its compound (``VisibilityCompound.problem``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from polarbeam._util.tables import CELL_BLANKS, read_table
from polarbeam.beam.distributions import TabulatedVelocity
from polarbeam.beam.talbot import (
    ABSORBED_CHOICES,
    LightGrating,
    MaterialGrating,
    TalbotLauInterferometer,
    absorption_cross_section,
)
from polarbeam.constants import AMU, ANGSTROM3_SI
from polarbeam.contract.paths import resolve_data_file
from polarbeam.contract.velocity import load_velocity_tables
from polarbeam.errors import CompoundError, InputError, RowValueError
from polarbeam.quantities import Measured, parse_quantity

__all__ = [
    "GRATING_KEYS",
    "VISIBILITY_COLUMNS",
    "VISIBILITY_PLAN_KEYS",
    "GratingSpec",
    "VisibilityCompound",
    "VisibilityData",
    "VisibilityPlanCompound",
    "VisibilityPlanInputs",
    "VisibilitySeries",
    "load_visibilities",
    "load_visibility_plan",
    "parse_gratings",
    "visibility_velocity_tables",
]

#: Keys of ``[gratings]`` and their SI unit ("" dimensionless, None not a quantity).
GRATING_KEYS: dict[str, str | None] = {
    "first": None,
    "second": None,
    "third": None,
    "open_fraction": "",
    "laser_wavelength": "m",
    "laser_waist_vertical": "m",
    "power_scale": "",
    "absorbed_molecules": None,
}

VISIBILITY_COLUMNS = (
    "compound",
    "temperature_K",
    "velocity_m_s",
    "velocity_err_m_s",
    "velocity_spread_m_s",
    "laser_power_W",
    "visibility",
    "visibility_err",
)

_KINDS = ("material", "light")


@dataclass(frozen=True)
class GratingSpec:
    """The ``[gratings]`` table: kinds, stated inputs with errors, and the geometry."""

    kinds: tuple[str, str, str]
    spacing: Measured
    period: Measured
    open_fraction: Measured | None = None
    laser_wavelength: Measured | None = None
    waist: Measured | None = None
    power_scale: Measured = field(default_factory=lambda: Measured(1.0))
    absorbed: str = "kept"

    @property
    def light(self) -> bool:
        return self.kinds[1] == "light"

    def stated(self) -> dict[str, Measured]:
        """Stated inputs keyed ``gratings.<key>`` (the budget of the optical fit)."""
        out = {"gratings.spacing": self.spacing, "gratings.period": self.period}
        for key in ("open_fraction", "laser_wavelength", "power_scale"):
            if getattr(self, key) is not None:
                out[f"gratings.{key}"] = getattr(self, key)
        if self.waist is not None:
            out["gratings.laser_waist_vertical"] = self.waist
        return out

    def build(self, values: dict[str, float] | None = None) -> TalbotLauInterferometer:
        """The interferometer for the given values of the stated inputs (nominal if omitted)."""
        v = {k: m.value for k, m in self.stated().items()}
        v.update(values or {})
        f = v.get("gratings.open_fraction", 0.5)

        def grating(kind: str):
            if kind == "material":
                return MaterialGrating(f)
            return LightGrating(
                v["gratings.laser_wavelength"],
                v["gratings.laser_waist_vertical"],
                self.absorbed,  # type: ignore[arg-type]
                v["gratings.power_scale"],
            )

        period = v["gratings.period"]
        if self.light:  # the period is the laser's (checked equal when loading)
            period = 0.5 * v["gratings.laser_wavelength"]
        return TalbotLauInterferometer(
            v["gratings.spacing"],
            period,
            grating(self.kinds[0]),
            grating(self.kinds[1]),
            grating(self.kinds[2]),
        )


@dataclass(frozen=True)
class VisibilitySeries:
    """Points of one compound at one source temperature and one velocity setting."""

    compound: str
    temperature_K: float
    velocity: Measured
    spread: float
    powers: np.ndarray
    visibilities: np.ndarray
    errors: np.ndarray
    lines: tuple[int, ...]
    #: the measured velocity table of this compound and temperature ([data] velocities), when
    #: given: its classes replace the Gaussian of ``velocity``/``spread`` (which then hold its
    #: mean and rms spread); ``velocity.error`` is the error of its common scale
    distribution: TabulatedVelocity | None = None

    @property
    def label(self) -> str:
        return f"{self.compound} @ {self.temperature_K:g} K, {self.velocity.value:g} m/s"


@dataclass(frozen=True)
class VisibilityCompound:
    """A compound measured in ``visibilities.csv`` with its mass (or why it cannot be fitted)."""

    name: str
    mass: Measured | None
    series: tuple[VisibilitySeries, ...] = ()
    problem: str | None = None


@dataclass(frozen=True)
class VisibilityData:
    """The visibility part of a campaign."""

    path: Path
    gratings: GratingSpec
    compounds: tuple[VisibilityCompound, ...]

    @property
    def compound_names(self) -> tuple[str, ...]:
        return tuple(c.name for c in self.compounds)

    @property
    def measured(self) -> tuple[frozenset[str], frozenset[tuple[str, float]]]:
        """(compounds, (compound, T) series) of the visibility data: their velocity tables are
        checked here, not with the deflection series."""
        pairs = {(c.name, s.temperature_K) for c in self.compounds for s in c.series}
        return frozenset(self.compound_names), frozenset(pairs)


def visibility_velocity_tables(doc: dict, base: Path, fname: str):
    """``[data] velocities`` for the visibility series: (tables, problems, file name) or None."""
    rel = doc.get("data", {}).get("velocities")
    if not isinstance(rel, str):  # absent (a bad value is named by the velocity settings)
        return None
    path = resolve_data_file(Path(base), rel, f"{fname} [data] velocities")
    tables, problems = load_velocity_tables(path)
    return tables, problems, Path(rel).name


def parse_gratings(doc: dict, fname: str, layout: str, stated: dict[str, Measured]) -> GratingSpec:
    """The ``[gratings]`` table, checked against the ``[instrument]`` geometry."""
    table = doc.get("gratings")
    where = f"{fname} [gratings]"
    if not isinstance(table, dict):
        raise InputError(f"{where}: expected a table, found {type(table).__name__}")
    if layout != "talbot-lau":
        raise InputError(
            f"{fname} [instrument] layout: [gratings] needs the 'talbot-lau' layout, "
            f"found {layout!r}"
        )
    kinds = []
    for key, default in (("first", "material"), ("second", "light"), ("third", "material")):
        kind = table.get(key, default)
        if kind not in _KINDS:
            raise InputError(f"{where} {key}: expected 'material' or 'light', found {kind!r}")
        if key != "second" and kind == "light":
            raise InputError(
                f"{where} {key}: expected 'material' (only the second grating may be a standing "
                f"light wave), found 'light'"
            )
        kinds.append(kind)

    def q(key: str) -> Measured | None:
        if key not in table:
            return None
        return parse_quantity(table[key], GRATING_KEYS[key] or "", where=f"{where} {key}")

    open_fraction = q("open_fraction")
    if open_fraction is None:
        raise InputError(f"{where} open_fraction: required key missing (slit width / period)")
    if not 0.0 < open_fraction.value < 1.0:
        raise InputError(
            f"{where} open_fraction: expected a number between 0 and 1 (exclusive), "
            f"found {table['open_fraction']!r}"
        )
    period = stated["instrument.grating_period"]
    z = [stated[f"instrument.grating_positions[{i}]"] for i in range(3)]
    l1, l2 = z[1].value - z[0].value, z[2].value - z[1].value
    if not (l1 > 0 and abs(l1 - l2) <= 1e-3 * l1):
        raise InputError(
            f"{fname} [instrument] grating_positions: [gratings] expects a symmetric "
            f"interferometer (equal distances), found {l1:.6g} m and {l2:.6g} m"
        )
    # the spacing's error: the first and last positions' errors, independent
    spacing = Measured(0.5 * (l1 + l2), 0.5 * math.hypot(z[0].error, z[2].error))
    wavelength = waist = None
    if kinds[1] == "light":
        for key in ("laser_wavelength", "laser_waist_vertical"):
            if key not in table:
                raise InputError(f"{where} {key}: required key missing (second = 'light')")
        wavelength, waist = q("laser_wavelength"), q("laser_waist_vertical")
        for key, m in (("laser_wavelength", wavelength), ("laser_waist_vertical", waist)):
            if not m.value > 0:
                raise InputError(f"{where} {key}: expected > 0, found {table[key]!r}")
        half = 0.5 * wavelength.value
        if abs(half - period.value) > 1e-3 * period.value:
            raise InputError(
                f"{where} laser_wavelength: the light grating's period laser_wavelength/2 = "
                f"{half * 1e9:.6g} nm must equal [instrument] grating_period, found "
                f"{period.value * 1e9:.6g} nm"
            )
    else:
        for key in ("laser_wavelength", "laser_waist_vertical"):
            if key in table:
                raise InputError(f"{where} {key}: only used with second = 'light'")
    power_scale = q("power_scale") or Measured(1.0)
    if not power_scale.value > 0:
        raise InputError(f"{where} power_scale: expected > 0, found {table['power_scale']!r}")
    absorbed = table.get("absorbed_molecules", "kept")
    if absorbed not in ABSORBED_CHOICES:
        raise InputError(
            f"{where} absorbed_molecules: expected 'kept' or 'lost', found {absorbed!r}"
        )
    return GratingSpec(
        tuple(kinds),  # type: ignore[arg-type]
        spacing,
        period,
        open_fraction,
        wavelength,
        waist,
        power_scale,
        absorbed,
    )


def _row(table, i: int, tabled: bool = False):
    num = table.number
    blank = math.nan if tabled else None  # with [data] velocities: empty means "from the table"
    where = f"{table.name} line {table.lines[i]}"
    power = num(i, "laser_power_W")
    if power < 0:
        raw = table.rows[i].get("laser_power_W", "").strip()
        raise RowValueError(f"{where}: column 'laser_power_W' expected >= 0, found {raw!r}")
    vis = num(i, "visibility")
    if not 0.0 <= vis <= 1.0:
        raw = table.rows[i].get("visibility", "").strip()
        raise RowValueError(f"{where}: column 'visibility' expected 0 .. 1, found {raw!r}")
    return (
        num(i, "temperature_K", positive=True),
        num(i, "velocity_m_s", positive=True, default=blank),
        num(i, "velocity_err_m_s", nonnegative=True),
        num(i, "velocity_spread_m_s", nonnegative=True, default=blank),
        power,
        vis,
        num(i, "visibility_err", positive=True),
    )


def load_visibilities(
    doc: dict,
    campaign_path: Path,
    layout: str,
    stated: dict[str, Measured],
    compounds_info: dict[str, dict],
    compounds_file: str = "compounds.csv",
    tables: tuple[dict, dict, str] | None = None,
    others: frozenset[str] = frozenset(),
) -> VisibilityData:
    """Read ``[gratings]`` and ``[data] visibilities`` of a parsed ``campaign.toml``.

    Called by :func:`polarbeam.contract.campaign.load_campaign`; ``compounds_info`` is its parsed
    ``compounds.csv`` (name → mass, extra columns, problem). ``tables`` is ``({(compound, T):
    TabulatedVelocity}, {compound: problem}, file name)`` of ``[data] velocities``
    (:func:`polarbeam.contract.velocity.load_velocity_tables`): a series with a table takes its
    classes, as a deflection series does. ``others``: compounds measured in the deflection data,
    whose tables are checked there.
    """
    fname = campaign_path.name
    data = doc.get("data", {})
    if "gratings" not in doc:
        raise InputError(
            f"{fname} [data] visibilities: expected a [gratings] table (first, second, third, "
            "open_fraction, ...), found none"
        )
    gratings = parse_gratings(doc, fname, layout, stated)
    rel = data["visibilities"]
    if not isinstance(rel, str):
        raise InputError(f"{fname} [data] visibilities: expected a file path string, found {rel!r}")
    path = resolve_data_file(campaign_path.parent, rel, f"{fname} [data] visibilities")
    table = read_table(path, VISIBILITY_COLUMNS, "visibilities")
    vtables, vproblems, vname = tables if tables is not None else ({}, {}, None)
    groups: dict[str, dict[tuple[float, float], list]] = {}
    problems: dict[str, str] = {}
    for i, row in enumerate(table.rows):
        name = (row.get("compound") or "").strip(CELL_BLANKS)
        if name in problems:
            continue
        try:
            table.check_row(i)
            rec = _row(table, i, tabled=tables is not None)
        except CompoundError as exc:
            problems[name] = str(exc)
            groups.pop(name, None)
            continue
        key = (rec[0], rec[1] if math.isfinite(rec[1]) else -1.0)  # -1: empty, from a table
        groups.setdefault(name, {}).setdefault(key, []).append((*rec, table.lines[i]))
    for name in groups:
        if name in vproblems:
            problems.setdefault(name, vproblems[name])
    compounds = []
    for name in dict.fromkeys([*groups, *problems]):
        entry = compounds_info.get(name)
        problem = problems.get(name)
        if entry is None:
            problem = problem or (
                f"{compounds_file}: compound {name!r} measured in {table.name} but not listed "
                "(expected a row with its mass_u)"
            )
            compounds.append(VisibilityCompound(name, None, problem=problem))
            continue
        problem = entry.get("problem") or problem
        series = []
        if problem is None:
            try:
                series = _series_of(name, groups[name], vtables, table.name, vname, others)
            except CompoundError as exc:
                problem, series = str(exc), []
        compounds.append(VisibilityCompound(name, entry.get("mass"), tuple(series), problem))
    return VisibilityData(path, gratings, tuple(compounds))


def _series_of(name, by_key, vtables, fname, vname, others) -> list[VisibilitySeries]:
    """The series of one compound, each with its velocity table when one is given."""
    out = []
    used = set()
    for (temp, vel), recs in by_key.items():
        arr = np.array([r[:7] for r in recs], dtype=float)
        dist = vtables.get((name, temp))
        err = float(np.max(arr[:, 2]))
        if dist is not None:
            used.add(temp)
            velocity, spread = Measured(dist.mean, err), dist.spread
        elif vel < 0 or np.any(np.isnan(arr[:, 3])):
            raise CompoundError(
                f"{fname}: series {name} @ {temp:g} K expected velocity_m_s and "
                f"velocity_spread_m_s (or its rows in {vname or '[data] velocities'}), found "
                "empty cells and no table"
            )
        else:
            velocity, spread = Measured(vel, err), float(np.max(arr[:, 3]))
        out.append(
            VisibilitySeries(
                compound=name,
                temperature_K=temp,
                velocity=velocity,
                spread=spread,
                powers=arr[:, 4],
                visibilities=arr[:, 5],
                errors=arr[:, 6],
                lines=tuple(r[7] for r in recs),
                distribution=dist,
            )
        )
    if name not in others:  # a deflection compound's tables are checked with its series
        for n, t in vtables:
            if n == name and t not in used:
                temps = ", ".join(f"{x:g} K" for x in sorted({k[0] for k in by_key}))
                raise CompoundError(
                    f"{vname}: series {name} @ {t:g} K has a table but no series in {fname}; "
                    f"expected a series of {name} at temperature_K {t:g}, found {temps}"
                )
    return out


@dataclass(frozen=True)
class VisibilityPlanCompound:
    """A planned compound: mass and the guessed optical polarizability (Re α, Im α in Å³)."""

    name: str
    mass: float | None
    alpha_re_A3: float | None
    alpha_im_A3: float
    problem: str | None = None


@dataclass(frozen=True)
class VisibilityPlanInputs:
    """``[gratings]`` of a planning campaign, the ladder keys of ``[plan]`` and the guesses."""

    gratings: GratingSpec
    power_max: float
    n_powers: int
    noise: float
    compounds: tuple[VisibilityPlanCompound, ...]


#: ``[plan]`` keys of a light-grating power ladder (read here; listed in contract.plan).
VISIBILITY_PLAN_KEYS = {"laser_power_max": "W", "n_powers": None, "visibility_noise": None}


def load_visibility_plan(
    doc: dict, plan_table: dict, fname: str, layout: str, stated: dict, compounds_path: Path
) -> VisibilityPlanInputs:
    """The power-ladder inputs of a planning campaign with ``[gratings]`` (second = 'light').

    Compounds take their guesses from the columns ``alpha_opt_A3`` (required for a ladder) and
    ``sigma_abs_m2`` (optional, 0) of the planning compounds file.
    """
    spec = parse_gratings(doc, fname, layout, stated)
    where = f"{fname} [plan]"
    if not spec.light:
        raise InputError(
            f"{fname} [gratings] second: a power ladder needs 'light', found 'material'"
        )
    if "laser_power_max" not in plan_table:
        raise InputError(f'{where} laser_power_max: required with [gratings] (e.g. "10 W")')
    pmax = parse_quantity(plan_table["laser_power_max"], "W", where=f"{where} laser_power_max")
    if not pmax.value > 0:
        raise InputError(
            f"{where} laser_power_max: expected > 0, found {plan_table['laser_power_max']!r}"
        )
    n = plan_table.get("n_powers", 10)
    if isinstance(n, bool) or not isinstance(n, int) or not 2 <= n <= 200:
        raise InputError(f"{where} n_powers: expected an integer 2..200, found {n!r}")
    noise = plan_table.get("visibility_noise", 0.01)
    if isinstance(noise, bool) or not isinstance(noise, int | float) or not 0 < noise < 1:
        raise InputError(f"{where} visibility_noise: expected a number in (0, 1), found {noise!r}")
    table = read_table(compounds_path, ("compound",), "compounds")
    out = []
    for i, row in enumerate(table.rows):
        name = (row.get("compound") or "").strip(CELL_BLANKS)
        try:
            if "__bad__" in row:
                raise CompoundError(f"{table.name} line {table.lines[i]}: {row['__bad__']}")
            mass = table.number(i, "mass_u", positive=True) * AMU
            alpha = None
            if (row.get("alpha_opt_A3") or "").strip():
                alpha = table.number(i, "alpha_opt_A3", positive=True)
            sigma = table.number(i, "sigma_abs_m2", nonnegative=True, default=0.0)
            im = sigma / float(absorption_cross_section(ANGSTROM3_SI, spec.laser_wavelength.value))
            problem = None
            if alpha is None:
                problem = (
                    f"{table.name} line {table.lines[i]}: column 'alpha_opt_A3' expected the "
                    "guessed optical polarizability for the power ladder, found ''"
                )
            out.append(VisibilityPlanCompound(name, mass, alpha, im, problem))
        except CompoundError as exc:
            out.append(VisibilityPlanCompound(name, None, None, 0.0, str(exc)))
    return VisibilityPlanInputs(spec, pmax.value, int(n), float(noise), tuple(out))
