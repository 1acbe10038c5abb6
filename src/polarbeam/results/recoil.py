"""Typed results of photon-recoil fits: per compound, per campaign, and their JSON records."""

from __future__ import annotations

import html
import math
from dataclasses import dataclass, field, fields
from typing import TYPE_CHECKING, Any

import numpy as np
import uncertainties
from uncertainties import UFloat

from polarbeam._util.text import finite_or_none
from polarbeam.constants import CM2
from polarbeam.quantities import value_error_text
from polarbeam.results.objects import CampaignResult
from polarbeam.uncertain import variance_budget

if TYPE_CHECKING:  # annotation only: results hold the contract's laser records
    from polarbeam.contract.recoil import Laser

__all__ = [
    "RECOIL_OUTPUT_COLUMNS",
    "CrossSectionFit",
    "RecoilCampaignResult",
    "RecoilCompoundResult",
    "RecoilResult",
    "nominal_values",
    "std_devs",
    "with_recoil",
]


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
        return self.yield_fitted or nominal_values(self.fluorescence_yield) > 0

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
                row["fluorescence_yield"] = nominal_values(self.fluorescence_yield)
                row["fluorescence_yield_err"] = std_devs(self.fluorescence_yield)
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
                "value": nominal_values(q),
                "err": std_devs(q),
                "fitted": self.yield_fitted,
                "emission_wavelength_nm": (
                    self.emission_wavelength_m * 1e9 if self.emission_wavelength_m else None
                ),
                "budget": variance_budget(q) if isinstance(q, UFloat) else {},
            },
            "chi2": finite_or_none(self.chi2),
            "ndof": self.ndof,
            "cross_section_correlation": _correlation(self.fits),
            "lasers": [f.summary() for f in self.fits],
            "warnings": list(self.warnings),
        }


def nominal_values(x) -> float:
    return float(x.nominal_value) if isinstance(x, UFloat) else float(x)


def std_devs(x) -> float:
    return float(x.std_dev) if isinstance(x, UFloat) else 0.0


def _correlation(fits) -> list[list[float]] | None:
    if len(fits) < 2:
        return None
    return np.round(uncertainties.correlation_matrix([f.cross_section for f in fits]), 6).tolist()


RECOIL_OUTPUT_COLUMNS = (
    "compound",
    "laser",
    "wavelength_nm",
    "cross_section_cm2",
    "cross_section_err_cm2",
    "mean_photons_at_max",
    "reduced_chi2",
)


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
                    "mode": la.mode,
                    "illumination": la.illumination,
                    "beam_height_rms_m": la.beam_height_rms.value,
                    "hit_fraction": la.hit_fraction.value,
                    "visibility_errors": la.visibility_errors,
                }
                for la in self.lasers
            ],
            "stated_inputs": self.stated_inputs,
            "compounds": [c.summary() for c in self.compounds],
            "notes": list(self.notes),
        }

    def _repr_html_(self) -> str:
        rows = []
        for c in self.compounds:
            for f in c.fits or (None,):
                cells = ["—", "—", "—"]
                if f is not None:
                    sig = value_error_text(
                        f.cross_section_cm2 / 1e-16, f.cross_section_err_cm2 / 1e-16
                    )
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


@dataclass(frozen=True)
class RecoilCampaignResult(CampaignResult):
    """A :class:`~polarbeam.results.objects.CampaignResult` with photon-recoil results attached."""

    recoil: RecoilResult | None = None

    def parts(self) -> tuple[tuple[str, tuple[Any, ...]], ...]:
        own = (("recoil", tuple(self.recoil.compounds)),) if self.recoil is not None else ()
        return super().parts() + own

    def summary(self) -> dict[str, Any]:
        out = super().summary()
        out["recoil"] = self.recoil.summary() if self.recoil is not None else None
        return out


def with_recoil(result: CampaignResult, recoil: RecoilResult) -> RecoilCampaignResult:
    """``result`` with the recoil results attached (all deflection fields unchanged)."""
    kw = {f.name: getattr(result, f.name) for f in fields(CampaignResult)}
    return RecoilCampaignResult(**kw, recoil=recoil)


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
            "reduced_chi2": finite_or_none(self.reduced_chi2),
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
