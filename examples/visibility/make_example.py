"""Regenerate the invented fringe-visibility example (deterministic: fixed seed).

Run from the repository root::

    PYTHONPATH=src python examples/visibility/make_example.py

The scenario is invented: three large made-up molecules ("flake-A", "flake-B", "cage-C") in a
Talbot–Lau interferometer whose middle grating is a retro-reflected 532 nm laser (266 nm period,
gratings 0.105 m apart, slit gratings of open fraction 0.42 ± 0.02, waist 900 ± 30 µm, power
calibration ± 3 %). Each molecule is measured at two source temperatures (two velocities) over a
power ladder 0.5–10 W. ``truth.json`` records what the simulator put in.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from polarbeam.simulation.visibility import (
    VisibilityCompoundTruth,
    VisibilitySetup,
    simulate_visibility_campaign,
)

HERE = Path(__file__).resolve().parent
SEED = 20261202

SETUP = VisibilitySetup(powers=tuple(np.round(np.linspace(0.5, 10.0, 12), 3)))
COMPOUNDS = [
    VisibilityCompoundTruth(
        "flake-A", 1620.0, 150.0, 6.0, ((520.0, 165.0, 20.0, 1.6), (640.0, 215.0, 26.0, 2.1))
    ),
    VisibilityCompoundTruth(
        "flake-B", 2240.0, 190.0, 3.0, ((520.0, 150.0, 18.0, 1.5), (640.0, 195.0, 23.0, 1.9))
    ),
    VisibilityCompoundTruth(
        "cage-C", 980.0, 95.0, 8.0, ((520.0, 190.0, 23.0, 1.9), (640.0, 245.0, 30.0, 2.4))
    ),
]


def main() -> None:
    path, truth = simulate_visibility_campaign(
        HERE,
        COMPOUNDS,
        SETUP,
        seed=SEED,
        title="Invented light-grating interferometer: optical polarizabilities",
    )
    (HERE / "truth.json").write_text(json.dumps(truth, indent=1) + "\n", encoding="utf-8")
    print(f"wrote {path}")


if __name__ == "__main__":
    main()
