"""The demo campaign: an invented scenario written by the project's simulator.

A fictional bench-top three-grating interferometer with a two-wire deflector measures six
sample codes of a made-up screening library at four source temperatures (one at a single
temperature).  The "true" values were invented for the demo (close to additive estimates, with
dipoles chosen by us); they are not measurements and must not be quoted as such.
"""

from __future__ import annotations

from pathlib import Path

from polarbeam._util.atomic import write_text_atomic
from polarbeam.simulation.campaigns import (
    CompoundTruth,
    InstrumentSpec,
    simulate_campaign,
    simulate_scan_campaign,
)

__all__ = ["DEMO_COMPOUNDS", "DEMO_COMPUTED", "write_demo", "write_demo_scans"]

TEMPS = (340.0, 420.0, 510.0, 620.0)

#: Invented sample codes with ordinary structures (SMILES) and invented "true" properties.
DEMO_COMPOUNDS = (
    CompoundTruth("DM-101", 137.57, 14.9, 2.60, TEMPS, "Clc1ccc(cc1)C#N", 0.01),
    CompoundTruth("DM-102", 154.21, 21.3, 0.0, TEMPS, "c1ccc(cc1)-c1ccccc1", 0.01),
    CompoundTruth("DM-103", 181.45, 17.0, 0.0, TEMPS, "Clc1cc(Cl)cc(Cl)c1", 0.01),
    CompoundTruth("DM-104", 179.22, 23.4, 3.90, TEMPS, "N#Cc1ccc(cc1)-c1ccccc1", 0.01),
    CompoundTruth("DM-105", 163.22, 20.9, 3.10, TEMPS, "CC(=O)c1ccc(cc1)N(C)C", 0.01),
    CompoundTruth("DM-106", 128.17, 17.9, 0.0, (450.0,), "c1ccc2ccccc2c1", 0.01),
)


#: Invented "computed chemistry" values for the demo (not the output of any real calculation).
DEMO_COMPUTED = """\
# invented values for the demo scenario; not results of real calculations
# (DM-101 b3lyp: 98.0 bohr3 written in A3, the unit of the column names)
compound,qc_method,alpha_A3,dipole_D
DM-101,b3lyp/def2-svpd,14.522101694699124,2.71
DM-102,b3lyp/def2-svpd,20.1,0.0
DM-103,b3lyp/def2-svpd,16.8,0.0
DM-104,b3lyp/def2-svpd,23.0,4.2
DM-105,b3lyp/def2-svpd,21.5,3.3
DM-101,hf/def2-svpd,12.6,2.9
"""


def write_demo(out_dir: str | Path = "examples/demo", seed: int = 2027) -> Path:
    """Write ``campaign.toml``, ``shifts.csv``, ``compounds.csv`` of the demo into ``out_dir``."""
    spec = InstrumentSpec.talbot_lau("two-wire", rel=0.004)
    truth = simulate_campaign(
        out_dir,
        list(DEMO_COMPOUNDS),
        spec=spec,
        seed=seed,
        velocity_m_s=210.0,
        velocity_err_frac=0.006,
        spread_frac=0.12,
        n_voltages=11,
        max_signal=3.2,
        noise=0.025,
        temperature_err_K=2.0,
        title="Demo campaign: invented screening library on a bench-top Talbot-Lau interferometer",
    )
    out = truth.path
    toml = (out / "campaign.toml").read_text()
    toml = toml.replace(
        'compounds = "compounds.csv"\n', 'compounds = "compounds.csv"\ncomputed = "computed.csv"\n'
    )
    write_text_atomic(out / "campaign.toml", toml)
    write_text_atomic(out / "computed.csv", DEMO_COMPUTED)
    return out


def write_demo_scans(out_dir: str | Path = "examples/demo_scans", seed: int = 2028) -> Path:
    """The raw-scan variant of the demo: grating scans with interleaved references."""
    temps = (360.0, 480.0, 600.0)
    comps = [
        CompoundTruth(c.name, c.mass_u, c.alpha_A3, c.dipole_D, temps, c.smiles, c.mass_err_u)
        for c in DEMO_COMPOUNDS[:3]
    ]
    truth = simulate_scan_campaign(
        out_dir,
        comps,
        spec=InstrumentSpec.talbot_lau("two-wire", rel=0.004),
        seed=seed,
        velocity_m_s=210.0,
        velocity_err_frac=0.006,
        spread_frac=0.12,
        n_voltages=6,
        scans_per_voltage=2,
        max_signal=3.0,
        signal_per_bin=120.0,
        temperature_err_K=2.0,
        title="Demo campaign, raw-scan variant: grating scans of three sample codes",
    )
    return truth.path
