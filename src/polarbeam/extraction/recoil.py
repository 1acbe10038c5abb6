"""Photon recoil: absolute absorption cross-sections from laser-induced fringe shifts.

A molecule that absorbs one photon of wavelength λ picks up the transverse velocity
Δv = ħk/m = h/(λ m).  A kick at z_L (spatial layouts) shifts its fringe by
Δx = (Δv/v)·w(z_L), with the layout weight w of :mod:`polarbeam.instrument.layouts`; in the time-domain
layout Δx = Δv·w(t_L).  One photon therefore turns the fringe phasor by φ1 = 2π Δx/d.

The number of absorbed photons is Poisson distributed with mean n̄ = σ E/(A ħω) for a pulse of
energy E spread over an effective area A (top hat; a Gaussian beam of waist w0 whose axis is
a distance r from the molecular beam has A = (π w0²/2)·exp(2r²/w0²)).  Summing the Poisson
mixture, the fringe phasor relative to the laser-off fringe is

    R = ⟨ exp( n̄ (g e^{iφ1(v)} − 1) ) ⟩_v,

averaged over the (Gaussian) velocity distribution.  arg R is the phase shift (tracked
continuously from n̄ = 0), |R| the visibility ratio.  g = 1 without re-emission; with isotropic
re-emission of quantum yield q, g = (1 − q) + q·sin φ_e/φ_e, φ_e being the phase of one
emitted photon's full recoil along the grating axis (the projection cos θ of an isotropic
emission is uniform on [−1, 1]).

σ (and optionally q) is fitted to the phases and visibility ratios together.  σ enters only as
σ·E·s/A (s the pulse-energy calibration factor), so the area and the calibration scale the result
exactly; the laser position, the grating geometry, the mass, the velocity calibration and a stated
q enter non-linearly and are propagated with the implicit derivative of the least-squares
solution.  Every input is a tagged :mod:`uncertainties` number, so
:func:`~polarbeam.results.objects.variance_budget` splits the variance of each σ.

Contents: pure physics functions (top), campaign inputs (``[[laser]]`` tables and ``recoil.csv``),
the fit, result objects with their renderings, and a simulator for round trips and the example.
"""

from __future__ import annotations

import html
import io
import math
from collections.abc import Sequence
from dataclasses import dataclass, field, fields
from pathlib import Path
from typing import Any

import lmfit
import numpy as np
import uncertainties
from scipy import constants as _sc
from scipy import stats
from uncertainties import UFloat, ufloat, umath

from polarbeam._util.atomic import write_bytes_atomic, write_text_atomic
from polarbeam._util.tables import read_table
from polarbeam.contract.campaign import build_layout
from polarbeam.constants import AMU
from polarbeam.errors import CompoundError, FitError, InputError
from polarbeam.extraction.series import FIT_TAG
from polarbeam.quantities import Measured, format_value_error, parse_quantity
from polarbeam.results.objects import CAUTIONS, CampaignResult, _num, variance_budget
from polarbeam.beam.velocity import velocity_nodes

__all__ = [
    "CM2",
    "PLANCK",
    "RECOIL_COLUMNS",
    "RECOIL_OUTPUT_COLUMNS",
    "SPEED_OF_LIGHT",
    "CrossSectionFit",
    "Laser",
    "LaserTruth",
    "RecoilCampaignResult",
    "RecoilCompound",
    "RecoilCompoundResult",
    "RecoilCompoundTruth",
    "RecoilData",
    "RecoilResult",
    "RecoilSeries",
    "RecoilSimulationTruth",
    "analyze_recoil",
    "emission_factor",
    "gaussian_effective_area",
    "kick_phase",
    "load_recoil",
    "mean_photons",
    "photon_energy",
    "poisson_phasor",
    "random_recoil_campaign",
    "recoil_observables",
    "recoil_phasor",
    "recoil_velocity",
    "simulate_recoil_campaign",
    "with_recoil",
    "write_recoil_results",
]

#: Planck constant (J s), CODATA via scipy.constants.
PLANCK = _sc.h
#: Speed of light in vacuum (m/s), exact (SI definition), via scipy.constants.
SPEED_OF_LIGHT = _sc.c
#: One cm² in m².
CM2 = 1e-4
#: Internal fit scale of the cross-section: 1e-16 cm² = 1e-20 m².
SIGMA_UNIT = 1e-20
#: Largest number of steps used to track the phase continuously from n̄ = 0.
_MAX_STEPS = 20000
_PHASE_STEP = 0.05  # step in n̄; one photon turns a phasor component by at most |g| ≤ 1 rad


# --------------------------------------------------------------------------------------------
# physics: plain functions of floats and arrays
# --------------------------------------------------------------------------------------------


def recoil_velocity(wavelength, mass):
    """Recoil velocity ħk/m = h/(λ m) of one photon (m/s).

    Parameters
    ----------
    wavelength
        Photon wavelength λ (m).
    mass
        Particle mass m (kg).
    """
    return PLANCK / (np.asarray(wavelength, dtype=float) * mass)


def photon_energy(wavelength):
    """Photon energy ħω = hc/λ (J) for a wavelength λ in metres."""
    return PLANCK * SPEED_OF_LIGHT / np.asarray(wavelength, dtype=float)


def gaussian_effective_area(waist, offset=0.0):
    """Effective area (m²) of a Gaussian beam seen at a distance ``offset`` from its axis.

    The local fluence of a pulse of energy E is (2E/(π w0²))·exp(−2r²/w0²) = E/A with
    A = (π w0²/2)·exp(2r²/w0²).  Works on floats and on :mod:`uncertainties` numbers.
    """
    return 0.5 * math.pi * waist**2 * umath.exp(2.0 * offset**2 / waist**2)


def mean_photons(cross_section, pulse_energy, area, wavelength):
    """Mean number of absorbed photons n̄ = σ E/(A ħω) (top-hat fluence E/A)."""
    return (
        cross_section * np.asarray(pulse_energy, dtype=float) / (area * photon_energy(wavelength))
    )


def kick_phase(kick_velocity, weight, period, velocity=None):
    """Fringe phase φ1 = 2π Δx/d of one kick.

    Δx = (Δv/v)·w for the spatial layouts (``velocity`` given, w in m) and Δx = Δv·w for the
    time-domain layout (``velocity=None``, w in s).
    """
    dx = kick_velocity * np.asarray(weight, dtype=float)
    if velocity is not None:
        dx = dx / np.asarray(velocity, dtype=float)
    return 2.0 * math.pi * dx / period


def emission_factor(fluorescence_yield, emission_phase):
    """Per-absorbed-photon factor g = (1 − q) + q·sin φ_e/φ_e of isotropic re-emission.

    ``emission_phase`` φ_e is the fringe phase of one emitted photon's full recoil along the
    grating axis; an isotropic emission projects it with cos θ uniform on [−1, 1].
    """
    x = np.asarray(emission_phase, dtype=float)
    return (1.0 - fluorescence_yield) + fluorescence_yield * np.sinc(x / math.pi)


def poisson_phasor(mean_photons, phase_per_photon, emission=1.0):
    """Σ_n Poisson(n; n̄)·(g e^{iφ1})^n = exp(n̄ (g e^{iφ1} − 1)) for one velocity class."""
    n = np.asarray(mean_photons, dtype=float)
    return np.exp(n * (emission * np.exp(1j * np.asarray(phase_per_photon, dtype=float)) - 1.0))


def _photon_terms(
    phase_coefficient: float,
    velocity: float,
    spread: float,
    emission_coefficient: float,
    fluorescence_yield: float,
    velocity_dependent: bool,
    nodes: int,
):
    """Quadrature weights and z = g e^{iφ1} − 1 per velocity node."""
    if velocity_dependent:
        v, w = velocity_nodes(velocity, spread, nodes)
        phi, phie = phase_coefficient / v, emission_coefficient / v
    else:
        w = np.array([1.0])
        phi, phie = np.array([phase_coefficient]), np.array([emission_coefficient])
    g = emission_factor(fluorescence_yield, phie)
    return w, g * np.exp(1j * phi) - 1.0


def recoil_phasor(
    mean_photons,
    phase_coefficient: float,
    velocity: float = 1.0,
    spread: float = 0.0,
    *,
    emission_coefficient: float = 0.0,
    fluorescence_yield: float = 0.0,
    velocity_dependent: bool = True,
    nodes: int = 48,
):
    """Velocity-averaged fringe phasor R = ⟨exp(n̄ (g(v) e^{iφ1(v)} − 1))⟩ (complex array).

    Parameters
    ----------
    mean_photons
        n̄ for each point (array).
    phase_coefficient
        K with φ1(v) = K/v (spatial layouts, rad·m/s) or φ1 = K (time domain, rad); its sign is
        the kick direction.
    velocity, spread
        Mean and standard deviation of the Gaussian velocity distribution (m/s).
    emission_coefficient
        The same coefficient for one emitted photon's full recoil (with ``fluorescence_yield``).
    velocity_dependent
        False for the time-domain layout.
    """
    w, z = _photon_terms(
        phase_coefficient,
        velocity,
        spread,
        emission_coefficient,
        fluorescence_yield,
        velocity_dependent,
        nodes,
    )
    n = np.asarray(mean_photons, dtype=float)
    return (w * np.exp(np.multiply.outer(n, z))).sum(axis=-1)


def recoil_observables(
    mean_photons,
    phase_coefficient: float,
    velocity: float = 1.0,
    spread: float = 0.0,
    *,
    emission_coefficient: float = 0.0,
    fluorescence_yield: float = 0.0,
    velocity_dependent: bool = True,
    nodes: int = 48,
):
    """Phase shift arg R and visibility ratio |R| for each n̄ (see :func:`recoil_phasor`).

    The phase is continuous in n̄: it is followed from n̄ = 0 in steps of 0.05 photons (one
    photon turns each velocity component by at most |g| ≤ 1 rad), as an experiment raising the
    pulse energy follows it, so it is not wrapped into (−π, π].
    """
    w, z = _photon_terms(
        phase_coefficient,
        velocity,
        spread,
        emission_coefficient,
        fluorescence_yield,
        velocity_dependent,
        nodes,
    )
    n = np.asarray(mean_photons, dtype=float)
    flat = n.ravel()
    phase = np.zeros_like(flat)
    modulus = np.ones_like(flat)
    for sign in (1.0, -1.0):
        sel = flat * sign > 0
        if not sel.any():
            continue
        targets = np.abs(flat[sel])
        top = float(targets.max())
        steps = int(min(_MAX_STEPS, max(8, math.ceil(top / _PHASE_STEP))))
        grid = np.linspace(0.0, top, steps + 1)
        allk = np.concatenate([grid, targets])
        order = np.argsort(allk, kind="stable")
        r = (w * np.exp(np.multiply.outer(sign * allk[order], z))).sum(axis=1)
        ph = np.empty_like(allk)
        md = np.empty_like(allk)
        ph[order] = np.unwrap(np.angle(r))
        md[order] = np.abs(r)
        phase[sel] = ph[grid.size :]
        modulus[sel] = md[grid.size :]
    return phase.reshape(n.shape), modulus.reshape(n.shape)


# --------------------------------------------------------------------------------------------
# campaign inputs: [[laser]] tables and recoil.csv
# --------------------------------------------------------------------------------------------

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
    path = (campaign_path.parent / rel).resolve()
    timing = layout == "time-domain"
    required = tuple(c for c in RECOIL_COLUMNS if not (timing and c in _VELOCITY_COLUMNS))
    table = read_table(path, required, "recoil")
    names = {la.name for la in lasers}
    groups: dict[str, dict[tuple[str, float], list]] = {}
    problems: dict[str, str] = {}
    for i, row in enumerate(table.rows):
        name = (row.get("compound") or "").strip()
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


# --------------------------------------------------------------------------------------------
# the fit
# --------------------------------------------------------------------------------------------


def _laser_tag(name: str, key: str) -> str:
    return f"laser {name}: {key}"


def _instrument_tag(key: str) -> str:
    table, _, name = key.partition(".")
    return f"{table}: {name}"


@dataclass(frozen=True)
class _Context:
    """Campaign-wide pieces shared by every compound (the same uncertain numbers for all)."""

    layout: str
    nominal: dict[str, float]
    shared: dict[str, UFloat]
    area_ratio: dict[str, Any]  # laser → A/A0 as an uncertain number (or 1.0)
    energy_ratio: dict[str, Any]  # laser → s/s0 as an uncertain number (or 1.0)
    lasers: dict[str, Laser]
    scale_errors: str
    nodes: int


def _tagged(m: Measured, tag: str):
    return ufloat(m.value, m.error, tag=tag) if m.error > 0 else m.value


def _build_context(c) -> _Context:
    rd: RecoilData = c.recoil
    nominal = {k: m.value for k, m in c.stated.items() if k.startswith("instrument.")}
    shared: dict[str, UFloat] = {}
    for k, m in c.stated.items():
        if k.startswith("instrument.") and m.error > 0:
            shared[k] = ufloat(m.value, m.error, tag=_instrument_tag(k))
    area_ratio, energy_ratio = {}, {}
    for la in rd.lasers:
        for key, m in (("wavelength", la.wavelength), ("position", la.position)):
            nominal[f"laser.{la.name}.{key}"] = m.value
            if m.error > 0:
                shared[f"laser.{la.name}.{key}"] = ufloat(
                    m.value, m.error, tag=_laser_tag(la.name, key)
                )
        if la.area is not None:
            a = _tagged(la.area, _laser_tag(la.name, "area"))
        else:
            a = gaussian_effective_area(
                _tagged(la.waist, _laser_tag(la.name, "waist")),
                _tagged(la.beam_offset, _laser_tag(la.name, "beam_offset")),
            )
        area_ratio[la.name] = a / la.effective_area
        energy_ratio[la.name] = (
            _tagged(la.energy_scale, _laser_tag(la.name, "energy_scale")) / la.energy_scale.value
        )
    return _Context(
        c.layout,
        nominal,
        shared,
        area_ratio,
        energy_ratio,
        {la.name: la for la in rd.lasers},
        c.settings.scale_errors,
        c.settings.velocity_nodes,
    )


@dataclass(frozen=True)
class _Block:
    laser: int
    group: int
    rows: np.ndarray
    velocity: float
    spread: float


class _CompoundModel:
    """Stacked rows of one compound and the model of their phases and visibility ratios."""

    def __init__(self, rc: RecoilCompound, ctx: _Context):
        self.rc, self.ctx = rc, ctx
        self.lasers = rc.lasers
        self.series = rc.series
        cat = np.concatenate
        s = rc.series
        self.energy = cat([x.pulse_energies for x in s])
        self.phase = cat([x.phases for x in s])
        self.phase_err = cat([x.phase_errors for x in s])
        self.vis = cat([x.visibility_ratios for x in s])
        self.vis_err = cat([x.visibility_errors for x in s])
        self.laser_of_row = cat([np.full(x.n_points, self.lasers.index(x.laser)) for x in s])
        self.group_of_row = cat([np.full(x.n_points, g) for g, x in enumerate(s)])
        self.velocity_dependent = ctx.layout != "time-domain"
        blocks: list[_Block] = []
        start = 0
        for g, x in enumerate(s):
            idx = np.arange(start, start + x.n_points)
            start += x.n_points
            pairs = np.stack([x.velocities, x.spreads], axis=1)
            for v, sp in np.unique(pairs, axis=0):
                sel = (x.velocities == v) & (x.spreads == sp)
                blocks.append(_Block(self.lasers.index(x.laser), g, idx[sel], float(v), float(sp)))
        self.blocks = tuple(blocks)
        self.n = self.energy.size
        self.e_max = np.array(
            [float(self.energy[self.laser_of_row == i].max()) for i in range(len(self.lasers))]
        )

    def values(self) -> dict[str, float]:
        """Nominal inputs of this compound's model (SI; velocity entries are scale factors)."""
        v = dict(self.ctx.nominal)
        v["mass"] = self.rc.mass.value
        v["fluorescence_yield"] = self.rc.fluorescence_yield.value
        for g in range(len(self.series)):
            v[f"velocity[{g}]"] = 1.0
        return v

    def coefficients(self, vals: dict[str, float]):
        """Per laser: K (φ1 = K/v or K), K_e (emitted photon) and n̄ per unit σ·E (1/(m²·J))."""
        layout = build_layout(self.ctx.layout, vals)
        t0 = vals["instrument.pulse_times[0]"] if self.ctx.layout == "time-domain" else 0.0
        out = []
        for name in self.lasers:
            la = self.ctx.lasers[name]
            lam = vals[f"laser.{name}.wavelength"]
            w = float(layout.weight(t0 + vals[f"laser.{name}.position"]))
            k = la.direction * layout.scale * float(recoil_velocity(lam, vals["mass"])) * w
            lam_e = self.rc.emission_wavelength or lam
            ke = layout.scale * float(recoil_velocity(lam_e, vals["mass"])) * w
            per = la.energy_scale.value / (la.effective_area * float(photon_energy(lam)))
            out.append((k, ke, per))
        return out

    def predict(self, sigmas: np.ndarray, q: float, vals: dict[str, float]):
        """Model phases and visibility ratios for cross-sections ``sigmas`` (m², per laser)."""
        coef = self.coefficients(vals)
        ph = np.empty(self.n)
        vi = np.empty(self.n)
        for b in self.blocks:
            k, ke, per = coef[b.laser]
            f = vals[f"velocity[{b.group}]"]
            nbar = sigmas[b.laser] * per * self.energy[b.rows]
            ph[b.rows], vi[b.rows] = recoil_observables(
                nbar,
                k,
                b.velocity * f,
                b.spread * f,
                emission_coefficient=ke,
                fluorescence_yield=q,
                velocity_dependent=self.velocity_dependent,
                nodes=self.ctx.nodes,
            )
        return ph, vi

    def residual(self, theta: np.ndarray, vals: dict[str, float]) -> np.ndarray:
        nl = len(self.lasers)
        q = theta[nl] if self.rc.fit_yield else vals["fluorescence_yield"]
        ph, vi = self.predict(theta[:nl] * SIGMA_UNIT, q, vals)
        return np.concatenate([(ph - self.phase) / self.phase_err, (vi - self.vis) / self.vis_err])


def _jacobian(fun, x0: np.ndarray, steps: np.ndarray) -> np.ndarray:
    cols = []
    for k, h in enumerate(steps):
        xp, xm = x0.copy(), x0.copy()
        xp[k] += h
        xm[k] -= h
        cols.append((fun(xp) - fun(xm)) / (2 * h))
    return np.column_stack(cols)


@dataclass(frozen=True)
class CrossSectionFit:
    """σ of one compound at one laser, with the points and the model."""

    compound: str
    laser: str
    wavelength_m: float
    cross_section: UFloat  # m²
    mean_photons_at_max: float
    chi2: float
    ndof: float
    pulse_energies: np.ndarray
    phases: np.ndarray
    phase_errors: np.ndarray
    visibility_ratios: np.ndarray
    visibility_errors: np.ndarray
    model_phases: np.ndarray
    model_visibility: np.ndarray

    @property
    def cross_section_cm2(self) -> float:
        return self.cross_section.nominal_value / CM2

    @property
    def cross_section_err_cm2(self) -> float:
        return self.cross_section.std_dev / CM2

    @property
    def reduced_chi2(self) -> float:
        return self.chi2 / self.ndof if self.ndof > 0 else math.nan

    @property
    def n_points(self) -> int:
        return int(self.pulse_energies.size)

    def summary(self) -> dict[str, Any]:
        return {
            "laser": self.laser,
            "wavelength_nm": self.wavelength_m * 1e9,
            "cross_section_cm2": self.cross_section_cm2,
            "cross_section_err_cm2": self.cross_section_err_cm2,
            "cross_section_m2": self.cross_section.nominal_value,
            "cross_section_err_m2": self.cross_section.std_dev,
            "mean_photons_at_max": self.mean_photons_at_max,
            "chi2": self.chi2,
            "ndof": self.ndof,
            "reduced_chi2": _num(self.reduced_chi2),
            "budget": variance_budget(self.cross_section),
            "points": [
                {
                    "pulse_energy_J": float(e),
                    "phase_rad": float(p),
                    "phase_err_rad": float(pe),
                    "model_phase_rad": float(mp),
                    "visibility_ratio": float(v),
                    "visibility_ratio_err": float(ve),
                    "model_visibility_ratio": float(mv),
                }
                for e, p, pe, mp, v, ve, mv in zip(
                    self.pulse_energies,
                    self.phases,
                    self.phase_errors,
                    self.model_phases,
                    self.visibility_ratios,
                    self.visibility_errors,
                    self.model_visibility,
                    strict=True,
                )
            ],
        }


@dataclass(frozen=True)
class RecoilCompoundResult:
    """Cross-sections of one compound (or why there are none)."""

    compound: str
    status: str
    message: str
    mass_u: float | None = None
    fits: tuple[CrossSectionFit, ...] = ()
    fluorescence_yield: Any = 0.0  # UFloat when fitted or stated with an error, else float
    yield_fitted: bool = False
    emission_wavelength_m: float | None = None
    chi2: float | None = None
    ndof: int | None = None
    warnings: tuple[str, ...] = ()

    @property
    def uses_reemission(self) -> bool:
        return self.yield_fitted or _nominal(self.fluorescence_yield) > 0

    def rows(self) -> list[dict[str, Any]]:
        """Rows of ``recoil.csv``."""
        if not self.fits:
            return [
                {
                    "compound": self.compound,
                    "laser": None,
                    "status": self.status,
                    "message": self.message,
                }
            ]
        out = []
        for f in self.fits:
            row: dict[str, Any] = {
                "compound": self.compound,
                "laser": f.laser,
                "wavelength_nm": f.wavelength_m * 1e9,
                "cross_section_cm2": f.cross_section_cm2,
                "cross_section_err_cm2": f.cross_section_err_cm2,
                "mean_photons_at_max": f.mean_photons_at_max,
                "reduced_chi2": f.reduced_chi2,
            }
            if self.yield_fitted:
                row["fluorescence_yield"] = _nominal(self.fluorescence_yield)
                row["fluorescence_yield_err"] = _std(self.fluorescence_yield)
            row.update({"status": self.status, "message": self.message, "n_points": f.n_points})
            out.append(row)
        return out

    def summary(self) -> dict[str, Any]:
        q = self.fluorescence_yield
        return {
            "compound": self.compound,
            "status": self.status,
            "message": self.message,
            "mass_u": self.mass_u,
            "fluorescence_yield": {
                "value": _nominal(q),
                "err": _std(q),
                "fitted": self.yield_fitted,
                "emission_wavelength_nm": (
                    self.emission_wavelength_m * 1e9 if self.emission_wavelength_m else None
                ),
                "budget": variance_budget(q) if isinstance(q, UFloat) else {},
            },
            "chi2": _num(self.chi2),
            "ndof": self.ndof,
            "cross_section_correlation": _correlation(self.fits),
            "lasers": [f.summary() for f in self.fits],
            "warnings": list(self.warnings),
        }


def _nominal(x) -> float:
    return float(x.nominal_value) if isinstance(x, UFloat) else float(x)


def _std(x) -> float:
    return float(x.std_dev) if isinstance(x, UFloat) else 0.0


def _correlation(fits) -> list[list[float]] | None:
    if len(fits) < 2:
        return None
    return np.round(uncertainties.correlation_matrix([f.cross_section for f in fits]), 6).tolist()


def _failed(rc: RecoilCompound, message: str, mass_u=None) -> RecoilCompoundResult:
    return RecoilCompoundResult(rc.name, "failed", message, mass_u=mass_u)


def _analyze_compound(rc: RecoilCompound, ctx: _Context) -> RecoilCompoundResult:
    if rc.problem:
        return _failed(rc, rc.problem)
    if rc.mass is None:
        return _failed(rc, f"compound {rc.name!r}: no mass")
    mass_u = rc.mass.value / AMU
    try:
        return _fit_compound(rc, ctx, mass_u)
    except CompoundError as exc:
        return _failed(rc, str(exc), mass_u)
    except (ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
        return _failed(rc, f"compound {rc.name!r}: numerical failure ({exc})", mass_u)


def _start(model: _CompoundModel, vals, q0: float) -> np.ndarray:
    """Per laser, the best of a logarithmic scan of n̄ at the largest pulse energy."""
    nl = len(model.lasers)
    coef = model.coefficients(vals)
    per_sigma = np.array([coef[i][2] * model.e_max[i] for i in range(nl)]) * SIGMA_UNIT
    best = np.full(nl, np.inf)
    theta0 = np.ones(nl)
    for nmax in np.geomspace(1e-3, 30.0, 22):
        th = nmax / per_sigma
        full = np.concatenate([th, [q0]]) if model.rc.fit_yield else th
        r = model.residual(full, vals) ** 2
        chi = r[: model.n] + r[model.n :]
        for i in range(nl):
            c = float(chi[model.laser_of_row == i].sum())
            if c < best[i]:
                best[i], theta0[i] = c, th[i]
    return theta0


def _fit_compound(rc: RecoilCompound, ctx: _Context, mass_u: float) -> RecoilCompoundResult:
    model = _CompoundModel(rc, ctx)
    nl = len(model.lasers)
    vals0 = model.values()
    fit_q = rc.fit_yield
    q_start = 0.5
    theta0 = _start(model, vals0, q_start)
    params = lmfit.Parameters()
    names = [f"s{i}" for i in range(nl)] + (["q"] if fit_q else [])
    for i in range(nl):
        params.add(names[i], value=theta0[i])
    if fit_q:
        params.add("q", value=q_start)

    def res_fun(p):
        return model.residual(np.array([p[k].value for k in names]), vals0)

    res = lmfit.minimize(res_fun, params, method="leastsq", scale_covar=False)
    theta = np.array([res.params[k].value for k in names])
    if not res.success or not np.all(np.isfinite(theta)):
        raise FitError(f"compound {rc.name!r}: the recoil fit did not converge ({res.message})")

    def r_theta(th):
        return model.residual(th, vals0)

    steps = 1e-4 * np.maximum(np.abs(theta), 1e-2)
    jac = _jacobian(r_theta, theta, steps)
    jtj = jac.T @ jac
    try:
        cov = np.linalg.inv(jtj)
    except np.linalg.LinAlgError:
        raise FitError(f"compound {rc.name!r}: the recoil fit has a singular covariance") from None
    if not (np.all(np.isfinite(cov)) and np.all(np.diag(cov) > 0)):
        raise FitError(f"compound {rc.name!r}: the recoil fit gave no usable errors")
    r0 = r_theta(theta)
    chi2 = float(r0 @ r0)
    ndof = 2 * model.n - len(names)
    error_scale = 1.0
    if ctx.scale_errors == "birge" and ndof > 0 and chi2 / ndof > 1:
        error_scale = math.sqrt(chi2 / ndof)
        cov = cov * error_scale**2

    # nuisance inputs entering non-linearly: implicit derivative of the least-squares solution,
    # dθ/dp = −(JᵀJ)⁻¹ Jᵀ ∂r/∂p
    nuisances: list[tuple[str, float, Any]] = []
    relevant = {f"laser.{n}.{x}" for n in model.lasers for x in ("wavelength", "position")}
    for k, u in ctx.shared.items():
        if k.startswith("instrument.") or k in relevant:
            nuisances.append((k, u.std_dev, u))
    if rc.mass.error > 0:
        nuisances.append(
            ("mass", rc.mass.error, ufloat(rc.mass.value, rc.mass.error, tag=f"mass: {rc.name}"))
        )
    if model.velocity_dependent:
        for g, s in enumerate(rc.series):
            if s.velocity.error > 0:
                rel = s.velocity.error / s.velocity.value
                nuisances.append(
                    (f"velocity[{g}]", rel, ufloat(1.0, rel, tag=f"velocity: {s.label}"))
                )
    q_stated = rc.fluorescence_yield
    if not fit_q and q_stated.error > 0:
        nuisances.append(
            (
                "fluorescence_yield",
                q_stated.error,
                ufloat(q_stated.value, q_stated.error, tag=f"fluorescence yield: {rc.name}"),
            )
        )
    solve = np.linalg.solve
    scales = np.array([SIGMA_UNIT] * nl + ([1.0] if fit_q else []))
    fit_u = uncertainties.correlated_values(
        theta * scales,
        cov * np.outer(scales, scales),
        tags=[f"{FIT_TAG}|recoil {rc.name}"] * len(names),
    )
    fit_u = list(fit_u)
    for key, err, u in nuisances:
        h = 1e-3 * err
        vp, vm = dict(vals0), dict(vals0)
        vp[key] += h
        vm[key] -= h
        drdp = (model.residual(theta, vp) - model.residual(theta, vm)) / (2 * h)
        dtheta = -solve(jtj, jac.T @ drdp) * scales
        for i in range(len(names)):
            fit_u[i] = fit_u[i] + dtheta[i] * (u - u.nominal_value)

    q_val = theta[nl] if fit_q else q_stated.value
    ph_m, vi_m = model.predict(theta[:nl] * SIGMA_UNIT, q_val, vals0)
    coef = model.coefficients(vals0)
    fits = []
    warnings: list[str] = []
    for i, name in enumerate(model.lasers):
        la = ctx.lasers[name]
        sigma_u = fit_u[i] * ctx.area_ratio[name] / ctx.energy_ratio[name]
        rows = model.laser_of_row == i
        rr = np.concatenate([r0[: model.n][rows], r0[model.n :][rows]])
        chi_l = float(rr @ rr)
        nu_l = int(2 * rows.sum()) - 1
        n_at_max = float(theta[i] * SIGMA_UNIT * coef[i][2] * model.e_max[i])
        fits.append(
            CrossSectionFit(
                compound=rc.name,
                laser=name,
                wavelength_m=la.wavelength.value,
                cross_section=sigma_u,
                mean_photons_at_max=n_at_max,
                chi2=chi2 if fit_q else chi_l,
                ndof=ndof if fit_q else nu_l,
                pulse_energies=model.energy[rows],
                phases=model.phase[rows],
                phase_errors=model.phase_err[rows],
                visibility_ratios=model.vis[rows],
                visibility_errors=model.vis_err[rows],
                model_phases=ph_m[rows],
                model_visibility=vi_m[rows],
            )
        )
        fit = fits[-1]
        if fit.ndof > 0 and not fit_q and stats.chi2.sf(chi_l, nu_l) < 0.01:
            warnings.append(
                f"{name}: reduced χ² = {fit.reduced_chi2:.2f} (p < 0.01); the stated point errors "
                "may be too small, or a stated input (laser position, velocity) off by more than "
                "its error"
            )
        if sigma_u.nominal_value <= 2 * sigma_u.std_dev:
            warnings.append(f"{name}: σ is not significant (less than 2 standard errors)")
        vmin = float(np.min(vi_m[rows]))
        if vmin < 0.1:
            warnings.append(
                f"{name}: the fringe visibility drops to {vmin:.0%} of laser-off at the largest "
                "pulse energy; the phase there is poorly defined"
            )
        if la.waist is not None and la.beam_offset.error > abs(la.beam_offset.value):
            warnings.append(
                f"{name}: beam_offset {la.beam_offset.value:g} ± {la.beam_offset.error:g} m is "
                "compatible with 0; the area error from it is second order and is not propagated"
            )
    if fit_q and ndof > 0 and stats.chi2.sf(chi2, ndof) < 0.01:
        warnings.append(
            f"reduced χ² = {chi2 / ndof:.2f} (p < 0.01); the stated point errors may be too "
            "small, or a stated input (laser position, velocity) off by more than its error"
        )
    if fit_q:
        q_u = fit_u[nl]
        if not 0 <= q_u.nominal_value <= 1:
            warnings.append(
                f"fitted fluorescence yield {q_u.nominal_value:.2f} lies outside 0..1 "
                "(unconstrained fit; the data barely determine it)"
            )
    else:
        q_u = (
            ufloat(q_stated.value, q_stated.error, tag=f"fluorescence yield: {rc.name}")
            if q_stated.error > 0
            else q_stated.value
        )
    messages = []
    if fit_q or q_stated.value > 0:
        lam_e = (
            f"{rc.emission_wavelength * 1e9:g} nm"
            if rc.emission_wavelength
            else "the laser wavelength"
        )
        what = "fitted" if fit_q else "stated"
        messages.append(
            f"isotropic re-emission included ({what} fluorescence yield "
            f"{format_value_error(_nominal(q_u), _std(q_u))}, emission at {lam_e})"
        )
    if error_scale > 1:
        messages.append(f"fit errors scaled by √(χ²/ν) = {error_scale:.2f} (Birge)")
    status = "warning" if warnings else "ok"
    return RecoilCompoundResult(
        compound=rc.name,
        status=status,
        message="; ".join(messages + warnings) or "ok",
        mass_u=mass_u,
        fits=tuple(fits),
        fluorescence_yield=q_u,
        yield_fitted=fit_q,
        emission_wavelength_m=rc.emission_wavelength,
        chi2=chi2,
        ndof=ndof,
        warnings=tuple(warnings),
    )


def analyze_recoil(c) -> RecoilResult:
    """Cross-sections of every compound of a loaded campaign that has ``[data] recoil``.

    Never raises for bad data: a compound with bad rows or a failed fit is ``failed``.
    """
    rd: RecoilData = c.recoil
    if rd is None:
        raise InputError(f"{c.path.name}: no [data] recoil in this campaign")
    ctx = _build_context(c)
    compounds = tuple(_analyze_compound(rc, ctx) for rc in rd.compounds)
    stated = {}
    for la in rd.lasers:
        for k, m in la.stated().items():
            stated[k] = {"value": m.value, "error": m.error}
    notes = []
    if any(r.uses_reemission for r in compounds):
        notes.append(
            "isotropic re-emission is modelled for the compounds with a fluorescence_yield: each "
            "absorbed photon's factor e^{iφ1} is multiplied by (1 − q) + q·sin φ_e/φ_e"
        )
    return RecoilResult(
        layout=c.layout,
        source=str(rd.path),
        lasers=rd.lasers,
        compounds=compounds,
        stated_inputs=stated,
        notes=tuple(notes),
    )


# --------------------------------------------------------------------------------------------
# results and their renderings (no physics below this line, apart from the simulator)
# --------------------------------------------------------------------------------------------

RECOIL_OUTPUT_COLUMNS = (
    "compound",
    "laser",
    "wavelength_nm",
    "cross_section_cm2",
    "cross_section_err_cm2",
    "mean_photons_at_max",
    "reduced_chi2",
)
SPECTRUM_PLOT = "recoil_spectrum.png"


@dataclass(frozen=True)
class RecoilResult:
    """Every compound's cross-sections from one campaign."""

    layout: str
    source: str
    lasers: tuple[Laser, ...]
    compounds: tuple[RecoilCompoundResult, ...]
    stated_inputs: dict[str, dict[str, float]] = field(default_factory=dict)
    notes: tuple[str, ...] = ()

    @property
    def n_failed(self) -> int:
        return sum(c.status == "failed" for c in self.compounds)

    @property
    def table(self):
        """The ``recoil.csv`` table as a :class:`pandas.DataFrame`."""
        import pandas as pd

        rows = [r for c in self.compounds for r in c.rows()]
        df = pd.DataFrame(rows)
        cols = list(RECOIL_OUTPUT_COLUMNS)
        if any(c.yield_fitted for c in self.compounds):
            cols += ["fluorescence_yield", "fluorescence_yield_err"]
        for col in cols:
            if col not in df.columns:
                df[col] = None
        return df[cols + [c for c in df.columns if c not in cols]]

    def summary(self) -> dict[str, Any]:
        return {
            "source": self.source,
            "layout": self.layout,
            "lasers": [
                {
                    "name": la.name,
                    "wavelength_nm": la.wavelength.value * 1e9,
                    "direction": la.direction,
                    "beam": "top-hat" if la.area is not None else "gaussian",
                    "effective_area_m2": la.effective_area,
                }
                for la in self.lasers
            ],
            "stated_inputs": self.stated_inputs,
            "compounds": [c.summary() for c in self.compounds],
            "notes": list(self.notes),
        }

    def markdown_lines(self) -> list[str]:
        """The report section (Markdown lines)."""
        out = [
            "## Photon-recoil absorption cross-sections",
            "",
            f"source `{_md(self.source)}` · lasers: "
            + ", ".join(f"{_md(la.name)} ({la.wavelength.value * 1e9:g} nm)" for la in self.lasers),
            "",
            "| compound | laser | λ (nm) | σ (10⁻¹⁶ cm²) | n̄ at max | χ²/ν | status |",
            "|---|---|---|---|---|---|---|",
        ]
        for c in self.compounds:
            if not c.fits:
                out.append(f"| {_md(c.compound)} | — | — | — | — | — | {c.status} |")
            for f in c.fits:
                out.append(
                    f"| {_md(c.compound)} | {_md(f.laser)} | {f.wavelength_m * 1e9:g} | "
                    f"{_fmt(f.cross_section_cm2 / 1e-16, f.cross_section_err_cm2 / 1e-16)} | "
                    f"{f.mean_photons_at_max:.3g} | {f.reduced_chi2:.2f} | {c.status} |"
                )
        for note in self.notes:
            out += ["", f"> {_md(note)}"]
        for c in self.compounds:
            out += ["", f"### {_md(c.compound)} (photon recoil)", ""]
            if c.status == "failed":
                out.append(f"**failed:** {_md(c.message)}")
                continue
            out.append(f"mass {c.mass_u:.4f} u")
            if c.uses_reemission:
                lam = (
                    f"{c.emission_wavelength_m * 1e9:g} nm"
                    if c.emission_wavelength_m
                    else "the laser wavelength"
                )
                how = "fitted" if c.yield_fitted else "stated"
                q = c.fluorescence_yield
                out.append(
                    f"Isotropic re-emission used: {how} fluorescence yield "
                    f"{_fmt(_nominal(q), _std(q))}, emission at {lam}."
                )
            for f in c.fits:
                out += [
                    "",
                    f"Laser {_md(f.laser)} ({f.wavelength_m * 1e9:g} nm): "
                    f"σ = ({_fmt(f.cross_section_cm2 / 1e-16, f.cross_section_err_cm2 / 1e-16)})"
                    "·10⁻¹⁶ cm²",
                    "",
                    "| E (J) | phase (rad) | model | pull | visibility ratio | model | pull |",
                    "|---|---|---|---|---|---|---|",
                ]
                for e, p, pe, pm, v, ve, vm in zip(
                    f.pulse_energies,
                    f.phases,
                    f.phase_errors,
                    f.model_phases,
                    f.visibility_ratios,
                    f.visibility_errors,
                    f.model_visibility,
                    strict=True,
                ):
                    out.append(
                        f"| {e:.4g} | {p:.4f} ± {pe:.2g} | {pm:.4f} | {(p - pm) / pe:+.2f} | "
                        f"{v:.4f} ± {ve:.2g} | {vm:.4f} | {(v - vm) / ve:+.2f} |"
                    )
                budget = variance_budget(f.cross_section)
                if budget:
                    shown = {k: v for k, v in budget.items() if v >= 5e-4}
                    out += ["", "Uncertainty budget of σ (share of variance):", ""]
                    out += ["| input | share |", "|---|---|"]
                    out += [f"| {_md(k)} | {v:.1%} |" for k, v in shown.items()]
                    if len(shown) < len(budget):
                        rest = sum(v for k, v in budget.items() if k not in shown)
                        out.append(
                            f"| {len(budget) - len(shown)} more inputs, each < 0.05 % | "
                            f"{rest:.2%} |"
                        )
            if c.warnings:
                out += ["", "Warnings:", ""] + [f"- {_md(w)}" for w in c.warnings]
        out += [
            "",
            "Method: n̄ = σE/(Aħω) photons per molecule (Poisson); fringe phasor "
            "R = ⟨exp(n̄(g e^{iφ1} − 1))⟩ over the velocity distribution, φ1 = 2π·(ħk/m)·w/(v d); "
            "σ fitted to arg R and |R| together; area and pulse-energy calibration scale σ "
            "exactly, the other inputs are propagated by implicit derivatives.",
        ]
        return out

    def terminal_lines(self) -> list[str]:
        head = f"{'compound':<20} {'laser':<10} {'λ (nm)':>8} {'σ (1e-16 cm²)':>18}  status"
        out = ["photon-recoil cross-sections", head, "-" * len(head)]
        for c in self.compounds:
            name = c.compound if len(c.compound) <= 20 else c.compound[:19] + "…"
            if not c.fits:
                out.append(f"{name:<20} {'—':<10} {'—':>8} {'—':>18}  {c.status}")
            for f in c.fits:
                s = _fmt(f.cross_section_cm2 / 1e-16, f.cross_section_err_cm2 / 1e-16)
                lname = f.laser if len(f.laser) <= 10 else f.laser[:9] + "…"
                out.append(f"{name:<20} {lname:<10} {f.wavelength_m * 1e9:>8g} {s:>18}  {c.status}")
        return out

    def to_markdown(self) -> str:
        return "\n".join(self.markdown_lines()) + "\n"

    def _repr_html_(self) -> str:
        rows = []
        for c in self.compounds:
            for f in c.fits or (None,):
                cells = ["—", "—", "—"]
                if f is not None:
                    sig = _fmt(f.cross_section_cm2 / 1e-16, f.cross_section_err_cm2 / 1e-16)
                    cells = [f.laser, f"{f.wavelength_m * 1e9:g}", sig]
                rows.append(
                    "<tr>"
                    + "".join(
                        f"<td>{html.escape(str(x))}</td>" for x in [c.compound, *cells, c.status]
                    )
                    + "</tr>"
                )
        return (
            "<table><thead><tr><th>compound</th><th>laser</th><th>λ (nm)</th>"
            "<th>σ (10⁻¹⁶ cm²)</th><th>status</th></tr></thead><tbody>"
            + "".join(rows)
            + "</tbody></table>"
        )


def _fmt(v, e) -> str:
    return format_value_error(v, e) if v is not None and e is not None else "—"


def _md(s: str) -> str:
    out = str(s).replace("\\", "\\\\").replace("|", "\\|").replace("<", "&lt;").replace(">", "&gt;")
    return out.replace("\n", " ")


@dataclass(frozen=True)
class RecoilCampaignResult(CampaignResult):
    """A :class:`~polarbeam.results.objects.CampaignResult` with the photon-recoil results attached."""

    recoil: RecoilResult | None = None

    @property
    def n_failed(self) -> int:
        extra = self.recoil.n_failed if self.recoil is not None else 0
        return sum(c.status == "failed" for c in self.compounds) + extra

    @property
    def exit_code(self) -> int:
        """0 when nothing failed, 2 when every compound (deflection and recoil) failed, else 1."""
        total = len(self.compounds) + (len(self.recoil.compounds) if self.recoil else 0)
        if total == 0:
            return 2
        if self.n_failed == 0:
            return 0
        return 2 if self.n_failed == total else 1

    def summary(self) -> dict[str, Any]:
        out = super().summary()
        out["recoil"] = self.recoil.summary() if self.recoil is not None else None
        return out


def with_recoil(result: CampaignResult, recoil: RecoilResult) -> RecoilCampaignResult:
    """``result`` with the recoil results attached (all deflection fields unchanged)."""
    kw = {f.name: getattr(result, f.name) for f in fields(CampaignResult)}
    return RecoilCampaignResult(**kw, recoil=recoil)


def render_recoil_only(result: RecoilCampaignResult) -> str:
    """Markdown report of a campaign with recoil data and no deflection data."""
    lines = [
        f"# {_md(result.title)}",
        "",
        f"polarbeam {result.version} · layout `{result.layout}` · source `{_md(result.source)}`",
        "",
    ]
    for note in result.notes:
        lines += [f"> {_md(note)}", ""]
    lines += result.recoil.markdown_lines()
    lines += ["", "## Cautions", ""] + [f"- {c}" for c in CAUTIONS]
    return "\n".join(lines) + "\n"


def write_recoil_results(recoil: RecoilResult, out: str | Path) -> list[str]:
    """Write ``recoil.csv`` (and ``recoil_spectrum.png`` when several lasers were used).

    Returns the names of the files written.  The plot needs matplotlib (``polarbeam[plots]``);
    without it the plot is skipped and a note saying so is written into the CSV's folder.
    """
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    buf = io.StringIO()
    recoil.table.to_csv(buf, index=False, float_format="%.10g", lineterminator="\n")
    write_text_atomic(out / "recoil.csv", buf.getvalue())
    written = ["recoil.csv"]
    if len(recoil.lasers) >= 2 and any(len(c.fits) >= 1 for c in recoil.compounds):
        png = _spectrum_png(recoil)
        if png is not None:
            write_bytes_atomic(out / SPECTRUM_PLOT, png)
            written.append(SPECTRUM_PLOT)
    return written


def _spectrum_png(recoil: RecoilResult) -> bytes | None:
    try:
        import matplotlib

        matplotlib.use("Agg", force=False)
        from matplotlib.figure import Figure
    except ImportError:  # optional extra polarbeam[plots]
        return None
    fig = Figure(figsize=(6.0, 4.0), dpi=120)
    ax = fig.add_subplot()
    for c in recoil.compounds:
        if not c.fits:
            continue
        fits = sorted(c.fits, key=lambda f: f.wavelength_m)
        ax.errorbar(
            [f.wavelength_m * 1e9 for f in fits],
            [f.cross_section_cm2 / 1e-16 for f in fits],
            yerr=[f.cross_section_err_cm2 / 1e-16 for f in fits],
            marker="o",
            capsize=3,
            label=c.compound,
        )
    ax.set_xlabel("wavelength (nm)")
    ax.set_ylabel("absorption cross-section (10⁻¹⁶ cm²)")
    ax.set_title("photon-recoil cross-sections (1σ errors)")
    ax.axhline(0.0, color="0.7", lw=0.8)
    ax.legend(fontsize="small")
    fig.tight_layout()
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return buf.getvalue()


# --------------------------------------------------------------------------------------------
# simulator: campaigns in the input contract with a known truth
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class LaserTruth:
    """A simulated laser: nominal (stated) values with their 1σ errors, SI units.

    ``position`` is z_L in metres (spatial layouts) or the time after the first pulse in
    seconds (time domain).  Give ``area`` (top hat) or ``waist`` (Gaussian).
    """

    name: str
    wavelength: float
    position: float
    position_err: float = 0.0
    area: float | None = None
    area_err: float = 0.0
    waist: float | None = None
    waist_err: float = 0.0
    beam_offset: float = 0.0
    beam_offset_err: float = 0.0
    direction: int = 1
    energy_scale_err: float = 0.0


@dataclass(frozen=True)
class RecoilCompoundTruth:
    """A simulated compound: true cross-section per laser (cm²) and re-emission."""

    name: str
    mass_u: float
    cross_sections_cm2: dict[str, float]
    fluorescence_yield: float = 0.0
    fluorescence_yield_err: float = 0.0
    fit_yield: bool = False
    emission_wavelength_nm: float | None = None
    mass_err_u: float = 0.0
    temperatures_K: tuple[float, ...] = (500.0,)


@dataclass(frozen=True)
class RecoilSimulationTruth:
    """What the simulator put in."""

    instrument: dict[str, float]
    lasers: dict[str, dict[str, float]]
    compounds: dict[str, RecoilCompoundTruth]
    path: Path


def _instrument_inputs(layout: str) -> dict[str, tuple[float, float, str]]:
    from polarbeam.simulation.campaigns import InstrumentSpec

    spec = InstrumentSpec.talbot_lau() if layout == "talbot-lau" else InstrumentSpec.time_domain()
    return {k: v for k, v in spec.inputs.items() if k.startswith("instrument.")}


_UNITS = {"m": 1.0, "mm": 1e-3, "nm": 1e-9, "us": 1e-6, "mm^2": 1e-6, "": 1.0}


def _q(value: float, err: float, unit: str) -> str:
    s = _UNITS[unit]
    u = f" {unit}" if unit else ""
    if err > 0:
        return f"{value / s:.10g} ± {err / s:.4g}{u}"
    return f"{value / s:.10g}{u}"


def simulate_recoil_campaign(
    out_dir: str | Path,
    compounds: Sequence[RecoilCompoundTruth],
    lasers: Sequence[LaserTruth],
    *,
    layout: str = "talbot-lau",
    seed: int | np.random.Generator = 0,
    velocity_m_s: float = 180.0,
    velocity_err_frac: float = 0.005,
    spread_frac: float = 0.08,
    n_energies: int = 8,
    max_photons: float = 2.0,
    phase_noise: float = 0.02,
    visibility_noise: float = 0.01,
    title: str = "simulated recoil campaign",
    nodes: int = 96,
) -> RecoilSimulationTruth:
    """Write ``campaign.toml``, ``recoil.csv`` and ``compounds.csv`` into ``out_dir``.

    Every stated input (grating geometry, laser position, area or waist and offset, pulse-energy
    calibration, mass, velocity calibration, fluorescence yield) is the truth plus a draw from
    its stated error.  The pulse energies of each compound and laser run up to the energy giving
    ``max_photons`` absorbed photons on average.  The velocity average uses ``nodes`` quadrature
    nodes (twice the analysis default, so the round trip also checks the quadrature).
    """
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    inst = _instrument_inputs(layout)
    true_inst = {k: v + e * rng.standard_normal() for k, (v, e, _) in inst.items()}
    layout_t = build_layout(layout, true_inst)
    t0 = true_inst["instrument.pulse_times[0]"] if layout == "time-domain" else 0.0
    true_lasers: dict[str, dict[str, float]] = {}
    for la in lasers:
        t = {
            "position": la.position + la.position_err * rng.standard_normal(),
            "energy_scale": 1.0 + la.energy_scale_err * rng.standard_normal(),
        }
        if la.area is not None:
            t["area"] = la.area + la.area_err * rng.standard_normal()
        else:
            t["waist"] = la.waist + la.waist_err * rng.standard_normal()
            t["beam_offset"] = la.beam_offset + la.beam_offset_err * rng.standard_normal()
            t["area"] = float(gaussian_effective_area(t["waist"], t["beam_offset"]))
        true_lasers[la.name] = t
    rows = []
    for comp in compounds:
        m_true = comp.mass_u * AMU
        q_true = comp.fluorescence_yield
        for la in lasers:
            if la.name not in comp.cross_sections_cm2:
                continue
            tl = true_lasers[la.name]
            sigma = comp.cross_sections_cm2[la.name] * CM2
            w = float(layout_t.weight(t0 + tl["position"]))
            k = la.direction * layout_t.scale * float(recoil_velocity(la.wavelength, m_true)) * w
            lam_e = (
                comp.emission_wavelength_nm * 1e-9 if comp.emission_wavelength_nm else la.wavelength
            )
            ke = layout_t.scale * float(recoil_velocity(lam_e, m_true)) * w
            per_e_true = (
                sigma * tl["energy_scale"] / (tl["area"] * float(photon_energy(la.wavelength)))
            )
            e_max = max_photons / per_e_true
            for temp in comp.temperatures_K:
                v_nom = velocity_m_s * math.sqrt(temp / comp.temperatures_K[0])
                v_err = velocity_err_frac * v_nom
                f = 1.0 + velocity_err_frac * rng.standard_normal()
                spread = spread_frac * v_nom

                def observe(e, _f=f, _v=v_nom, _s=spread, _k=k, _ke=ke, _p=per_e_true, _q=q_true):
                    return recoil_observables(
                        _p * e,
                        _k,
                        _v * _f,
                        _s * _f,
                        emission_coefficient=_ke,
                        fluorescence_yield=_q,
                        velocity_dependent=layout != "time-domain",
                        nodes=nodes,
                    )

                # an experimenter keeps the fringe visible: at least 10 % of laser-off contrast
                energies = e_max * np.linspace(1.0 / n_energies, 1.0, n_energies)
                ph, vi = observe(energies)
                for _ in range(12):
                    if vi.min() >= 0.1:
                        break
                    energies = energies * 0.75
                    ph, vi = observe(energies)
                ph = ph + phase_noise * rng.standard_normal(n_energies)
                vi = np.abs(vi + visibility_noise * rng.standard_normal(n_energies))
                for e, p, v in zip(energies, ph, vi, strict=True):
                    rows.append(
                        f"{comp.name},{la.name},{temp:g},{v_nom:.6g},{v_err:.4g},{spread:.4g},"
                        f"{e:.8g},{p:.8g},{phase_noise:.4g},{v:.8g},{visibility_noise:.4g}"
                    )
    # plain writes: simulated inputs need no crash safety
    (out / "recoil.csv").write_text(",".join(RECOIL_COLUMNS) + "\n" + "\n".join(rows) + "\n")
    chead = (
        "compound,mass_u,mass_err_u,fluorescence_yield,fluorescence_yield_err,"
        "emission_wavelength_nm"
    )
    clines = [chead]
    for c in compounds:
        m_stated = c.mass_u + c.mass_err_u * rng.standard_normal()
        if c.fit_yield:
            qcell, qerr = FLUORESCENCE_FIT, ""
        elif c.fluorescence_yield > 0 or c.fluorescence_yield_err > 0:
            qs = c.fluorescence_yield + c.fluorescence_yield_err * rng.standard_normal()
            qcell, qerr = f"{min(max(qs, 0.0), 1.0):.6g}", f"{c.fluorescence_yield_err:g}"
        else:
            qcell, qerr = "", ""
        lam = f"{c.emission_wavelength_nm:g}" if c.emission_wavelength_nm else ""
        clines.append(f"{c.name},{m_stated:.8g},{c.mass_err_u:g},{qcell},{qerr},{lam}")
    (out / "compounds.csv").write_text("\n".join(clines) + "\n")
    (out / "campaign.toml").write_text(_recoil_toml(title, layout, inst, lasers))
    return RecoilSimulationTruth(
        instrument=true_inst,
        lasers=true_lasers,
        compounds={c.name: c for c in compounds},
        path=out,
    )


def _recoil_toml(title: str, layout: str, inst, lasers: Sequence[LaserTruth]) -> str:
    lines = ["[campaign]", f'title = "{title}"', "", "[instrument]", f'layout = "{layout}"']
    lists: dict[str, list[str]] = {}
    for key, (v, e, u) in inst.items():
        name = key.partition(".")[2]
        if "[" in name:
            lists.setdefault(name.split("[")[0], []).append(f'"{_q(v, e, u)}"')
        else:
            lines.append(f'{name} = "{_q(v, e, u)}"')
    for base, items in lists.items():
        lines.append(f"{base} = [{', '.join(items)}]")
    pos_unit = "us" if layout == "time-domain" else "m"
    for la in lasers:
        lines += [
            "",
            "[[laser]]",
            f'name = "{la.name}"',
            f'wavelength = "{_q(la.wavelength, 0.0, "nm")}"',
            f'position = "{_q(la.position, la.position_err, pos_unit)}"',
        ]
        if la.area is not None:
            lines.append(f'area = "{_q(la.area, la.area_err, "mm^2")}"')
        else:
            lines.append(f'waist = "{_q(la.waist, la.waist_err, "mm")}"')
            lines.append(f'beam_offset = "{_q(la.beam_offset, la.beam_offset_err, "mm")}"')
        lines.append(f"direction = {la.direction:+d}")
        if la.energy_scale_err > 0:
            lines.append(f'energy_scale = "{_q(1.0, la.energy_scale_err, "")}"')
    lines += ["", "[data]", 'recoil = "recoil.csv"', 'compounds = "compounds.csv"', ""]
    return "\n".join(lines)


def random_recoil_campaign(
    out_dir: str | Path,
    rng: np.random.Generator,
    *,
    reemission: str | None = None,
) -> RecoilSimulationTruth:
    """One randomised recoil campaign for round trips.

    Talbot–Lau (70 %) or time-domain layout; one to three lasers (400–700 nm, top hat or
    Gaussian, either direction) placed to give 0.3–2.5 rad per photon; cross-sections
    0.2–5·10⁻¹⁶ cm²; velocity spreads up to 15 %; re-emission off, stated or fitted
    (``reemission`` = ``"off"``, ``"stated"``, ``"fit"``; random when None).
    """
    layout = "talbot-lau" if rng.random() < 0.7 else "time-domain"
    inst = _instrument_inputs(layout)
    nominal = {k: v for k, (v, _, _) in inst.items()}
    lay = build_layout(layout, nominal)
    if layout == "talbot-lau":
        v_mean = float(rng.uniform(120, 350))
        mass_u = float(rng.uniform(3e3, 3e4))
        wmax, lo, mid, hi = lay.L2, lay.z1, lay.z2, lay.z3
    else:
        v_mean = 1.0
        mass_u = float(rng.uniform(300, 5000))
        t = [nominal[f"instrument.pulse_times[{i}]"] for i in range(3)]
        wmax, lo, mid, hi = t[2] - t[1], t[0], t[1], t[2]
    mode = reemission or str(rng.choice(["off", "stated", "fit"], p=[0.4, 0.4, 0.2]))
    n_l = int(rng.integers(1, 4))
    names = ["blue", "green", "red"][:n_l]
    lasers = []
    for name in names:
        lam = float(rng.uniform(400e-9, 700e-9))
        lo_phi = 1.2 if mode == "fit" else 0.3
        phi = float(rng.uniform(lo_phi, 2.5))
        # phase per unit weight (rad/m, or rad/s in the time domain) at the mean velocity
        per_w = lay.scale * float(recoil_velocity(lam, mass_u * AMU)) / v_mean
        w = float(np.clip(phi / per_w, 0.05 * wmax, 0.95 * wmax))
        # either side of the middle grating (pulse) with this weight
        if rng.random() < 0.5:
            pos = lo + w * (mid - lo) / wmax
        else:
            pos = hi - w
        if layout == "time-domain":
            pos -= lo
            pos_err = float(rng.choice([0.0, 2e-8]))
        else:
            pos_err = float(rng.choice([0.0, 1e-3]))
        gaussian = rng.random() < 0.3
        area = float(rng.uniform(0.3e-6, 2e-6))
        lasers.append(
            LaserTruth(
                name=name,
                wavelength=round(lam * 1e9) * 1e-9,
                position=pos,
                position_err=pos_err,
                area=None if gaussian else area,
                area_err=0.0 if gaussian else float(rng.uniform(0.0, 0.05)) * area,
                waist=float(rng.uniform(0.5e-3, 1.5e-3)) if gaussian else None,
                waist_err=float(rng.uniform(0.005, 0.03)) * 1e-3 if gaussian else 0.0,
                beam_offset=float(rng.uniform(0.1e-3, 0.4e-3)) if gaussian else 0.0,
                beam_offset_err=0.02e-3 if gaussian else 0.0,
                direction=int(rng.choice([-1, 1])),
                energy_scale_err=float(rng.choice([0.0, 0.01, 0.03])),
            )
        )
    q = 0.0 if mode == "off" else float(rng.uniform(0.15, 0.85))
    comp = RecoilCompoundTruth(
        name="sample",
        mass_u=mass_u,
        cross_sections_cm2={n: float(rng.uniform(0.2e-16, 5e-16)) for n in names},
        fluorescence_yield=q,
        fluorescence_yield_err=float(rng.choice([0.0, 0.03])) if mode == "stated" else 0.0,
        fit_yield=mode == "fit",
        emission_wavelength_nm=(
            float(rng.uniform(550, 750)) if mode != "off" and rng.random() < 0.5 else None
        ),
        mass_err_u=float(rng.choice([0.0, 0.001])) * mass_u,
        temperatures_K=(500.0,) if rng.random() < 0.7 else (450.0, 600.0),
    )
    return simulate_recoil_campaign(
        out_dir,
        [comp],
        lasers,
        layout=layout,
        seed=rng,
        velocity_m_s=v_mean if layout == "talbot-lau" else 1.0,
        velocity_err_frac=float(rng.uniform(0.002, 0.02)) if layout == "talbot-lau" else 0.0,
        spread_frac=float(rng.uniform(0.0, 0.15)) if layout == "talbot-lau" else 0.0,
        n_energies=int(rng.integers(4, 11)),
        max_photons=float(rng.uniform(0.5, 3.0)),
        phase_noise=float(rng.uniform(0.02, 0.08)),
        visibility_noise=float(rng.uniform(0.01, 0.03)),
    )
