"""What the input tables hold once read: the shifts columns, the analysis settings and the
series and compound records every later stage works on (plain frozen dataclasses, SI)."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from polarbeam.beam.distributions import VelocityDistribution
from polarbeam.errors import InputError
from polarbeam.quantities import Measured

__all__ = [
    "OBSERVABLE_COLUMNS",
    "ROTATIONAL_COLUMNS",
    "SHIFT_COLUMNS_COMMON",
    "AnalysisSettings",
    "CompoundData",
    "SeriesData",
]

SHIFT_COLUMNS_COMMON = (
    "compound",
    "temperature_K",
    "temperature_err_K",
    "velocity_m_s",
    "velocity_err_m_s",
    "velocity_spread_m_s",
    "voltage_V",
)

#: Optional columns of shifts.csv and the raw-scan tables: the rotational temperature of the
#: molecules in the deflector (and its 1σ error). When given for a series it replaces the source
#: temperature in the orientational term ⟨μ²⟩/(3kT) of the separation.
ROTATIONAL_COLUMNS = ("rotational_temperature_K", "rotational_temperature_err_K")


OBSERVABLE_COLUMNS = {
    "talbot-lau": ("phase_rad", "phase_err_rad"),
    "time-domain": ("phase_rad", "phase_err_rad"),
    "beam-profile": ("shift_m", "shift_err_m"),
}


@dataclass(frozen=True)
class AnalysisSettings:
    """Options of the ``[analysis]`` table (all optional)."""

    velocity_nodes: int = 48
    fit_offset: bool = True
    scale_errors: str = "never"  # "never" | "birge" (inflate by sqrt(χ²/ν) when > 1)
    upper_limit_cl: float = 0.95
    dipole_significance: float = 3.0
    orientation_warning: float = 0.2  # warn when μE/kT exceeds this at the largest field
    structure_check: bool = True  # compare with structure-based predictions when possible
    conformers: int = 10  # conformers for the predicted dipole (0: no dipole prediction)
    conformer_seed: int = 61453
    calibration: str = "auto"  # "auto" | "check" | "off": use of reference compounds
    mass: str = "average"  # mass from a structure when mass_u is empty: average | monoisotopic

    def __post_init__(self):
        if self.scale_errors not in ("never", "birge"):
            raise InputError(
                "[analysis] scale_errors: expected one of 'never', 'birge', "
                f"found {self.scale_errors!r}"
            )
        if not (isinstance(self.velocity_nodes, int) and 4 <= self.velocity_nodes <= 400):
            raise InputError(
                f"[analysis] velocity_nodes: expected an integer 4..400, found "
                f"{self.velocity_nodes!r}"
            )
        if not 0.5 < self.upper_limit_cl < 1:
            raise InputError(
                f"[analysis] upper_limit_cl: expected 0.5 < cl < 1, found {self.upper_limit_cl!r}"
            )
        if not (isinstance(self.conformers, int) and 0 <= self.conformers <= 1000):
            raise InputError(
                f"[analysis] conformers: expected an integer 0..1000, found {self.conformers!r}"
            )
        if self.mass not in ("average", "monoisotopic"):
            raise InputError(
                f"[analysis] mass: expected one of 'average', 'monoisotopic', found {self.mass!r}"
            )
        if self.calibration not in ("auto", "check", "off"):
            raise InputError(
                "[analysis] calibration: expected one of 'auto', 'check', 'off', "
                f"found {self.calibration!r}"
            )
        if not self.dipole_significance > 0:
            raise InputError(
                f"[analysis] dipole_significance: expected > 0, found {self.dipole_significance!r}"
            )


@dataclass(frozen=True)
class SeriesData:
    """Points of one compound at one source temperature."""

    compound: str
    temperature: Measured
    velocity: Measured
    velocities: np.ndarray
    spreads: np.ndarray
    voltages: np.ndarray
    values: np.ndarray
    errors: np.ndarray
    lines: tuple[int, ...]
    covariance: Any = None  # dense ndarray, a scipy.sparse matrix (banded phases) or None
    visibility: np.ndarray | None = None
    visibility_err: np.ndarray | None = None
    rotational: Measured | None = None  # rotational temperature in the deflector, when stated
    #: the series' measured distribution (a velocities.csv table or a time-of-flight fit); when
    #: set it replaces ``velocities``/``spreads`` (which then hold its mean and rms spread)
    distribution: VelocityDistribution | None = None
    shape: str = "gaussian"  # [beam] velocity_distribution used with velocities/spreads
    spread_error: float = 0.0  # 1σ of the spread (velocity_spread_err_m_s), 0 when not stated
    #: the fitted time-of-flight trace (polarbeam.contract.time_of_flight.TraceFit), when given,
    #: and its velocity-scale error terms (tag, relative change per 1σ) for the separation
    time_of_flight: Any = None
    velocity_terms: tuple[tuple[str, float], ...] = ()
    #: the interferometer model's contrast per velocity class ([gratings];
    #: polarbeam.beam.talbot.GratingContrast), applied to every velocity model of the series
    grating_contrast: Any = None

    @property
    def label(self) -> str:
        return f"{self.compound} @ {self.temperature.value:g} K"

    @property
    def n_points(self) -> int:
        return int(self.voltages.size)


@dataclass(frozen=True)
class CompoundData:
    """A compound: its mass, its series, its extra columns and any row problem found."""

    name: str
    mass: Measured | None
    series: tuple[SeriesData, ...] = ()
    extra: dict[str, str] = field(default_factory=dict)
    problem: str | None = None
    alpha_known: Measured | None = None
    dipole_known: Measured | None = None
    notes: tuple[str, ...] = ()  # e.g. scans dropped by the fringe reduction
    #: the particle response (compounds.csv rotor columns; contract/rotors.py): None = ergodic
    response: object | None = None
    #: whole beam profiles ([data] profiles; contract/profiles.py), one ProfileSeries per T
    profiles: tuple = ()
    #: why this response (``rotor = auto``: derived from the structure), None when stated
    response_reason: str | None = None
