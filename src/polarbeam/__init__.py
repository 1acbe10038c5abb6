"""polarbeam — static polarizabilities and dipole moments from molecular-beam deflection.

A deflection campaign measures, for each compound, fringe phases (three-grating near-field
interferometer) or beam-centroid shifts (classical beam) at a ladder of deflector voltages, often at
several source temperatures.  polarbeam models the deflector field and the flight layout, averages
over the measured velocity distribution, fits the effective polarizability
α_eff = α + ⟨μ²⟩/(3kT) of every series, separates α and μ from the temperature dependence, and
propagates every stated input -- with its correlations -- into the final error bars.

Everything inside is SI; units appear only where data enter (quantity strings) and leave (reports).
The stages live in subpackages, in the order data flows (see ``docs/architecture.md``); this
module is the public façade, loaded lazily so that ``import polarbeam`` stays light.
"""

from __future__ import annotations

from importlib import import_module

from polarbeam._version import __version__

#: public name → module that defines it (imported on first use).
_API: dict[str, str] = {
    "analyze": "polarbeam.pipeline.analysis",
    "analyze_campaign": "polarbeam.pipeline.analysis",
    "load_campaign": "polarbeam.contract.campaign",
    "write_report": "polarbeam.report.folder",
    "run_batch": "polarbeam.batch.run",
    "make_plan": "polarbeam.planning.plan",
    "write_plan": "polarbeam.planning.output",
    "deflector_field": "polarbeam.pipeline.field",
    "estimate_table": "polarbeam.chemistry.library",
    "plot_deflector_field": "polarbeam.pipeline.field",
    "run_cli": "polarbeam.batch.run",
    "write_phases": "polarbeam.reduction",
    "reduce_file": "polarbeam.reduction",
    "qchem": "polarbeam.chemistry",
    "simulate_campaign": "polarbeam.simulation.campaigns",
    "simulate_random_campaign": "polarbeam.simulation.campaigns",
    "write_demo": "polarbeam.simulation.demo",
    "write_demo_scans": "polarbeam.simulation.demo",
    "CampaignResult": "polarbeam.results.objects",
    "CompoundResult": "polarbeam.results.objects",
    "SeriesResult": "polarbeam.results.objects",
    "Measured": "polarbeam.quantities",
    "parse_quantity": "polarbeam.quantities",
    "parse_duration": "polarbeam.contract.arguments",
    "parse_temperature": "polarbeam.contract.arguments",
    "PolarbeamError": "polarbeam.errors",
    "InputError": "polarbeam.errors",
    "CompoundError": "polarbeam.errors",
}

__all__ = ["__version__", *sorted(_API)]


def __getattr__(name: str):
    """Lazy public API (keeps ``import polarbeam`` light)."""
    module = _API.get(name)
    if module is None:
        raise AttributeError(f"module 'polarbeam' has no attribute {name!r}")
    value = getattr(import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted({*globals(), *__all__})
