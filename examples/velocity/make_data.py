"""Write the invented measured-velocity example campaign (deterministic: fixed seed).

Usage::

    PYTHONPATH=src python examples/velocity/make_data.py [--out FOLDER]

Three invented lab codes (VD-301, VD-302, VD-303) leave a warm oven through a slit that passes
a broad, effusive-like beam: its rms spread is about a third of the mean velocity. The lab has
measured the detected velocity distribution of every series (``velocities.csv``, 90 classes per
series with a 0.5 % time-of-flight calibration error) and the relative fringe contrast of each
class (the slow classes keep more contrast in this interferometer). The gratings are tilted a
little, so gravity leaves a background acceleration along the grating vector. The printed JSON
is the truth the simulator used.
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign

HERE = Path(__file__).resolve().parent
SEED = 20261202
OVEN_K = (350.0, 450.0, 550.0)
COMPOUNDS = [
    # name, mass (u), α (Å³), μ (D): invented values
    CompoundTruth("VD-301", 188.4, 22.5, 1.4, OVEN_K, mass_err_u=0.02),
    CompoundTruth("VD-302", 236.9, 30.0, 0.0, OVEN_K, mass_err_u=0.02),
    CompoundTruth("VD-303", 301.3, 38.5, 0.8, OVEN_K, mass_err_u=0.02),
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
        velocity_m_s=220.0,
        velocity_err_frac=0.005,
        spread_frac=0.33,
        n_voltages=9,
        max_signal=2.0,
        noise=0.015,
        temperature_err_K=2.0,
        table_shape="effusive",
        contrast_slope=-0.8,
        acceleration=(0.012, 0.0015),
        thermal_velocity=True,
        title="Invented oven-beam campaign: three lab codes, measured velocity tables",
    )
    print(
        json.dumps(
            {c.name: {"alpha_A3": c.alpha_A3, "dipole_D": c.dipole_D} for c in COMPOUNDS},
            indent=1,
        )
    )


if __name__ == "__main__":
    main()
