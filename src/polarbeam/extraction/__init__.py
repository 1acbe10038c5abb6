"""Extraction: per-series fits of α_eff (phase or shift versus voltage, velocity-averaged, with the
fit covariance as correlated uncertain numbers), the campaign context of the coupling, and the
photon-recoil cross-section fits.
"""

from polarbeam.extraction.context import (
    Context,
    build_context,
    field_factor_sensitivities,
)
from polarbeam.extraction.recoil import (
    analyze_recoil,
)
from polarbeam.extraction.series import (
    SeriesFit,
    alpha_eff_with_errors,
    fit_series,
    observable_model,
)

__all__ = [
    "Context",
    "SeriesFit",
    "alpha_eff_with_errors",
    "analyze_recoil",
    "build_context",
    "field_factor_sensitivities",
    "fit_series",
    "observable_model",
]
