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

__all__ = [
    "DebyeFit",
    "bounded_upper_limit",
    "debye_fit",
    "dipole_from_known_alpha",
    "make_result",
    "separate",
]
