"""Result objects of the visibility fits: optical polarizability and absorption cross-section.

Read by the renderers (``report/visibility.py``); made by
:mod:`polarbeam.extraction.visibility`. No physics here.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields
from typing import Any

import numpy as np
from uncertainties import UFloat

from polarbeam._util.optional import lazy
from polarbeam.results.objects import CampaignResult
from polarbeam.results.recoil import RecoilCampaignResult
from polarbeam.uncertain import variance_budget

pd = lazy("pandas", "reading and writing tables")

__all__ = [
    "OPTICAL_COLUMNS",
    "OpticalCampaignResult",
    "OpticalCompoundResult",
    "OpticalResult",
    "VisibilityCurve",
    "with_optical",
]

OPTICAL_COLUMNS = (
    "compound",
    "wavelength_nm",
    "alpha_opt_A3",
    "alpha_opt_err_A3",
    "sigma_abs_m2",
    "sigma_abs_err_m2",
    "chi2_quantum",
    "chi2_classical",
    "preferred_model",
)


def _nom(x) -> float:
    return float(x.nominal_value) if isinstance(x, UFloat) else float("nan")


def _err(x) -> float:
    return float(x.std_dev) if isinstance(x, UFloat) else float("nan")


@dataclass(frozen=True)
class VisibilityCurve:
    """One series: the data, both models at the points, and dense curves for the figure."""

    label: str
    temperature_K: float
    velocity_m_s: float
    powers: np.ndarray
    visibilities: np.ndarray
    errors: np.ndarray
    quantum: np.ndarray
    classical: np.ndarray
    dense_powers: np.ndarray
    dense_quantum: np.ndarray
    dense_classical: np.ndarray

    def summary(self) -> dict[str, Any]:
        return {
            "label": self.label,
            "temperature_K": self.temperature_K,
            "velocity_m_s": self.velocity_m_s,
            "laser_power_W": self.powers.tolist(),
            "visibility": self.visibilities.tolist(),
            "visibility_err": self.errors.tolist(),
            "model_quantum": self.quantum.tolist(),
            "model_classical": self.classical.tolist(),
        }


@dataclass(frozen=True)
class OpticalCompoundResult:
    """α_opt and σ_abs of one compound (or why there are none)."""

    compound: str
    status: str
    message: str
    mass_u: float | None = None
    wavelength_m: float | None = None
    alpha_opt: UFloat | None = None  # Å³ (polarizability volume of Re α at the laser)
    sigma_abs: UFloat | None = None  # m²
    chi2_quantum: float | None = None
    chi2_classical: float | None = None
    ndof: int | None = None
    preferred_model: str = "undecided"
    classical_alpha_A3: float | None = None
    classical_sigma_m2: float | None = None
    curves: tuple[VisibilityCurve, ...] = ()
    warnings: tuple[str, ...] = ()

    def row(self) -> dict[str, Any]:
        """One row of ``optical.csv``."""
        chi = lambda x: float("nan") if x is None else float(x)  # noqa: E731
        return {
            "compound": self.compound,
            "wavelength_nm": (
                self.wavelength_m * 1e9 if self.wavelength_m is not None else float("nan")
            ),
            "alpha_opt_A3": _nom(self.alpha_opt),
            "alpha_opt_err_A3": _err(self.alpha_opt),
            "sigma_abs_m2": _nom(self.sigma_abs),
            "sigma_abs_err_m2": _err(self.sigma_abs),
            "chi2_quantum": chi(self.chi2_quantum),
            "chi2_classical": chi(self.chi2_classical),
            "preferred_model": self.preferred_model if self.status == "ok" else "",
        }

    @property
    def budget(self) -> dict[str, dict[str, float]]:
        """Variance shares of α_opt and σ_abs by input (power scale, waist, open fraction,
        velocity, fit statistics)."""
        return {
            "alpha_opt": variance_budget(self.alpha_opt),
            "sigma_abs": variance_budget(self.sigma_abs),
        }

    def summary(self) -> dict[str, Any]:
        out = {
            "compound": self.compound,
            "status": self.status,
            "message": self.message,
            "mass_u": self.mass_u,
            **{k: v for k, v in self.row().items() if k != "compound"},
            "ndof": self.ndof,
            "classical_fit": {
                "alpha_opt_A3": self.classical_alpha_A3,
                "sigma_abs_m2": self.classical_sigma_m2,
            },
            "budget": self.budget,
            "series": [c.summary() for c in self.curves],
            "warnings": list(self.warnings),
        }
        return out


@dataclass(frozen=True)
class OpticalResult:
    """Every visibility fit of a campaign, with the grating description."""

    gratings: dict[str, Any]
    compounds: tuple[OpticalCompoundResult, ...]
    threshold: float = 2.0 * math.log(100.0)
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def table(self) -> pd.DataFrame:
        return pd.DataFrame([c.row() for c in self.compounds], columns=list(OPTICAL_COLUMNS))

    @property
    def n_failed(self) -> int:
        return sum(c.status == "failed" for c in self.compounds)

    def summary(self) -> dict[str, Any]:
        return {
            "gratings": self.gratings,
            "likelihood_ratio_threshold_2lnL": self.threshold,
            "compounds": [c.summary() for c in self.compounds],
            "notes": list(self.notes),
        }


@dataclass(frozen=True)
class OpticalCampaignResult(RecoilCampaignResult):
    """A campaign result with visibility (optical) results attached."""

    optical: OpticalResult | None = None

    def parts(self) -> tuple[tuple[str, tuple[Any, ...]], ...]:
        own = (("optical", tuple(self.optical.compounds)),) if self.optical is not None else ()
        return super().parts() + own

    def summary(self) -> dict[str, Any]:
        out = super().summary()
        out["optical"] = self.optical.summary() if self.optical is not None else None
        return out


def with_optical(result: CampaignResult, optical: OpticalResult) -> OpticalCampaignResult:
    """``result`` with the optical results attached (every other field unchanged)."""
    kw = {f.name: getattr(result, f.name) for f in fields(CampaignResult)}
    return OpticalCampaignResult(**kw, recoil=getattr(result, "recoil", None), optical=optical)
