"""Mesh refinement and Richardson extrapolation of the field factor.

:func:`solve_deflector` solves on nested grids ``2**(levels-1) h, ..., 2h, h``, averages over the
beam on each and extrapolates the two finest with the observed order (capped at the scheme's
nominal 2); the size of the correction is the numerical error.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from polarbeam.errors import InputError
from polarbeam.instrument.fields.beam import BeamField, beam_field
from polarbeam.instrument.fields.geometry import Beam, CrossSection
from polarbeam.instrument.fields.grid import grid_shape
from polarbeam.instrument.fields.result import DeflectorSolution
from polarbeam.instrument.fields.solve import BoundaryMode, SolverMode, solve_laplace

__all__ = ["solve_deflector"]


def _richardson(levels: Sequence[BeamField], nominal: float = 2.0):
    """Observed order, order used, extrapolated BeamField and error of the finest level."""
    fine = levels[-1]
    if len(levels) == 1:
        return math.nan, math.nan, fine, math.nan
    g = [lv.field_factor for lv in levels]
    d_f = g[-1] - g[-2]
    p_obs = math.nan
    p_used = nominal
    oscillating = False
    if len(levels) >= 3:
        d_c = g[-2] - g[-3]
        if d_f != 0 and d_c != 0 and d_f * d_c > 0:
            p_obs = math.log2(abs(d_c / d_f))
            # never assume faster convergence than the scheme's nominal order
            p_used = min(max(p_obs, 0.5), nominal)
        elif d_f != 0 or d_c != 0:
            oscillating = True
    factor = 1.0 / (2.0**p_used - 1.0)

    def extrap(name):
        a, b = getattr(levels[-1], name), getattr(levels[-2], name)
        return a + (a - b) * factor

    names = ("E", "dE_dx", "dE_dy", "E_dE_dy", "field_factor")
    ex = BeamField(
        h=0.0,
        **{n: extrap(n) for n in names},
        field_factor_min=fine.field_factor_min,
        field_factor_max=fine.field_factor_max,
        field_factor_rms=fine.field_factor_rms,
    )
    err = abs(d_f) * factor
    if oscillating:
        err = max(abs(g[-1] - g[-2]), abs(g[-2] - g[-3]))
        ex = fine
    return p_obs, p_used, ex, err


def solve_deflector(
    cross_section: CrossSection,
    beam: Beam,
    h: float,
    *,
    levels: int = 3,
    boundary: BoundaryMode = "shortley-weller",
    solver: SolverMode = "auto",
    quadrature: int = 6,
) -> DeflectorSolution:
    """Field factor at the beam with a mesh-refinement error estimate.

    Solves on nested grids with spacings ``2**(levels-1) h, ..., 2h, h`` (the finest is ``h``),
    averages the field over the beam on each, and Richardson-extrapolates the two finest with
    the observed order ``p = log2((g_4h - g_2h)/(g_2h - g_h))`` capped at the nominal 2 (a
    smaller observed order gives a larger, more cautious correction).  The numerical error is
    the size of the extrapolation correction; if the sequence is not monotonic it is the
    largest change between levels and no extrapolation is applied.
    """
    cross_section.check_beam(beam)
    levels = int(levels)
    if levels < 1:
        raise InputError(f"levels: expected >= 1, found {levels}")
    box = cross_section.box
    nx, ny = grid_shape(box, h)
    step = 2 ** (levels - 1)
    cx = max(math.ceil((nx - 1) / step), 2)
    cy = max(math.ceil((ny - 1) / step), 2)
    sols, bfs = [], []
    for lv in range(levels):
        m = 2**lv
        sol = solve_laplace(
            cross_section, shape=(cx * m + 1, cy * m + 1), boundary=boundary, solver=solver
        )
        sols.append(sol)
        bfs.append(beam_field(sol, beam, quadrature=quadrature))
    p_obs, p_used, ex, err = _richardson(bfs)
    return DeflectorSolution(
        cross_section=cross_section,
        beam=beam,
        solutions=tuple(sols),
        levels=tuple(bfs),
        extrapolated=ex,
        observed_order=p_obs,
        order_used=p_used,
        numerical_error=err,
    )
