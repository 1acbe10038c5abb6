"""Write the invented time-domain example campaign (deterministic: fixed seed).

Usage::

    PYTHONPATH=src python examples/timedomain/make_data.py [--out FOLDER]

The three compounds are invented lab codes with plausible masses; the instrument follows the
documented time-domain contract (pulses at 0, 24, 48 µs, an 80 nm grating, a field switched on
3 µs after the first pulse for 40 µs).  shifts.csv carries no velocity columns: the time-domain
phase does not depend on velocity.  The printed JSON is the truth the simulator used.
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign

HERE = Path(__file__).resolve().parent
SEED = 20260915
TEMPERATURES = (350.0, 475.0, 600.0)
COMPOUNDS = [
    # name, mass (u), α (Å³), μ (D): invented values
    CompoundTruth("TD-117", 228.3, 28.0, 3.4, TEMPERATURES, mass_err_u=0.05),
    CompoundTruth("TD-204", 346.4, 45.0, 0.0, TEMPERATURES, mass_err_u=0.05),
    CompoundTruth("TD-351", 512.6, 71.0, 1.8, TEMPERATURES, mass_err_u=0.05),
]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=HERE, help="folder to write into")
    args = parser.parse_args()
    truth = simulate_campaign(
        args.out,
        COMPOUNDS,
        spec=InstrumentSpec.time_domain(),
        seed=SEED,
        n_voltages=9,
        max_signal=0.6,
        noise=0.006,
        temperature_err_K=1.0,
        title="Invented time-domain demo: three lab codes, switched deflector field",
        velocity_columns=False,
    )
    print(
        json.dumps(
            {c.name: {"alpha_A3": c.alpha_A3, "dipole_D": c.dipole_D} for c in COMPOUNDS},
            indent=1,
        )
    )
    print(f"written: {truth.path / 'campaign.toml'}")


if __name__ == "__main__":
    main()
