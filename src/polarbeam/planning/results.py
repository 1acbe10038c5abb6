"""Results of a plan: per series, per compound and for the campaign, with their summaries and the
Markdown rendering of ``plan.md``."""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any

from polarbeam._util.cautions import CAUTIONS
from polarbeam._util.text import finite_or_none
from polarbeam._version import __version__
from polarbeam.contract.plan import PlanSettings
from polarbeam.planning.model import SeriesModel
from polarbeam.planning.precision import DebyePrecision, LadderPrecision
from polarbeam.report.text import md_code, md_escape

#: What a plan adds to the one caution text.
PLAN_CAUTION = (
    "A plan is arithmetic, not a safety assessment: check every planned voltage and temperature "
    "against the ratings of the supply, feedthroughs, electrodes and oven."
)

__all__ = ["CampaignPlan", "CompoundPlan", "SeriesPlan", "err_key", "render_markdown"]

#: Names of plan.json keys whose generic error name (:func:`err_key`) would hide what the error
#: is on: these are errors of the planned α_eff (Å³), not of a velocity or a scale.
_ALPHA_EFF_ERRORS = {
    "sigma_stat_A3": "alpha_eff_stat_err_A3",
    "sigma_total_A3": "alpha_eff_expected_err_A3",
    "sigma_velocity_A3": "alpha_eff_velocity_err_A3",
    "sigma_scale_A3": "alpha_eff_scale_err_A3",
}


def err_key(key: str) -> str:
    """The ``_err`` name of a ``sigma_<quantity>_<unit>`` key (``sigma_alpha_A3`` →
    ``alpha_err_A3``), the one error naming of every table and JSON file; other keys unchanged."""
    if key in _ALPHA_EFF_ERRORS:
        return _ALPHA_EFF_ERRORS[key]
    if key.startswith("sigma_") and key.count("_") >= 2:
        quantity, unit = key[len("sigma_") :].rsplit("_", 1)
        return f"{quantity}_err_{unit}"
    return key


def _err_keys(x):
    """``x`` with every dict key renamed by :func:`err_key` (recursively)."""
    if isinstance(x, dict):
        return {err_key(k): _err_keys(v) for k, v in x.items()}
    if isinstance(x, list | tuple):
        return [_err_keys(v) for v in x]
    return x


@dataclass(frozen=True)
class SeriesPlan:
    """The plan of one compound at one source temperature (α in Å³, voltages in V, times in s)."""

    compound: str
    temperature_K: float
    velocity_m_s: float
    velocity_err_m_s: float
    velocity_spread_m_s: float
    alpha_eff_pred_A3: float
    alpha_eff_pred_err_A3: float
    voltage_max_V: float
    voltage_max_reason: str
    ladder: LadderPrecision
    even: LadderPrecision  # the evenly spaced ladder with the same scans, for comparison
    sigma_velocity_A3: float
    sigma_scale_A3: float  # coupling and mass (shared by the compound's series)
    signal_counts: float  # per scan at zero field
    dark_counts: float
    beam_time_s: float
    model: SeriesModel | None = None
    scans_per_voltage_target: int | None = None
    beam_time_target_s: float | None = None
    notes: tuple[str, ...] = ()

    @property
    def sigma_stat_A3(self) -> float:
        return self.ladder.sigma_stat_A3

    @property
    def sigma_total_A3(self) -> float:
        return math.sqrt(
            self.ladder.sigma_stat_A3**2 + self.sigma_velocity_A3**2 + self.sigma_scale_A3**2
        )

    @property
    def specific_var(self) -> float:
        return self.ladder.sigma_stat_A3**2 + self.sigma_velocity_A3**2

    def summary(self) -> dict[str, Any]:
        out = {k: v for k, v in self.__dict__.items() if k not in ("ladder", "even", "model")}
        out["ladder"] = asdict(self.ladder)
        out["even_ladder"] = asdict(self.even)
        out["sigma_stat_A3"] = self.sigma_stat_A3
        out["sigma_total_A3"] = self.sigma_total_A3
        out["notes"] = list(self.notes)
        return _err_keys(out)


@dataclass(frozen=True)
class CompoundPlan:
    """The plan of one compound: its series, the α/μ precision and the temperature choice."""

    compound: str
    status: str  # "ok", "warning" or "failed"
    message: str
    mass_u: float | None = None
    mass_err_u: float = 0.0
    smiles: str | None = None
    source: str = ""  # where α and μ come from
    alpha_pred_A3: float | None = None
    dipole_pred_D: float | None = None
    series: tuple[SeriesPlan, ...] = ()
    debye: DebyePrecision | None = None
    sigma_dipole_D: float = math.nan
    dipole_limit_D: float = math.nan
    temperature_sets: tuple[dict[str, Any], ...] = ()
    beam_time_dipole_target_s: float | None = None
    warnings: tuple[str, ...] = ()

    @property
    def beam_time_s(self) -> float:
        return float(sum(s.beam_time_s for s in self.series))

    def summary(self) -> dict[str, Any]:
        return {
            "compound": self.compound,
            "status": self.status,
            "message": self.message,
            "mass_u": self.mass_u,
            "mass_err_u": self.mass_err_u,
            "smiles": self.smiles,
            "source": self.source,
            "alpha_pred_A3": self.alpha_pred_A3,
            "dipole_rms_D": self.dipole_pred_D,
            "series": [s.summary() for s in self.series],
            "debye": None if self.debye is None else _err_keys(asdict(self.debye)),
            "dipole_expected_err_D": finite_or_none(self.sigma_dipole_D),
            "dipole_limit_D": finite_or_none(self.dipole_limit_D),
            "temperature_sets": _err_keys(list(self.temperature_sets)),
            "beam_time_s": self.beam_time_s,
            "beam_time_dipole_target_s": finite_or_none(self.beam_time_dipole_target_s),
            "warnings": list(self.warnings),
        }


@dataclass(frozen=True)
class CampaignPlan:
    """A whole plan: the campaign it came from, the settings, the systematics and every compound."""

    campaign: Any  # polarbeam.contract.campaign.Campaign (without data)
    settings: PlanSettings
    coupling: float
    coupling_rel_err: float
    budget: dict[str, float]  # stated input → its relative share σ_p·∂lnC/∂p
    compounds: tuple[CompoundPlan, ...]
    notes: tuple[str, ...] = ()
    visibility: tuple = ()  # planning.visibility.VisibilityLadder per compound ([gratings])

    @property
    def exit_code(self) -> int:
        failed = sum(c.status == "failed" for c in self.compounds)
        if failed == 0:
            return 0
        return 2 if failed == len(self.compounds) else 1

    def table(self):
        """``plan.csv`` as a DataFrame: one row per compound and temperature."""
        import pandas as pd

        rows = []
        for c in self.compounds:
            if c.status == "failed":
                continue
            for s in c.series:
                rows.append(
                    {
                        "compound": c.compound,
                        "temperature_K": s.temperature_K,
                        "alpha_eff_pred_A3": s.alpha_eff_pred_A3,
                        # the plan.csv contract's name for the expected 1σ of α_eff, kept in
                        # its pinned place for scripts written to it; the same value follows
                        # under the ``_err`` name every other table uses
                        "sigma_alpha_eff_pred_A3": s.sigma_total_A3,
                        "voltage_max_V": s.voltage_max_V,
                        "n_voltages": len(s.ladder.levels_V),
                        "scans_per_voltage": s.ladder.scans_per_voltage,
                        "beam_time_h": s.beam_time_s / 3600.0,
                        "alpha_eff_expected_err_A3": s.sigma_total_A3,
                        "alpha_expected_err_A3": c.debye.sigma_alpha_A3 if c.debye else math.nan,
                        "dipole_expected_err_D": c.sigma_dipole_D,
                        "dipole_limit_pred_D": c.dipole_limit_D,
                        "alpha_pred_A3": c.alpha_pred_A3,
                        "dipole_rms_D": c.dipole_pred_D,
                        "alpha_eff_pred_err_A3": s.alpha_eff_pred_err_A3,
                        "alpha_eff_stat_err_A3": s.sigma_stat_A3,
                        "alpha_eff_even_err_A3": math.sqrt(
                            s.even.sigma_stat_A3**2 + s.sigma_velocity_A3**2 + s.sigma_scale_A3**2
                        ),
                        "voltage_limited_by": s.voltage_max_reason,
                        "ladder_V": ";".join(f"{v:.4g}" for v in s.ladder.levels_V),
                        "scans_per_voltage_target": s.scans_per_voltage_target,
                        "beam_time_target_h": (
                            math.nan
                            if s.beam_time_target_s is None
                            else s.beam_time_target_s / 3600
                        ),
                        "beam_time_dipole_target_h": (
                            math.nan
                            if c.beam_time_dipole_target_s is None
                            else c.beam_time_dipole_target_s / 3600
                        ),
                        "velocity_m_s": s.velocity_m_s,
                    }
                )
        return pd.DataFrame(rows)

    def summary(self) -> dict[str, Any]:
        return {
            "software": f"polarbeam {__version__}",
            "campaign": str(self.campaign.path),
            "title": self.campaign.title,
            "layout": self.campaign.layout,
            "model": self.campaign.model,
            "settings": self.settings.summary(),
            "coupling": self.coupling,
            "coupling_rel_err": self.coupling_rel_err,
            "coupling_budget": self.budget,
            "compounds": [c.summary() for c in self.compounds],
            "notes": list(self.notes),
            "cautions": [*CAUTIONS, PLAN_CAUTION],
            "visibility_ladders": [v.summary() for v in self.visibility],
        }

    def to_markdown(self) -> str:
        return render_markdown(self)

    def _repr_html_(self) -> str:
        import html

        return "<pre>" + html.escape(self.to_markdown()) + "</pre>"


def _fmt(x, spec: str = ".3g") -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "—"
    return format(x, spec)


def render_markdown(p: CampaignPlan) -> str:
    st = p.settings
    lines = [
        f"# Plan: {md_escape(p.campaign.title)}",
        "",
        f"Campaign {md_code(p.campaign.path.name)}, layout {p.campaign.layout}, deflector "
        f"{p.campaign.model}.  Coupling C = {p.coupling:.6g} (stated-input scale error "
        f"σ_C/C = {p.coupling_rel_err:.3%}).  Scan {st.scan_time:g} s + {st.scan_dead_time:g} s "
        f"dead time, {st.bins} bins, zero-field visibility {st.visibility:g}, floor "
        f"{st.visibility_floor:.3g}, phase limit {st.phase_limit:g} rad, a reference every "
        f"{st.reference_every} signal scans.",
        "",
        "| compound | T (K) | α_eff pred (Å³) | σ(α_eff) (Å³) | stat | even ladder | V_max (V) "
        "| limited by | ladder (V) | scans/V | beam time (h) | to target (h) |",
        "|---|---|---|---|---|---|---|---|---|---|---|---|",
    ]
    for c in p.compounds:
        for s in c.series:
            even_tot = math.sqrt(
                s.even.sigma_stat_A3**2 + s.sigma_velocity_A3**2 + s.sigma_scale_A3**2
            )
            tt = s.beam_time_target_s
            lines.append(
                f"| {md_escape(c.compound)} | {s.temperature_K:g} | {s.alpha_eff_pred_A3:.2f} ± "
                f"{s.alpha_eff_pred_err_A3:.2f} | {s.sigma_total_A3:.3g} | "
                f"{s.sigma_stat_A3:.3g} | {even_tot:.3g} | {s.voltage_max_V:.4g} | "
                f"{s.voltage_max_reason} | {', '.join(f'{v:.4g}' for v in s.ladder.levels_V)} | "
                f"{s.ladder.scans_per_voltage} | {s.beam_time_s / 3600:.2f} | "
                f"{_fmt(None if tt is None else tt / 3600, '.2f')} |"
            )
    lines += [
        "",
        "| compound | source | mass (u) | α pred (Å³) | μ pred (D) | σ(α) (Å³) | σ(μ) (D) "
        "| μ limit (D) | temperatures (K) | status |",
        "|---|---|---|---|---|---|---|---|---|---|",
    ]
    for c in p.compounds:
        if c.status == "failed":
            lines.append(
                f"| {md_escape(c.compound)} | — | — | — | — | — | — | — | — "
                f"| failed: {md_escape(c.message)} |"
            )
            continue
        lines.append(
            f"| {md_escape(c.compound)} | {md_escape(c.source)} | {c.mass_u:.3f} | "
            f"{_fmt(c.alpha_pred_A3, '.2f')} | "
            f"{_fmt(c.dipole_pred_D, '.2f')} | "
            f"{_fmt(c.debye.sigma_alpha_A3 if c.debye else None)} | {_fmt(c.sigma_dipole_D)} | "
            f"{_fmt(c.dipole_limit_D)} | {', '.join(f'{s.temperature_K:g}' for s in c.series)} "
            f"| {c.status} |"
        )
    sets = [(c.compound, r) for c in p.compounds for r in c.temperature_sets]
    if sets:
        lines += [
            "",
            f"Temperature sets compared (criterion: {st.temperature_criterion}):",
            "",
            "| compound | set | temperatures (K) | σ(α) (Å³) | σ(⟨μ²⟩) (D²) | corr |",
            "|---|---|---|---|---|---|",
        ]
        for name, r in sets:
            lines.append(
                f"| {md_escape(name)} | {md_escape(r['label'])} | "
                f"{', '.join(f'{t:.0f}' for t in r['temperatures_K'])} "
                f"| {_fmt(r['sigma_alpha_A3'])} | {_fmt(r['sigma_mu2_D2'])} | "
                f"{_fmt(r['corr'], '.2f')} |"
            )
    notes = [
        w if w.startswith(c.compound) else f"{c.compound}: {w}"
        for c in p.compounds
        for w in c.warnings
    ]
    if notes or p.notes:
        lines += ["", "Notes:", ""] + [f"* {md_escape(n)}" for n in (*p.notes, *notes)]
    lines += ["", "## Safety", "", *[f"- {c}" for c in (*CAUTIONS, PLAN_CAUTION)], ""]
    return "\n".join(lines)
