"""Simulated campaigns with reference compounds (known truth), for the calibration round trips."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from polarbeam._util.atomic import write_text_atomic
from polarbeam.simulation.campaigns import (
    CompoundTruth,
    InstrumentSpec,
    random_beam_conditions,
    simulate_campaign,
)

__all__ = [
    "CalibrationTruth",
    "calibration_campaign",
]


@dataclass(frozen=True)
class CalibrationTruth:
    """A simulated campaign whose field factor is known only through reference compounds."""

    simulation: Any  # polarbeam.simulation.campaigns.SimulationTruth
    references: dict[str, tuple[float, float, float, float]]  # stated α, err (Å³), μ, err (D)
    field_factor: float  # true g (m⁻³)

    @property
    def path(self) -> Path:
        return self.simulation.path


def calibration_campaign(
    out_dir: str | Path,
    rng: np.random.Generator,
    n_refs: int = 1,
    *,
    n_unknowns: int = 2,
    layout: str | None = None,
) -> CalibrationTruth:
    """A randomised campaign with ``n_refs`` reference compounds among ``n_unknowns`` others.

    The ``uniform`` deflector's ``field_factor`` is removed from ``campaign.toml``: the analysis
    knows it only through the references.  The references' "published" α and μ are their true
    values plus a draw from the stated errors, like every other stated input of the simulator.
    """
    layout = layout or str(rng.choice(["talbot-lau", "beam-profile"]))
    rel = float(rng.uniform(0.002, 0.02))
    spec = (
        InstrumentSpec.talbot_lau("uniform", rel)
        if layout == "talbot-lau"
        else InstrumentSpec.beam_profile("uniform", rel)
    )

    def temps(lo, hi):
        n = int(rng.integers(lo, hi + 1))
        return tuple(float(t) for t in np.sort(rng.choice(np.arange(300, 801, 50), n, False)))

    refs, unknowns, stated = [], [], {}
    for i in range(n_refs):
        polar = rng.random() < 0.5
        comp = CompoundTruth(
            f"reference-{i + 1}",
            float(rng.uniform(30, 400)),
            float(rng.uniform(5, 40)),
            float(rng.uniform(0.5, 2.5)) if polar else 0.0,
            temps(1, 3),
            mass_err_u=float(rng.choice([0.0, 0.05])),
        )
        refs.append(comp)
        da = comp.alpha_A3 * float(rng.uniform(0.005, 0.03))
        dmu = 0.01 + 0.01 * comp.dipole_D if polar else 0.0
        stated[comp.name] = (
            comp.alpha_A3 + da * rng.standard_normal(),
            da,
            comp.dipole_D + dmu * rng.standard_normal() if polar else 0.0,
            dmu,
        )
    for i in range(n_unknowns):
        unknowns.append(
            CompoundTruth(
                f"sample-{i + 1}",
                float(rng.uniform(60, 900)),
                float(rng.uniform(5, 150)),
                float(rng.uniform(0.0, 4.0)),
                temps(1, 4),
                mass_err_u=float(rng.choice([0.0, 0.05])),
            )
        )
    sim = simulate_campaign(
        out_dir, refs + unknowns, spec=spec, seed=rng, **random_beam_conditions(rng)
    )
    out = Path(out_dir)
    toml = out / "campaign.toml"
    text = "\n".join(
        ln for ln in toml.read_text().splitlines() if not ln.startswith("field_factor")
    )
    write_text_atomic(toml, text + "\n")
    head = (
        "compound,mass_u,mass_err_u,smiles,reference,reference_alpha_A3,reference_alpha_err_A3,"
        "reference_dipole_D,reference_dipole_err_D"
    )
    rows = [head]
    for comp in refs + unknowns:
        base = f"{comp.name},{comp.mass_u:.6g},{comp.mass_err_u:g},{comp.smiles}"
        if comp.name in stated:
            a, da, mu, dmu = stated[comp.name]
            rows.append(f"{base},true,{a:.8g},{da:.6g},{mu:.8g},{dmu:.6g}")
        else:
            rows.append(f"{base},false,,,,")
    write_text_atomic(out / "compounds.csv", "\n".join(rows) + "\n")
    return CalibrationTruth(sim, stated, sim.instrument["deflector.field_factor"])
