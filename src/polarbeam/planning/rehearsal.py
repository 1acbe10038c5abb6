"""Rehearsal of a plan: simulated raw scans of the planned series, in the input contract."""

from __future__ import annotations

import json
import math
import shutil
from pathlib import Path

import numpy as np

from polarbeam._util.atomic import write_text_atomic
from polarbeam.constants import AMU, alpha_a3_from_si
from polarbeam.contract.campaign import series_from_reduction
from polarbeam.errors import CompoundError, InputError
from polarbeam.extraction.series import fit_series
from polarbeam.instrument.deflectors import coupling
from polarbeam.pipeline.analysis import build_context
from polarbeam.planning.model import SeriesModel, acquisition_sequence
from polarbeam.planning.results import CampaignPlan, CompoundPlan, SeriesPlan
from polarbeam.reduction import reduce_table
from polarbeam.simulation.scans import fringe_counts

__all__ = ["rehearsal_scans", "rehearsal_scatter", "write_rehearsal"]


def _draw_instrument(camp, rng: np.random.Generator | None) -> dict[str, float]:
    vals = camp.nominal()
    if rng is None:
        return vals
    return {k: m.value + m.error * rng.standard_normal() for k, m in camp.stated.items()}


def rehearsal_scans(
    cplan: CampaignPlan,
    rng: np.random.Generator,
    *,
    systematics: bool = True,
    copies: int = 1,
    only: tuple[str, float] | None = None,
):
    """Simulated raw-scan table of the plan (and the truth per series).

    Each series follows its planned acquisition order (:func:`acquisition_sequence`).  Counts are
    Poisson with the planned signal and dark counts; the visibility of a signal scan is the
    zero-field visibility times the phasor modulus of the velocity average at its voltage; the
    interferometer phase drifts linearly (``phase_drift``) and as a random walk
    (``phase_diffusion``).  With ``systematics`` the instrument truth is drawn once from the stated
    errors (shared by all series of the table), each series draws its own velocity and temperature
    and each compound its mass, so an analysis of the table sees the systematics the plan
    propagates; without it the truth is the nominal set-up.

    ``copies`` repeats every series with independent counts and noise (compound names get
    ``#i``); ``only = (compound, temperature_K)`` restricts the table to one series.

    Returns
    -------
    (DataFrame, DataFrame)
        The scan table (columns of :data:`polarbeam.reduction.INPUT_COLUMNS`) and the truth per
        series (``compound, temperature_K, alpha_eff_true_A3, temperature_true_K,
        velocity_true_m_s``).
    """
    import pandas as pd

    camp, plan = cplan.campaign, cplan.settings
    period = camp.nominal().get("instrument.grating_period")
    inst_true = _draw_instrument(camp, rng if systematics else None)
    c_true = coupling(*camp.build(inst_true))
    period_true = inst_true.get("instrument.grating_period", period)
    tables, truth = [], []
    first_scan, t0 = 0, 0.0
    for c in cplan.compounds:
        if c.status == "failed":
            continue
        for copy in range(copies):
            label = c.compound if copies == 1 else f"{c.compound}#{copy}"
            m_true = c.mass_u * AMU
            if systematics and c.mass_err_u > 0:
                m_true = (c.mass_u + c.mass_err_u * rng.standard_normal()) * AMU
            for s in c.series:
                if only is not None and (c.compound, s.temperature_K) != only:
                    continue
                t_true = s.temperature_K
                v_true = s.velocity_m_s
                if systematics:
                    t_true += plan.temperature_err_K * rng.standard_normal()
                    v_true += s.velocity_err_m_s * rng.standard_normal()
                a_true = _alpha_eff_at(c, s, t_true)
                seq = acquisition_sequence(
                    s.ladder.levels_V,
                    s.ladder.scans_per_voltage,
                    plan.reference_every,
                    plan.scan_time,
                    plan.scan_dead_time,
                    t0,
                )
                model = SeriesModel(
                    a_true,
                    c_true / m_true,
                    v_true,
                    s.velocity_spread_m_s,
                    camp.layout,
                    s.signal_counts + s.dark_counts,
                    plan.visibility,
                    plan.visibility,
                    camp.settings.velocity_nodes,
                )
                shift, mod = model.phase(seq.voltages)
                shift[seq.is_reference] = 0.0
                mod[seq.is_reference] = 1.0
                n_sc = seq.voltages.size
                steps = rng.standard_normal(n_sc) * np.sqrt(
                    plan.phase_diffusion * np.r_[0.0, np.diff(seq.times)]
                )
                phi_i = (
                    rng.uniform(-np.pi, np.pi)
                    + plan.phase_drift * (seq.times - seq.times[0])
                    + np.cumsum(steps)
                )
                bins = plan.bins
                x_bins = np.arange(bins) * (period_true / bins)
                t_bins = (np.arange(bins) + 0.5) * (plan.scan_time / bins) - 0.5 * plan.scan_time
                _, counts = fringe_counts(
                    np.tile(x_bins, n_sc),
                    period_true,
                    np.repeat(phi_i + shift, bins),
                    s.signal_counts / bins,
                    np.repeat(plan.visibility * mod, bins),
                    s.dark_counts / bins,
                    rng,
                )
                n_rows = n_sc * bins
                tables.append(
                    pd.DataFrame(
                        {
                            "compound": np.full(n_rows, label, dtype=object),
                            "temperature_K": np.full(n_rows, s.temperature_K),
                            "temperature_err_K": np.full(n_rows, plan.temperature_err_K),
                            "velocity_m_s": np.full(n_rows, s.velocity_m_s),
                            "velocity_err_m_s": np.full(n_rows, s.velocity_err_m_s),
                            "velocity_spread_m_s": np.full(n_rows, s.velocity_spread_m_s),
                            "voltage_V": np.repeat(seq.voltages, bins),
                            "scan": np.repeat(first_scan + np.arange(n_sc), bins),
                            "time_s": np.repeat(seq.times, bins) + np.tile(t_bins, n_sc),
                            "position_m": np.tile(x_bins, n_sc),
                            "counts": counts,
                        }
                    )
                )
                truth.append(
                    {
                        "compound": label,
                        "temperature_K": s.temperature_K,
                        "alpha_eff_true_A3": a_true,
                        "temperature_true_K": t_true,
                        "velocity_true_m_s": v_true,
                        "alpha_eff_pred_A3": s.alpha_eff_pred_A3,
                    }
                )
                first_scan += n_sc
                t0 = float(seq.times[-1]) + plan.scan_time + 600.0
    if not tables:
        raise InputError("rehearsal: no planned series to simulate")
    return pd.concat(tables, ignore_index=True), pd.DataFrame(truth)


def _alpha_eff_at(c: CompoundPlan, s: SeriesPlan, t_true: float) -> float:
    """α_eff at the true temperature: the planned α plus the planned ⟨μ²⟩ scaled as 1/T."""
    orient = s.alpha_eff_pred_A3 - c.alpha_pred_A3
    return c.alpha_pred_A3 + orient * s.temperature_K / t_true


def rehearsal_scatter(
    cplan: CampaignPlan,
    compound: str,
    temperature_K: float,
    n: int = 200,
    *,
    seed: int = 0,
    systematics: bool = False,
):
    """Fit ``n`` independent rehearsals of one planned series; returns (α_eff fits, errors), Å³.

    The rehearsals are reduced together (:func:`polarbeam.reduction.reduce_table`) and each series
    is fitted as the analysis does (:func:`polarbeam.extraction.series.fit_series`), in memory.
    With ``systematics`` every rehearsal draws its own instrument, velocity, temperature and mass,
    so the scatter includes the systematic errors (compare with the total σ); without, compare
    with σ_stat.  The returned errors are the fits' statistical errors.
    """
    rng = np.random.default_rng(seed)
    camp = cplan.campaign
    ctx = build_context(camp)
    comp = next(c for c in cplan.compounds if c.compound == compound)
    if systematics:
        import pandas as pd

        parts, truths = [], []
        for i in range(n):
            tab, tr = rehearsal_scans(cplan, rng, systematics=True, only=(compound, temperature_K))
            tab["compound"] = f"{compound}#{i}"
            tab["scan"] += i * 100000
            tab["time_s"] += i * 1e6
            tr["compound"] = f"{compound}#{i}"
            parts.append(tab)
            truths.append(tr)
        table = pd.concat(parts, ignore_index=True)
    else:
        table, _ = rehearsal_scans(
            cplan, rng, systematics=False, copies=n, only=(compound, temperature_K)
        )
    red = reduce_table(table, camp.nominal()["instrument.grating_period"], source="rehearsal")
    series, problems, _ = series_from_reduction(red)
    if problems:
        raise CompoundError("; ".join(problems.values()))
    fits, errs = [], []
    for name in sorted(series):
        (s,) = series[name]
        f = fit_series(
            s,
            ctx.coupling,
            comp.mass_u * AMU,
            camp.layout,
            fit_offset=camp.settings.fit_offset,
            nodes=camp.settings.velocity_nodes,
        )
        fits.append(alpha_a3_from_si(f.alpha_si))
        errs.append(alpha_a3_from_si(math.sqrt(f.covariance[0, 0])))
    return np.asarray(fits), np.asarray(errs)


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int | float):
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    raise TypeError(f"cannot write {v!r} to TOML")


def write_rehearsal(cplan: CampaignPlan, out_dir: str | Path, seed: int | None = None) -> Path:
    """Write ``campaign.toml``, ``scans.csv``, ``compounds.csv`` and ``truth.csv`` of a rehearsal.

    The campaign keeps the plan's ``[campaign]``, ``[instrument]``, ``[deflector]`` and
    ``[analysis]`` tables (field-map and waveform files are copied next to it), so
    ``polarbeam analyze out_dir/campaign.toml`` analyses it as it would the real data.
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    camp = cplan.campaign
    rng = np.random.default_rng(cplan.settings.seed if seed is None else seed)
    table, truth = rehearsal_scans(cplan, rng, systematics=True)
    raw = camp.raw
    lines = []
    title = raw.get("campaign", {}).get("title", camp.title)
    lines += ["[campaign]", f"title = {_toml_value('Rehearsal (simulated) of the plan: ' + title)}"]
    desc = (
        "Simulated raw scans of a planned campaign; invented data for rehearsing the analysis, "
        "not measurements."
    )
    lines += [f"description = {_toml_value(desc)}", ""]
    for tname in ("instrument", "deflector", "analysis"):
        tab = dict(raw.get(tname, {}))
        if not tab:
            continue
        for key in ("field_map", "waveform"):
            if key in tab:
                src = (camp.path.parent / tab[key]).resolve()
                shutil.copyfile(src, out / src.name)
                tab[key] = src.name
        lines.append(f"[{tname}]")
        lines += [f"{k} = {_toml_value(v)}" for k, v in tab.items()]
        lines.append("")
    lines += ["[data]", 'scans = "scans.csv"', 'compounds = "compounds.csv"']
    sdf = raw.get("data", {}).get("structures")
    if isinstance(sdf, str):  # the structures travel with the rehearsal for the cross-check
        src = (camp.path.parent / sdf).resolve()
        shutil.copyfile(src, out / src.name)
        lines.append(f"structures = {_toml_value(src.name)}")
    lines.append("")
    write_text_atomic(
        out / "scans.csv", table.to_csv(index=False, float_format="%.10g", lineterminator="\n")
    )
    import csv
    import io

    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(["compound", "mass_u", "mass_err_u", "smiles"])
    for c in cplan.compounds:
        if c.status != "failed":
            writer.writerow([c.compound, f"{c.mass_u:.8g}", f"{c.mass_err_u:g}", c.smiles or ""])
    write_text_atomic(out / "compounds.csv", buf.getvalue())
    write_text_atomic(
        out / "truth.csv",
        "# invented truth of the simulated rehearsal (not measurements)\n"
        + truth.to_csv(index=False, float_format="%.8g", lineterminator="\n"),
    )
    write_text_atomic(out / "campaign.toml", "\n".join(lines))
    return out / "campaign.toml"
