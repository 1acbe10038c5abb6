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
    gaussian_crossing_length,
    gaussian_effective_area,
)
from polarbeam.contract.paths import resolve_data_file
from polarbeam.errors import CompoundError, InputError
from polarbeam.quantities import Measured, parse_quantity

__all__ = [
    "FLUORESCENCE_FIT",
    "ILLUMINATIONS",
    "LASER_KEYS",
    "LASER_MODES",
    "OPTIONAL_RECOIL_COLUMNS",
    "RECOIL_COLUMNS",
    "VISIBILITY_ERRORS",
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

#: Optional ``recoil.csv`` columns: the power of a cw laser per row, and a shared laser-off
#: reference (label, its phase error in rad, the relative error of its visibility).
OPTIONAL_RECOIL_COLUMNS = (
    "power_W",
    "reference",
    "reference_phase_err_rad",
    "reference_visibility_err",
)

LASER_MODES = ("pulsed", "cw")
ILLUMINATIONS = ("travelling", "standing")
VISIBILITY_ERRORS = ("rician", "gaussian")


@dataclass(frozen=True)
class Laser:
    """One ``[[laser]]`` table: SI values with their stated 1σ errors.

    ``mode`` "pulsed" (pulse energies, J) or "cw" (powers, W; n̄ ∝ 1/v); ``illumination``
    "travelling" or "standing" (retro-reflected); ``beam_height_rms`` the rms height of the
    molecular beam in a Gaussian spot; ``hit_fraction`` the fraction of detected molecules that
    met a pulse; ``power`` the cw power of rows without ``power_W``; ``visibility_errors`` how
    the visibility ratios are distributed ("rician": moduli; "gaussian").
    """

    name: str
    wavelength: Measured
    position: Measured
    direction: int = 1
    area: Measured | None = None
    waist: Measured | None = None
    beam_offset: Measured = field(default_factory=lambda: Measured(0.0))
    energy_scale: Measured = field(default_factory=lambda: Measured(1.0))
    mode: str = "pulsed"
    illumination: str = "travelling"
    beam_height_rms: Measured = field(default_factory=lambda: Measured(0.0))
    hit_fraction: Measured = field(default_factory=lambda: Measured(1.0))
    power: Measured | None = None
    visibility_errors: str = "rician"

    @property
    def cw(self) -> bool:
        return self.mode == "cw"

    @property
    def standing(self) -> bool:
        return self.illumination == "standing"

    def __post_init__(self):
        if (self.area is None) == (self.waist is None):
            raise InputError(f"[[laser]] {self.name!r}: expected exactly one of area or waist")
        if self.direction not in (1, -1):
            raise InputError(
                f"[[laser]] {self.name!r} direction: expected +1 or -1, found {self.direction!r}"
            )

    @property
    def effective_area(self) -> float:
        """Nominal effective area A (m²) of a pulse, or the crossing length L (m) of a cw beam
        (fluence P/(vL)), both at the centre of the molecular beam."""
        if self.area is not None:
            return self.area.value
        if self.cw:
            return float(gaussian_crossing_length(self.waist.value, self.beam_offset.value))
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
            if self.beam_height_rms.value > 0 or self.beam_height_rms.error > 0:
                out[f"laser.{self.name}.beam_height_rms"] = self.beam_height_rms
        if self.hit_fraction.value != 1 or self.hit_fraction.error > 0:
            out[f"laser.{self.name}.hit_fraction"] = self.hit_fraction
        if self.power is not None:
            out[f"laser.{self.name}.power"] = self.power
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
    key_power: np.ndarray | None = None  # cw rows whose power is the laser's ``power`` key
    references: tuple[str, ...] = ()  # shared laser-off reference label per row ("" none)
    reference_phase_errors: np.ndarray | None = None
    reference_visibility_errors: np.ndarray | None = None

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
    dropped: tuple[str, ...] = ()  # points left out, each with the reason

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

        choices = _laser_choices(table, where, layout)
        vals = {k: q(k) for k in table if LASER_KEYS[k] is not None}
        for k in ("wavelength", "area", "waist", "energy_scale", "power"):
            if k in vals and not vals[k].value > 0:
                raise InputError(f"{where} {k}: expected > 0, found {table[k]!r}")
        if "beam_height_rms" in vals and vals["beam_height_rms"].value < 0:
            raise InputError(
                f"{where} beam_height_rms: expected >= 0, found {table['beam_height_rms']!r}"
            )
        if "hit_fraction" in vals and not 0 < vals["hit_fraction"].value <= 1:
            raise InputError(
                f"{where} hit_fraction: expected a fraction 0 < f <= 1, found "
                f"{table['hit_fraction']!r}"
            )
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
                beam_height_rms=vals.get("beam_height_rms", Measured(0.0)),
                hit_fraction=vals.get("hit_fraction", Measured(1.0)),
                power=vals.get("power"),
                **choices,
            )
        )
    return tuple(lasers)


def _laser_choices(table: dict, where: str, layout: str) -> dict[str, str]:
    """mode, illumination and visibility_errors of one [[laser]] table, with their rules."""
    out = {}
    for key, allowed in (
        ("mode", LASER_MODES),
        ("illumination", ILLUMINATIONS),
        ("visibility_errors", VISIBILITY_ERRORS),
    ):
        v = table.get(key, allowed[0])
        if v not in allowed:
            raise InputError(
                f"{where} {key}: expected one of {', '.join(repr(a) for a in allowed)}, found {v!r}"
            )
        out[key] = v
    if "beam_height_rms" in table and "waist" not in table:
        raise InputError(
            f"{where} beam_height_rms: only used with waist (a Gaussian spot); a top-hat area "
            "already is the mean over the molecular beam"
        )
    if out["mode"] == "cw":
        if layout == "time-domain":
            raise InputError(
                f"{where} mode: expected 'pulsed' in the time-domain layout (a kick needs a "
                "time), found 'cw'"
            )
        if "waist" not in table:
            raise InputError(
                f"{where} mode: 'cw' needs waist (the Gaussian beam the molecules cross), "
                "found area"
            )
        if "hit_fraction" in table:
            raise InputError(
                f"{where} hit_fraction: only used with mode = 'pulsed' (every molecule crosses "
                "a cw beam)"
            )
    elif "power" in table:
        raise InputError(f"{where} power: only used with mode = 'cw' (pulses give energies)")
    return out


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
    all_cw = all(la.cw for la in lasers)
    required = tuple(
        c
        for c in RECOIL_COLUMNS
        if not (timing and c in _VELOCITY_COLUMNS) and not (all_cw and c == "pulse_energy_J")
    )
    table = read_table(path, required, "recoil")
    by_name = {la.name: la for la in lasers}
    names = set(by_name)
    groups: dict[str, dict[tuple[str, float], list]] = {}
    problems: dict[str, str] = {}
    dropped: dict[str, list[str]] = {}
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
            table.check_row(i)
            rec, drop = _row(table, i, by_name[laser], timing)
            temp = table.number(i, "temperature_K", positive=True)
        except CompoundError as exc:
            problems[name] = str(exc)
            groups.pop(name, None)
            continue
        if drop:
            dropped.setdefault(name, []).append(drop)
            continue
        groups.setdefault(name, {}).setdefault((laser, temp), []).append(rec)
    compounds = []
    for name in dict.fromkeys([*groups, *problems, *dropped]):
        problem = problems.get(name)
        if problem is None and name not in groups:
            problem = (
                f"{table.name}: compound {name!r}: every point was dropped ({dropped[name][0]})"
            )
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
                series = _series(name, groups[name], table.name)
            except CompoundError as exc:
                problem = str(exc)
        compounds.append(
            RecoilCompound(
                name,
                entry.get("mass"),
                tuple(series) if problem is None else (),
                q,
                fit,
                lam,
                problem,
                tuple(dropped.get(name, ())),
            )
        )
    return RecoilData(path, layout, lasers, tuple(compounds))


_VELOCITY_COLUMNS = ("velocity_m_s", "velocity_err_m_s", "velocity_spread_m_s")


def _row(table, i: int, la: Laser, timing: bool):
    """One row's numbers, or (None, reason) when the point is dropped (a negative Rician
    visibility ratio); bad cells raise :class:`CompoundError`."""
    num = table.number
    if timing:
        v = num(i, "velocity_m_s", positive=True, default=1.0)
        dv = num(i, "velocity_err_m_s", nonnegative=True, default=0.0)
        sv = num(i, "velocity_spread_m_s", nonnegative=True, default=0.0)
    else:
        v = num(i, "velocity_m_s", positive=True)
        dv = num(i, "velocity_err_m_s", nonnegative=True)
        sv = num(i, "velocity_spread_m_s", nonnegative=True)
    key_power = 0.0
    if la.cw:
        raw = (table.rows[i].get("power_W") or "").strip()
        if not raw and la.power is None:
            raise CompoundError(
                f"{table.name} line {table.lines[i]}: column 'power_W' expected a number > 0 "
                f"(cw laser {la.name!r} has no power key), found ''"
            )
        if raw:
            dose = num(i, "power_W", positive=True)
        else:
            dose, key_power = la.power.value, 1.0
    else:
        dose = num(i, "pulse_energy_J", positive=True)
    phase = num(i, "phase_rad")
    phase_err = num(i, "phase_err_rad", positive=True)
    rician = la.visibility_errors == "rician"
    vis = num(i, "visibility_ratio")
    vis_err = num(i, "visibility_ratio_err", positive=True)
    label = (table.rows[i].get("reference") or "").strip()
    ref_ph = num(i, "reference_phase_err_rad", nonnegative=True, default=0.0)
    ref_vi = num(i, "reference_visibility_err", nonnegative=True, default=0.0)
    if (ref_ph > 0 or ref_vi > 0) and not label:
        raise CompoundError(
            f"{table.name} line {table.lines[i]}: column 'reference' expected the label of the "
            "shared laser-off reference whose errors this row gives, found ''"
        )
    if vis < 0 and rician:  # a Gaussian-distributed ratio may be negative, a modulus not
        raw = (table.rows[i].get("visibility_ratio") or "").strip()
        return None, (
            f"{table.name} line {table.lines[i]}: column 'visibility_ratio' expected a "
            f"number >= 0 (a Rician modulus; laser {la.name!r} visibility_errors = 'rician'), "
            f"found {raw!r}; point dropped"
        )
    rec = (dose, phase, phase_err, vis, vis_err, v, dv, sv, key_power, ref_ph, ref_vi)
    return (rec, table.lines[i], label), None


def _series(name: str, groups: dict, fname: str) -> list[RecoilSeries]:
    """The series of one compound, with the shared-reference errors checked per label."""
    seen: dict[str, tuple[float, float, int]] = {}
    series = []
    for (laser, temp), recs in groups.items():
        arr = np.array([r[0] for r in recs], dtype=float)
        labels = tuple(r[2] for r in recs)
        for rec, line, label in recs:
            if not label:
                continue
            errs = (rec[9], rec[10])
            first = seen.setdefault(label, (*errs, line))
            if errs != first[:2]:
                raise CompoundError(
                    f"{fname} line {line}: reference {label!r} expected the errors of line "
                    f"{first[2]} (reference_phase_err_rad {first[0]:g}, "
                    f"reference_visibility_err {first[1]:g}), found {errs[0]:g}, {errs[1]:g}"
                )
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
                lines=tuple(r[1] for r in recs),
                key_power=arr[:, 8] > 0,
                references=labels,
                reference_phase_errors=arr[:, 9],
                reference_visibility_errors=arr[:, 10],
            )
        )
    return series


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
    "mode": None,
    "illumination": None,
    "beam_height_rms": "m",
    "hit_fraction": "",
    "power": "W",
    "visibility_errors": None,
}


FLUORESCENCE_FIT = "fit"
