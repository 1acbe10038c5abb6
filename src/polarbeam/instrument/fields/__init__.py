"""Deflector fields: a 2-D electrostatic solver for electrode cross-sections.

An electric deflector is a long pair of electrodes.  In its cross-section plane (``x``
horizontal, ``y`` along the deflection direction) the potential obeys Laplace's equation, with the
electrodes held at fixed potentials inside a grounded rectangular box.  A polarizable particle
feels the force ``F_y = alpha * E * dE/dy``, so what the pipeline needs from this stage is the
*field factor*

    g = E * dE/dy / V**2        (m^-3)

with ``E = |grad phi|`` and ``V`` the voltage between the electrodes, averaged over the beam's
rectangular cross-section.  Magnitudes are reported; the deflection points the way ``|E|`` grows.

The modules, in pipeline order:

* :mod:`.analytic` -- the classic two-wire field (potential ``K arg((w-a)/(w+a))``,
  ``w = x + i y``), used as the reference solution.
* :mod:`.shapes` and :mod:`.geometry` -- frozen dataclasses: :class:`Circle`, :class:`ArcRegion`
  (a circle's inside or outside clipped to a half-plane, e.g. a trough), :class:`Polygon`, the
  grounded :class:`BoundaryBox`, the :class:`CrossSection` that validates them, the
  :class:`Beam`, and :func:`two_wire_cross_section` for the two-wire pair.
* :mod:`.grid`, :mod:`.discretise` and :mod:`.solve` -- :func:`solve_laplace`: finite
  differences on a uniform grid (5-point Laplacian) with the Shortley-Weller treatment of curved
  Dirichlet boundaries, assembled vectorised in :mod:`scipy.sparse` and solved by SuperLU or, for
  big grids, algebraic multigrid (pyamg); the :class:`FieldSolution` gives ``E`` and ``dE/dy``.
* :mod:`.beam` -- averages over the beam rectangle (:func:`beam_field`, :func:`beam_points`).
* :mod:`.extrapolate` and :mod:`.result` -- :func:`solve_deflector` solves at ``h``, ``2h`` and
  ``4h``, evaluates ``E`` and ``dE/dy`` at the beam, Richardson-extrapolates and reports the
  observed order; :func:`field_at_beam` turns the :class:`DeflectorSolution` into the plain dict
  the rest of the pipeline reads.
* :mod:`.ends` -- fringe fields: :func:`maxwell_fringe_extension` (closed form for thin
  semi-infinite plates), :func:`fringe_extension_numerical` (a 2-D solve in the ``(z, y)`` plane)
  and :func:`effective_length_from_map` / :func:`read_fringe_map_csv` for a measured map.
* :mod:`.tolerances` -- :func:`propagate_tolerances` (central finite differences) and
  :func:`monte_carlo_tolerances`.
* :mod:`.plot` -- :func:`plot_cross_section` (matplotlib, loaded only when called).

Everything is SI (metres, volts); lengths are printed in mm only in error messages.
"""

from __future__ import annotations

from polarbeam.instrument.fields.analytic import (
    two_wire_analytic,
    two_wire_constant,
    two_wire_from_radii,
)
from polarbeam.instrument.fields.beam import BeamField, beam_field, beam_points
from polarbeam.instrument.fields.ends import (
    FringeResult,
    effective_length,
    effective_length_from_map,
    fringe_extension_numerical,
    maxwell_edge_field,
    maxwell_fringe_extension,
    read_fringe_map_csv,
)
from polarbeam.instrument.fields.extrapolate import solve_deflector
from polarbeam.instrument.fields.geometry import Beam, CrossSection, two_wire_cross_section
from polarbeam.instrument.fields.grid import FieldSolution
from polarbeam.instrument.fields.plot import format_potential, plot_cross_section
from polarbeam.instrument.fields.result import DeflectorSolution, field_at_beam
from polarbeam.instrument.fields.shapes import ArcRegion, BoundaryBox, Circle, Electrode, Polygon
from polarbeam.instrument.fields.solve import (
    DIRECT_SOLVER_LIMIT,
    BoundaryMode,
    SolverMode,
    solve_laplace,
)
from polarbeam.instrument.fields.tolerances import (
    MonteCarloResult,
    ToleranceBudget,
    monte_carlo_tolerances,
    propagate_tolerances,
)

__all__ = [
    "DIRECT_SOLVER_LIMIT",
    "ArcRegion",
    "Beam",
    "BeamField",
    "BoundaryBox",
    "BoundaryMode",
    "Circle",
    "CrossSection",
    "DeflectorSolution",
    "Electrode",
    "FieldSolution",
    "FringeResult",
    "MonteCarloResult",
    "Polygon",
    "SolverMode",
    "ToleranceBudget",
    "beam_field",
    "beam_points",
    "effective_length",
    "effective_length_from_map",
    "field_at_beam",
    "format_potential",
    "fringe_extension_numerical",
    "maxwell_edge_field",
    "maxwell_fringe_extension",
    "monte_carlo_tolerances",
    "plot_cross_section",
    "propagate_tolerances",
    "read_fringe_map_csv",
    "solve_deflector",
    "solve_laplace",
    "two_wire_analytic",
    "two_wire_constant",
    "two_wire_cross_section",
    "two_wire_from_radii",
]
