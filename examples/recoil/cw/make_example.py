"""Regenerate the invented continuous-wave photon-recoil example (deterministic: fixed seed).

Run from the repository root::

    PYTHONPATH=src python examples/recoil/cw/make_example.py

The scenario is invented: two dye-like compounds with made-up labels crossing two continuous
Gaussian beams on a Talbot–Lau interferometer (266 nm gratings 0.38 m apart).  "amber" is a
travelling beam the 0.12 mm high molecular beam crosses; "teal" is retro-reflected (a standing
wave).  Each series is referenced to one laser-off scan, whose errors are given per row.
``truth.json`` records what the simulator put in.
"""

from __future__ import annotations

import json
from pathlib import Path

from polarbeam.simulation.recoil import LaserTruth, RecoilCompoundTruth, simulate_recoil_campaign

HERE = Path(__file__).resolve().parent
SEED = 20261203

LASERS = [
    LaserTruth(
        "amber",
        590e-9,
        0.030,
        0.0002,
        waist=0.60e-3,
        waist_err=0.01e-3,
        beam_offset=0.05e-3,
        beam_offset_err=0.02e-3,
        beam_height_rms=0.12e-3,
        beam_height_rms_err=0.01e-3,
        energy_scale_err=0.02,
        mode="cw",
    ),
    LaserTruth(
        "teal",
        488e-9,
        0.025,
        0.0002,
        waist=0.80e-3,
        waist_err=0.01e-3,
        energy_scale_err=0.02,
        mode="cw",
        illumination="standing",
    ),
]
COMPOUNDS = [
    RecoilCompoundTruth("chromo-C", 1800.0, {"amber": 2.2e-16, "teal": 0.9e-16}, mass_err_u=0.5),
    RecoilCompoundTruth(
        "chromo-D",
        2600.0,
        {"amber": 0.7e-16, "teal": 1.6e-16},
        mass_err_u=0.5,
        temperatures_K=(450.0, 560.0),
    ),
]


def main(out: Path = HERE) -> None:
    truth = simulate_recoil_campaign(
        out,
        COMPOUNDS,
        LASERS,
        layout="talbot-lau",
        seed=SEED,
        velocity_m_s=170.0,
        velocity_err_frac=0.005,
        spread_frac=0.12,
        n_energies=8,
        max_photons=2.0,
        phase_noise=0.03,
        visibility_noise=0.015,
        visibility_noise_model="rician",
        reference_phase_err=0.02,
        reference_visibility_err=0.015,
        title="Invented demo: continuous-wave photon recoil of two dye-like compounds",
    )
    toml = out / "campaign.toml"
    toml.write_text(
        "# Invented scenario written by examples/recoil/cw/make_example.py (simulated data).\n"
        + toml.read_text()
    )
    (out / "truth.json").write_text(
        json.dumps(
            {
                "note": "invented scenario; true values used by the simulator",
                "seed": SEED,
                "cross_sections_cm2": {c.name: c.cross_sections_cm2 for c in COMPOUNDS},
                "lasers_true": truth.lasers,
            },
            indent=1,
        )
        + "\n"
    )


if __name__ == "__main__":
    main()
