"""polarbeam — static polarizabilities and dipole moments from molecular-beam deflection.

A deflection campaign measures, for each compound, fringe phases (three-grating near-field
interferometer) or beam-centroid shifts (classical beam) at a ladder of deflector voltages, often at
several source temperatures.  polarbeam models the deflector field and the flight layout, averages
over the measured velocity distribution, fits the effective polarizability
α_eff = α + ⟨μ²⟩/(3kT) of every series, separates α and μ from the temperature dependence, and
propagates every stated input -- with its correlations -- into the final error bars.

Everything inside is SI; units appear only where data enter (quantity strings) and leave (reports).
"""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = [
    "CampaignResult",
    "CompoundResult",
    "PolarbeamError",
    "SeriesResult",
    "__version__",
    "analyze",
    "load_campaign",
]


def __getattr__(name: str):
    """Lazy public API (keeps ``import polarbeam`` light)."""
    if name == "analyze":
        from polarbeam.pipeline.analysis import analyze

        return analyze
    if name == "load_campaign":
        from polarbeam.contract.campaign import load_campaign

        return load_campaign
    if name in ("CampaignResult", "CompoundResult", "SeriesResult"):
        from polarbeam.results import objects as results

        return getattr(results, name)
    if name == "PolarbeamError":
        from polarbeam.errors import PolarbeamError

        return PolarbeamError
    raise AttributeError(f"module 'polarbeam' has no attribute {name!r}")
