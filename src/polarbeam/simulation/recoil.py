"""Simulated photon-recoil campaigns (known truth) in the input contract, for round trips and the
worked example.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from polarbeam._util.atomic import make_folder
from polarbeam.beam.photon_recoil import (
    gaussian_crossing_length,
    gaussian_effective_area,
    height_fluence_nodes,
    photon_energy,
    recoil_observables,
    recoil_velocity,
)
from polarbeam.constants import AMU, CM2
from polarbeam.contract.campaign import build_layout
from polarbeam.contract.recoil import FLUORESCENCE_FIT, OPTIONAL_RECOIL_COLUMNS, RECOIL_COLUMNS
from polarbeam.simulation.campaigns import InstrumentSpec

__all__ = [
    "RECOIL_EFFECTS",
    "LaserTruth",
    "RecoilCompoundTruth",
    "RecoilSimulationTruth",
    "random_recoil_campaign",
    "random_recoil_modes_campaign",
    "simulate_recoil_campaign",
]


@dataclass(frozen=True)
class LaserTruth:
    """A simulated laser: nominal (stated) values with their 1σ errors, SI units.

    ``position`` is z_L in metres (spatial layouts) or the time after the first pulse in
    seconds (time domain).  Give ``area`` (top hat) or ``waist`` (Gaussian).  ``mode`` "cw"
    (powers in W, a Gaussian ``waist``), ``illumination`` "standing", ``beam_height_rms`` (m),
    ``hit_fraction`` and ``visibility_errors`` are written to the ``[[laser]]`` table only when
    they differ from the defaults.  ``power`` (W) makes the cw rows use the table's key.
    """

    name: str
    wavelength: float
    position: float
    position_err: float = 0.0
    area: float | None = None
    area_err: float = 0.0
    waist: float | None = None
    waist_err: float = 0.0
    beam_offset: float = 0.0
    beam_offset_err: float = 0.0
    direction: int = 1
    energy_scale_err: float = 0.0
    mode: str = "pulsed"
    illumination: str = "travelling"
    beam_height_rms: float = 0.0
    beam_height_rms_err: float = 0.0
    hit_fraction: float = 1.0
    hit_fraction_err: float = 0.0
    power: float | None = None
    power_err: float = 0.0
    visibility_errors: str = "rician"


@dataclass(frozen=True)
class RecoilCompoundTruth:
    """A simulated compound: true cross-section per laser (cm²) and re-emission."""

    name: str
    mass_u: float
    cross_sections_cm2: dict[str, float]
    fluorescence_yield: float = 0.0
    fluorescence_yield_err: float = 0.0
    fit_yield: bool = False
    emission_wavelength_nm: float | None = None
    mass_err_u: float = 0.0
    temperatures_K: tuple[float, ...] = (500.0,)


@dataclass(frozen=True)
class RecoilSimulationTruth:
    """What the simulator put in."""

    instrument: dict[str, float]
    lasers: dict[str, dict[str, float]]
    compounds: dict[str, RecoilCompoundTruth]
    path: Path


def _instrument_inputs(layout: str) -> dict[str, tuple[float, float, str]]:
    spec = InstrumentSpec.talbot_lau() if layout == "talbot-lau" else InstrumentSpec.time_domain()
    return {k: v for k, v in spec.inputs.items() if k.startswith("instrument.")}


def _q(value: float, err: float, unit: str) -> str:
    s = _UNITS[unit]
    u = f" {unit}" if unit else ""
    if err > 0:
        return f"{value / s:.10g} ± {err / s:.4g}{u}"
    return f"{value / s:.10g}{u}"


def simulate_recoil_campaign(
    out_dir: str | Path,
    compounds: Sequence[RecoilCompoundTruth],
    lasers: Sequence[LaserTruth],
    *,
    layout: str = "talbot-lau",
    seed: int | np.random.Generator = 0,
    velocity_m_s: float = 180.0,
    velocity_err_frac: float = 0.005,
    spread_frac: float = 0.08,
    n_energies: int = 8,
    max_photons: float = 2.0,
    phase_noise: float = 0.02,
    visibility_noise: float = 0.01,
    title: str = "simulated recoil campaign",
    nodes: int = 96,
    visibility_noise_model: str = "folded",
    reference_phase_err: float = 0.0,
    reference_visibility_err: float = 0.0,
    min_visibility: float = 0.1,
) -> RecoilSimulationTruth:
    """Write ``campaign.toml``, ``recoil.csv`` and ``compounds.csv`` into ``out_dir``.

    Every stated input (grating geometry, laser position, area or waist and offset, pulse-energy
    calibration, mass, velocity calibration, fluorescence yield) is the truth plus a draw from
    its stated error.  The pulse energies of each compound and laser run up to the energy giving
    ``max_photons`` absorbed photons on average.  The velocity average uses ``nodes`` quadrature
    nodes (twice the analysis default, so the round trip also checks the quadrature).

    ``visibility_noise_model``: "folded" |ν + σ n| (the historical default, kept so the worked
    example stays byte-identical), "rician" |ν + σ(n₁ + i n₂)| (a fitted amplitude's modulus) or
    "gaussian" ν + σ n (may be negative).  ``reference_phase_err`` (rad) and
    ``reference_visibility_err`` (relative) give every series one shared laser-off reference:
    its phase error shifts all the series' phases alike, its visibility error divides all its
    ratios by the same 1 + δ; the ``reference`` columns are then written.  Pulse energies (cw:
    powers) are lowered until the model visibility stays above ``min_visibility``.
    """
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    out = Path(out_dir)
    make_folder(out)
    inst = _instrument_inputs(layout)
    true_inst = {k: v + e * rng.standard_normal() for k, (v, e, _) in inst.items()}
    layout_t = build_layout(layout, true_inst)
    t0 = true_inst["instrument.pulse_times[0]"] if layout == "time-domain" else 0.0
    true_lasers: dict[str, dict[str, float]] = {}
    for la in lasers:
        t = {
            "position": la.position + la.position_err * rng.standard_normal(),
            "energy_scale": 1.0 + la.energy_scale_err * rng.standard_normal(),
        }
        if la.area is not None:
            t["area"] = la.area + la.area_err * rng.standard_normal()
        else:
            t["waist"] = la.waist + la.waist_err * rng.standard_normal()
            t["beam_offset"] = la.beam_offset + la.beam_offset_err * rng.standard_normal()
            profile = gaussian_crossing_length if la.mode == "cw" else gaussian_effective_area
            t["area"] = float(profile(t["waist"], t["beam_offset"]))
        t.update(_true_modes(la, rng))
        true_lasers[la.name] = t
    rows = []
    refs = reference_phase_err > 0 or reference_visibility_err > 0
    for comp in compounds:
        m_true = comp.mass_u * AMU
        q_true = comp.fluorescence_yield
        for la in lasers:
            if la.name not in comp.cross_sections_cm2:
                continue
            tl = true_lasers[la.name]
            sigma = comp.cross_sections_cm2[la.name] * CM2
            w = float(layout_t.weight(t0 + tl["position"]))
            k = la.direction * layout_t.scale * float(recoil_velocity(la.wavelength, m_true)) * w
            lam_e = (
                comp.emission_wavelength_nm * 1e-9 if comp.emission_wavelength_nm else la.wavelength
            )
            ke = layout_t.scale * float(recoil_velocity(lam_e, m_true)) * w
            per_e_true = (
                sigma * tl["energy_scale"] / (tl["area"] * float(photon_energy(la.wavelength)))
            )
            if la.illumination == "standing":
                per_e_true *= 2.0  # both passes
            fnodes = None
            if tl.get("beam_height_rms", 0.0) > 0:
                fnodes = height_fluence_nodes(
                    tl["waist"], tl["beam_offset"], tl["beam_height_rms"], 48
                )
            for temp in comp.temperatures_K:
                v_nom = velocity_m_s * math.sqrt(temp / comp.temperatures_K[0])
                v_err = velocity_err_frac * v_nom
                f = 1.0 + velocity_err_frac * rng.standard_normal()
                spread = spread_frac * v_nom
                per = per_e_true / (v_nom * f) if la.mode == "cw" else per_e_true

                modes = {
                    "cw": la.mode == "cw",
                    "standing": la.illumination == "standing",
                    "hit_fraction": tl.get("hit_fraction", 1.0),
                    "fluence_nodes": fnodes,
                }

                def observe(
                    e, _f=f, _v=v_nom, _s=spread, _k=k, _ke=ke, _p=per, _q=q_true, _m=modes
                ):
                    return recoil_observables(
                        _p * e,
                        _k,
                        _v * _f,
                        _s * _f,
                        emission_coefficient=_ke,
                        fluorescence_yield=_q,
                        velocity_dependent=layout != "time-domain",
                        nodes=nodes,
                        **_m,
                    )

                # an experimenter keeps the fringe visible: at least 10 % of laser-off contrast
                e_max = max_photons / per
                energies = e_max * np.linspace(1.0 / n_energies, 1.0, n_energies)
                ph, vi = observe(energies)
                for _ in range(12):
                    if vi.min() >= min_visibility:
                        break
                    energies = energies * 0.75
                    ph, vi = observe(energies)
                if la.power is not None:  # a fixed cw power: the speed is what varies
                    energies = np.full(n_energies, tl["power"])
                    ph, vi = observe(energies)
                ph = ph + phase_noise * rng.standard_normal(n_energies)
                vi = _visibility_noise(vi, visibility_noise, visibility_noise_model, rng)
                ref = ""
                if refs:
                    ph = ph + reference_phase_err * rng.standard_normal()
                    vi = vi / (1.0 + reference_visibility_err * rng.standard_normal())
                    ref = (
                        f",ref-{comp.name}-{la.name}-{temp:g},{reference_phase_err:.4g},"
                        f"{reference_visibility_err:.4g}"
                    )
                for e, p, v in zip(energies, ph, vi, strict=True):
                    pulse, power = (f"{e:.8g}", "") if la.mode == "pulsed" else ("", f"{e:.8g}")
                    if la.power is not None:
                        power = ""
                    extra = f",{power}" if any(x.mode == "cw" for x in lasers) else ""
                    rows.append(
                        f"{comp.name},{la.name},{temp:g},{v_nom:.6g},{v_err:.4g},{spread:.4g},"
                        f"{pulse},{p:.8g},{phase_noise:.4g},{v:.8g},{visibility_noise:.4g}"
                        f"{extra}{ref}"
                    )
    # plain writes: simulated inputs need no crash safety
    columns = list(RECOIL_COLUMNS)
    if any(x.mode == "cw" for x in lasers):
        columns.append(OPTIONAL_RECOIL_COLUMNS[0])
    if refs:
        columns += OPTIONAL_RECOIL_COLUMNS[1:]
    (out / "recoil.csv").write_text(",".join(columns) + "\n" + "\n".join(rows) + "\n")
    chead = (
        "compound,mass_u,mass_err_u,fluorescence_yield,fluorescence_yield_err,"
        "emission_wavelength_nm"
    )
    clines = [chead]
    for c in compounds:
        m_stated = c.mass_u + c.mass_err_u * rng.standard_normal()
        if c.fit_yield:
            qcell, qerr = FLUORESCENCE_FIT, ""
        elif c.fluorescence_yield > 0 or c.fluorescence_yield_err > 0:
            qs = c.fluorescence_yield + c.fluorescence_yield_err * rng.standard_normal()
            qcell, qerr = f"{min(max(qs, 0.0), 1.0):.6g}", f"{c.fluorescence_yield_err:g}"
        else:
            qcell, qerr = "", ""
        lam = f"{c.emission_wavelength_nm:g}" if c.emission_wavelength_nm else ""
        clines.append(f"{c.name},{m_stated:.8g},{c.mass_err_u:g},{qcell},{qerr},{lam}")
    (out / "compounds.csv").write_text("\n".join(clines) + "\n")
    (out / "campaign.toml").write_text(_recoil_toml(title, layout, inst, lasers))
    return RecoilSimulationTruth(
        instrument=true_inst,
        lasers=true_lasers,
        compounds={c.name: c for c in compounds},
        path=out,
    )


def _true_modes(la: LaserTruth, rng: np.random.Generator) -> dict[str, float]:
    """True beam height, hit fraction and fixed power (drawn only when they are given)."""
    t = {}
    if la.beam_height_rms > 0 or la.beam_height_rms_err > 0:
        t["beam_height_rms"] = abs(
            la.beam_height_rms + la.beam_height_rms_err * rng.standard_normal()
        )
    if la.hit_fraction != 1 or la.hit_fraction_err > 0:
        t["hit_fraction"] = min(la.hit_fraction + la.hit_fraction_err * rng.standard_normal(), 1.0)
    if la.power is not None:
        t["power"] = la.power + la.power_err * rng.standard_normal()
    return t


def _visibility_noise(vi, noise: float, model: str, rng: np.random.Generator) -> np.ndarray:
    n = vi.size
    if model == "rician":
        return np.abs(vi + noise * (rng.standard_normal(n) + 1j * rng.standard_normal(n)))
    if model == "gaussian":
        return vi + noise * rng.standard_normal(n)
    return np.abs(vi + noise * rng.standard_normal(n))


def _recoil_toml(title: str, layout: str, inst, lasers: Sequence[LaserTruth]) -> str:
    lines = ["[campaign]", f'title = "{title}"', "", "[instrument]", f'layout = "{layout}"']
    lists: dict[str, list[str]] = {}
    for key, (v, e, u) in inst.items():
        name = key.partition(".")[2]
        if "[" in name:
            lists.setdefault(name.split("[")[0], []).append(f'"{_q(v, e, u)}"')
        else:
            lines.append(f'{name} = "{_q(v, e, u)}"')
    for base, items in lists.items():
        lines.append(f"{base} = [{', '.join(items)}]")
    pos_unit = "us" if layout == "time-domain" else "m"
    for la in lasers:
        lines += [
            "",
            "[[laser]]",
            f'name = "{la.name}"',
            f'wavelength = "{_q(la.wavelength, 0.0, "nm")}"',
            f'position = "{_q(la.position, la.position_err, pos_unit)}"',
        ]
        if la.area is not None:
            lines.append(f'area = "{_q(la.area, la.area_err, "mm^2")}"')
        else:
            lines.append(f'waist = "{_q(la.waist, la.waist_err, "mm")}"')
            lines.append(f'beam_offset = "{_q(la.beam_offset, la.beam_offset_err, "mm")}"')
        lines.append(f"direction = {la.direction:+d}")
        if la.energy_scale_err > 0:
            lines.append(f'energy_scale = "{_q(1.0, la.energy_scale_err, "")}"')
        if la.mode != "pulsed":
            lines.append(f'mode = "{la.mode}"')
        if la.power is not None:
            lines.append(f'power = "{_q(la.power, la.power_err, "W")}"')
        if la.illumination != "travelling":
            lines.append(f'illumination = "{la.illumination}"')
        if la.beam_height_rms > 0 or la.beam_height_rms_err > 0:
            lines.append(
                f'beam_height_rms = "{_q(la.beam_height_rms, la.beam_height_rms_err, "mm")}"'
            )
        if la.hit_fraction != 1 or la.hit_fraction_err > 0:
            lines.append(f'hit_fraction = "{_q(la.hit_fraction, la.hit_fraction_err, "")}"')
        if la.visibility_errors != "rician":
            lines.append(f'visibility_errors = "{la.visibility_errors}"')
    lines += ["", "[data]", 'recoil = "recoil.csv"', 'compounds = "compounds.csv"', ""]
    return "\n".join(lines)


def random_recoil_campaign(
    out_dir: str | Path,
    rng: np.random.Generator,
    *,
    reemission: str | None = None,
) -> RecoilSimulationTruth:
    """One randomised recoil campaign for round trips.

    Talbot–Lau (70 %) or time-domain layout; one to three lasers (400–700 nm, top hat or
    Gaussian, either direction) placed to give 0.3–2.5 rad per photon; cross-sections
    0.2–5·10⁻¹⁶ cm²; velocity spreads up to 15 %; re-emission off, stated or fitted
    (``reemission`` = ``"off"``, ``"stated"``, ``"fit"``; random when None).
    """
    layout = "talbot-lau" if rng.random() < 0.7 else "time-domain"
    inst = _instrument_inputs(layout)
    nominal = {k: v for k, (v, _, _) in inst.items()}
    lay = build_layout(layout, nominal)
    if layout == "talbot-lau":
        v_mean = float(rng.uniform(120, 350))
        mass_u = float(rng.uniform(3e3, 3e4))
        wmax, lo, mid, hi = lay.L2, lay.z1, lay.z2, lay.z3
    else:
        v_mean = 1.0
        mass_u = float(rng.uniform(300, 5000))
        t = [nominal[f"instrument.pulse_times[{i}]"] for i in range(3)]
        wmax, lo, mid, hi = t[2] - t[1], t[0], t[1], t[2]
    mode = reemission or str(rng.choice(["off", "stated", "fit"], p=[0.4, 0.4, 0.2]))
    n_l = int(rng.integers(1, 4))
    names = ["blue", "green", "red"][:n_l]
    lasers = []
    for name in names:
        lam = float(rng.uniform(400e-9, 700e-9))
        lo_phi = 1.2 if mode == "fit" else 0.3
        phi = float(rng.uniform(lo_phi, 2.5))
        # phase per unit weight (rad/m, or rad/s in the time domain) at the mean velocity
        per_w = lay.scale * float(recoil_velocity(lam, mass_u * AMU)) / v_mean
        w = float(np.clip(phi / per_w, 0.05 * wmax, 0.95 * wmax))
        # either side of the middle grating (pulse) with this weight
        if rng.random() < 0.5:
            pos = lo + w * (mid - lo) / wmax
        else:
            pos = hi - w
        if layout == "time-domain":
            pos -= lo
            pos_err = float(rng.choice([0.0, 2e-8]))
        else:
            pos_err = float(rng.choice([0.0, 1e-3]))
        gaussian = rng.random() < 0.3
        area = float(rng.uniform(0.3e-6, 2e-6))
        lasers.append(
            LaserTruth(
                name=name,
                wavelength=round(lam * 1e9) * 1e-9,
                position=pos,
                position_err=pos_err,
                area=None if gaussian else area,
                area_err=0.0 if gaussian else float(rng.uniform(0.0, 0.05)) * area,
                waist=float(rng.uniform(0.5e-3, 1.5e-3)) if gaussian else None,
                waist_err=float(rng.uniform(0.005, 0.03)) * 1e-3 if gaussian else 0.0,
                beam_offset=float(rng.uniform(0.1e-3, 0.4e-3)) if gaussian else 0.0,
                beam_offset_err=0.02e-3 if gaussian else 0.0,
                direction=int(rng.choice([-1, 1])),
                energy_scale_err=float(rng.choice([0.0, 0.01, 0.03])),
            )
        )
    q = 0.0 if mode == "off" else float(rng.uniform(0.15, 0.85))
    comp = RecoilCompoundTruth(
        name="sample",
        mass_u=mass_u,
        cross_sections_cm2={n: float(rng.uniform(0.2e-16, 5e-16)) for n in names},
        fluorescence_yield=q,
        fluorescence_yield_err=float(rng.choice([0.0, 0.03])) if mode == "stated" else 0.0,
        fit_yield=mode == "fit",
        emission_wavelength_nm=(
            float(rng.uniform(550, 750)) if mode != "off" and rng.random() < 0.5 else None
        ),
        mass_err_u=float(rng.choice([0.0, 0.001])) * mass_u,
        temperatures_K=(500.0,) if rng.random() < 0.7 else (450.0, 600.0),
    )
    return simulate_recoil_campaign(
        out_dir,
        [comp],
        lasers,
        layout=layout,
        seed=rng,
        velocity_m_s=v_mean if layout == "talbot-lau" else 1.0,
        velocity_err_frac=float(rng.uniform(0.002, 0.02)) if layout == "talbot-lau" else 0.0,
        spread_frac=float(rng.uniform(0.0, 0.15)) if layout == "talbot-lau" else 0.0,
        n_energies=int(rng.integers(4, 11)),
        max_photons=float(rng.uniform(0.5, 3.0)),
        phase_noise=float(rng.uniform(0.02, 0.08)),
        visibility_noise=float(rng.uniform(0.01, 0.03)),
    )


_UNITS = {"m": 1.0, "mm": 1e-3, "nm": 1e-9, "us": 1e-6, "mm^2": 1e-6, "": 1.0, "W": 1.0}


#: The effects of :func:`random_recoil_modes_campaign`, one per campaign.
RECOIL_EFFECTS = ("height", "hit", "cw", "cw-power", "standing", "reference", "rician")


def random_recoil_modes_campaign(
    out_dir: str | Path, rng: np.random.Generator, effect: str
) -> RecoilSimulationTruth:
    """One randomised Talbot–Lau campaign exercising one ``effect`` of :data:`RECOIL_EFFECTS`.

    "height": a Gaussian spot with a molecular beam 0.1–0.4 w0 rms high (offset 0–0.3 w0);
    "hit": a hit fraction 0.5–0.85 ± 0.02–0.05; "cw": a continuous Gaussian beam, powers per
    row; "cw-power": a fixed cw power (``power`` key, ± 2 %) at three source temperatures;
    "standing": a retro-reflected top-hat beam; "reference": one shared laser-off reference
    per series (0.01–0.05 rad, 1–4 %); "rician": visibilities down to 0.02 with noise
    0.02–0.04.  Visibility noise is Rician throughout.
    """
    if effect not in RECOIL_EFFECTS:
        raise ValueError(f"effect: expected one of {', '.join(RECOIL_EFFECTS)}, found {effect!r}")
    inst = _instrument_inputs("talbot-lau")
    lay = build_layout("talbot-lau", {k: v for k, (v, _, _) in inst.items()})
    v_mean = float(rng.uniform(120, 350))
    mass_u = float(rng.uniform(3e3, 3e4))
    lam = round(float(rng.uniform(400e-9, 700e-9)) * 1e9) * 1e-9
    phi = float(rng.uniform(0.3, 2.5))
    per_w = lay.scale * float(recoil_velocity(lam, mass_u * AMU)) / v_mean
    w = float(np.clip(phi / per_w, 0.05 * lay.L2, 0.95 * lay.L2))
    pos = lay.z1 + w * (lay.z2 - lay.z1) / lay.L2 if rng.random() < 0.5 else lay.z3 - w
    waist = float(rng.uniform(0.5e-3, 1.5e-3))
    gaussian = effect in ("height", "cw", "cw-power") or rng.random() < 0.3
    kw: dict = {
        "name": "probe",
        "wavelength": lam,
        "position": pos,
        "position_err": float(rng.choice([0.0, 1e-3])),
        "direction": int(rng.choice([-1, 1])),
        "energy_scale_err": float(rng.choice([0.0, 0.01, 0.03])),
    }
    if gaussian:
        kw.update(waist=waist, waist_err=0.01 * waist, beam_offset=0.0, beam_offset_err=0.0)
    else:
        area = float(rng.uniform(0.3e-6, 2e-6))
        kw.update(area=area, area_err=float(rng.uniform(0.0, 0.05)) * area)
    if effect == "height":
        h = float(rng.uniform(0.1, 0.4)) * waist
        kw.update(
            beam_offset=float(rng.uniform(0.0, 0.3)) * waist,
            beam_offset_err=0.02 * waist,
            beam_height_rms=h,
            beam_height_rms_err=0.1 * h,
        )
    elif effect == "hit":
        # true fractions are clipped at 1: stay 3σ below it so the truth is not biased
        kw.update(
            hit_fraction=float(rng.uniform(0.5, 0.85)),
            hit_fraction_err=float(rng.uniform(0.02, 0.05)),
        )
    elif effect in ("cw", "cw-power"):
        kw["mode"] = "cw"
        if effect == "cw-power":
            # a fixed power giving 0.8–2 photons at the mean speed of the first temperature
            sigma = float(rng.uniform(0.2e-16, 5e-16)) * CM2
            n0 = float(rng.uniform(0.8, 2.0))
            p = n0 * float(gaussian_crossing_length(waist)) * float(photon_energy(lam)) * v_mean
            kw.update(power=p / sigma, power_err=0.02 * p / sigma)
    elif effect == "standing":
        kw["illumination"] = "standing"
    temps = (400.0, 500.0, 650.0) if effect == "cw-power" else (500.0,)
    comp = RecoilCompoundTruth(
        name="sample",
        mass_u=mass_u,
        cross_sections_cm2={
            "probe": sigma / CM2 if effect == "cw-power" else float(rng.uniform(0.2e-16, 5e-16))
        },
        mass_err_u=float(rng.choice([0.0, 0.001])) * mass_u,
        temperatures_K=temps,
    )
    rician = effect == "rician"
    max_photons = float(rng.uniform(0.5, 3.0))
    reference = effect == "reference"
    truth = simulate_recoil_campaign(
        out_dir,
        [comp],
        [LaserTruth(**kw)],
        layout="talbot-lau",
        seed=rng,
        velocity_m_s=v_mean,
        velocity_err_frac=float(rng.uniform(0.002, 0.02)),
        spread_frac=float(rng.uniform(0.0, 0.15)),
        n_energies=int(rng.integers(4, 11)),
        max_photons=float(rng.uniform(3.0, 5.0)) if rician else max_photons,
        phase_noise=float(rng.uniform(0.02, 0.08)),
        visibility_noise=float(rng.uniform(0.02, 0.04))
        if rician
        else float(rng.uniform(0.01, 0.03)),
        visibility_noise_model="rician",
        reference_phase_err=float(rng.uniform(0.01, 0.05)) if reference else 0.0,
        reference_visibility_err=float(rng.uniform(0.01, 0.04)) if reference else 0.0,
        min_visibility=0.02 if rician else 0.1,
    )
    return truth
