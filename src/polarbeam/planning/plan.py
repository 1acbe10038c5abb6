"""Campaign planning before the beam time: predicted phases, voltage ladders, expected precision.

A planning campaign is an ordinary ``campaign.toml`` (instrument, deflector, optional
``[analysis]``) with a ``[plan]`` table instead of measured data, and a ``compounds.csv`` that
names each compound by its structure (``smiles``, or a record of ``[data] structures``) or by stated
values (``alpha_A3``, ``dipole_D``).  For every compound and source temperature the planner

1. predicts α_eff(T) = α + ⟨μ²⟩/(3kT) (structure estimates of
   :mod:`polarbeam.comparison.structure_check`, or the stated values) and, with the analysis' own
   model (:func:`polarbeam.extraction.series.observable_model`), the phase φ(V) and the phasor
   modulus M(V) = |⟨e^{iφ(v)}⟩| of the velocity average;
2. finds the largest voltage that keeps |φ| ≤ ``phase_limit`` and the visibility V₀·M(V) above
   ``visibility_floor`` (and below ``voltage_limit``);
3. chooses a ladder of ``n_voltages`` levels on a grid evenly spaced in V² that minimises the
   variance of α_eff from the Fisher information of the fit model (c-optimal exact design by
   coordinate exchange), with the offset as a nuisance parameter;
4. propagates the design to σ(α_eff) (statistics plus the campaign's stated systematics), to σ(α)
   and σ(μ) from the Debye line, and to the beam time needed for a target precision;
5. compares candidate temperature sets and keeps the one that best separates α from ⟨μ²⟩.

The noise model of a scan is described in :mod:`polarbeam.planning.model`, the Fisher precision
and the branch safety of a ladder in :mod:`polarbeam.planning.precision`.

Systematics
-----------
α_eff depends on the geometry, field and mass only through α_eff·C/m, so the stated inputs add
the relative variance Σ_p (∂ln C/∂p · σ_p)² + (σ_m/m)² (sensitivities from
:func:`polarbeam.pipeline.analysis.build_context`), shared by all series of a compound.  The
per-series velocity calibration error adds (∂α̂/∂v̄ · σ_v)², with ∂α̂/∂v̄ the implicit derivative
of the least-squares solution (as in :func:`polarbeam.extraction.series.fit_series`).  The Debye
line is propagated as the pipeline does it: weights from the series-specific variances (plus the
temperature error as an effective variance), the full correlated covariance for the estimate.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np

from polarbeam.comparison.structure_check import (
    DIPOLE_REL_ERROR,
    predict_for_compound,
    stated_mass_check,
)
from polarbeam.constants import (
    AMU,
    BOLTZMANN,
    alpha_a3_from_si,
    langevin_debye_si,
    si_from_debye,
)
from polarbeam.contract.plan import PlanCompound, PlanSettings, load_plan
from polarbeam.errors import CompoundError
from polarbeam.pipeline.analysis import build_context
from polarbeam.planning.ladders import design_ladder, even_ladder
from polarbeam.planning.model import SeriesModel, voltage_max
from polarbeam.planning.precision import (
    DebyePrecision,
    debye_precision,
    dipole_figures,
    ladder_precision,
)
from polarbeam.planning.results import CampaignPlan, CompoundPlan, SeriesPlan
from polarbeam.planning.visibility import plan_visibility
from polarbeam.quantities import Measured

__all__ = ["make_plan", "plan_campaign"]

_EXACT_TARGET_MAX = 400  # scans per voltage up to which the target search uses exact Fisher values


def _temperature_velocity(plan: PlanSettings, t: float, index: int) -> tuple[float, float, float]:
    """(velocity, its error, spread) at temperature t."""
    vel = plan.per_temperature("velocity", index)
    spread = plan.per_temperature("velocity_spread", index)
    f = 1.0
    if plan.velocity_temperature_K is not None:
        f = math.sqrt(t / plan.velocity_temperature_K)
    return vel.value * f, vel.error * f, spread * f


class _Predictor:
    """α_eff(T) ± its prediction error for one compound, from structure or stated values."""

    def __init__(self, pc: PlanCompound, camp, temps: Sequence[float]):
        self.notes: list[str] = []
        mol = camp.structures.get(pc.name)
        if isinstance(mol, str):
            raise CompoundError(f"structures file: record {pc.name!r} could not be read ({mol})")
        has_structure = pc.smiles is not None or mol is not None
        if pc.alpha_A3 is None and not has_structure:
            raise CompoundError(
                f"compounds.csv line {pc.line}: compound {pc.name!r} has no structure (smiles "
                "column or a [data] structures record) and no stated alpha_A3; expected one of them"
            )
        self.pred = None
        if has_structure and (pc.alpha_A3 is None or pc.dipole_D is None or pc.mass is None):
            conf = camp.settings.conformers if pc.dipole_D is None else 0
            self.pred = predict_for_compound(
                pc.name,
                pc.smiles,
                mol,
                temperatures=tuple(temps),
                conformers=conf,
                seed=camp.settings.conformer_seed,
            )
            self.notes.extend(self.pred.notes)
            if self.pred.flags:
                self.notes.append(
                    "outside the additive schemes' domain: " + ", ".join(self.pred.flags)
                )
        if pc.mass is not None:
            self.mass = pc.mass
            if self.pred is not None:
                w = stated_mass_check(pc.mass.value, self.pred.mass_u, pc.name)
                if w:
                    self.notes.append(w)
        elif self.pred is not None:
            self.mass = Measured(self.pred.mass_u * AMU, 0.0)
            self.notes.append(f"mass {self.pred.mass_u:.3f} u from the structure")
        else:
            raise CompoundError(
                f"compounds.csv line {pc.line}: compound {pc.name!r} expected a mass_u (or a "
                "structure to compute it from), found none"
            )
        self.pc = pc
        if pc.alpha_A3 is not None:
            self.alpha, self.alpha_err = pc.alpha_A3.value, pc.alpha_A3.error
            src_a = "stated α"
        else:
            self.alpha, self.alpha_err = (
                self.pred.alpha_additive_A3,
                self.pred.alpha_additive_err_A3,
            )
            src_a = "additive α"
        if pc.dipole_D is not None:
            src_m = "stated μ"
        elif self.pred is not None and self.pred.mu2_si:
            src_m = "conformer ⟨μ²⟩"
        else:
            src_m = "μ = 0 (none stated)"
            if pc.dipole_D is None and self.pred is None:
                self.notes.append("no dipole_D stated: planned as non-polar")
        self.source = f"{src_a}, {src_m}"

    def mu2_D2(self, t: float) -> tuple[float, float]:
        """⟨μ²⟩ (D²) and its 1σ at temperature t."""
        if self.pc.dipole_D is not None:
            m, dm = self.pc.dipole_D.value, self.pc.dipole_D.error
            return m * m, 2 * m * dm
        if self.pred is not None and self.pred.mu2_si:
            if t not in self.pred.mu2_si:
                raise KeyError(t)
            mu2 = self.pred.mu2_si[t] / si_from_debye(1.0) ** 2
            return mu2, 2 * DIPOLE_REL_ERROR * mu2
        return 0.0, 0.0

    def alpha_eff(self, t: float) -> tuple[float, float]:
        mu2, dmu2 = self.mu2_D2(t)
        per = alpha_a3_from_si(langevin_debye_si(si_from_debye(1.0), t))  # Å³ per D²
        return self.alpha + per * mu2, math.hypot(self.alpha_err, per * dmu2)


def _series_plan(
    name: str,
    t: float,
    index: int,
    predictor: _Predictor,
    plan: PlanSettings,
    camp,
    ctx,
    scale_rel: float,
    ladder_override: str | None = None,
) -> SeriesPlan:
    a_eff, a_err = predictor.alpha_eff(t)
    v, dv, spread = _temperature_velocity(plan, t, index)
    sig = plan.signal_counts(index)
    dark = plan.dark_rate * plan.scan_time
    vis_obs = plan.visibility * sig / (sig + dark)
    model = SeriesModel(
        a_eff,
        ctx.coupling / predictor.mass.value,
        v,
        spread,
        camp.layout,
        sig + dark,
        plan.visibility,
        vis_obs,
        camp.settings.velocity_nodes,
    )
    timing = _timing(plan, camp)
    notes: list[str] = []
    ladder_kind = ladder_override or plan.ladder
    if isinstance(ladder_kind, tuple):
        levels = np.asarray(ladder_kind)
        vmax, reason = float(levels.max()), "stated ladder"
        v_ok, _ = voltage_max(model, plan.phase_limit, plan.visibility_floor, plan.voltage_limit)
        if vmax > v_ok * (1 + 1e-9):
            notes.append(
                f"{name} @ {t:g} K: the stated ladder reaches {vmax:.4g} V, beyond the "
                f"{v_ok:.4g} V allowed by the phase limit and visibility floor"
            )
    else:
        design_a = a_eff + plan.design_margin * a_err
        vmax, reason = voltage_max(
            model, plan.phase_limit, plan.visibility_floor, plan.voltage_limit, design_a
        )
    k = plan.scans_per_voltage
    n = plan.n_voltages
    even = ladder_precision(model, even_ladder(vmax, n), k, **timing)
    if isinstance(ladder_kind, tuple):
        lad = ladder_precision(model, ladder_kind, k, **timing)
    elif ladder_kind == "even":
        lad = even
    else:
        lad = design_ladder(model, vmax, n, k, **timing)
        if lad.sigma_stat_A3 > even.sigma_stat_A3 and even.branch_excess <= lad.branch_excess:
            lad = even  # the grid may miss the even ladder's exact levels
    if lad.branch_excess > 0:
        notes.append(
            f"{name} @ {t:g} K: 2π branch tracking is not safe by {lad.branch_excess:.2f} rad "
            "(too few counts for this phase range): lower phase_limit or add scans"
        )
    n_scans = lad.n_signal + lad.n_reference
    time_s = n_scans * (plan.scan_time + plan.scan_dead_time)
    sig_v = abs(lad.dalpha_dvelocity) * dv
    sig_scale = a_eff * math.sqrt(scale_rel + (predictor.mass.error / predictor.mass.value) ** 2)
    sp = SeriesPlan(
        compound=name,
        temperature_K=t,
        velocity_m_s=v,
        velocity_err_m_s=dv,
        velocity_spread_m_s=spread,
        alpha_eff_pred_A3=a_eff,
        alpha_eff_pred_err_A3=a_err,
        voltage_max_V=vmax,
        voltage_max_reason=reason,
        ladder=lad,
        even=even,
        sigma_velocity_A3=sig_v,
        sigma_scale_A3=sig_scale,
        signal_counts=sig,
        dark_counts=dark,
        beam_time_s=time_s,
        model=model,
        notes=tuple(notes),
    )
    return sp


def _timing(plan: PlanSettings, camp) -> dict[str, Any]:
    return {
        "reference_every": plan.reference_every,
        "scan_time_s": plan.scan_time,
        "dead_time_s": plan.scan_dead_time,
        "diffusion_rad2_s": plan.phase_diffusion,
        "fit_offset": camp.settings.fit_offset,
    }


def _target_scans(sp: SeriesPlan, plan: PlanSettings, timing) -> SeriesPlan:
    """Scans per voltage (and beam time) that reach target_alpha_rel on α_eff, if reachable."""
    target = plan.target_alpha_rel * sp.alpha_eff_pred_A3
    sys2 = sp.sigma_scale_A3**2
    k0 = sp.ladder.scans_per_voltage
    if target**2 <= sys2 + sp.sigma_velocity_A3**2 * 0.999:
        note = (
            f"{sp.compound} @ {sp.temperature_K:g} K: target σ(α_eff)/α_eff = "
            f"{plan.target_alpha_rel:g} is below the systematic floor "
            f"{math.hypot(sp.sigma_scale_A3, sp.sigma_velocity_A3) / sp.alpha_eff_pred_A3:.3g} "
            "(coupling, mass and velocity errors): no beam time reaches it"
        )
        return replace(sp, beam_time_target_s=math.inf, notes=(*sp.notes, note))
    room = max(target**2 - sys2 - sp.sigma_velocity_A3**2, 1e-300)
    estimate = max(1, math.ceil(k0 * sp.ladder.sigma_stat_A3**2 / room))  # σ²_stat ∝ 1/k

    def reaches(k: int) -> bool:
        lp = ladder_precision(sp.model, sp.ladder.levels_V, k, **timing)
        vel2 = (lp.dalpha_dvelocity * sp.velocity_err_m_s) ** 2
        return lp.sigma_stat_A3**2 + vel2 + sys2 <= target**2

    if estimate > _EXACT_TARGET_MAX:
        k = estimate  # beyond a few hundred passes the 1/k scaling is exact enough
    else:  # the smallest k that reaches the target, by bisection on the exact Fisher value
        hi = estimate
        while not reaches(hi):
            hi *= 2
            if hi > _EXACT_TARGET_MAX:
                break
        lo = 0
        while hi - lo > 1 and hi <= _EXACT_TARGET_MAX:
            mid = (lo + hi) // 2
            if reaches(mid):
                hi = mid
            else:
                lo = mid
        k = hi
    n_sig = k * len(sp.ladder.levels_V)
    n_scans = n_sig + (-(-n_sig // plan.reference_every)) + 1
    return replace(
        sp,
        scans_per_voltage_target=int(k),
        beam_time_target_s=n_scans * (plan.scan_time + plan.scan_dead_time),
    )


def _candidate_sets(lo: float, hi: float, n: int, grid_n: int = 9) -> list[tuple[float, ...]]:
    """Temperature sets of ``n`` grid points in [lo, hi], spaced at least half the even spacing."""
    grid = np.linspace(lo, hi, grid_n)
    if n == 1:
        return [(float(t),) for t in grid]
    min_gap = (hi - lo) / (2 * (n - 1)) - 1e-9
    out = []
    for combo in itertools.combinations(range(grid_n), n):
        ts = grid[list(combo)]
        if np.all(np.diff(ts) >= min_gap):
            out.append(tuple(float(t) for t in ts))
    return out


def _criterion(dp: DebyePrecision, crit: str) -> float:
    if crit == "alpha":
        return dp.sigma_alpha_A3
    if crit == "dipole":
        return dp.sigma_mu2_D2
    return dp.determinant


def _plan_compound(
    pc: PlanCompound, camp, ctx, plan: PlanSettings, scale_rel: float
) -> CompoundPlan:
    if pc.problem:
        return CompoundPlan(pc.name, "failed", pc.problem)
    try:
        return _plan_compound_inner(pc, camp, ctx, plan, scale_rel)
    except CompoundError as exc:
        return CompoundPlan(pc.name, "failed", str(exc))
    except (ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
        return CompoundPlan(pc.name, "failed", f"compound {pc.name!r}: numerical failure ({exc})")


def _plan_compound_inner(pc, camp, ctx, plan: PlanSettings, scale_rel: float) -> CompoundPlan:
    st = camp.settings
    if plan.temperatures_K is not None:
        sets = [plan.temperatures_K]
        grid_temps = list(plan.temperatures_K)
    else:
        lo, hi = plan.temperature_range_K
        sets = _candidate_sets(lo, hi, plan.n_temperatures)
        n = plan.n_temperatures
        even_t = tuple(float(t) for t in np.linspace(lo, hi, n))
        even_inv = tuple(float(t) for t in sorted(1.0 / np.linspace(1 / hi, 1 / lo, n)))
        named = {"evenly spaced in T": even_t, "evenly spaced in 1/T": even_inv}
        grid_temps = sorted({t for s in sets for t in s} | set(even_t) | set(even_inv))
    pred = _Predictor(pc, camp, grid_temps)
    series_by_t: dict[float, SeriesPlan] = {}

    def series(t: float) -> SeriesPlan:
        if t not in series_by_t:
            idx = plan.temperatures_K.index(t) if plan.temperatures_K is not None else 0
            series_by_t[t] = _series_plan(pc.name, t, idx, pred, plan, camp, ctx, scale_rel)
        return series_by_t[t]

    def debye_for(ts: Sequence[float]) -> DebyePrecision | None:
        if len(ts) < 2:
            return None
        ss = [series(t) for t in ts]
        mu2 = pred.mu2_D2(min(ts))[0]
        return debye_precision(
            [s.alpha_eff_pred_A3 for s in ss],
            [s.specific_var for s in ss],
            [s.sigma_stat_A3**2 for s in ss],
            scale_rel + (pred.mass.error / pred.mass.value) ** 2,
            ts,
            plan.temperature_err_K,
            mu2,
        )

    temperature_sets: list[dict[str, Any]] = []
    if plan.temperatures_K is not None:
        chosen = plan.temperatures_K
    else:
        scored = []
        for ts in sets:
            dp = debye_for(ts)
            val = _criterion(dp, plan.temperature_criterion) if dp else _series_sigma(series(ts[0]))
            scored.append((val, ts, dp))
        for label, ts in named.items():
            dp = debye_for(ts)
            val = _criterion(dp, plan.temperature_criterion) if dp else _series_sigma(series(ts[0]))
            scored.append((val, ts, dp))
            temperature_sets.append(_set_record(label, ts, dp, val))
        scored.sort(key=lambda r: r[0])
        best_val, chosen, best_dp = scored[0]
        temperature_sets.insert(0, _set_record("best (chosen)", chosen, best_dp, best_val))
    ss = tuple(series(t) for t in chosen)
    if plan.target_alpha_rel is not None:
        ss = tuple(_target_scans(s, plan, _timing(plan, camp)) for s in ss)
    dp = debye_for(chosen)
    warnings = list(pred.notes)
    for s in ss:
        warnings.extend(s.notes)
    sig_mu = lim = math.nan
    mu2_pred = pred.mu2_D2(min(chosen))[0]
    dip_target_time = None
    if dp is not None:
        sig_mu, lim = dipole_figures(
            mu2_pred, dp.sigma_mu2_D2, st.dipole_significance, st.upper_limit_cl
        )
        if plan.target_dipole_D is not None:
            dip_target_time = _dipole_target_time(dp, mu2_pred, plan, ss, st)
            if dip_target_time is not None and not math.isfinite(dip_target_time):
                warnings.append(
                    f"{pc.name}: target_dipole_D = {plan.target_dipole_D:g} D is below the "
                    "systematic floor of the Debye line: no beam time reaches it"
                )
    else:
        warnings.append(
            "single source temperature: α and μ cannot be separated; plan at least two temperatures"
        )
    fpv = ctx.field_per_volt
    if fpv and mu2_pred > 0:
        vmax = max(s.voltage_max_V for s in ss)
        tmin = min(chosen)
        ratio = si_from_debye(math.sqrt(mu2_pred)) * fpv * vmax / (BOLTZMANN * tmin)
        if ratio > st.orientation_warning:
            warnings.append(
                f"μE/kT = {ratio:.2f} at {vmax:.4g} V and {tmin:g} K: the weak-field "
                "Langevin–Debye limit is not well satisfied; lower the voltage or raise T"
            )
    return CompoundPlan(
        compound=pc.name,
        status="warning" if warnings else "ok",
        message="; ".join(warnings) or "ok",
        mass_u=pred.mass.value / AMU,
        mass_err_u=pred.mass.error / AMU,
        smiles=pc.smiles,
        source=pred.source,
        alpha_pred_A3=pred.alpha,
        dipole_pred_D=math.sqrt(mu2_pred),
        series=ss,
        debye=dp,
        sigma_dipole_D=sig_mu,
        dipole_limit_D=lim,
        temperature_sets=tuple(temperature_sets),
        beam_time_dipole_target_s=dip_target_time,
        warnings=tuple(warnings),
    )


def _series_sigma(s: SeriesPlan) -> float:
    return s.sigma_total_A3


def _set_record(label: str, ts, dp: DebyePrecision | None, val: float) -> dict[str, Any]:
    return {
        "label": label,
        "temperatures_K": list(ts),
        "sigma_alpha_A3": dp.sigma_alpha_A3 if dp else None,
        "sigma_mu2_D2": dp.sigma_mu2_D2 if dp else None,
        "corr": dp.corr if dp else None,
        "criterion": val,
    }


def _dipole_target_time(dp: DebyePrecision, mu2: float, plan: PlanSettings, ss, st) -> float | None:
    """Total beam time (s) for the compound to reach target_dipole_D (statistics scale as 1/time).

    For a significant dipole the target is σ(μ); otherwise it is the expected upper limit, which
    for ⟨μ²⟩ ≈ 0 is sqrt(z·σ(⟨μ²⟩)) with z the one-sided normal quantile of the bounded limit.
    """
    from scipy import stats

    tgt = plan.target_dipole_D
    if mu2 > 0 and mu2 / dp.sigma_mu2_D2 >= st.dipole_significance:
        want = 2.0 * math.sqrt(mu2) * tgt  # σ(⟨μ²⟩) that gives σ(μ) = target
    else:
        z = stats.norm.ppf(0.5 + 0.5 * st.upper_limit_cl)
        want = tgt**2 / z
    stat2 = dp.sigma_mu2_stat_D2**2
    sys2 = max(dp.sigma_mu2_D2**2 - stat2, 0.0)
    if want**2 <= sys2:
        return math.inf
    factor = stat2 / (want**2 - sys2)
    return factor * float(sum(s.beam_time_s for s in ss))


def plan_campaign(camp, plan: PlanSettings, compounds: Sequence[PlanCompound]) -> CampaignPlan:
    """Plan every compound of a loaded planning campaign (see the module docstring)."""
    ctx = build_context(camp)
    budget = {}
    scale_rel = 0.0
    for key, m in camp.stated.items():
        s = ctx.sensitivities.get(key)
        if s is None or m.error <= 0:
            continue
        budget[key] = abs(s) * m.error
        scale_rel += (s * m.error) ** 2
    out = tuple(_plan_compound(pc, camp, ctx, plan, scale_rel) for pc in compounds)
    notes = []
    if camp.layout == "time-domain":
        notes.append("time-domain layout: the phase does not depend on velocity")
    return CampaignPlan(camp, plan, ctx.coupling, math.sqrt(scale_rel), budget, out, tuple(notes))


def make_plan(path: str | Path) -> CampaignPlan:
    """Load a planning campaign and plan it (no files written)."""
    camp, plan, compounds = load_plan(path)
    cplan = plan_campaign(camp, plan, compounds)
    if camp.visibility is not None:  # [gratings]: light-grating power ladders
        cplan = replace(cplan, visibility=plan_visibility(camp.visibility, plan))
    return cplan
