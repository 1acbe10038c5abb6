"""Write the invented time-of-flight example campaign (deterministic: fixed seed).

Usage::

    PYTHONPATH=src python examples/velocity/tof/make_data.py [--out FOLDER]

Three invented lab codes (TF-301, TF-302, TF-303) fly in one seeded supersonic beam (flux form
v³·exp(−(v − u)²/a²), mean 620 m/s, rms spread 12 %) through a Talbot–Lau interferometer at
three source temperatures. Before each deflection series the beam is chopped by a 20 us gate and
its arrival times recorded 1.250 ± 0.002 m downstream (``tof.csv``); the true flight length and
the time offset of the electronics are drawn once from their stated errors, so they are a common
systematic of every trace. shifts.csv leaves the velocity columns empty: the traces give the
distributions. The printed JSON is the truth the simulator used.
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

import numpy as np

from polarbeam.beam.distributions import FluxVelocity
from polarbeam.beam.time_of_flight import FluxShape, TraceSetup
from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign
from polarbeam.simulation.time_of_flight import simulate_trace, write_traces

HERE = Path(__file__).resolve().parent
SEED = 20261202
TEMPS_K = (320.0, 400.0, 480.0)
MEAN, SPREAD = 620.0, 0.12  # m/s, relative rms spread
LENGTH, LENGTH_ERR, GATE, OFFSET_ERR = 1.250, 0.002, 20e-6, 2e-6
COMPOUNDS = [
    # name, mass (u), α (Å³), μ (D): invented values
    CompoundTruth("TF-301", 142.2, 17.5, 0.9, TEMPS_K, mass_err_u=0.02),
    CompoundTruth("TF-302", 188.3, 23.0, 0.0, TEMPS_K, mass_err_u=0.02),
    CompoundTruth("TF-303", 236.1, 29.5, 1.6, TEMPS_K, mass_err_u=0.02),
]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=HERE, help="folder to write into")
    args = parser.parse_args()
    rng = np.random.default_rng(SEED)
    truth = simulate_campaign(
        args.out,
        COMPOUNDS,
        spec=InstrumentSpec.talbot_lau("uniform", rel=0.004),
        seed=rng,
        velocity_m_s=MEAN,
        velocity_err_frac=0.0,  # the traces carry the velocity errors
        spread_frac=SPREAD,
        table_shape="supersonic",
        n_voltages=9,
        max_signal=2.5,
        noise=0.02,
        title="Invented time-of-flight campaign: three lab codes, distributions from traces",
    )
    # the simulated table is the truth: replace it by a trace per series
    (args.out / "velocities.csv").unlink()
    camp = args.out / "campaign.toml"
    camp.write_text(
        camp.read_text(encoding="utf-8").replace('velocities = "velocities.csv"\n', ""),
        encoding="utf-8",
    )
    u, a = FluxVelocity(MEAN, SPREAD * MEAN).parameters()
    shape = FluxShape(u, a)
    true = TraceSetup(
        LENGTH + LENGTH_ERR * rng.standard_normal(), GATE, OFFSET_ERR * rng.standard_normal()
    )
    width = 4e-6
    starts = np.arange(1.2e-3, 3.4e-3, width)
    traces = [
        simulate_trace(c.name, t, shape, true, starts, width, rng, total=3e4, background=1.5)
        for c in COMPOUNDS
        for t in TEMPS_K
    ]
    write_traces(
        camp, traces, length=LENGTH, length_err=LENGTH_ERR, gate=GATE, offset_err=OFFSET_ERR
    )
    print(
        json.dumps(
            {
                "alpha_eff_A3": {f"{n} @ {t:g} K": v for (n, t), v in truth.alpha_eff_A3.items()},
                "beam": {"u_m_s": u, "a_m_s": a, "mean_inverse_square_s2_m2": shape.moment(-2)},
                "flight_length_m": true.flight_length,
                "time_offset_s": true.time_offset,
            },
            indent=1,
        )
    )


if __name__ == "__main__":
    main()
