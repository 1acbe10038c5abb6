"""The velocity distribution a series was analysed with, when polarbeam made it from a
time-of-flight trace: the table written to ``velocities.csv`` and the trace with its model (for
the figure). Plain arrays copied from the fit; nothing here computes physics.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from polarbeam._util.text import finite_or_none

__all__ = ["VELOCITY_TABLE_COLUMNS", "VelocityRecord"]

#: columns of ``velocities.csv`` (the same as the input table of ``[data] velocities``)
VELOCITY_TABLE_COLUMNS = ("compound", "temperature_K", "velocity_m_s", "weight")


@dataclass(frozen=True)
class VelocityRecord:
    """One series' fitted time-of-flight trace and the distribution made from it (SI)."""

    compound: str
    temperature_K: float
    velocities: np.ndarray  # m/s, the table's classes
    weights: np.ndarray  # normalised to 1
    mean_inverse_square: float  # ⟨v⁻²⟩, s²/m²
    mean_inverse_square_err: float  # its 1σ: fit, flight length and time offset
    starts: np.ndarray  # bin starts, s from the gate's opening
    width: float  # bin width, s
    counts: np.ndarray
    model: np.ndarray  # expected counts of the fitted model
    parameters: dict[str, float]  # u, a (m/s), total, background (counts) and their errors
    deviance: float
    ndof: int
    source: str = "time of flight"

    @classmethod
    def from_trace_fit(cls, tf) -> VelocityRecord:
        """Copy of a fitted trace (``polarbeam.contract.time_of_flight.TraceFit``)."""
        fit = tf.fit
        err = np.sqrt(np.clip(np.diag(fit.covariance), 0.0, None))
        names = ("u_m_s", "a_m_s", "total_counts", "background_counts_per_bin")
        params: dict[str, float] = {}
        for name, val, e in zip(names, fit.parameters, err, strict=True):
            params[name] = float(val)
            params[f"{name}_err"] = float(e)
        return cls(
            compound=tf.trace.compound,
            temperature_K=float(tf.trace.temperature),
            velocities=np.asarray(tf.velocities, dtype=float),
            weights=np.asarray(tf.weights, dtype=float),
            mean_inverse_square=float(tf.mean_inverse_square),
            mean_inverse_square_err=float(tf.mean_inverse_square_err),
            starts=np.asarray(tf.trace.starts, dtype=float),
            width=float(tf.trace.width),
            counts=np.asarray(tf.trace.counts, dtype=float),
            model=np.asarray(fit.model, dtype=float),
            parameters=params,
            deviance=float(fit.deviance),
            ndof=int(fit.ndof),
        )

    @property
    def mean_m_s(self) -> float:
        return float(np.sum(self.weights * self.velocities))

    @property
    def spread_m_s(self) -> float:
        m = self.mean_m_s
        return float(np.sqrt(max(np.sum(self.weights * self.velocities**2) - m * m, 0.0)))

    def rows(self) -> list[dict[str, Any]]:
        """The rows of ``velocities.csv`` for this series."""
        return [
            {
                "compound": self.compound,
                "temperature_K": self.temperature_K,
                "velocity_m_s": float(v),
                "weight": float(w),
            }
            for v, w in zip(self.velocities, self.weights, strict=True)
        ]

    def summary(self) -> dict[str, Any]:
        """Plain dict for ``results.json`` (the table itself is in ``velocities.csv``)."""
        return {
            "source": self.source,
            "mean_m_s": self.mean_m_s,
            "spread_m_s": self.spread_m_s,
            "mean_inverse_square_s2_m2": self.mean_inverse_square,
            "mean_inverse_square_err_s2_m2": self.mean_inverse_square_err,
            "n_classes": int(self.velocities.size),
            "fit": {k: finite_or_none(v) for k, v in self.parameters.items()},
            "deviance": finite_or_none(self.deviance),
            "ndof": self.ndof,
            "bins": int(self.counts.size),
            "bin_width_s": self.width,
        }
