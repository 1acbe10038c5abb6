"""Choice of the voltage ladder of a series: the even lab ladder and the c-optimal design."""

from __future__ import annotations

import math

import numpy as np

from polarbeam.planning.model import SeriesModel, acquisition_sequence
from polarbeam.planning.precision import (
    LadderPrecision,
    branch_excess,
    fixed_covariance,
    ladder_precision,
    precision_core,
)

__all__ = ["GRID_PER_LEVEL", "design_ladder", "even_ladder"]

#: Candidate ladder levels per requested level (grid evenly spaced in V²).
GRID_PER_LEVEL = 6


def even_ladder(v_max: float, n_voltages: int) -> np.ndarray:
    """``n_voltages`` levels evenly spaced in V from v_max/n to v_max (the usual lab ladder)."""
    return np.linspace(v_max / n_voltages, v_max, n_voltages)


def design_ladder(
    model: SeriesModel,
    v_max: float,
    n_voltages: int,
    scans_per_voltage: int,
    *,
    reference_every: int = 2,
    scan_time_s: float = 20.0,
    dead_time_s: float = 0.0,
    diffusion_rad2_s: float = 0.0,
    fit_offset: bool = True,
    grid_points: int | None = None,
) -> LadderPrecision:
    """c-optimal ladder for α_eff: ``n_voltages`` distinct levels on a grid evenly spaced in V².

    The grid has ``grid_points`` levels (default :data:`GRID_PER_LEVEL` per requested level)
    ``v_max·sqrt(g/G)``, g = 1..G.  Starting from the even ladder snapped to the grid, each level
    in turn is moved to the grid point that lowers σ²_stat(α_eff) most (coordinate exchange) until
    no move helps.  Ladders whose branch tracking is not safe (:data:`BRANCH_Z`) lose against
    every safe one; the least unsafe is kept when none is safe.
    """
    n = int(n_voltages)
    g_n = int(grid_points or max(GRID_PER_LEVEL * n, 24))
    grid = v_max * np.sqrt(np.arange(1, g_n + 1) / g_n)
    ev = model.evaluate(grid)
    seq = acquisition_sequence(
        grid[:n], scans_per_voltage, reference_every, scan_time_s, dead_time_s
    )
    fixed = fixed_covariance(seq, model.reference_variance, diffusion_rad2_s)
    rank = seq.rank[~seq.is_reference]

    cache: dict[tuple[int, ...], tuple[float, float]] = {}

    def score(idx: tuple[int, ...]) -> tuple[float, float]:
        if idx not in cache:
            cache[idx] = _score(idx)
        return cache[idx]

    def _score(idx: tuple[int, ...]) -> tuple[float, float]:
        ids = np.asarray(idx)
        g = ids[rank]
        try:
            var_a, _, diag = precision_core(ev["d_alpha"][g], ev["var"][g], None, fixed, fit_offset)
        except np.linalg.LinAlgError:
            return (math.inf, math.inf)
        excess = branch_excess(ev["phase"][ids], grid[ids], rank, diag)
        return (round(excess, 9), var_a)

    def snap(levels: np.ndarray) -> tuple[int, ...]:
        out: list[int] = []
        for v in levels:
            order = np.argsort(np.abs(grid**2 - v**2))
            out.append(next(int(i) for i in order if int(i) not in out))
        return tuple(sorted(out))

    starts = [
        snap(even_ladder(v_max, n)),
        snap(v_max * np.sqrt(np.linspace(1.0 / n, 1.0, n))),  # even in V²
    ]
    best_idx, best = None, (math.inf, math.inf)
    for start in starts:
        cur, cur_s = start, score(start)
        for _ in range(60):
            moved = False
            for i in range(n):
                slot_best, slot_s = None, cur_s
                for gi in range(g_n):
                    if gi in cur:
                        continue
                    cand = tuple(sorted((*cur[:i], gi, *cur[i + 1 :])))
                    s = score(cand)
                    if s < slot_s:
                        slot_best, slot_s = cand, s
                if slot_best is not None:
                    cur, cur_s, moved = slot_best, slot_s, True
            if not moved:
                break
        if cur_s < best:
            best_idx, best = cur, cur_s
    return ladder_precision(
        model,
        grid[np.asarray(best_idx)],
        scans_per_voltage,
        reference_every=reference_every,
        scan_time_s=scan_time_s,
        dead_time_s=dead_time_s,
        diffusion_rad2_s=diffusion_rad2_s,
        fit_offset=fit_offset,
    )
