"""Write the invented magnetic-deflection example campaign (deterministic: fixed seed).

Usage::

    PYTHONPATH=src python examples/magnetic/make_data.py [--out FOLDER]

Three invented lab codes fly through a Talbot–Lau interferometer with an electromagnet
(``[deflector] field = "magnetic"``, (B·∂B/∂x)/I² = 35 T²/(m A²), |B|/I = 0.06 T/A) at four
source temperatures: MG-101 is a closed-shell diamagnetic reference (negative χ_eff, pushed to
weak field), MG-201 an S = 1/2 radical and MG-301 an S = 1 radical (spin-only moments
g√(S(S+1)) μ_B).  The drive column is ``current_A``.  The printed JSON is the truth the
simulator used (χ_dia in cm³/mol, moments in μ_B).
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

from polarbeam.simulation.magnetic import MagneticTruth, magnet_spec, simulate_magnetic_campaign

HERE = Path(__file__).resolve().parent
SEED = 20261202
TEMPS_K = (300.0, 380.0, 460.0, 540.0)
COMPOUNDS = [
    # name, mass (u), χ_dia (cm³/mol), temperatures, spin, structure: invented lab codes
    MagneticTruth("MG-101", 92.14, -66.0e-6, TEMPS_K, smiles="Cc1ccccc1"),
    MagneticTruth("MG-201", 156.25, -98.0e-6, TEMPS_K, spin=0.5, smiles="CC1(C)CCCC(C)(C)N1[O]"),
    MagneticTruth("MG-301", 166.22, -97.0e-6, TEMPS_K, spin=1.0, smiles="c1ccc(cc1)[C]c1ccccc1"),
]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=HERE, help="folder to write into")
    args = parser.parse_args()
    simulate_magnetic_campaign(
        args.out,
        COMPOUNDS,
        spec=magnet_spec("talbot-lau", field_factor=35.0, rel=0.01, field_per_ampere=0.06),
        seed=SEED,
        velocity_m_s=200.0,
        velocity_err_frac=0.005,
        spread_frac=0.08,
        n_voltages=9,
        max_signal=2.5,
        noise=0.02,
        temperature_err_K=1.0,
        title="Invented magnetic campaign: a diamagnetic reference and two radicals",
    )
    print(
        json.dumps(
            {
                c.name: {
                    "chi_dia_cm3_mol": c.chi_dia_cm3_mol,
                    "spin": c.spin,
                    "moment_muB": round(c.moment, 4),
                }
                for c in COMPOUNDS
            },
            indent=1,
        )
    )


if __name__ == "__main__":
    main()
