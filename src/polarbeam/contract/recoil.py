"""The photon-recoil contract: ``[[laser]]`` tables and the ``recoil.csv`` input.

Parses and validates the laser definitions (name, wavelength, position, area or waist, direction,
optional energy scale) and the per-pulse-energy phases and visibility ratios into
:class:`RecoilData`, with one-line errors naming file, key or row.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from polarbeam._util.tables import CELL_BLANKS, read_table
from polarbeam.beam.photon_recoil import (
    gaussian_effective_area,
)
from polarbeam.contract.paths import resolve_data_file
from polarbeam.errors import CompoundError, InputError
from polarbeam.quantities import Measured, parse_quantity

__all__ = [
    "FLUORESCENCE_FIT",
    "LASER_KEYS",
    "RECOIL_COLUMNS",
    "Laser",
    "RecoilCompound",
    "RecoilData",
    "RecoilSeries",
    "load_recoil",
]

RECOIL_COLUMNS = (
    "compound",
    "laser",
    "temperature_K",
    "velocity_m_s",
    "velocity_err_m_s",
    "velocity_spread_m_s",
    "pulse_energy_J",
    "phase_rad",
    "phase_err_rad",
    "visibility_ratio",
    "visibility_ratio_err",
)


@dataclass(frozen=True)
class Laser:
    """One ``[[laser]]`` table: SI values with their stated 1σ errors."""

    name: str
    wavelength: Measured
    position: Measured
    direction: int = 1
    area: Measured | None = None
    waist: Measured | None = None
    beam_offset: Measured = field(default_factory=lambda: Measured(0.0))
    energy_scale: Measured = field(default_factory=lambda: Measured(1.0))

    def __post_init__(self):
        if (self.area is None) == (self.waist is None):
            raise InputError(f"[[laser]] {self.name!r}: expected exactly one of area or waist")
        if self.direction not in (1, -1):
            raise InputError(
                f"[[laser]] {self.name!r} direction: expected +1 or -1, found {self.direction!r}"
            )

    @property
    def effective_area(self) -> float:
        """Nominal effective area A (m²)."""
        if self.area is not None:
            return self.area.value
        return float(gaussian_effective_area(self.waist.value, self.beam_offset.value))

    def stated(self) -> dict[str, Measured]:
        """Every stated input, keyed ``laser.<name>.<key>``."""
        out = {
            f"laser.{self.name}.wavelength": self.wavelength,
            f"laser.{self.name}.position": self.position,
            f"laser.{self.name}.energy_scale": self.energy_scale,
        }
        if self.area is not None:
            out[f"laser.{self.name}.area"] = self.area
        else:
            out[f"laser.{self.name}.waist"] = self.waist
            out[f"laser.{self.name}.beam_offset"] = self.beam_offset
        return out


@dataclass(frozen=True)
class RecoilSeries:
    """Points of one compound with one laser at one source temperature."""

    compound: str
    laser: str
    temperature_K: float
    velocity: Measured
    velocities: np.ndarray
    spreads: np.ndarray
    pulse_energies: np.ndarray
    phases: np.ndarray
    phase_errors: np.ndarray
    visibility_ratios: np.ndarray
    visibility_errors: np.ndarray
    lines: tuple[int, ...]

    @property
    def label(self) -> str:
        return f"{self.compound} / {self.laser} @ {self.temperature_K:g} K"

    @property
    def n_points(self) -> int:
        return int(self.pulse_energies.size)


@dataclass(frozen=True)
class RecoilCompound:
    """A compound measured in ``recoil.csv``, with its mass and re-emission inputs."""

    name: str
    mass: Measured | None
    series: tuple[RecoilSeries, ...] = ()
    fluorescence_yield: Measured = field(default_factory=lambda: Measured(0.0))
    fit_yield: bool = False
    emission_wavelength: float | None = None
    problem: str | None = None

    @property
    def lasers(self) -> tuple[str, ...]:
        return tuple(dict.fromkeys(s.laser for s in self.series))


@dataclass(frozen=True)
class RecoilData:
    """The recoil part of a campaign: lasers, compounds and where they came from."""

    path: Path
    layout: str
    lasers: tuple[Laser, ...]
    compounds: tuple[RecoilCompound, ...]

    @property
    def compound_names(self) -> tuple[str, ...]:
        return tuple(c.name for c in self.compounds)

    def laser(self, name: str) -> Laser:
        return next(la for la in self.lasers if la.name == name)


def _laser_position_unit(layout: str) -> str:
    return "s" if layout == "time-domain" else "m"


def _parse_lasers(raw, fname: str, layout: str, stated: dict[str, Measured]) -> tuple[Laser, ...]:
    if isinstance(raw, dict):
        raise InputError(
            f"{fname} [laser]: expected an array of tables ([[laser]], one per laser), "
            "found a single table [laser]"
        )
    if not isinstance(raw, list) or not raw or not all(isinstance(t, dict) for t in raw):
        raise InputError(
            f"{fname} [[laser]]: expected one or more [[laser]] tables, found {type(raw).__name__}"
        )
    lasers: list[Laser] = []
    for i, table in enumerate(raw, start=1):
        where = f"{fname} [[laser]] #{i}"
        bad = [k for k in table if k not in LASER_KEYS]
        if bad:
            raise InputError(
                f"{where}: unknown key(s) {', '.join(repr(k) for k in bad)}; expected one of "
                f"{', '.join(LASER_KEYS)}"
            )
        name = table.get("name")
        if not isinstance(name, str) or not name.strip():
            raise InputError(f"{where} name: expected a non-empty string, found {name!r}")
        name = name.strip()
        if any(la.name == name for la in lasers):
            raise InputError(f"{where} name: laser {name!r} defined twice; names must be unique")
        where = f"{fname} [[laser]] {name!r}"
        for k in ("wavelength", "position"):
            if k not in table:
                raise InputError(f"{where} {k}: required key missing")
        if ("area" in table) == ("waist" in table):
            raise InputError(
                f"{where}: expected exactly one of area (top hat) or waist (Gaussian), found "
                f"{'both' if 'area' in table else 'neither'}"
            )
        if "beam_offset" in table and "waist" not in table:
            raise InputError(f"{where} beam_offset: only used with waist (Gaussian beam)")

        def q(key: str, _t=table, _w=where) -> Measured:
            unit = _laser_position_unit(layout) if key == "position" else LASER_KEYS[key]
            return parse_quantity(_t[key], unit or "", where=f"{_w} {key}")

        vals = {k: q(k) for k in table if LASER_KEYS[k] is not None}
        for k in ("wavelength", "area", "waist", "energy_scale"):
            if k in vals and not vals[k].value > 0:
                raise InputError(f"{where} {k}: expected > 0, found {table[k]!r}")
        direction = table.get("direction", 1)
        if isinstance(direction, bool) or direction not in (1, -1):
            raise InputError(f"{where} direction: expected +1 or -1, found {direction!r}")
        _check_position(vals["position"], table["position"], where, layout, stated)
        lasers.append(
            Laser(
                name=name,
                wavelength=vals["wavelength"],
                position=vals["position"],
                direction=int(direction),
                area=vals.get("area"),
                waist=vals.get("waist"),
                beam_offset=vals.get("beam_offset", Measured(0.0)),
                energy_scale=vals.get("energy_scale", Measured(1.0)),
            )
        )
    return tuple(lasers)


def _check_position(pos: Measured, raw, where: str, layout: str, stated) -> None:
    if layout == "time-domain":
        t = [stated[f"instrument.pulse_times[{i}]"].value for i in range(3)]
        span = t[2] - t[0]
        if not 0 < pos.value < span:
            raise InputError(
                f"{where} position: expected a time after the first pulse, between 0 and "
                f"{span:.6g} s (the last pulse), where a kick shifts the fringe; found {raw!r}"
            )
        return
    z = [stated[f"instrument.grating_positions[{i}]"].value for i in range(3)]
    if not z[0] < pos.value < z[2]:
        raise InputError(
            f"{where} position: expected between the first and the last grating "
            f"({z[0]:.6g} .. {z[2]:.6g} m), where a kick shifts the fringe; found {raw!r}"
        )


def _yield_inputs(name: str, extra: dict[str, str], cfile: str):
    """Fluorescence yield (Measured), whether to fit it, emission wavelength (m) or None."""

    def cell(col):
        return (extra.get(col) or "").strip()

    where = f"{cfile}: compound {name!r} column"
    raw = cell("fluorescence_yield")
    fit = raw.lower() == FLUORESCENCE_FIT
    q = Measured(0.0)
    if raw and not fit:
        try:
            val = float(raw)
        except ValueError:
            val = math.nan
        if not (math.isfinite(val) and 0.0 <= val <= 1.0):
            raise CompoundError(
                f"{where} 'fluorescence_yield' expected a number 0..1 or 'fit', found {raw!r}"
            )
        raw_e = cell("fluorescence_yield_err")
        err = 0.0
        if raw_e:
            try:
                err = float(raw_e)
            except ValueError:
                err = math.nan
            if not (math.isfinite(err) and err >= 0):
                raise CompoundError(
                    f"{where} 'fluorescence_yield_err' expected a number >= 0, found {raw_e!r}"
                )
        q = Measured(val, err)
    lam = None
    raw_l = cell("emission_wavelength_nm")
    if raw_l:
        try:
            lam = float(raw_l)
        except ValueError:
            lam = math.nan
        if not (math.isfinite(lam) and lam > 0):
            raise CompoundError(
                f"{where} 'emission_wavelength_nm' expected a number > 0, found {raw_l!r}"
            )
        lam *= 1e-9
    return q, fit, lam


def load_recoil(
    doc: dict,
    campaign_path: Path,
    layout: str,
    stated: dict[str, Measured],
    compounds_info: dict[str, dict],
    compounds_file: str = "compounds.csv",
) -> RecoilData:
    """Read the ``[[laser]]`` tables and ``[data] recoil`` of a parsed ``campaign.toml``.

    Called by :func:`polarbeam.contract.campaign.load_campaign`; ``compounds_info`` is its parsed
    ``compounds.csv`` (name → mass, extra columns, problem).

    Raises
    ------
    InputError
        For structural problems (missing or unknown keys, an undefined laser in ``recoil.csv``,
        a layout without fringes); bad row values only mark their compound.
    """
    fname = campaign_path.name
    data = doc.get("data", {})
    if "laser" not in doc:
        raise InputError(
            f"{fname} [data] recoil: expected at least one [[laser]] table (name, wavelength, "
            "position, area or waist), found none"
        )
    if "recoil" not in data:
        raise InputError(
            f"{fname} [[laser]]: given but [data] recoil is missing (expected "
            'recoil = "recoil.csv")'
        )
    if layout == "beam-profile":
        raise InputError(
            f"{fname} [data] recoil: photon-recoil analysis needs a fringe layout "
            "('talbot-lau' or 'time-domain'), found 'beam-profile'"
        )
    lasers = _parse_lasers(doc["laser"], fname, layout, stated)
    rel = data["recoil"]
    if not isinstance(rel, str):
        raise InputError(f"{fname} [data] recoil: expected a file path string, found {rel!r}")
    path = resolve_data_file(campaign_path.parent, rel, f"{fname} [data] recoil")
    timing = layout == "time-domain"
    required = tuple(c for c in RECOIL_COLUMNS if not (timing and c in _VELOCITY_COLUMNS))
    table = read_table(path, required, "recoil")
    names = {la.name for la in lasers}
    groups: dict[str, dict[tuple[str, float], list]] = {}
    problems: dict[str, str] = {}
    for i, row in enumerate(table.rows):
        name = (row.get("compound") or "").strip(CELL_BLANKS)
        laser = (row.get("laser") or "").strip()
        if "__bad__" not in row and laser not in names:
            raise InputError(
                f"{table.name} line {table.lines[i]}: column 'laser' expected one of "
                f"{', '.join(sorted(names))} (the [[laser]] names), found {laser!r}"
            )
        if name in problems:
            continue
        try:
            if "__bad__" in row:
                raise CompoundError(f"{table.name} line {table.lines[i]}: {row['__bad__']}")
            if not name:
                raise CompoundError(f"{table.name} line {table.lines[i]}: empty compound name")
            num = table.number
            if timing:
                v = num(i, "velocity_m_s", positive=True, default=1.0)
                dv = num(i, "velocity_err_m_s", nonnegative=True, default=0.0)
                sv = num(i, "velocity_spread_m_s", nonnegative=True, default=0.0)
            else:
                v = num(i, "velocity_m_s", positive=True)
                dv = num(i, "velocity_err_m_s", nonnegative=True)
                sv = num(i, "velocity_spread_m_s", nonnegative=True)
            rec = (
                num(i, "pulse_energy_J", positive=True),
                num(i, "phase_rad"),
                num(i, "phase_err_rad", positive=True),
                num(i, "visibility_ratio", nonnegative=True),
                num(i, "visibility_ratio_err", positive=True),
                v,
                dv,
                sv,
                table.lines[i],
            )
            temp = num(i, "temperature_K", positive=True)
        except CompoundError as exc:
            problems[name] = str(exc)
            groups.pop(name, None)
            continue
        groups.setdefault(name, {}).setdefault((laser, temp), []).append(rec)
    compounds = []
    for name in dict.fromkeys([*groups, *problems]):
        problem = problems.get(name)
        entry = compounds_info.get(name)
        if entry is None:
            compounds.append(
                RecoilCompound(
                    name,
                    None,
                    problem=problem
                    or (
                        f"{compounds_file}: compound {name!r} measured in {table.name} but not "
                        "listed (expected a row with its mass_u)"
                    ),
                )
            )
            continue
        problem = entry.get("problem") or problem
        q, fit, lam = Measured(0.0), False, None
        if problem is None:
            try:
                q, fit, lam = _yield_inputs(name, entry.get("extra", {}), compounds_file)
            except CompoundError as exc:
                problem = str(exc)
        series = []
        if problem is None:
            for (laser, temp), recs in groups[name].items():
                arr = np.array([r[:8] for r in recs], dtype=float)
                series.append(
                    RecoilSeries(
                        compound=name,
                        laser=laser,
                        temperature_K=temp,
                        velocity=Measured(float(np.mean(arr[:, 5])), float(np.mean(arr[:, 6]))),
                        velocities=arr[:, 5],
                        spreads=arr[:, 7],
                        pulse_energies=arr[:, 0],
                        phases=arr[:, 1],
                        phase_errors=arr[:, 2],
                        visibility_ratios=arr[:, 3],
                        visibility_errors=arr[:, 4],
                        lines=tuple(r[8] for r in recs),
                    )
                )
        compounds.append(
            RecoilCompound(
                name,
                entry.get("mass"),
                tuple(series),
                q,
                fit,
                lam,
                problem,
            )
        )
    return RecoilData(path, layout, lasers, tuple(compounds))


_VELOCITY_COLUMNS = ("velocity_m_s", "velocity_err_m_s", "velocity_spread_m_s")


#: Keys of a ``[[laser]]`` table and their SI unit ("" dimensionless, None not a quantity;
#: ``position`` is metres, or seconds after the first pulse in the time-domain layout).
LASER_KEYS: dict[str, str | None] = {
    "name": None,
    "wavelength": "m",
    "position": "m",
    "area": "m^2",
    "waist": "m",
    "beam_offset": "m",
    "direction": None,
    "energy_scale": "",
}


FLUORESCENCE_FIT = "fit"
