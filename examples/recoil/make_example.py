"""Regenerate the invented photon-recoil example (deterministic: fixed seed).

Run from the repository root::

    PYTHONPATH=src python examples/recoil/make_example.py

The scenario is invented: two dye-like compounds with made-up labels, three lasers on a
Talbot–Lau interferometer (266 nm gratings 0.38 m apart), cross-sections of order 1e-16 cm².
``truth.json`` records what the simulator put in, so the analysis can be checked against it.
"""

from __future__ import annotations

import json
from pathlib import Path

from polarbeam.simulation.recoil import LaserTruth, RecoilCompoundTruth, simulate_recoil_campaign

HERE = Path(__file__).resolve().parent
SEED = 20261201

LASERS = [
    LaserTruth(
        "violet", 420e-9, 0.020, 0.0002, area=0.50e-6, area_err=0.03e-6, energy_scale_err=0.03
    ),
    LaserTruth(
        "green", 532e-9, 0.030, 0.0002, area=0.80e-6, area_err=0.04e-6, energy_scale_err=0.03
    ),
    LaserTruth(
        "red",
        660e-9,
        0.035,
        0.0005,
        waist=0.90e-3,
        waist_err=0.02e-3,
        beam_offset=0.15e-3,
        beam_offset_err=0.03e-3,
        direction=-1,
        energy_scale_err=0.03,
    ),
]
COMPOUNDS = [
    RecoilCompoundTruth(
        "chromo-A",
        1450.0,
        {"violet": 1.1e-16, "green": 3.2e-16, "red": 0.35e-16},
        fluorescence_yield=0.60,
        fluorescence_yield_err=0.05,
        emission_wavelength_nm=585.0,
        mass_err_u=0.5,
        temperatures_K=(500.0,),
    ),
    RecoilCompoundTruth(
        "chromo-B",
        2300.0,
        {"violet": 0.45e-16, "green": 0.80e-16, "red": 2.5e-16},
        fit_yield=True,
        fluorescence_yield=0.35,
        emission_wavelength_nm=700.0,
        mass_err_u=0.5,
        temperatures_K=(480.0, 560.0),
    ),
]


def main(out: Path = HERE) -> None:
    truth = simulate_recoil_campaign(
        out,
        COMPOUNDS,
        LASERS,
        layout="talbot-lau",
        seed=SEED,
        velocity_m_s=180.0,
        velocity_err_frac=0.005,
        spread_frac=0.08,
        n_energies=8,
        max_photons=2.0,
        phase_noise=0.03,
        visibility_noise=0.015,
        title="Invented demo: photon-recoil absorption cross-sections of two dye-like compounds",
    )
    toml = out / "campaign.toml"
    toml.write_text(
        "# Invented scenario written by examples/recoil/make_example.py (simulated data).\n"
        + toml.read_text()
    )
    (out / "truth.json").write_text(
        json.dumps(
            {
                "note": "invented scenario; true values used by the simulator",
                "seed": SEED,
                "cross_sections_cm2": {c.name: c.cross_sections_cm2 for c in COMPOUNDS},
                "fluorescence_yield": {c.name: c.fluorescence_yield for c in COMPOUNDS},
                "lasers_true": truth.lasers,
            },
            indent=1,
        )
        + "\n"
    )


if __name__ == "__main__":
    main()
