"""Separation: the α_eff(1/T) line → α and ⟨μ²⟩, dipole values or bounded upper limits, and the
per-compound analysis that combines the series of a compound.
"""

from polarbeam.separation.compound import (
    make_result,
    separate,
)
from polarbeam.separation.debye import (
    DebyeFit,
    bounded_upper_limit,
    debye_fit,
    dipole_from_known_alpha,
)
from polarbeam.separation.dipole import (
    INTERVAL_CL,
    LIMIT_CL,
    DipoleStatement,
    dipole_statement,
)
from polarbeam.separation.intervals import (
    BoundedInterval,
    acceptance_region,
    unified_interval,
)

__all__ = [
    "INTERVAL_CL",
    "LIMIT_CL",
    "BoundedInterval",
    "DebyeFit",
    "DipoleStatement",
    "acceptance_region",
    "bounded_upper_limit",
    "debye_fit",
    "dipole_from_known_alpha",
    "dipole_statement",
    "make_result",
    "separate",
    "unified_interval",
]
