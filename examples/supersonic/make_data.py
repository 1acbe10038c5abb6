"""Write the invented supersonic-beam example campaign (deterministic: fixed seed).

Usage::

    PYTHONPATH=src python examples/supersonic/make_data.py [--out FOLDER]

Three invented lab codes are seeded into a supersonic expansion from a nozzle at 300, 375 and
450 K.  The expansion cools the molecules' rotation to 20, 35 and 55 K: that rotational
temperature, not the nozzle's, sets the orientational term ⟨μ²⟩/(3kT) in the deflector, so the
simulator uses it for the true α_eff and writes it to shifts.csv (``rotational_temperature_K``,
``rotational_temperature_err_K``).  The printed JSON is the truth the simulator used.
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign

HERE = Path(__file__).resolve().parent
SEED = 20260916
NOZZLE_K = (300.0, 375.0, 450.0)
ROTATION_K = (20.0, 35.0, 55.0)
COMPOUNDS = [
    # name, mass (u), α (Å³), μ (D): invented values
    CompoundTruth(
        "SB-201", 164.2, 19.5, 1.2, NOZZLE_K, mass_err_u=0.02, rotational_temperatures_K=ROTATION_K
    ),
    CompoundTruth(
        "SB-202", 212.3, 27.0, 0.0, NOZZLE_K, mass_err_u=0.02, rotational_temperatures_K=ROTATION_K
    ),
    CompoundTruth(
        "SB-203", 258.1, 31.5, 0.6, NOZZLE_K, mass_err_u=0.02, rotational_temperatures_K=ROTATION_K
    ),
]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=HERE, help="folder to write into")
    args = parser.parse_args()
    simulate_campaign(
        args.out,
        COMPOUNDS,
        spec=InstrumentSpec.talbot_lau("uniform", rel=0.004),
        seed=SEED,
        velocity_m_s=520.0,
        velocity_err_frac=0.004,
        spread_frac=0.06,
        n_voltages=9,
        max_signal=2.5,
        noise=0.02,
        temperature_err_K=2.0,
        rotational_err_K=1.0,
        title="Invented supersonic-beam campaign: three lab codes, rotationally cold beam",
    )
    print(
        json.dumps(
            {c.name: {"alpha_A3": c.alpha_A3, "dipole_D": c.dipole_D} for c in COMPOUNDS},
            indent=1,
        )
    )


if __name__ == "__main__":
    main()
