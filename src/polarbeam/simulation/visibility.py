"""Simulated visibility-versus-power campaigns (known truth) in the input contract, for round
trips and the worked example (invented scenario).

The stated instrument inputs carry 1σ errors; each simulated campaign draws its true power scale,
waist and open fraction once (shared by its compounds) and each series its true mean velocity;
the measured visibilities are the moduli of complex fringe amplitudes with Gaussian noise on
both quadratures (Rician).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from polarbeam._util.atomic import make_folder
from polarbeam.beam.distributions import GaussianVelocity
from polarbeam.beam.talbot import (
    LightGrating,
    MaterialGrating,
    TalbotLauInterferometer,
    absorption_cross_section,
)
from polarbeam.constants import AMU, ANGSTROM3_SI
from polarbeam.simulation.velocity import stated_table, velocity_csv, velocity_table

__all__ = [
    "VisibilityCompoundTruth",
    "VisibilitySetup",
    "random_visibility_compounds",
    "simulate_visibility_campaign",
]


@dataclass(frozen=True)
class VisibilitySetup:
    """Stated inputs of a light-grating interferometer (SI) with their 1σ errors."""

    spacing: float = 0.105
    wavelength: float = 532e-9
    first_position: float = 0.0
    open_fraction: float = 0.42
    open_fraction_err: float = 0.02
    waist: float = 900e-6
    waist_err: float = 30e-6
    power_scale_err: float = 0.03
    absorbed: str = "kept"
    powers: tuple[float, ...] = tuple(np.linspace(0.5, 10.0, 14).round(3))
    noise: float = 0.01

    @property
    def period(self) -> float:
        return 0.5 * self.wavelength

    def interferometer(self, open_fraction, waist, power_scale) -> TalbotLauInterferometer:
        return TalbotLauInterferometer(
            self.spacing,
            self.period,
            MaterialGrating(open_fraction),
            LightGrating(self.wavelength, waist, self.absorbed, power_scale),  # type: ignore[arg-type]
            MaterialGrating(open_fraction),
        )


@dataclass(frozen=True)
class VisibilityCompoundTruth:
    """True optical polarizability (Re α, Im α in Å³) and the series (T K, v m/s, spread m/s,
    velocity calibration error m/s)."""

    name: str
    mass_u: float
    alpha_re_A3: float
    alpha_im_A3: float
    series: tuple[tuple[float, float, float, float], ...]

    def sigma_abs(self, wavelength: float) -> float:
        return float(absorption_cross_section(self.alpha_im_A3 * ANGSTROM3_SI, wavelength))


def random_visibility_compounds(n: int, rng: np.random.Generator) -> list[VisibilityCompoundTruth]:
    """Invented compounds spanning the masses and polarizabilities a light grating resolves."""
    out = []
    for i in range(n):
        mass = float(rng.uniform(800.0, 3000.0))
        re = float(rng.uniform(60.0, 200.0))
        im = float(re * rng.uniform(0.0, 0.08))
        v1 = float(rng.uniform(120.0, 200.0))
        v2 = float(v1 * rng.uniform(1.2, 1.5))
        series = ((500.0, v1, 0.12 * v1, 0.01 * v1), (600.0, v2, 0.12 * v2, 0.01 * v2))
        out.append(VisibilityCompoundTruth(f"vis-{i + 1:03d}", mass, re, im, series))
    return out


def _q(value: float, err: float, unit: str = "") -> str:
    u = f" {unit}" if unit else ""
    return f"{value:.10g} ± {err:.4g}{u}" if err > 0 else f"{value:.10g}{u}"


def simulate_visibility_campaign(
    out_dir: str | Path,
    compounds: Sequence[VisibilityCompoundTruth],
    setup: VisibilitySetup = VisibilitySetup(),
    *,
    seed: int | np.random.Generator = 0,
    title: str = "simulated visibility campaign",
    nodes: int = 48,
    table_shape: str | None = None,
) -> tuple[Path, dict]:
    """Write ``campaign.toml``, ``compounds.csv`` and ``visibilities.csv``; return the
    campaign path and the truth (true power scale, waist, open fraction, per compound α, σ).

    With ``table_shape`` (:func:`polarbeam.simulation.velocity.velocity_table`) each series'
    beam is a measured table of that shape, the series' mean and relative spread: the true
    table is drawn, the stated one (``velocities.csv``) is the truth times one calibration
    draw of the series' velocity error, and the velocity and spread cells are left empty."""
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    out = make_folder(out_dir)
    scale = 1.0 + setup.power_scale_err * rng.standard_normal()
    waist = setup.waist + setup.waist_err * rng.standard_normal()
    frac = setup.open_fraction + setup.open_fraction_err * rng.standard_normal()
    tl = setup.interferometer(frac, waist, scale)
    rows = [
        "compound,temperature_K,velocity_m_s,velocity_err_m_s,velocity_spread_m_s,"
        "laser_power_W,visibility,visibility_err"
    ]
    truth: dict = {"power_scale": scale, "waist": waist, "open_fraction": frac, "compounds": {}}
    powers = np.asarray(setup.powers, dtype=float)
    tables: list = []
    for c in compounds:
        sigma = c.sigma_abs(setup.wavelength)
        truth["compounds"][c.name] = {"alpha_opt_A3": c.alpha_re_A3, "sigma_abs_m2": sigma}
        for temp, v, spread, verr in c.series:
            cells = f"{v:.6g},{verr:.4g},{spread:.4g}"
            if table_shape is not None:
                true_dist = velocity_table(table_shape, v, spread / v)
                stated, err = stated_table(true_dist, verr / v, rng)
                tables.append((c.name, temp, stated))
                cells = f",{err:.6g},"
            else:
                true_dist = GaussianVelocity(v + verr * rng.standard_normal(), spread)
            nu = tl.visibility(
                c.mass_u * AMU,
                true_dist,
                powers,
                c.alpha_re_A3 * ANGSTROM3_SI,
                sigma,
                nodes=nodes,
            )
            amp = nu + setup.noise * (
                rng.standard_normal(powers.size) + 1j * rng.standard_normal(powers.size)
            )
            for p, vis in zip(powers, np.abs(amp), strict=True):
                rows.append(
                    f"{c.name},{temp:g},{cells},{p:.6g},{min(vis, 1.0):.6f},{setup.noise:.4g}"
                )
    (out / "visibilities.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    clines = ["compound,mass_u"] + [f"{c.name},{c.mass_u:.6g}" for c in compounds]
    (out / "compounds.csv").write_text("\n".join(clines) + "\n", encoding="utf-8")
    z0 = setup.first_position
    toml = [
        "[campaign]",
        f'title = "{title}"',
        "",
        "[instrument]",
        'layout = "talbot-lau"',
        f'grating_period = "{setup.period * 1e9:.10g} nm"',
        "grating_positions = ["
        + ", ".join(f'"{z0 + k * setup.spacing:.10g} m"' for k in range(3))
        + "]",
        "",
        "[gratings]",
        'first = "material"',
        'second = "light"',
        'third = "material"',
        f'open_fraction = "{_q(setup.open_fraction, setup.open_fraction_err)}"',
        f'laser_wavelength = "{setup.wavelength * 1e9:.10g} nm"',
        f'laser_waist_vertical = "{_q(setup.waist * 1e6, setup.waist_err * 1e6, "um")}"',
        f'power_scale = "{_q(1.0, setup.power_scale_err)}"',
        f'absorbed_molecules = "{setup.absorbed}"',
        "",
        "[data]",
        'compounds = "compounds.csv"',
        'visibilities = "visibilities.csv"',
        *(['velocities = "velocities.csv"'] if tables else []),
        "",
    ]
    if tables:
        (out / "velocities.csv").write_text(velocity_csv(tables), encoding="utf-8")
    path = out / "campaign.toml"
    path.write_text("\n".join(toml), encoding="utf-8")
    return path, truth
