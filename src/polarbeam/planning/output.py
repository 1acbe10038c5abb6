"""Output of a plan: ``plan.csv``, ``plan.json``, ``plan.md``, plots and the rehearsal."""

from __future__ import annotations

import json
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd

from polarbeam._util.atomic import write_text_atomic
from polarbeam._util.optional import has
from polarbeam.planning.rehearsal import write_rehearsal
from polarbeam.planning.results import CampaignPlan, CompoundPlan
from polarbeam.planning.visibility import VISIBILITY_PLAN_COLUMNS
from polarbeam.report.figures import PALETTE

__all__ = ["write_plan"]


def _plot_compound(c: CompoundPlan, cplan: CampaignPlan, path: Path) -> None:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    st = cplan.settings
    fig = Figure(figsize=(7, 6))
    FigureCanvasAgg(fig)
    ax1, ax2 = fig.subplots(2, 1, sharex=True)
    for i, s in enumerate(c.series):
        model = s.model
        vv = np.linspace(0.0, 1.15 * s.voltage_max_V, 300)[1:]
        ph, mod = model.phase(vv)
        col = PALETTE[i % len(PALETTE)]  # the report's colour-blind-safe palette
        (line,) = ax1.plot(vv, ph, color=col, label=f"{s.temperature_K:g} K")
        ax2.plot(vv, st.visibility * mod, color=line.get_color())
        lev = np.asarray(s.ladder.levels_V)
        ax1.plot(lev, s.ladder.phase_rad, "o", color=line.get_color())
        ax2.plot(lev, s.ladder.visibility, "o", color=line.get_color())
        ax1.axvline(s.voltage_max_V, color=line.get_color(), ls=":", lw=0.8)
    ax1.axhline(st.phase_limit, color="0.4", ls="--", lw=0.8, label="phase limit")
    ax2.axhline(st.visibility_floor, color="0.4", ls="--", lw=0.8, label="visibility floor")
    ax1.set_ylabel("predicted phase (rad)")
    ax2.set_ylabel("predicted visibility")
    ax2.set_xlabel("deflector voltage (V)")
    ax1.set_title(f"{c.compound}: ladder (points) and V_max (dotted)")
    ax1.legend(fontsize=8)
    ax2.legend(fontsize=8)
    fig.tight_layout()
    fig.savefig(path, dpi=110)


def write_plan(cplan: CampaignPlan, out: str | Path, *, rehearsal: bool | None = None) -> Path:
    """Write ``plan.csv``, ``plan.json``, ``plan.md``, one PNG per compound and ``rehearsal/``.

    Plots need matplotlib (extra ``polarbeam[plots]``); without it they are skipped with a note.
    """
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    table = cplan.table()
    write_text_atomic(
        out / "plan.csv", table.to_csv(index=False, float_format="%.6g", lineterminator="\n")
    )
    notes = list(cplan.notes)
    have_mpl = has("matplotlib")
    if not have_mpl:
        notes.append("plots skipped: matplotlib is not installed (pip install polarbeam[plots])")
    if have_mpl:
        for c in cplan.compounds:
            if c.status != "failed":
                safe = "".join(ch if ch.isalnum() or ch in "-_." else "_" for ch in c.compound)
                _plot_compound(c, cplan, out / f"plan_{safe}.png")
    do_rehearsal = cplan.settings.rehearsal if rehearsal is None else rehearsal
    if do_rehearsal and any(c.status != "failed" for c in cplan.compounds):
        write_rehearsal(cplan, out / "rehearsal")
    if cplan.visibility:  # light-grating power ladders (planning.visibility)
        rows = [r for lad in cplan.visibility for r in lad.rows()]
        frame = pd.DataFrame(rows, columns=list(VISIBILITY_PLAN_COLUMNS))
        write_text_atomic(
            out / "visibility_plan.csv",
            frame.to_csv(index=False, float_format="%.6g", lineterminator="\n"),
        )
        notes += [f"{lad.compound}: {lad.message}" for lad in cplan.visibility if lad.message]
    final = replace(cplan, notes=tuple(notes))
    write_text_atomic(out / "plan.md", final.to_markdown())
    write_text_atomic(
        out / "plan.json",
        json.dumps(_clean(final.summary()), indent=2, default=_json_default) + "\n",
    )
    return out


def _clean(o):
    """Non-finite floats → None (JSON has no NaN or Infinity), recursively."""
    if isinstance(o, dict):
        return {k: _clean(v) for k, v in o.items()}
    if isinstance(o, list | tuple):
        return [_clean(v) for v in o]
    if isinstance(o, float | np.floating) and not math.isfinite(o):
        return None
    return o


def _json_default(o):
    if isinstance(o, np.generic):
        return o.item()
    if isinstance(o, np.ndarray):
        return o.tolist()
    if isinstance(o, Path):
        return str(o)
    if isinstance(o, float) and not math.isfinite(o):
        return None
    raise TypeError(f"not JSON serialisable: {type(o).__name__}")
