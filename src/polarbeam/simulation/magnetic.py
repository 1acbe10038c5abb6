"""Magnetic campaigns with a known truth: diamagnets and radicals in an electromagnet.

The force constant χ_m/μ0 + m²/(3kT) (polarbeam.beam.magnetic) is the electric α + μ²/(3kT) with
α ↔ χ_m/μ0 and μ ↔ m, so the electric simulator writes the observable; this module states the
truth in the chemist's units (χ_dia in CGS-emu cm³/mol, the moment in μ_B or a spin S), writes
the magnet as ``[deflector] field = "magnetic"`` and the drive as ``current_A`` (|I|: the force
goes as I²).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from polarbeam._util.atomic import write_text_atomic
from polarbeam.beam.magnetic import spin_only_moment
from polarbeam.constants import (
    MU0,
    alpha_a3_from_si,
    chi_molecular_si_from_cgs,
    debye_from_si,
    si_from_muB,
)
from polarbeam.simulation.campaigns import (
    CompoundTruth,
    InstrumentSpec,
    SimulationTruth,
    simulate_campaign,
)

__all__ = ["MagneticTruth", "magnet_spec", "simulate_magnetic_campaign"]


@dataclass(frozen=True)
class MagneticTruth:
    """A compound of a simulated magnetic campaign: χ_dia (cm³/mol) and a spin S (moment
    g√(S(S+1)) μ_B, spin only) or an explicit ``moment_muB``."""

    name: str
    mass_u: float
    chi_dia_cm3_mol: float
    temperatures_K: tuple[float, ...]
    spin: float = 0.0
    moment_muB: float | None = None
    smiles: str = ""

    @property
    def moment(self) -> float:
        """The effective moment in μ_B."""
        if self.moment_muB is not None:
            return self.moment_muB
        return spin_only_moment(self.spin) if self.spin > 0 else 0.0

    def as_compound(self) -> CompoundTruth:
        """The electric stand-in: α = χ_m/μ0 (as Å³ of C·m²/V), μ = m (as debye of C·m)."""
        a_si = chi_molecular_si_from_cgs(self.chi_dia_cm3_mol) / MU0
        return CompoundTruth(
            name=self.name,
            mass_u=self.mass_u,
            alpha_A3=float(alpha_a3_from_si(a_si)),
            dipole_D=float(debye_from_si(si_from_muB(self.moment))),
            temperatures_K=self.temperatures_K,
            smiles=self.smiles,
        )


def magnet_spec(
    layout: str = "talbot-lau",
    field_factor: float = 35.0,
    rel: float = 0.01,
    field_per_ampere: float | None = None,
) -> InstrumentSpec:
    """An electromagnet of ``field_factor`` (T²/(m A²), 1σ ``rel``) on a preset layout."""
    spec = (
        InstrumentSpec.talbot_lau("uniform", rel)
        if layout == "talbot-lau"
        else InstrumentSpec.beam_profile("uniform", rel)
    )
    inputs = dict(spec.inputs)
    inputs["deflector.field_factor"] = (field_factor, field_factor * rel, "T^2/(m A^2)")
    if field_per_ampere is not None:
        inputs["deflector.field_per_ampere"] = (field_per_ampere, 0.0, "T/A")
    return InstrumentSpec(spec.layout, "uniform", inputs)


def simulate_magnetic_campaign(
    out_dir: str | Path,
    compounds: list[MagneticTruth],
    *,
    spec: InstrumentSpec | None = None,
    seed: int | np.random.Generator = 0,
    title: str = "simulated magnetic campaign",
    **kwargs,
) -> SimulationTruth:
    """Write a magnetic campaign (``campaign.toml``, ``shifts.csv`` with ``current_A``,
    ``compounds.csv``); keywords as for :func:`~polarbeam.simulation.campaigns.simulate_campaign`.

    The truth's ``alpha_eff_A3`` holds the force constants in the electric stand-in unit; convert
    with :func:`polarbeam.constants.chi_cgs_from_force_constant` of ``alpha_si_from_a3(x)``."""
    spec = spec or magnet_spec()
    truth = simulate_campaign(
        out_dir,
        [c.as_compound() for c in compounds],
        spec=spec,
        seed=seed,
        title=title,
        **kwargs,
    )
    out = Path(out_dir)
    toml = (out / "campaign.toml").read_text(encoding="utf-8")
    toml = toml.replace("[deflector]\n", '[deflector]\nfield = "magnetic"\n', 1)
    write_text_atomic(out / "campaign.toml", toml)
    lines = (out / "shifts.csv").read_text(encoding="utf-8").splitlines()
    head = lines[0].split(",")
    k = head.index("voltage_V")
    head[k] = "current_A"
    rows = [head]
    for line in lines[1:]:
        cells = line.split(",")
        cells[k] = f"{abs(float(cells[k])):.6g}"  # the force goes as I²: write |I|
        rows.append(cells)
    write_text_atomic(out / "shifts.csv", "\n".join(",".join(r) for r in rows) + "\n")
    return truth
