"""Result objects: typed, frozen, with ``summary()`` (plain dict for JSON) and renderings.

Nothing here computes physics; values arrive as correlated :mod:`uncertainties` numbers in SI and
are converted for display only.
"""

from __future__ import annotations

import html
import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import uncertainties
from uncertainties import UFloat

from polarbeam._util.cautions import CAUTIONS
from polarbeam._util.optional import lazy
from polarbeam._util.text import finite_or_none
from polarbeam._version import __version__
from polarbeam.constants import alpha_a3_from_si, alpha_au_from_si, debye_from_si
from polarbeam.errors import PolarbeamError
from polarbeam.quantities import format_value_error
from polarbeam.results.profiles import ProfileRecord
from polarbeam.results.velocity import VelocityRecord
from polarbeam.uncertain import variance_budget

pd = lazy("pandas", "reading and writing tables")

__all__ = [
    "CampaignResult",
    "CompoundResult",
    "SeriesResult",
    "correlation",
    "register_writer",
    "writer",
]

STATUS = ("ok", "warning", "failed")  # reference compounds: extra["role"] == "reference"


def _alpha_block(u: UFloat | None) -> dict[str, float | None]:
    if u is None:
        return {"A3": None, "err_A3": None, "au": None, "err_au": None, "SI": None, "err_SI": None}
    n, s = u.nominal_value, u.std_dev
    return {
        "A3": alpha_a3_from_si(n),
        "err_A3": alpha_a3_from_si(s),
        "au": alpha_au_from_si(n),
        "err_au": alpha_au_from_si(s),
        "SI": n,
        "err_SI": s,
        "unit_SI": "C m^2/V",
    }


@dataclass(frozen=True)
class SeriesResult:
    """α_eff of one series with its fit diagnostics."""

    compound: str
    temperature_K: float
    temperature_err_K: float
    observable: str
    voltages: np.ndarray
    values: np.ndarray
    errors: np.ndarray
    model: np.ndarray
    modulus: np.ndarray
    alpha_eff: UFloat
    offset: float
    chi2: float
    ndof: int
    p_value: float
    velocity_m_s: float
    velocity_err_m_s: float
    velocity_spread_m_s: float
    error_scale: float = 1.0
    warnings: tuple[str, ...] = ()
    extra: dict[str, Any] = field(default_factory=dict)
    visibility: np.ndarray | None = None  # relative to the zero-field references (raw scans)
    visibility_err: np.ndarray | None = None
    #: the fitted model on a dense voltage grid (V; observable), for figures (None: not stored)
    curve_voltages: np.ndarray | None = field(default=None, repr=False)
    curve: np.ndarray | None = field(default=None, repr=False)
    time_of_flight: VelocityRecord | None = None  # distribution fitted to a trace, when given
    #: (velocities m/s, density per m/s, relative contrast or None) of the velocity model, for
    #: the report's distribution figure (not written to the tables)
    velocity_curve: tuple | None = None

    def __repr__(self) -> str:
        return (
            f"SeriesResult({self.compound!r} @ {self.temperature_K:g} K: α_eff = "
            f"{format_value_error(self.alpha_eff_A3, self.alpha_eff_err_A3)} Å³, "
            f"{self.n_points} points)"
        )

    @property
    def n_points(self) -> int:
        return int(self.voltages.size)

    @property
    def reduced_chi2(self) -> float:
        return self.chi2 / self.ndof if self.ndof > 0 else math.nan

    @property
    def alpha_eff_A3(self) -> float:
        return alpha_a3_from_si(self.alpha_eff.nominal_value)

    @property
    def alpha_eff_err_A3(self) -> float:
        return alpha_a3_from_si(self.alpha_eff.std_dev)

    def row(self) -> dict[str, Any]:
        """The ``series.csv`` row."""
        return {
            "compound": self.compound,
            "temperature_K": self.temperature_K,
            "n_points": self.n_points,
            "alpha_eff_A3": self.alpha_eff_A3,
            "alpha_eff_err_A3": self.alpha_eff_err_A3,
            "reduced_chi2": self.reduced_chi2,
            "temperature_err_K": self.temperature_err_K,
            "alpha_eff_au": alpha_au_from_si(self.alpha_eff.nominal_value),
            "alpha_eff_err_au": alpha_au_from_si(self.alpha_eff.std_dev),
            "chi2": self.chi2,
            "ndof": self.ndof,
            "p_value": self.p_value,
            "offset": self.offset,
            "velocity_m_s": self.velocity_m_s,
            "velocity_spread_m_s": self.velocity_spread_m_s,
            "min_velocity_contrast": float(np.min(self.modulus)) if self.modulus.size else 1.0,
            "max_abs_voltage_V": float(np.max(np.abs(self.voltages))),
            "relative_visibility_at_max_V": self._visibility_at_max(),
            **self.extra,
        }

    def _visibility_at_max(self) -> float | None:
        if self.visibility is None or not self.visibility.size:
            return None
        vmax = np.max(np.abs(self.voltages))
        sel = np.abs(self.voltages) == vmax
        return float(np.nanmean(self.visibility[sel]))

    def summary(self) -> dict[str, Any]:
        vis = self.visibility
        verr = self.visibility_err
        return {
            "compound": self.compound,
            "temperature_K": self.temperature_K,
            "temperature_err_K": self.temperature_err_K,
            "n_points": self.n_points,
            "relative_visibility": None if vis is None else [finite_or_none(v) for v in vis],
            "relative_visibility_err": None if verr is None else [finite_or_none(v) for v in verr],
            "alpha_eff": _alpha_block(self.alpha_eff),
            "offset": self.offset,
            "chi2": self.chi2,
            "ndof": self.ndof,
            "reduced_chi2": finite_or_none(self.reduced_chi2),
            "p_value": finite_or_none(self.p_value),
            "error_scale": self.error_scale,
            "velocity_m_s": self.velocity_m_s,
            "velocity_err_m_s": self.velocity_err_m_s,
            "velocity_spread_m_s": self.velocity_spread_m_s,
            "observable": self.observable,
            "points": [
                {
                    "voltage_V": float(v),
                    "value": float(y),
                    "error": float(e),
                    "model": float(m),
                    "velocity_contrast": float(c),
                }
                for v, y, e, m, c in zip(
                    self.voltages, self.values, self.errors, self.model, self.modulus, strict=True
                )
            ],
            "budget": variance_budget(self.alpha_eff),
            "warnings": list(self.warnings),
            **{k: finite_or_none(v) if isinstance(v, float) else v for k, v in self.extra.items()},
            **(
                {"time_of_flight": self.time_of_flight.summary()}
                if self.time_of_flight is not None
                else {}
            ),
        }


@dataclass(frozen=True)
class CompoundResult:
    """α and μ of one compound (or the reason they could not be given)."""

    compound: str
    status: str
    message: str
    mass_u: float | None = None
    series: tuple[SeriesResult, ...] = ()
    alpha: UFloat | None = None
    dipole: UFloat | None = None
    dipole_upper_si: float | None = None
    dipole_interval_si: tuple[float, float] | None = None  # unified interval [μ_lo, μ_hi]
    dipole_cl: tuple[float, float] | None = None  # (interval CL, limit CL)
    mu2: UFloat | None = None
    method: str = "none"
    debye_chi2: float | None = None
    debye_ndof: int | None = None
    warnings: tuple[str, ...] = ()
    extra: dict[str, Any] = field(default_factory=dict)
    #: whole beam profiles of a profile compound (results.profiles.ProfileRecord), in data order
    profiles: tuple[ProfileRecord, ...] = ()

    def __post_init__(self):
        if self.status not in STATUS:
            raise ValueError(f"status must be one of {STATUS}, found {self.status!r}")

    # Values in the units people read (the properties.csv columns), for notebooks.
    @property
    def alpha_A3(self) -> float | None:
        return self.row()["alpha_A3"]

    @property
    def alpha_err_A3(self) -> float | None:
        return self.row()["alpha_err_A3"]

    @property
    def dipole_D(self) -> float | None:
        return self.row()["dipole_D"]

    @property
    def dipole_err_D(self) -> float | None:
        return self.row()["dipole_err_D"]

    @property
    def dipole_upper_D(self) -> float | None:
        return self.row()["dipole_upper_D"]

    @property
    def dipole_lo_D(self) -> float | None:
        return self.row()["dipole_lo_D"]

    @property
    def dipole_hi_D(self) -> float | None:
        return self.row()["dipole_hi_D"]

    @property
    def alpha_mu2_correlation(self) -> float | None:
        """Correlation coefficient of α and ⟨μ²⟩ (the Debye line's intercept and slope), from
        their shared error budget; None without both."""
        return correlation(self.alpha, self.mu2)

    def to_dataframe(self) -> pd.DataFrame:
        """The compound's series as a table (the series.csv rows)."""
        return pd.DataFrame([s.row() for s in self.series] + [p.row() for p in self.profiles])

    def __repr__(self) -> str:
        return f"CompoundResult({self.compound!r}, {self.status}: {self._statement_text()})"

    def _statement_text(self) -> str:
        r = self.row()
        parts = []
        if r["alpha_A3"] is not None:
            parts.append(f"α = {format_value_error(r['alpha_A3'], r['alpha_err_A3'])} Å³")
        if r["dipole_D"] is not None:
            parts.append(f"μ = {format_value_error(r['dipole_D'], r['dipole_err_D'])} D")
        elif r["dipole_upper_D"] is not None:
            parts.append(f"μ < {r['dipole_upper_D']:.2f} D")
        return ", ".join(parts) or "no result"

    def _repr_html_(self) -> str:
        rows = "".join(
            f"<tr><td>{s.temperature_K:g}</td><td>{s.n_points}</td>"
            f"<td>{format_value_error(s.alpha_eff_A3, s.alpha_eff_err_A3)}</td>"
            f"<td>{s.reduced_chi2:.2f}</td></tr>"
            for s in self.series
        )
        corr = self.alpha_mu2_correlation
        extra = f"; corr(α, ⟨μ²⟩) = {corr:+.2f}" if corr is not None else ""
        return (
            f"<p><b>{html.escape(self.compound)}</b> ({html.escape(self.status)}): "
            f"{html.escape(self._statement_text())}{extra}</p>"
            f"<p>{html.escape(self.message)}</p><table><thead><tr><th>T (K)</th><th>points</th>"
            "<th>α_eff (Å³)</th><th>χ²/ν</th></tr></thead><tbody>" + rows + "</tbody></table>"
        )

    def row(self) -> dict[str, Any]:
        """The ``properties.csv`` row."""
        a = self.alpha
        d = self.dipole
        return {
            "compound": self.compound,
            "alpha_A3": alpha_a3_from_si(a.nominal_value) if a is not None else None,
            "alpha_err_A3": alpha_a3_from_si(a.std_dev) if a is not None else None,
            "dipole_D": debye_from_si(d.nominal_value) if d is not None else None,
            "dipole_err_D": debye_from_si(d.std_dev) if d is not None else None,
            "dipole_upper_D": (
                debye_from_si(self.dipole_upper_si) if self.dipole_upper_si is not None else None
            ),
            "status": self.status,
            "message": self.message,
            "dipole_lo_D": (
                debye_from_si(self.dipole_interval_si[0]) if self.dipole_interval_si else None
            ),
            "dipole_hi_D": (
                debye_from_si(self.dipole_interval_si[1]) if self.dipole_interval_si else None
            ),
            "n_series": len(self.series),
            "temperatures_K": ";".join(f"{s.temperature_K:g}" for s in self.series),
            "method": self.method,
            "mass_u": self.mass_u,
            "debye_chi2": self.debye_chi2,
            "debye_ndof": self.debye_ndof,
            **self.extra,
        }

    def summary(self) -> dict[str, Any]:
        d = self.dipole
        return {
            "compound": self.compound,
            "status": self.status,
            "message": self.message,
            "mass_u": self.mass_u,
            "method": self.method,
            "alpha": _alpha_block(self.alpha),
            "alpha_budget": variance_budget(self.alpha),
            "dipole": {
                "D": debye_from_si(d.nominal_value) if d is not None else None,
                "err_D": debye_from_si(d.std_dev) if d is not None else None,
                "Cm": d.nominal_value if d is not None else None,
                "err_Cm": d.std_dev if d is not None else None,
                "upper_D": (
                    debye_from_si(self.dipole_upper_si)
                    if self.dipole_upper_si is not None
                    else None
                ),
                "upper_Cm": self.dipole_upper_si,
                "interval_D": (
                    [debye_from_si(v) for v in self.dipole_interval_si]
                    if self.dipole_interval_si
                    else None
                ),
                "interval_cl": self.dipole_cl[0] if self.dipole_cl else None,
                "limit_cl": self.dipole_cl[1] if self.dipole_cl else None,
                "method": "unified intervals for <mu^2> >= 0 (Feldman-Cousins 1998)",
            },
            "dipole_budget": variance_budget(d if d is not None else self.mu2),
            "mean_square_dipole_C2m2": (
                {"value": self.mu2.nominal_value, "err": self.mu2.std_dev}
                if self.mu2 is not None
                else None
            ),
            "debye_fit": {"chi2": finite_or_none(self.debye_chi2), "ndof": self.debye_ndof},
            "alpha_mu2_correlation": self.alpha_mu2_correlation,
            "alpha_eff_correlation": _correlation(self.series),
            "series": [s.summary() for s in self.series],
            "warnings": list(self.warnings),
            "extra": {k: v for k, v in self.extra.items()},
            **({"profiles": [p.summary() for p in self.profiles]} if self.profiles else {}),
        }


def correlation(a: UFloat | None, b: UFloat | None) -> float | None:
    """Correlation coefficient of two uncertain numbers from their shared variables."""
    if a is None or b is None or not (a.std_dev > 0 and b.std_dev > 0):
        return None
    # rounded: the last bits depend on the order the shared variables are summed in, which
    # differs between a result made in this process and one rebuilt from a batch record
    return round(float(uncertainties.correlation_matrix([a, b])[0, 1]), 12)


def _records(df) -> list[dict[str, Any]] | None:
    if df is None or len(df) == 0:
        return None
    return [
        {k: finite_or_none(v) if isinstance(v, float) else v for k, v in r.items()}
        for r in df.to_dict(orient="records")
    ]


def _correlation(series) -> list[list[float]] | None:
    if len(series) < 2:
        return None
    from uncertainties import correlation_matrix

    return np.round(correlation_matrix([s.alpha_eff for s in series]), 6).tolist()


@dataclass(frozen=True)
class CampaignResult:
    """Everything one campaign produced."""

    title: str
    source: str
    layout: str
    model: str
    compounds: tuple[CompoundResult, ...]
    stated_inputs: dict[str, dict[str, float]] = field(default_factory=dict)
    settings: dict[str, Any] = field(default_factory=dict)
    unmeasured: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    version: str = __version__
    comparison: pd.DataFrame | None = None  # measured versus computed α, per compound & method
    series_comparison: pd.DataFrame | None = None  # computed α + μ²/3kT versus each α_eff
    parity: pd.DataFrame | None = None  # per-method deviation statistics
    calibration: dict[str, Any] | None = None  # reference-compound calibration (calibration.py)
    input_warnings: tuple[str, ...] = ()  # implausible inputs (also in notes), for stderr
    provenance: dict[str, Any] = field(default_factory=dict)  # date, software, input hashes
    #: the raw-scan reduction (reduction.ReducedPhases) when the campaign started from scans
    reduction: Any = field(default=None, repr=False, compare=False)
    deflector_field: str = "electric"  # "magnetic": [deflector] field = "magnetic"

    @property
    def series(self) -> pd.DataFrame:
        rows = [s.row() for c in self.compounds for s in c.series]
        rows += [p.row() for c in self.compounds for p in c.profiles]  # profile compounds
        cols = [
            "compound",
            "temperature_K",
            "n_points",
            "alpha_eff_A3",
            "alpha_eff_err_A3",
            "reduced_chi2",
        ]
        return pd.DataFrame(rows, columns=None if rows else cols)

    @property
    def properties(self) -> pd.DataFrame:
        return pd.DataFrame([c.row() for c in self.compounds])

    def to_dataframe(self) -> pd.DataFrame:
        """The properties table (one row per compound, the properties.csv columns)."""
        return self.properties

    def __repr__(self) -> str:
        return (
            f"CampaignResult({self.title!r}: {len(self.compounds)} compound(s), "
            f"{self.n_failed} failed, {self.layout}, {self.model} deflector)"
        )

    def parts(self) -> tuple[tuple[str, tuple[Any, ...]], ...]:
        """Every kind of per-compound result this campaign holds, as ``(kind, compounds)``.

        A campaign result that attaches another kind (photon recoil, visibility, …) extends this
        one method; the failure count, the exit code and the batch's compound count all read it.
        """
        return (("deflection", tuple(self.compounds)),)

    def compound_names(self) -> list[str]:
        """The distinct compounds of every part (a compound measured two ways counts once)."""
        return list(dict.fromkeys(c.compound for _, part in self.parts() for c in part))

    @property
    def n_failed(self) -> int:
        return sum(c.status == "failed" for _, part in self.parts() for c in part)

    @property
    def exit_code(self) -> int:
        """0 when no compound of any part failed, 2 when every one failed (or none), else 1."""
        total = sum(len(part) for _, part in self.parts())
        if total == 0:
            return 2
        if self.n_failed == 0:
            return 0
        return 2 if self.n_failed == total else 1

    def summary(self) -> dict[str, Any]:
        return {
            "software": {"name": "polarbeam", "version": self.version},
            "provenance": self.provenance,
            "campaign": {
                "title": self.title,
                "source": self.source,
                "layout": self.layout,
                "deflector_model": self.model,
                **({"field": self.deflector_field} if self.deflector_field != "electric" else {}),
                "stated_inputs": self.stated_inputs,
                "settings": self.settings,
            },
            "compounds": [c.summary() for c in self.compounds],
            "computed_comparison": _records(self.comparison),
            "computed_series_comparison": _records(self.series_comparison),
            "computed_parity": _records(self.parity),
            "calibration": self.calibration,
            "unmeasured_compounds": list(self.unmeasured),
            "notes": list(self.notes),
            "cautions": list(CAUTIONS),
        }

    def to_markdown(self) -> str:
        """The Markdown report (the renderer registered by :mod:`polarbeam.report`)."""
        return writer("markdown")(self)

    def to_report(self, path, *, html: bool = True, details: int | None = None) -> None:
        """Write the whole results folder (CSV, JSON, Markdown and, unless ``html=False``,
        ``report.html`` with ``figures/``) to ``path``; ``details``: compounds with figures."""
        writer("folder")(self, path, html=html, details=details)

    def _repr_html_(self) -> str:
        if self.deflector_field == "magnetic":  # χ and moments (separation.magnetic), not α/μ
            return self._magnetic_html()
        rows = []
        for c in self.compounds:
            r = c.row()
            alpha = (
                format_value_error(r["alpha_A3"], r["alpha_err_A3"])
                if r["alpha_A3"] is not None
                else "—"
            )
            if r["dipole_D"] is not None:
                dip = format_value_error(r["dipole_D"], r["dipole_err_D"])
            elif r["dipole_upper_D"] is not None:
                dip = f"&lt; {r['dipole_upper_D']:.2f}"
            else:
                dip = "—"
            rows.append(
                f"<tr><td>{html.escape(c.compound)}</td><td>{alpha}</td><td>{dip}</td>"
                f"<td>{html.escape(c.status)}</td><td>{html.escape(c.message)}</td></tr>"
            )
        return (
            f"<p><b>{html.escape(self.title)}</b> ({html.escape(self.layout)}, "
            f"{html.escape(self.model)} deflector)</p><table><thead><tr><th>compound</th>"
            "<th>α (Å³)</th><th>μ (D)</th><th>status</th><th>message</th></tr></thead><tbody>"
            + "".join(rows)
            + "</tbody></table>"
        )

    def _magnetic_html(self) -> str:
        rows = []
        for c in self.compounds:
            e = c.extra
            chi = (
                format_value_error(e["chi_dia_cm3_mol"] * 1e6, e["chi_dia_err_cm3_mol"] * 1e6)
                if e.get("chi_dia_cm3_mol") is not None
                else "—"
            )
            if e.get("moment_muB") is not None:
                mom = format_value_error(e["moment_muB"], e["moment_err_muB"])
            elif e.get("moment_upper_muB") is not None:
                mom = f"&lt; {e['moment_upper_muB']:.3g}"
            else:
                mom = "—"
            rows.append(
                f"<tr><td>{html.escape(c.compound)}</td><td>{chi}</td><td>{mom}</td>"
                f"<td>{html.escape(c.status)}</td><td>{html.escape(c.message)}</td></tr>"
            )
        return (
            f"<p><b>{html.escape(self.title)}</b> ({html.escape(self.layout)}, magnet)</p>"
            "<table><thead><tr><th>compound</th><th>χ_dia (10⁻⁶ cm³/mol)</th>"
            "<th>moment (μ_B)</th><th>status</th><th>message</th></tr></thead><tbody>"
            + "".join(rows)
            + "</tbody></table>"
        )


#: Renderers by name ("markdown", "folder"), registered by :mod:`polarbeam.report` on import, so
#: results offer ``to_markdown``/``to_report`` without importing the renderers.
_WRITERS: dict[str, Callable[..., Any]] = {}


def register_writer(name: str, function: Callable[..., Any]) -> None:
    """Make ``function`` the renderer ``name`` of campaign results."""
    _WRITERS[name] = function


def writer(name: str) -> Callable[..., Any]:
    """The registered renderer ``name``; a clear error when the report stage is not loaded."""
    try:
        return _WRITERS[name]
    except KeyError:
        raise PolarbeamError(
            f"no {name!r} renderer is registered: import polarbeam.report first "
            "(polarbeam.analyze and the batch do)"
        ) from None
