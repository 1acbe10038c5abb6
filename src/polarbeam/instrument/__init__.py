"""The instrument: flight layouts (where a force becomes a detected shift), deflector models (the
field factor g = E·∂E/∂x / V² along the beam), the coupling C = scale·∫ w g, and the numerical
field model built on the 2-D solver in :mod:`polarbeam.instrument.fields`. Knows no file formats.
"""

from polarbeam.instrument.deflectors import (
    DEFLECTOR_MODELS,
    UNCALIBRATED_FIELD_FACTOR,
    Deflector,
    FieldMapDeflector,
    SwitchedField,
    TwoWireDeflector,
    UniformDeflector,
    overlap,
    two_wire_axis_field_per_volt,
    two_wire_field_factor,
    two_wire_potential,
)
from polarbeam.instrument.layouts import (
    LAYOUTS,
    BeamProfile,
    Layout,
    TalbotLau,
    TimeDomain,
    piecewise_linear_integral,
)
from polarbeam.instrument.numerical import (
    FIELD_ERROR_KEY,
    FRINGE_ERROR_KEY,
    NumericalDeflector,
    NumericalModel,
    NumericalSpec,
)
from polarbeam.instrument.protocols import (
    DeflectorModel,
    LayoutModel,
)

__all__ = [
    "DEFLECTOR_MODELS",
    "FIELD_ERROR_KEY",
    "FRINGE_ERROR_KEY",
    "LAYOUTS",
    "UNCALIBRATED_FIELD_FACTOR",
    "BeamProfile",
    "Deflector",
    "DeflectorModel",
    "FieldMapDeflector",
    "Layout",
    "LayoutModel",
    "NumericalDeflector",
    "NumericalModel",
    "NumericalSpec",
    "SwitchedField",
    "TalbotLau",
    "TimeDomain",
    "TwoWireDeflector",
    "UniformDeflector",
    "overlap",
    "piecewise_linear_integral",
    "two_wire_axis_field_per_volt",
    "two_wire_field_factor",
    "two_wire_potential",
]
