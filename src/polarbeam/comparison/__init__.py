"""Comparison: measured values against structure-based predictions (additive α, force-field
⟨μ²⟩) and against computed chemistry.
"""

from polarbeam.comparison.checks import (
    computed_comparison,
    cross_check,
)
from polarbeam.comparison.structure_check import (
    DIPOLE_REL_ERROR,
    StructurePrediction,
    predict_for_compound,
    verdict,
)

__all__ = [
    "DIPOLE_REL_ERROR",
    "StructurePrediction",
    "computed_comparison",
    "cross_check",
    "predict_for_compound",
    "verdict",
]
