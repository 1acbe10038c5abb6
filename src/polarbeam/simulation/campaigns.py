"""Campaign simulator: writes campaigns in the input contract with a known truth.

Used for the round-trip tests (simulate → analyse → pulls) and to write the demo data.  Every
stated instrument input is the truth plus a draw from its stated error, so the analysis sees
systematics exactly as a real campaign would: shared by all series of the campaign.

The simulated observable follows the same physics as the analysis: α_eff = α + μ²/(3kT) at the
true source temperature, the true coupling of layout and deflector, and the velocity average over
the true (Gaussian) velocity distribution.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from polarbeam._util.atomic import make_folder, write_text_atomic
from polarbeam.beam.distributions import distribution_from_moments
from polarbeam.beam.response import LangevinDebye, ParticleResponse
from polarbeam.beam.talbot import GratingContrast, TalbotLauInterferometer
from polarbeam.constants import AMU, alpha_si_from_a3, si_from_debye
from polarbeam.contract.campaign import build_layout
from polarbeam.errors import InputError
from polarbeam.extraction.series import observable_model
from polarbeam.instrument.deflectors import (
    FieldMapDeflector,
    SwitchedField,
    TwoWireDeflector,
    UniformDeflector,
    coupling,
)
from polarbeam.simulation import scans as scansim
from polarbeam.simulation.truth import write_truth
from polarbeam.simulation.velocity import stated_table, velocity_csv, velocity_table

#: the default particle response of simulated compounds.
LANGEVIN_DEBYE = LangevinDebye()

__all__ = [
    "LAYOUT_PRESETS",
    "CompoundTruth",
    "DeflectionGratings",
    "InstrumentSpec",
    "SimulationTruth",
    "random_beam_conditions",
    "random_campaign",
    "random_time_domain_campaign",
    "simulate_campaign",
    "simulate_random_campaign",
    "simulate_scan_campaign",
]


@dataclass(frozen=True)
class CompoundTruth:
    """A compound of a simulated campaign."""

    name: str
    mass_u: float
    alpha_A3: float
    dipole_D: float
    temperatures_K: tuple[float, ...]
    smiles: str = ""
    mass_err_u: float = 0.0
    #: rotational temperature in the deflector per source temperature (same order), when it
    #: differs from the source temperature (a supersonic expansion): the true α_eff follows it,
    #: and shifts.csv gets the rotational_temperature_K/_err_K columns
    rotational_temperatures_K: tuple[float, ...] = ()
    #: the compound's own particle response (a rigid rotor of polarbeam.beam.rotors; None: the
    #: campaign's ``response``), followed per voltage when the deflector knows its field
    response: object | None = None
    #: extra compounds.csv cells, e.g. (("rotor", "linear"), ("rot_B_MHz", "2000"))
    columns: tuple[tuple[str, str], ...] = ()


@dataclass(frozen=True)
class InstrumentSpec:
    """Stated instrument: key → (nominal SI value, 1σ error, unit for writing).

    ``waveform`` (time-domain only): knots (t relative to the switch-on, amplitude 0..1) written
    to ``waveform.csv`` in place of a rectangular ``field_duration``.
    """

    layout: str = "talbot-lau"
    model: str = "uniform"
    inputs: dict[str, tuple[float, float, str]] = field(default_factory=dict)
    waveform: tuple[tuple[float, ...], tuple[float, ...]] | None = None

    @staticmethod
    def talbot_lau(model: str = "uniform", rel: float = 0.005) -> InstrumentSpec:
        inp = {
            "instrument.grating_period": (266e-9, 0.0, "nm"),
            "instrument.grating_positions[0]": (0.0, 0.0, "m"),
            "instrument.grating_positions[1]": (0.38, 2e-4, "m"),
            "instrument.grating_positions[2]": (0.76, 2e-4, "m"),
            "deflector.entrance": (0.22, 1e-3, "m"),
            "deflector.length": (0.10, 0.10 * rel, "m"),
        }
        inp.update(_deflector_inputs(model, rel))
        return InstrumentSpec("talbot-lau", model, inp)

    @staticmethod
    def beam_profile(model: str = "uniform", rel: float = 0.005) -> InstrumentSpec:
        inp = {
            "instrument.detector_position": (1.45, 1e-3, "m"),
            "deflector.entrance": (0.30, 1e-3, "m"),
            "deflector.length": (0.15, 0.15 * rel, "m"),
        }
        inp.update(_deflector_inputs(model, rel))
        return InstrumentSpec("beam-profile", model, inp)

    @staticmethod
    def time_domain(
        rel: float = 0.005,
        *,
        period: tuple[float, float] = (80e-9, 0.0),
        pulse_times: tuple[tuple[float, float], ...] = ((0.0, 0.0), (24e-6, 0.0), (48e-6, 0.0)),
        field_factor: float = 2.0e6,
        field_on: tuple[float, float] = (3.0e-6, 0.02e-6),
        field_duration: tuple[float, float] = (40e-6, 0.02e-6),
        waveform: tuple[tuple[float, ...], tuple[float, ...]] | None = None,
    ) -> InstrumentSpec:
        """Pulsed-grating set-up; (value, 1σ error) pairs in SI, defaults as in the contract.

        With ``waveform`` the switching follows it and ``field_duration`` is not written.
        """
        inp = {"instrument.grating_period": (*period, "nm")}
        for i, (t, dt) in enumerate(pulse_times):
            inp[f"instrument.pulse_times[{i}]"] = (t, dt, "us")
        inp["deflector.field_factor"] = (field_factor, field_factor * rel, "m^-3")
        inp["deflector.field_on"] = (*field_on, "us")
        if waveform is None:
            inp["deflector.field_duration"] = (*field_duration, "us")
        return InstrumentSpec("time-domain", "uniform", inp, waveform)


def _deflector_inputs(model: str, rel: float):
    if model == "two-wire":
        a = 2.0e-3
        return {
            "deflector.line_half_spacing": (a, a * rel / 2, "mm"),
            "deflector.convex_crossing": (1.6e-3, 1.6e-3 * rel / 2, "mm"),
            "deflector.concave_crossing": (3.4e-3, 3.4e-3 * rel / 2, "mm"),
            "deflector.beam_height": (2.4e-3, 2.4e-3 * rel / 2, "mm"),
        }
    return {"deflector.field_factor": (1.5e8, 1.5e8 * rel, "m^-3")}


_UNIT_SCALE = {"m": 1.0, "mm": 1e-3, "nm": 1e-9, "us": 1e-6, "m^-3": 1.0, "s": 1.0, "m^-1": 1.0}
_UNIT_SCALE.update({"T^2/(m A^2)": 1.0, "T/A": 1.0})  # magnetic deflectors (simulation/magnetic)


def _fmt_q(value: float, err: float, unit: str) -> str:
    s = _UNIT_SCALE[unit]
    if err > 0:
        return f"{value / s:.10g} ± {err / s:.4g} {unit}"
    return f"{value / s:.10g} {unit}"


@dataclass(frozen=True)
class SimulationTruth:
    """What the simulator put in: true instrument, α, μ and α_eff per series."""

    instrument: dict[str, float]
    compounds: dict[str, CompoundTruth]
    alpha_eff_A3: dict[tuple[str, float], float]  # (compound, stated T) → α_eff at the true T
    path: Path


def _draw_instrument(spec: InstrumentSpec, rng: np.random.Generator):
    """(nominal values, true values drawn from the stated errors, nominal coupling, true coupling):
    the first draws of every simulated campaign."""
    nominal = {k: v for k, (v, e, u) in spec.inputs.items()}
    true = {k: v + e * rng.standard_normal() for k, (v, e, u) in spec.inputs.items()}
    c_nom = coupling(*_setup(spec, nominal))
    c_true = coupling(*_setup(spec, true))
    return nominal, true, c_nom, c_true


def _setup(spec: InstrumentSpec, values: dict[str, float]):
    layout = build_layout(spec.layout, values)
    g = values.get
    if spec.layout == "time-domain":
        d = SwitchedField(
            values["deflector.field_factor"],
            values["deflector.field_on"],
            g("deflector.field_duration"),
            spec.waveform,
            origin=values["instrument.pulse_times[0]"],
        )
    elif spec.model == "uniform":
        d = UniformDeflector(
            values["deflector.field_factor"],
            values["deflector.entrance"],
            values["deflector.length"],
            g("deflector.field_per_volt"),
        )
    elif spec.model == "two-wire":
        d = TwoWireDeflector(
            values["deflector.line_half_spacing"],
            values["deflector.convex_crossing"],
            values["deflector.concave_crossing"],
            g("deflector.beam_height"),
            values["deflector.entrance"],
            values["deflector.length"],
        )
    else:  # pragma: no cover - field maps are written by the tests themselves
        d = FieldMapDeflector((0.0, 1.0), (1.0, 1.0), values["deflector.entrance"])
    return layout, d


@dataclass(frozen=True)
class DeflectionGratings:
    """``[gratings]`` of a simulated Talbot–Lau deflection campaign: the interferometer (its
    stated values are written), the light grating's power in every series (shifts.csv
    ``laser_power_W``) and its model. The compounds' optical α and σ_abs are their
    ``alpha_opt_A3``/``sigma_abs_m2`` columns (:class:`CompoundTruth` ``columns``)."""

    interferometer: TalbotLauInterferometer
    power_W: float = 0.0

    def contrast(self, comp: CompoundTruth, mass: float) -> GratingContrast:
        """The true model of one compound (quantum)."""
        cols = dict(comp.columns)
        alpha = alpha_si_from_a3(float(cols.get("alpha_opt_A3", 0.0) or 0.0))
        sigma = float(cols.get("sigma_abs_m2", 0.0) or 0.0)
        power = self.power_W if self.interferometer.light else 0.0
        return GratingContrast(self.interferometer, mass, power, alpha, sigma)

    def toml(self) -> str:
        tl = self.interferometer
        kinds = ["material", "light" if tl.light else "material", "material"]
        lines = [
            "\n[gratings]",
            *(f'{k} = "{v}"' for k, v in zip(("first", "second", "third"), kinds, strict=True)),
            f'open_fraction = "{tl.first.open_fraction:.10g}"',
        ]
        if tl.light:
            g = tl.second
            lines += [
                f'laser_wavelength = "{g.wavelength * 1e9:.10g} nm"',
                f'laser_waist_vertical = "{g.waist * 1e6:.10g} um"',
                f'power_scale = "{g.power_scale:.10g}"',
                f'absorbed_molecules = "{g.absorbed}"',
            ]
        return "\n".join(lines) + "\n"


def simulate_campaign(
    out_dir: str | Path,
    compounds: list[CompoundTruth],
    *,
    spec: InstrumentSpec | None = None,
    seed: int | np.random.Generator = 0,
    velocity_m_s: float = 180.0,
    velocity_err_frac: float = 0.005,
    spread_frac: float = 0.08,
    n_voltages: int = 9,
    max_signal: float = 3.0,
    noise: float = 0.02,
    temperature_err_K: float = 1.0,
    title: str = "simulated campaign",
    offset_scale: float = 0.1,
    velocity_columns: bool = True,
    response: ParticleResponse = LANGEVIN_DEBYE,
    rotational_err_K: float = 1.0,
    shape: str = "gaussian",
    spread_err_frac: float = 0.0,
    table_shape: str | None = None,
    contrast_slope: float | None = None,
    acceleration: tuple[float, float] | None = None,
    thermal_velocity: bool = False,
    gratings: DeflectionGratings | None = None,
) -> SimulationTruth:
    """Write ``campaign.toml``, ``shifts.csv`` and ``compounds.csv`` into ``out_dir``.

    Parameters
    ----------
    response
        How the true α_eff follows from α, μ and T (default Langevin–Debye).
    max_signal
        The largest observable (rad, or m for a beam profile: then read as metres ×1e-6) the
        voltage ladder should reach for the largest α_eff of each compound.
    noise
        Point error: rad for phases, relative to ``max_signal`` for beam-profile shifts.
    velocity_columns
        Write the velocity columns of ``shifts.csv`` (they may be left out for the time domain).
    rotational_err_K
        Stated (and drawn) error of the rotational temperatures of compounds that give
        ``rotational_temperatures_K``.
    shape, spread_err_frac
        ``[beam] velocity_distribution`` of the beam (the truth and the analysis), and the
        stated relative error of the spread (drawn into the truth, written as
        ``velocity_spread_err_m_s``; 0: no column).
    table_shape, contrast_slope
        Measured tables instead (:func:`polarbeam.simulation.velocity.velocity_table`): each
        series' true distribution has this shape, mean ``velocity_m_s`` and relative spread
        ``spread_frac``; the stated table (``velocities.csv``) is the truth times one draw of
        ``velocity_err_frac`` (a common scale), the velocity and spread cells of shifts.csv are
        left empty. ``contrast_slope`` adds the contrast column c = 1 + k·(v − v̄)/v̄.
    acceleration
        (a, 1σ) in m/s² of ``[instrument] background_acceleration`` (Talbot–Lau): the true a is
        drawn from it.
    thermal_velocity
        Scale the mean velocity of each series as sqrt(T/T_first) (an oven): ``velocity_m_s``
        is then the mean at the compound's first temperature.
    gratings
        Talbot–Lau only: every velocity class carries the interferometer model's fringe
        contrast (``[gratings]`` and shifts.csv ``laser_power_W`` are written; the grating
        geometry is taken as stated, so the spacing must equal the layout's).
    """
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    spec = spec or InstrumentSpec.talbot_lau()
    out = Path(out_dir)
    make_folder(out)
    _, true, c_nom, c_true = _draw_instrument(spec, rng)
    fpv_true = getattr(_setup(spec, true)[1], "field_per_volt", None)
    kind = spec.layout
    kappa_zero = 0.0
    if acceleration is not None:
        lay = build_layout(kind, true)
        a_true = acceleration[0] + acceleration[1] * rng.standard_normal()
        kappa_zero = lay.scale * lay.weight_integral(lay.z1, lay.z3) * a_true
    tables: list = []
    is_profile = kind == "beam-profile"
    signal = max_signal * (1e-6 if is_profile else 1.0)
    err = noise * (signal if is_profile else 1.0)
    rows = []
    truth_eff: dict[tuple[str, float], float] = {}
    for comp in compounds:
        m_true = comp.mass_u * AMU
        m_stated = (comp.mass_u + comp.mass_err_u * rng.standard_normal()) * AMU
        a_si = alpha_si_from_a3(comp.alpha_A3)
        mu_si = si_from_debye(comp.dipole_D)
        rot = dict(zip(comp.temperatures_K, comp.rotational_temperatures_K, strict=False))
        a_max = response.alpha_eff(a_si, mu_si, min(rot.values() or comp.temperatures_K))
        v_nom = velocity_m_s
        inv_v2 = 1.0 if kind == "time-domain" else (1 + 3 * spread_frac**2) / v_nom**2
        vmax = math.sqrt(signal * m_stated / (abs(a_max) * c_nom * inv_v2))  # < 0: diamagnets
        ladder = np.linspace(-vmax, vmax, n_voltages)
        for t_stated in comp.temperatures_K:
            t_true = t_stated + temperature_err_K * rng.standard_normal()
            if t_stated in rot:  # the rotation in the deflector sets the orientational term
                t_true = rot[t_stated] + rotational_err_K * rng.standard_normal()
            resp = comp.response if comp.response is not None else response
            a_eff = resp.alpha_eff(a_si, mu_si, t_true)
            if thermal_velocity:
                v_nom = velocity_m_s * math.sqrt(t_stated / comp.temperatures_K[0])
            v_err = velocity_err_frac * v_nom
            v_true = v_nom + v_err * rng.standard_normal()
            spread = spread_frac * v_nom
            offset = offset_scale * err * rng.standard_normal() * 10
            groups = None
            spread_err = spread_err_frac * spread
            if table_shape is not None:
                true_table = velocity_table(
                    table_shape, v_nom, spread_frac, contrast_slope=contrast_slope
                )
                stated, v_err = stated_table(true_table, velocity_err_frac, rng)
                tables.append((comp.name, t_stated, stated))
                groups = [(np.ones(n_voltages, dtype=bool), true_table)]
            elif shape != "gaussian" or spread_err > 0:
                s_true = spread + spread_err * rng.standard_normal()
                d = distribution_from_moments(shape, v_true, max(s_true, 0.0))
                groups = [(np.ones(n_voltages, dtype=bool), d)]
            if gratings is not None:  # the model's contrast per velocity class (the truth)
                if groups is None:
                    d = distribution_from_moments(shape, v_true, spread)
                    groups = [(np.ones(n_voltages, dtype=bool), d)]
                model_c = gratings.contrast(comp, m_true)
                groups = [(sel, model_c.apply(d)) for sel, d in groups]
            per_volt = [a_eff]
            if comp.response is not None and fpv_true:  # α_eff follows the field: per voltage
                per_volt = [resp.alpha_eff(a_si, mu_si, t_true, fpv_true * abs(V)) for V in ladder]
            one = len(per_volt) == 1
            model = np.concatenate(
                [
                    observable_model(
                        a,
                        ladder if one else ladder[i : i + 1],
                        c_true / m_true,
                        np.full(n_voltages if one else 1, v_true),
                        np.full(n_voltages if one else 1, spread),
                        kind,
                        groups=(
                            groups
                            if groups is None or one
                            else [(np.ones(1, dtype=bool), groups[0][1])]
                        ),
                        kappa_zero=kappa_zero,
                    )[0]
                    for i, a in enumerate(per_volt)
                ]
            )
            y = offset + model + err * rng.standard_normal(n_voltages)
            truth_eff[(comp.name, t_stated)] = a_eff / alpha_si_from_a3(1.0)
            for V, yy in zip(ladder, y, strict=True):
                vcells = (
                    ("", f"{v_err:.6g}", "")
                    if table_shape is not None
                    else (f"{v_nom:.6g}", f"{v_err:.4g}", f"{spread:.4g}")
                )
                if spread_err_frac > 0:
                    vcells = (*vcells[:2], f"{vcells[2]},{spread_err:.4g}")
                rows.append(
                    (comp.name, t_stated, temperature_err_K, vcells, None, None, V, yy, err)
                    + ((rot[t_stated],) if t_stated in rot else ())
                )
    obs = ("shift_m", "shift_err_m") if is_profile else ("phase_rad", "phase_err_rad")
    if not velocity_columns and kind != "time-domain":
        raise ValueError("velocity columns can only be left out for the time-domain layout")
    vcols = "velocity_m_s,velocity_err_m_s,velocity_spread_m_s," if velocity_columns else ""
    if velocity_columns and spread_err_frac > 0:
        vcols += "velocity_spread_err_m_s,"
    head = f"compound,temperature_K,temperature_err_K,{vcols}voltage_V,{obs[0]},{obs[1]}"
    with_rot = any(c.rotational_temperatures_K for c in compounds)
    if with_rot:
        head += ",rotational_temperature_K,rotational_temperature_err_K"
    lines = [head] + [
        f"{r[0]},{r[1]:g},{r[2]:g},"
        + (",".join(r[3]) + "," if velocity_columns else "")
        + f"{r[6]:.6g},{r[7]:.10g},{r[8]:.6g}"
        + ((f",{r[9]:g},{rotational_err_K:g}" if len(r) > 9 else ",,") if with_rot else "")
        for r in rows
    ]
    if gratings is not None:
        power = gratings.power_W if gratings.interferometer.light else 0.0
        lines = [lines[0] + ",laser_power_W"] + [ln + f",{power:.10g}" for ln in lines[1:]]
    write_text_atomic(out / "shifts.csv", "\n".join(lines) + "\n")
    if spec.waveform is not None:
        wl = ["t_s,amplitude"] + [f"{t:.10g},{a:.10g}" for t, a in zip(*spec.waveform, strict=True)]
        write_text_atomic(out / "waveform.csv", "\n".join(wl) + "\n")
    chead = "compound,mass_u,mass_err_u,smiles"
    extra_cols = list(dict.fromkeys(k for c in compounds for k, _ in c.columns))
    chead += "".join(f",{k}" for k in extra_cols)
    clines = [chead] + [
        f"{c.name},{c.mass_u:.6g},{c.mass_err_u:g},{c.smiles}"
        + "".join(f',"{dict(c.columns).get(k, "")}"' for k in extra_cols)
        for c in compounds
    ]
    write_text_atomic(out / "compounds.csv", "\n".join(clines) + "\n")
    toml = _toml(spec, title)
    if tables:
        write_text_atomic(out / "velocities.csv", velocity_csv(tables))
        toml += 'velocities = "velocities.csv"\n'
    if shape != "gaussian":
        toml += f'\n[beam]\nvelocity_distribution = "{shape}"\n'
    if acceleration is not None:
        q = f'background_acceleration = "{acceleration[0]:.10g} ± {acceleration[1]:.4g} m/s^2"'
        toml = toml.replace("\n\n[deflector]", f"\n{q}\n\n[deflector]", 1)
    if gratings is not None:
        toml += gratings.toml()
    write_text_atomic(out / "campaign.toml", toml)
    return SimulationTruth(true, {c.name: c for c in compounds}, truth_eff, out)


def _toml(spec: InstrumentSpec, title: str) -> str:
    inst = [f'layout = "{spec.layout}"']
    defl = [f'model = "{spec.model}"']
    lists: dict[str, list[str]] = {}
    for key, (v, e, u) in spec.inputs.items():
        table, _, name = key.partition(".")
        q = _fmt_q(v, e, u)
        if "[" in name:
            base = name.split("[")[0]
            lists.setdefault(base, []).append(f'"{q}"')
            continue
        (inst if table == "instrument" else defl).append(f'{name} = "{q}"')
    for base, items in lists.items():
        inst.append(f"{base} = [{', '.join(items)}]")
    if spec.waveform is not None:
        defl.append('waveform = "waveform.csv"')
    return (
        f'[campaign]\ntitle = "{title}"\n\n[instrument]\n'
        + "\n".join(inst)
        + "\n\n[deflector]\n"
        + "\n".join(defl)
        + '\n\n[data]\nshifts = "shifts.csv"\ncompounds = "compounds.csv"\n'
    )


def random_campaign(
    out_dir: str | Path,
    rng: np.random.Generator,
    *,
    dipole_range_D: tuple[float, float] = (0.0, 4.0),
    n_temperatures: tuple[int, int] = (1, 4),
) -> SimulationTruth:
    """One randomised campaign for round-trip tests: both layouts, spreads up to 15 %,
    dipoles 0–4 D, 1–4 temperatures, all systematics drawn from their stated errors."""
    layout = rng.choice(["talbot-lau", "beam-profile"])
    model = rng.choice(["uniform", "two-wire"])
    rel = float(rng.uniform(0.002, 0.02))
    spec = (
        InstrumentSpec.talbot_lau(model, rel)
        if layout == "talbot-lau"
        else InstrumentSpec.beam_profile(model, rel)
    )
    n_t = int(rng.integers(n_temperatures[0], n_temperatures[1] + 1))
    temps = tuple(float(t) for t in np.sort(rng.choice(np.arange(300, 801, 50), n_t, False)))
    comp = CompoundTruth(
        name="sample",
        mass_u=float(rng.uniform(60, 900)),
        alpha_A3=float(rng.uniform(5, 150)),
        dipole_D=float(rng.uniform(*dipole_range_D)),
        temperatures_K=temps,
        mass_err_u=float(rng.choice([0.0, 0.05])),
    )
    return simulate_campaign(out_dir, [comp], spec=spec, seed=rng, **random_beam_conditions(rng))


def random_beam_conditions(rng: np.random.Generator) -> dict:
    """Randomised beam and acquisition keywords of :func:`simulate_campaign` for round trips:
    velocities 100–400 m/s known to 0.2–2 %, spreads up to 15 %, 5–12 voltages, signals of 1–4
    (rad or µm), point errors 1–5 %, temperature errors up to 3 K (drawn in this order)."""
    return {
        "velocity_m_s": float(rng.uniform(100, 400)),
        "velocity_err_frac": float(rng.uniform(0.002, 0.02)),
        "spread_frac": float(rng.uniform(0, 0.15)),
        "n_voltages": int(rng.integers(5, 13)),
        "max_signal": float(rng.uniform(1, 4)),
        "noise": float(rng.uniform(0.01, 0.05)),
        "temperature_err_K": float(rng.uniform(0, 3)),
    }


def random_time_domain_campaign(
    out_dir: str | Path,
    rng: np.random.Generator,
    *,
    dipole_range_D: tuple[float, float] = (0.0, 4.0),
    n_temperatures: tuple[int, int] = (1, 4),
) -> SimulationTruth:
    """One randomised time-domain campaign for round-trip tests.

    Randomised: pulse sequence (t1 = 0 or later, T1 ≠ T2 allowed), switch-on time and length
    anywhere over the sequence (partly outside it too) with their jitter, rectangular or ramped
    waveform switching, field-factor, period and mass errors, dipoles 0–4 D, 1–4 temperatures,
    velocity columns present or absent.  Every stated error is drawn into the truth.
    """
    us = 1e-6
    t1 = float(rng.choice([0.0, rng.uniform(1.0, 30.0)])) * us
    big_t1 = float(rng.uniform(10.0, 60.0)) * us
    big_t2 = big_t1 * (1.0 if rng.random() < 0.5 else float(rng.uniform(0.8, 1.25)))
    total = big_t1 + big_t2
    jitter = [float(rng.uniform(0.0, 0.005)) * us for _ in range(3)]
    start = float(rng.uniform(-0.1, 0.6)) * total
    dur = float(rng.uniform(0.15, 1.0)) * total
    if start + dur < 0.1 * total:  # keep a usable overlap with the pulse sequence
        dur = 0.1 * total - start
    waveform = None
    if rng.random() < 0.3:  # ramped switching: rise, flat top (with a sag), fall
        rise = float(rng.uniform(0.02, 0.2)) * dur
        sag = float(rng.uniform(0.85, 1.0))
        waveform = ((0.0, rise, 0.5 * dur, dur - rise, dur), (0.0, 1.0, sag, 1.0, 0.0))
    rel = float(rng.uniform(0.002, 0.02))
    spec = InstrumentSpec.time_domain(
        rel,
        period=(float(rng.uniform(50, 300)) * 1e-9, float(rng.choice([0.0, 1e-11]))),
        pulse_times=((t1, jitter[0]), (t1 + big_t1, jitter[1]), (t1 + total, jitter[2])),
        field_factor=float(10 ** rng.uniform(5, 7)),
        field_on=(start, float(rng.uniform(0.005, 0.2)) * us),
        field_duration=(dur, float(rng.uniform(0.005, 0.2)) * us),
        waveform=waveform,
    )
    n_t = int(rng.integers(n_temperatures[0], n_temperatures[1] + 1))
    temps = tuple(float(t) for t in np.sort(rng.choice(np.arange(300, 801, 50), n_t, False)))
    comp = CompoundTruth(
        name="sample",
        mass_u=float(rng.uniform(60, 900)),
        alpha_A3=float(rng.uniform(5, 150)),
        dipole_D=float(rng.uniform(*dipole_range_D)),
        temperatures_K=temps,
        mass_err_u=float(rng.choice([0.0, 0.05, 0.5])),
    )
    return simulate_campaign(
        out_dir,
        [comp],
        spec=spec,
        seed=rng,
        n_voltages=int(rng.integers(5, 13)),
        max_signal=float(rng.uniform(1, 4)),
        noise=float(rng.uniform(0.01, 0.05)),
        temperature_err_K=float(rng.uniform(0, 3)),
        velocity_columns=bool(rng.random() < 0.5),
    )


def simulate_scan_campaign(
    out_dir: str | Path,
    compounds: list[CompoundTruth],
    *,
    spec: InstrumentSpec | None = None,
    seed: int | np.random.Generator = 0,
    velocity_m_s: float = 180.0,
    velocity_err_frac: float = 0.005,
    spread_frac: float = 0.08,
    n_voltages: int = 6,
    scans_per_voltage: int = 2,
    max_signal: float = 3.0,
    signal_per_bin: float = 150.0,
    dark_per_bin: float = 2.0,
    bins: int = 40,
    temperature_err_K: float = 1.0,
    drift_rad_s: float = 2.0e-4,
    random_walk_rad2_s: float = 2.0e-5,
    title: str = "simulated raw-scan campaign",
    parquet: bool = False,
    response: ParticleResponse = LANGEVIN_DEBYE,
    rotational_err_K: float = 1.0,
    table_shape: str | None = None,
    contrast_slope: float | None = None,
) -> SimulationTruth:
    """Like :func:`simulate_campaign` but writes raw fringe scans (``[data] scans``).

    The signal scans' visibility follows the velocity average's phasor modulus |Z(κ)|/|Z(0)|.
    With ``table_shape`` (and ``contrast_slope``) each series' beam is a measured table as in
    :func:`simulate_campaign` (``velocities.csv``; the scans' velocity cells hold the stated
    table's mean and rms spread).

    Compounds that give ``rotational_temperatures_K`` have their orientational term set by the
    rotational temperature (drawn with ``rotational_err_K``), and the scan table gets the
    ``rotational_temperature_K``/``_err_K`` columns (blank for the other compounds).

    Each series is a sequence of grating scans (Poisson counts with dark counts, visibility drawn
    in 10–40 %, linear drift plus a random walk of the interferometer phase) with zero-voltage
    references interleaved; the true phase of each signal scan follows the same physics as the
    analysis (velocity-averaged phasor at the true instrument and velocity).
    """
    import pandas as pd

    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    spec = spec or InstrumentSpec.talbot_lau()
    if spec.layout == "beam-profile":
        raise ValueError("raw fringe scans need a fringe layout")
    out = Path(out_dir)
    make_folder(out)
    nominal, true, c_nom, c_true = _draw_instrument(spec, rng)
    period_true = true.get("instrument.grating_period", nominal["instrument.grating_period"])
    kind = spec.layout
    tables = []
    tables_out: list = []
    truth_eff: dict[tuple[str, float], float] = {}
    first_scan, t0 = 0, 0.0
    for comp in compounds:
        m_true = comp.mass_u * AMU
        a_si = alpha_si_from_a3(comp.alpha_A3)
        mu_si = si_from_debye(comp.dipole_D)
        rot = dict(zip(comp.temperatures_K, comp.rotational_temperatures_K, strict=False))
        a_max = response.alpha_eff(a_si, mu_si, min(rot.values() or comp.temperatures_K))
        inv_v2 = 1.0 if kind == "time-domain" else (1 + 3 * spread_frac**2) / velocity_m_s**2
        vmax = math.sqrt(max_signal * m_true / (a_max * c_nom * inv_v2))
        ladder = np.linspace(vmax / n_voltages, vmax, n_voltages)
        for t_stated in comp.temperatures_K:
            t_true = t_stated + temperature_err_K * rng.standard_normal()
            if t_stated in rot:  # the rotation in the deflector sets the orientational term
                t_true = rot[t_stated] + rotational_err_K * rng.standard_normal()
            a_eff = response.alpha_eff(a_si, mu_si, t_true)
            v_err = velocity_err_frac * velocity_m_s
            v_true = velocity_m_s + v_err * rng.standard_normal()
            volts = np.repeat(ladder, scans_per_voltage)
            volts = volts * rng.choice([-1.0, 1.0], size=volts.size)
            rng.shuffle(volts)
            groups = None
            v_cell, s_cell = velocity_m_s, spread_frac * velocity_m_s
            if table_shape is not None:
                true_table = velocity_table(
                    table_shape, velocity_m_s, spread_frac, contrast_slope=contrast_slope
                )
                stated, v_err = stated_table(true_table, velocity_err_frac, rng)
                tables_out.append((comp.name, t_stated, stated))
                groups = [(np.ones(volts.size, dtype=bool), true_table)]
                v_cell, s_cell = stated.mean, stated.spread
            phases, modulus = observable_model(
                a_eff,
                volts,
                c_true / m_true,
                np.full(volts.size, v_true),
                np.full(volts.size, spread_frac * velocity_m_s),
                kind,
                groups=groups,
            )
            factors = modulus  # the signal scans lose visibility as the phasor modulus
            truth_eff[(comp.name, t_stated)] = a_eff / alpha_si_from_a3(1.0)
            sim = scansim.simulate_series(
                phases,
                volts,
                compound=comp.name,
                temperature_K=t_stated,
                temperature_err_K=temperature_err_K,
                velocity_m_s=v_cell,
                velocity_err_m_s=v_err,
                velocity_spread_m_s=s_cell,
                period_m=period_true,
                bins=bins,
                signal_per_bin=signal_per_bin,
                dark_per_bin=dark_per_bin,
                drift_rad_s=drift_rad_s,
                random_walk_rad2_s=random_walk_rad2_s,
                start_time_s=t0,
                first_scan=first_scan,
                rng=rng,
                contrast_factors=factors,
            )
            if t_stated in rot:
                sim.table["rotational_temperature_K"] = rot[t_stated]
                sim.table["rotational_temperature_err_K"] = rotational_err_K
            tables.append(sim.table)
            first_scan = int(sim.table["scan"].max()) + 1
            t0 = float(sim.table["time_s"].max()) + 600.0
    df = pd.concat(tables, ignore_index=True)
    name = "scans.parquet" if parquet else "scans.csv"
    if parquet:
        df.to_parquet(out / name, index=False)
    else:
        write_text_atomic(
            out / name, df.to_csv(index=False, float_format="%.10g", lineterminator="\n")
        )
    clines = ["compound,mass_u,mass_err_u,smiles"] + [
        f"{c.name},{c.mass_u:.6g},{c.mass_err_u:g},{c.smiles}" for c in compounds
    ]
    write_text_atomic(out / "compounds.csv", "\n".join(clines) + "\n")
    toml = _toml(spec, title).replace('shifts = "shifts.csv"', f'scans = "{name}"')
    if tables_out:
        write_text_atomic(out / "velocities.csv", velocity_csv(tables_out))
        toml += 'velocities = "velocities.csv"\n'
    write_text_atomic(out / "campaign.toml", toml)
    return SimulationTruth(true, {c.name: c for c in compounds}, truth_eff, out)


#: Instrument presets of :func:`simulate_random_campaign`, by layout.
LAYOUT_PRESETS = {
    "talbot-lau": InstrumentSpec.talbot_lau,
    "beam-profile": InstrumentSpec.beam_profile,
    "time-domain": InstrumentSpec.time_domain,
}


def simulate_random_campaign(
    out_dir: str | Path, seed: int = 0, layout: str = "talbot-lau"
) -> tuple[SimulationTruth, CompoundTruth]:
    """One random compound (α 10–80 Å³, μ 0–3 D, 80–600 u) at 300–600 K in a preset instrument:
    the campaign ``polarbeam simulate`` writes, with its ``truth.json`` beside ``campaign.toml``
    (:mod:`polarbeam.simulation.truth`). Returns the truth and the compound."""
    if layout not in LAYOUT_PRESETS:
        raise InputError(f"--layout: expected one of {', '.join(LAYOUT_PRESETS)}, found {layout!r}")
    rng = np.random.default_rng(seed)
    comp = CompoundTruth(
        "sample-1",
        float(rng.uniform(80, 600)),
        float(rng.uniform(10, 80)),
        float(rng.uniform(0, 3)),
        (300.0, 400.0, 500.0, 600.0),
    )
    truth = simulate_campaign(out_dir, [comp], spec=LAYOUT_PRESETS[layout](), seed=rng)
    write_truth(truth, written_by="polarbeam simulate", seed=seed, layout=layout)
    return truth, comp
