"""Result of one recorded beam profile of a profile campaign (``[data] profiles``).

The measured counts, the fitted model's expected counts, and the centroid and rms width of both
(computed by :func:`polarbeam.extraction.profiles.profile_moments`; nothing here computes
physics). Each record is one ``series.csv`` row of a profile compound (one per voltage) and one
entry of the compound's ``profiles`` list in ``results.json``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from polarbeam._util.text import finite_or_none

__all__ = ["ProfileRecord"]


@dataclass(frozen=True)
class ProfileRecord:
    """One profile: counts, model and moments (SI), with its series' conditions."""

    compound: str
    temperature_K: float
    voltage_V: float
    positions: np.ndarray = field(repr=False)
    counts: np.ndarray = field(repr=False)
    model: np.ndarray = field(repr=False)
    background: float
    centroid_m: float
    centroid_err_m: float
    width_m: float
    width_err_m: float
    model_centroid_m: float
    model_width_m: float
    rotational_temperature_K: float
    rotational_temperature_err_K: float  # 0 where stated
    velocity_m_s: float
    velocity_spread_m_s: float
    #: the rotor's orientational response over Langevin–Debye at this profile's field (None: μ=0)
    ld_ratio: float | None = None

    @property
    def n_bins(self) -> int:
        return int(self.positions.size)

    @property
    def total_counts(self) -> float:
        return float(np.sum(self.counts))

    def row(self) -> dict[str, Any]:
        """The ``series.csv`` row (one per voltage)."""
        return {
            "compound": self.compound,
            "temperature_K": self.temperature_K,
            "n_points": self.n_bins,
            "voltage_V": self.voltage_V,
            "centroid_m": finite_or_none(self.centroid_m),
            "centroid_err_m": finite_or_none(self.centroid_err_m),
            "width_m": finite_or_none(self.width_m),
            "width_err_m": finite_or_none(self.width_err_m),
            "model_centroid_m": finite_or_none(self.model_centroid_m),
            "model_width_m": finite_or_none(self.model_width_m),
            "total_counts": self.total_counts,
            "background_counts": self.background,
            "rotational_temperature_K": self.rotational_temperature_K,
            "rotational_temperature_err_K": self.rotational_temperature_err_K,
            "velocity_m_s": self.velocity_m_s,
            "velocity_spread_m_s": self.velocity_spread_m_s,
            "ld_ratio": self.ld_ratio,
        }

    def summary(self) -> dict[str, Any]:
        """The ``results.json`` entry: the row plus the binned counts and model."""
        return {
            **self.row(),
            "positions_m": [float(x) for x in self.positions],
            "counts": [float(x) for x in self.counts],
            "model_counts": [float(x) for x in self.model],
        }
