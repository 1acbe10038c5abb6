"""Write the invented cold-beam example campaign (deterministic: fixed seed).

Usage::

    PYTHONPATH=src python examples/cold-beam/make_data.py [--out FOLDER]

Three invented lab codes in a seeded supersonic beam whose rotation is cooled to 3, 6 and 12 K,
deflected by a two-wire field of up to a few MV/m and recorded as beam-profile centroid shifts.
CB-301 is a rigid linear rotor, CB-302 a rigid prolate symmetric top (both described in
compounds.csv with their rotational constants), CB-303 a floppy molecule (Langevin–Debye). The
simulator follows each rigid molecule's Stark states per voltage (polarbeam.beam.rotors). The
printed JSON is the truth the simulator used.
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

from polarbeam.beam.rotors import LinearRotor, SymmetricTop
from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign

HERE = Path(__file__).resolve().parent
SEED = 1
NOZZLE_K = (300.0, 350.0, 400.0)
ROTATION_K = (3.0, 6.0, 12.0)
COMPOUNDS = [
    # name, mass (u), α (Å³), μ (D): invented values
    CompoundTruth(
        "CB-301",
        88.0,
        6.5,
        1.1,
        NOZZLE_K,
        rotational_temperatures_K=ROTATION_K,
        response=LinearRotor(5500e6),
        columns=(("rotor", "linear"), ("rot_B_MHz", "5500")),
    ),
    CompoundTruth(
        "CB-302",
        131.0,
        11.0,
        1.6,
        NOZZLE_K,
        rotational_temperatures_K=ROTATION_K,
        response=SymmetricTop(5200e6, 1700e6, 1700e6),
        columns=(
            ("rotor", "symmetric"),
            ("rot_A_MHz", "5200"),
            ("rot_B_MHz", "1700"),
            ("rot_C_MHz", "1700"),
            ("dipole_axis", "a"),
        ),
    ),
    CompoundTruth("CB-303", 176.0, 17.0, 0.8, NOZZLE_K, rotational_temperatures_K=ROTATION_K),
]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=HERE, help="folder to write into")
    parser.add_argument("--seed", type=int, default=SEED, help="random seed of the simulation")
    args = parser.parse_args()
    simulate_campaign(
        args.out,
        COMPOUNDS,
        spec=InstrumentSpec.beam_profile("two-wire", rel=0.003),
        seed=args.seed,
        velocity_m_s=1500.0,
        velocity_err_frac=0.004,
        spread_frac=0.05,
        n_voltages=9,
        max_signal=400.0,
        noise=0.01,
        temperature_err_K=2.0,
        rotational_err_K=0.1,
        title="Invented cold-beam campaign: rigid rotors in a rotationally cold beam",
    )
    print(
        json.dumps(
            {c.name: {"alpha_A3": c.alpha_A3, "dipole_D": c.dipole_D} for c in COMPOUNDS},
            indent=1,
        )
    )


if __name__ == "__main__":
    main()
