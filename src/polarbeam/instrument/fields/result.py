"""The solved deflector and the plain dict the pipeline reads from it.

:class:`DeflectorSolution` keeps the grids ``4h, 2h, h``, their beam averages and the
Richardson-extrapolated value (with ``to_markdown`` for reports); :func:`field_at_beam` turns it
(or a single :class:`~.grid.FieldSolution`) into SI magnitudes at any voltage.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from polarbeam.errors import InputError
from polarbeam.instrument.fields.beam import BeamField, beam_field
from polarbeam.instrument.fields.checks import MM, finite
from polarbeam.instrument.fields.geometry import Beam, CrossSection
from polarbeam.instrument.fields.grid import FieldSolution

__all__ = ["DeflectorSolution", "field_at_beam"]


@dataclass(frozen=True, eq=False)
class DeflectorSolution:
    """Solutions at ``4h, 2h, h`` (coarse to fine), their beam averages and the extrapolation."""

    cross_section: CrossSection
    beam: Beam
    solutions: tuple[FieldSolution, ...]
    levels: tuple[BeamField, ...]
    extrapolated: BeamField
    observed_order: float
    order_used: float
    numerical_error: float

    @property
    def finest(self) -> FieldSolution:
        return self.solutions[-1]

    def summary(self, voltage: float | None = None) -> dict:
        """Plain dict for JSON (see :func:`field_at_beam`)."""
        return field_at_beam(self, voltage)

    def to_markdown(self) -> str:
        d = self.summary()
        rows = [
            "| grid h (mm) | g (m⁻³) |",
            "|---|---|",
            *(f"| {lv.h * MM:.4g} | {abs(lv.field_factor):.6e} |" for lv in self.levels),
            f"| extrapolated | {d['field_factor_per_m3']:.6e} "
            f"± {d['numerical_error_per_m3']:.2e} |",
        ]
        return (
            f"Field factor at the {self.beam.describe()}\n\n"
            + "\n".join(rows)
            + f"\n\nobserved order {self.observed_order:.3g}, relative variation across the beam "
            f"{d['field_factor_rel_variation']:.3g}\n"
        )

    def _repr_html_(self) -> str:
        import html

        return "<pre>" + html.escape(self.to_markdown()) + "</pre>"


def field_at_beam(
    solution: DeflectorSolution | FieldSolution,
    voltage: float | None = None,
    *,
    beam: Beam | None = None,
) -> dict:
    """The deflector field at the beam as a plain dict (SI, magnitudes).

    Parameters
    ----------
    solution
        A :class:`DeflectorSolution` (refinement levels, extrapolated values) or a single
        :class:`FieldSolution` (then ``beam`` is required and no numerical error is known).
    voltage
        Voltage between the electrodes (V) to report the field at; the problem is linear, so the
        field scales with ``voltage / V_solved`` (all Dirichlet values, box included, scaled
        together).  Default: the solved voltage.  ``g`` does not depend on it.

    Returns
    -------
    dict
        ``E_V_per_m``, ``dE_dx_V_per_m2``, ``E_dE_dx_V2_per_m3``, ``field_factor_per_m3`` (the
        key names use ``dx`` for the deflection direction, the cross-section ``y`` here),
        ``field_factor_rel_variation`` ((max - min)/mean across the beam),
        ``field_factor_rel_rms``, ``numerical_error_per_m3``, ``observed_order``,
        ``field_factor_finest_per_m3``, ``grid_h_m``, ``voltage_V`` and ``method``.
    """
    if isinstance(solution, DeflectorSolution):
        ex = solution.extrapolated
        fine = solution.levels[-1]
        err = solution.numerical_error
        order = solution.observed_order
        cs = solution.cross_section
        h = fine.h
        method = (
            f"finite differences ({solution.finest.boundary}), {len(solution.levels)} levels, "
            "Richardson-extrapolated"
        )
    elif isinstance(solution, FieldSolution):
        if beam is None:
            raise InputError("field_at_beam: a single FieldSolution needs beam=Beam(...)")
        ex = fine = beam_field(solution, beam)
        err = math.nan
        order = math.nan
        cs = solution.cross_section
        h = fine.h
        method = f"finite differences ({solution.boundary}), single grid"
    else:
        raise InputError(
            f"field_at_beam: expected a DeflectorSolution or FieldSolution, found "
            f"{type(solution).__name__}"
        )
    V0 = cs.voltage
    V = V0 if voltage is None else finite(voltage, "field_at_beam voltage")
    k = V / V0
    g = abs(ex.field_factor)
    return {
        "E_V_per_m": abs(ex.E * k),
        "dE_dx_V_per_m2": abs(ex.dE_dy * k),
        "E_dE_dx_V2_per_m3": abs(ex.E_dE_dy) * k * k,
        "field_factor_per_m3": g,
        "field_factor_rel_variation": fine.rel_variation,
        "field_factor_rel_rms": fine.field_factor_rms / g if g > 0 else math.inf,
        "numerical_error_per_m3": err,
        "observed_order": order,
        "field_factor_finest_per_m3": abs(fine.field_factor),
        "grid_h_m": h,
        "voltage_V": V,
        "method": method,
    }
