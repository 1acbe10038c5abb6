"""The truth of a simulated campaign, written next to it (``truth.json``).

``polarbeam simulate`` writes ``truth.json`` into the campaign folder beside ``campaign.toml``:
what the simulator put in, so an analysis of the folder can be checked against it without the
Python objects.  Keys (SI for the instrument, the units of the tables elsewhere):

* ``written_by``, ``seed``, ``layout``: how the campaign was drawn;
* ``instrument``: the *true* value of every stated instrument input (the stated values in
  ``campaign.toml`` are these minus a draw from their stated errors), SI units;
* ``compounds``: per compound ``alpha_A3``, ``dipole_D``, ``mass_u``, ``temperatures_K``;
* ``series``: per compound and stated temperature the true ``alpha_eff_A3`` (α + μ²/3kT at the
  true temperature of the series), the values ``series.csv`` of an analysis estimates.
"""

from __future__ import annotations

import json
from pathlib import Path

from polarbeam._util.atomic import write_text_atomic

__all__ = ["TRUTH_FILE", "truth_record", "write_truth"]

#: Name of the truth file in a simulated campaign's folder.
TRUTH_FILE = "truth.json"


def truth_record(truth, **how) -> dict:
    """A :class:`~polarbeam.simulation.campaigns.SimulationTruth` as a plain dict (the content
    of ``truth.json``); ``how`` (seed, layout, …) is put first."""
    return {
        **how,
        "instrument": dict(sorted(truth.instrument.items())),
        "compounds": {
            name: {
                "alpha_A3": c.alpha_A3,
                "dipole_D": c.dipole_D,
                "mass_u": c.mass_u,
                "temperatures_K": list(c.temperatures_K),
            }
            for name, c in truth.compounds.items()
        },
        "series": [
            {"compound": name, "temperature_K": t, "alpha_eff_A3": a}
            for (name, t), a in sorted(truth.alpha_eff_A3.items())
        ],
    }


def write_truth(truth, **how) -> Path:
    """Write ``truth.json`` into the campaign folder (atomically); returns its path."""
    path = Path(truth.path) / TRUTH_FILE
    write_text_atomic(path, json.dumps(truth_record(truth, **how), indent=1) + "\n")
    return path
