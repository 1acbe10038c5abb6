"""Solving Laplace's equation on a grid: SuperLU, or algebraic multigrid for big grids.

:func:`solve_laplace` lays the grid over the box, assembles the operator
(:mod:`.discretise`) and solves it directly (SuperLU) or, above :data:`DIRECT_SOLVER_LIMIT`
unknowns and if the optional pyamg is installed, by Ruge-Stuben multigrid with BiCGStab.
"""

from __future__ import annotations

import time
from typing import Literal

import numpy as np

from polarbeam._util.optional import has, lazy, require
from polarbeam.errors import InputError
from polarbeam.instrument.fields.discretise import assemble
from polarbeam.instrument.fields.geometry import CrossSection
from polarbeam.instrument.fields.grid import FieldSolution, grid_shape

spla = lazy("scipy.sparse.linalg", "numerical routines")

__all__ = ["DIRECT_SOLVER_LIMIT", "BoundaryMode", "SolverMode", "solve_laplace"]

BoundaryMode = Literal["shortley-weller", "staircase"]
SolverMode = Literal["auto", "direct", "amg"]
_BOUNDARY_MODES = ("shortley-weller", "staircase")
_SOLVER_MODES = ("auto", "direct", "amg")
#: Above this many unknowns ``solver="auto"`` switches from SuperLU to multigrid (if installed).
DIRECT_SOLVER_LIMIT = 250_000


def _solve_linear(A, b, solver: str, tol: float):
    n = A.shape[0]
    if solver == "auto":
        solver = "direct"
        if n > DIRECT_SOLVER_LIMIT and has("pyamg"):
            solver = "amg"
    if solver == "direct":
        lu = spla.splu(A.tocsc(), permc_spec="COLAMD")
        return lu.solve(b), "direct (SuperLU)", {}
    if not has("pyamg"):
        raise InputError(
            "solver 'amg': the optional package pyamg is not installed (pip install pyamg); "
            "use solver='direct'"
        )
    pyamg = require("pyamg", "solver 'amg'")
    ml = pyamg.ruge_stuben_solver(A)
    res: list[float] = []
    x = ml.solve(b, tol=tol, maxiter=200, accel="bicgstab", residuals=res)
    rel = float(np.linalg.norm(b - A @ x) / max(np.linalg.norm(b), 1e-300))
    if not rel <= max(10 * tol, 1e-12):
        raise RuntimeError(f"AMG did not converge: relative residual {rel:.3g} (tolerance {tol})")
    return x, "amg (pyamg Ruge-Stuben + BiCGStab)", {"iterations": len(res), "residual": rel}


def solve_laplace(
    cross_section: CrossSection,
    h: float | None = None,
    *,
    shape: tuple[int, int] | None = None,
    boundary: BoundaryMode = "shortley-weller",
    solver: SolverMode = "auto",
    tol: float = 1e-13,
) -> FieldSolution:
    """Solve Laplace's equation on a uniform grid covering the boundary box.

    Parameters
    ----------
    cross_section
        Electrodes and box.
    h
        Target grid spacing (m); the box is divided into whole cells, so the actual spacings
        ``hx``, ``hy`` are at most ``h``.  Give either ``h`` or ``shape``.
    shape
        Grid size ``(nx, ny)`` in nodes, including the box walls.
    boundary
        ``"shortley-weller"``: curved Dirichlet surfaces cut the grid links at their true
        position and the 3-point second difference uses the unequal arms (second-order);
        ``"staircase"``: nodes inside an electrode are simply held at its potential (first-order,
        kept for comparison).
    solver
        ``"direct"`` (SuperLU), ``"amg"`` (pyamg, optional) or ``"auto"`` (direct up to
        ``DIRECT_SOLVER_LIMIT`` unknowns).
    tol
        Relative residual for the multigrid solver (``E dE/dy`` involves second differences
        of ``phi``, so the default is near round-off: 1e-11 already shifts ``g`` by ~1e-7).
    """
    if boundary not in _BOUNDARY_MODES:
        raise InputError(f"boundary: expected one of {list(_BOUNDARY_MODES)}, found {boundary!r}")
    if solver not in _SOLVER_MODES:
        raise InputError(f"solver: expected one of {list(_SOLVER_MODES)}, found {solver!r}")
    box = cross_section.box
    if shape is None:
        if h is None:
            raise InputError("solve_laplace: give the grid spacing h or the grid shape (nx, ny)")
        nx, ny = grid_shape(box, h)
    else:
        try:
            nx, ny = (int(v) for v in shape)
        except (TypeError, ValueError):
            raise InputError(f"grid shape: expected (nx, ny), found {shape!r}") from None
        if nx < 3 or ny < 3:
            raise InputError(f"grid shape: expected at least 3 x 3 nodes, found {nx} x {ny}")
    x = np.linspace(box.xmin, box.xmax, nx)
    y = np.linspace(box.ymin, box.ymax, ny)
    t0 = time.perf_counter()
    A, rhs, known, free, fidx, regular = assemble(cross_section, x, y, boundary)
    t1 = time.perf_counter()
    u, used, info = _solve_linear(A, rhs, solver, tol)
    t2 = time.perf_counter()
    phi = known.copy()
    phi[fidx] = u
    info = {"assemble_s": t1 - t0, "solve_s": t2 - t1, **info}
    return FieldSolution(
        cross_section=cross_section,
        x=x,
        y=y,
        phi=phi.reshape(ny, nx),
        free=free.reshape(ny, nx),
        regular=regular,
        boundary=boundary,
        solver=used,
        n_unknowns=int(fidx.size),
        seconds=t2 - t0,
        info=info,
    )
