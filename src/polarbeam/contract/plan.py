"""The ``[plan]`` table of a planning campaign, the planning compounds file and their loading."""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, replace
from pathlib import Path
from typing import Any, Literal

from polarbeam._util.tables import CELL_BLANKS, read_table
from polarbeam.constants import AMU
from polarbeam.contract import campaign as cm
from polarbeam.contract.visibility import VISIBILITY_PLAN_KEYS, load_visibility_plan
from polarbeam.errors import CompoundError, InputError
from polarbeam.quantities import Measured, parse_quantity

__all__ = ["CRITERIA", "PLAN_KEYS", "Criterion", "PlanCompound", "PlanSettings", "load_plan"]

Criterion = Literal["determinant", "alpha", "dipole"]
CRITERIA = ("determinant", "alpha", "dipole")

PLAN_KEYS: dict[str, str | None] = {
    "temperatures_K": None,
    "temperature_range_K": None,
    "n_temperatures": None,
    "temperature_err": "K",
    "velocity": "m/s",
    "velocity_spread": "m/s",
    "velocity_temperature_K": None,
    "visibility": None,
    "count_rate": "1/s",
    "counts_per_bin": None,
    "phase_noise": "rad",
    "dark_rate": "1/s",
    "bins": None,
    "scan_time": "s",
    "scan_dead_time": "s",
    "reference_every": None,
    "scans_per_voltage": None,
    "n_voltages": None,
    "ladder": None,
    "voltage_limit": "V",
    "phase_limit": "rad",
    "visibility_floor": None,
    "phase_drift": "rad/s",
    "phase_diffusion": "rad^2/s",
    "target_alpha_rel": None,
    "target_dipole_D": None,
    "temperature_criterion": None,
    "design_margin": None,
    "rehearsal": None,
    "seed": None,
    **VISIBILITY_PLAN_KEYS,  # light-grating power ladders (contract.visibility)
}


@dataclass(frozen=True)
class PlanSettings:
    """The ``[plan]`` table in SI (see docs/planning.md for every key).

    Per-temperature values (``velocity``, ``velocity_spread``, ``count_rate``) are tuples with
    one entry, or one entry per planned temperature when ``temperatures_K`` is given.
    """

    temperatures_K: tuple[float, ...] | None
    temperature_range_K: tuple[float, float] | None
    n_temperatures: int
    temperature_err_K: float
    velocity: tuple[Measured, ...]
    velocity_spread: tuple[float, ...]
    velocity_temperature_K: float | None
    visibility: float
    count_rate: tuple[float, ...] | None  # signal counts per second at zero field
    counts_per_bin: float | None
    phase_noise: float | None  # rad per scan at zero field
    dark_rate: float
    bins: int
    scan_time: float
    scan_dead_time: float
    reference_every: int
    scans_per_voltage: int
    n_voltages: int
    ladder: str | tuple[float, ...]
    voltage_limit: float | None
    phase_limit: float
    visibility_floor: float
    phase_drift: float
    phase_diffusion: float
    target_alpha_rel: float | None
    target_dipole_D: float | None
    temperature_criterion: str
    design_margin: float
    rehearsal: bool
    seed: int

    def per_temperature(self, name: str, index: int):
        vals = getattr(self, name)
        return vals[index if len(vals) > 1 else 0]

    def signal_counts(self, index: int) -> float:
        """Mean signal counts of one scan at zero field (all bins)."""
        if self.counts_per_bin is not None:
            return self.counts_per_bin * self.bins
        if self.count_rate is not None:
            return self.per_temperature("count_rate", index) * self.scan_time
        # phase noise given: the counts that give it at the stated visibility
        return 1.0 / (self.phase_noise**2 * (1.0 - math.sqrt(1.0 - self.visibility**2)))

    def summary(self) -> dict[str, Any]:
        out = asdict(self)
        out["velocity"] = [{"value": m.value, "error": m.error} for m in self.velocity]
        return out


def _plan_error(fname: str, key: str, expected: str, found) -> InputError:
    return InputError(f"{fname} [plan] {key}: expected {expected}, found {found!r}")


# Readers of single keys -----------------------------------------------------------------------


def _quantity(
    table: dict, fname: str, key: str, default=None, *, positive=False, nonneg=False
) -> Measured | None:
    if key not in table:
        return default
    m = parse_quantity(table[key], PLAN_KEYS[key] or "", where=f"{fname} [plan] {key}")
    if positive and not m.value > 0:
        raise _plan_error(fname, key, "a value > 0", table[key])
    if nonneg and m.value < 0:
        raise _plan_error(fname, key, "a value >= 0", table[key])
    return m


def _number(
    table: dict,
    fname: str,
    key: str,
    default=None,
    *,
    lo=None,
    hi=None,
    integer=False,
    open_lo=False,
):
    if key not in table:
        return default
    v = table[key]
    ok = isinstance(v, int | float) and not isinstance(v, bool)
    if integer:
        ok = isinstance(v, int) and not isinstance(v, bool)
    if ok and not math.isfinite(v):
        ok = False
    if ok and lo is not None and (v < lo or (open_lo and v == lo)):
        ok = False
    if ok and hi is not None and v > hi:
        ok = False
    if not ok:
        kind = "an integer" if integer else "a number"
        rng = ""
        if lo is not None and hi is not None:
            rng = f" in {'(' if open_lo else '['}{lo:g}, {hi:g}]"
        elif lo is not None:
            rng = f" {'>' if open_lo else '>='} {lo:g}"
        raise _plan_error(fname, key, kind + rng, v)
    return int(v) if integer else float(v)


def _require(table: dict, fname: str, key: str, hint: str = "") -> None:
    if key not in table:
        raise InputError(f"{fname} [plan] {key}: required key missing{hint}")


def _per_temperature(
    table: dict,
    fname: str,
    key: str,
    temps: tuple[float, ...] | None,
    default=None,
    *,
    positive=False,
    nonneg=False,
) -> tuple[Measured, ...] | None:
    if key not in table:
        return None if default is None else (default,)
    raw = table[key]
    if isinstance(raw, list):
        if temps is None:
            raise InputError(
                f"{fname} [plan] {key}: a list (one value per temperature) needs "
                "temperatures_K; with temperature_range_K give one value"
            )
        if len(raw) != len(temps):
            raise InputError(
                f"{fname} [plan] {key}: expected {len(temps)} values (one per temperature of "
                f"temperatures_K), found {len(raw)}"
            )
        items = raw
    else:
        items = [raw]
    out = []
    for item in items:
        m = parse_quantity(item, PLAN_KEYS[key] or "", where=f"{fname} [plan] {key}")
        if positive and not m.value > 0:
            raise _plan_error(fname, key, "values > 0", raw)
        if nonneg and m.value < 0:
            raise _plan_error(fname, key, "values >= 0", raw)
        out.append(m)
    return tuple(out)


# Groups of keys, in the order they are checked ------------------------------------------------


def _check_unknown_keys(table: dict, fname: str) -> None:
    unknown = [k for k in table if k not in PLAN_KEYS]
    if unknown:
        raise InputError(
            f"{fname}: unknown key(s) in [plan]: {', '.join(repr(k) for k in unknown)}; "
            f"expected one of {', '.join(PLAN_KEYS)}"
        )


def _is_temperature_list(raw) -> bool:
    return isinstance(raw, list) and all(
        isinstance(t, int | float) and not isinstance(t, bool) and t > 0 for t in raw
    )


def _temperatures(
    table: dict, fname: str
) -> tuple[tuple[float, ...] | None, tuple[float, float] | None, int]:
    """``temperatures_K`` or ``temperature_range_K`` (exactly one), and ``n_temperatures``."""
    temps = rng_t = None
    if "temperatures_K" in table and "temperature_range_K" in table:
        raise InputError(
            f"{fname} [plan] temperatures_K, temperature_range_K: expected one of them, found both"
        )
    if "temperatures_K" in table:
        raw = table["temperatures_K"]
        if not (_is_temperature_list(raw) and raw):
            raise _plan_error(fname, "temperatures_K", "a list of temperatures > 0 (K)", raw)
        temps = tuple(sorted(float(t) for t in raw))
        if len(set(temps)) != len(temps):
            raise _plan_error(fname, "temperatures_K", "distinct temperatures", raw)
        if "n_temperatures" in table and table["n_temperatures"] != len(temps):
            raise InputError(
                f"{fname} [plan] n_temperatures: expected {len(temps)} (the length of "
                f"temperatures_K) or nothing, found {table['n_temperatures']!r}"
            )
    elif "temperature_range_K" in table:
        raw = table["temperature_range_K"]
        if not (_is_temperature_list(raw) and len(raw) == 2 and raw[0] < raw[1]):
            raise _plan_error(
                fname, "temperature_range_K", "[lowest, highest] in K, lowest first", raw
            )
        rng_t = (float(raw[0]), float(raw[1]))
    else:
        raise InputError(
            f"{fname} [plan] temperatures_K: required key missing (or temperature_range_K with "
            "n_temperatures)"
        )
    n_t = _number(
        table, fname, "n_temperatures", len(temps) if temps else 3, lo=1, hi=8, integer=True
    )
    return temps, rng_t, n_t


def _velocity_distribution(
    table: dict, fname: str, layout: str, temps: tuple[float, ...] | None
) -> tuple[tuple[Measured, ...], tuple[Measured, ...]]:
    """``velocity`` and ``velocity_spread`` (required unless the layout is time-domain)."""
    if layout != "time-domain":
        _require(table, fname, "velocity", ' (mean detected velocity, e.g. "210 ± 1.3 m/s")')
        _require(
            table,
            fname,
            "velocity_spread",
            ' (1σ of the velocity distribution; "0 m/s" if monochromatic)',
        )
    vel = _per_temperature(table, fname, "velocity", temps, Measured(1.0, 0.0), positive=True)
    spread = _per_temperature(
        table, fname, "velocity_spread", temps, Measured(0.0, 0.0), nonneg=True
    )
    return vel, spread


def _signal(table: dict, fname: str, temps: tuple[float, ...] | None):
    """``visibility``, ``scan_time`` and one of ``count_rate``, ``counts_per_bin``,
    ``phase_noise`` (with ``dark_rate`` only beside the first two)."""
    _require(table, fname, "visibility", " (zero-field fringe visibility, 0 < V <= 1)")
    vis = _number(table, fname, "visibility", lo=0.0, hi=1.0, open_lo=True)
    _require(table, fname, "scan_time", ' (duration of one grating scan, e.g. "20 s")')
    scan_time = _quantity(table, fname, "scan_time", positive=True).value
    given = [k for k in ("count_rate", "counts_per_bin", "phase_noise") if k in table]
    if len(given) != 1:
        raise InputError(
            f"{fname} [plan] count_rate: expected exactly one of count_rate, counts_per_bin, "
            f"phase_noise, found {', '.join(given) if given else 'none'}"
        )
    rate = _per_temperature(table, fname, "count_rate", temps, positive=True)
    cpb = _number(table, fname, "counts_per_bin", lo=0.0, open_lo=True)
    noise = _quantity(table, fname, "phase_noise", positive=True)
    if noise is not None and "dark_rate" in table:
        raise InputError(
            f"{fname} [plan] dark_rate: give it with count_rate or counts_per_bin; phase_noise "
            "already includes the dark counts"
        )
    return vis, scan_time, rate, cpb, noise


def _visibility_floor(table: dict, fname: str, vis: float) -> float:
    vfloor = _number(table, fname, "visibility_floor", 0.3 * vis, lo=0.0)
    if vfloor >= vis:
        raise _plan_error(fname, "visibility_floor", f"a value below visibility ({vis:g})", vfloor)
    return vfloor


def _ladder(table: dict, fname: str) -> str | tuple[float, ...]:
    """``ladder``: 'optimal', 'even' or the stated voltages (sorted |V|)."""
    ladder = table.get("ladder", "optimal")
    if isinstance(ladder, list):
        if not (
            len(ladder) >= 2
            and all(
                isinstance(v, int | float) and not isinstance(v, bool) and v != 0 for v in ladder
            )
            and len({abs(float(v)) for v in ladder}) == len(ladder)
        ):
            raise _plan_error(
                fname, "ladder", "'optimal', 'even' or a list of >= 2 distinct non-zero |V|", ladder
            )
        ladder = tuple(sorted(abs(float(v)) for v in ladder))
    elif ladder not in ("optimal", "even"):
        raise _plan_error(fname, "ladder", "'optimal', 'even' or a list of voltages (V)", ladder)
    return ladder


def _choices(table: dict, fname: str) -> tuple[str, bool]:
    """``temperature_criterion`` and ``rehearsal``."""
    crit = table.get("temperature_criterion", "determinant")
    if crit not in CRITERIA:
        raise _plan_error(fname, "temperature_criterion", "one of " + ", ".join(CRITERIA), crit)
    rehearsal = table.get("rehearsal", True)
    if not isinstance(rehearsal, bool):
        raise _plan_error(fname, "rehearsal", "true or false", rehearsal)
    return crit, rehearsal


def _voltages(table: dict, fname: str, ladder) -> tuple[int, float | None]:
    """``n_voltages`` (the stated ladder's length wins) and ``voltage_limit``."""
    n_volt = _number(table, fname, "n_voltages", 6, lo=2, hi=40, integer=True)
    if isinstance(ladder, tuple):
        n_volt = len(ladder)
    vlim = _quantity(table, fname, "voltage_limit", positive=True)
    return n_volt, None if vlim is None else vlim.value


def _acquisition(table: dict, fname: str) -> dict[str, Any]:
    """Temperature error, dark counts, bins and the acquisition order."""

    def q(key, default):
        return _quantity(table, fname, key, Measured(default), nonneg=True).value

    return {
        "temperature_err_K": q("temperature_err", 0.0),
        "dark_rate": q("dark_rate", 0.0),
        "bins": _number(table, fname, "bins", 40, lo=4, hi=100000, integer=True),
        "scan_dead_time": q("scan_dead_time", 0.0),
        "reference_every": _number(table, fname, "reference_every", 2, lo=1, hi=1000, integer=True),
        "scans_per_voltage": _number(
            table, fname, "scans_per_voltage", 2, lo=1, hi=10000, integer=True
        ),
    }


def _limits_and_targets(table: dict, fname: str) -> dict[str, Any]:
    """Phase limit, drift and diffusion, precision targets, design margin and seed."""
    return {
        "phase_limit": _quantity(table, fname, "phase_limit", Measured(3.0), positive=True).value,
        "phase_drift": _quantity(table, fname, "phase_drift", Measured(0.0)).value,
        "phase_diffusion": _quantity(
            table, fname, "phase_diffusion", Measured(0.0), nonneg=True
        ).value,
        "target_alpha_rel": _number(table, fname, "target_alpha_rel", lo=0.0, open_lo=True),
        "target_dipole_D": _number(table, fname, "target_dipole_D", lo=0.0, open_lo=True),
        "design_margin": _number(table, fname, "design_margin", 0.0, lo=0.0),
        "seed": _number(table, fname, "seed", 0, lo=0, integer=True),
    }


def _parse_settings(table: dict, fname: str, layout: str) -> PlanSettings:
    """The ``[plan]`` table of ``fname`` as :class:`PlanSettings` (one-line InputError if bad)."""
    _check_unknown_keys(table, fname)
    temps, rng_t, n_t = _temperatures(table, fname)
    vel, spread = _velocity_distribution(table, fname, layout, temps)
    vis, scan_time, rate, cpb, noise = _signal(table, fname, temps)
    vfloor = _visibility_floor(table, fname, vis)
    ladder = _ladder(table, fname)
    crit, rehearsal = _choices(table, fname)
    vt = _number(table, fname, "velocity_temperature_K", lo=0.0, open_lo=True)
    n_volt, vlim = _voltages(table, fname, ladder)
    acquisition = _acquisition(table, fname)
    limits = _limits_and_targets(table, fname)
    return PlanSettings(
        temperatures_K=temps,
        temperature_range_K=rng_t,
        n_temperatures=n_t,
        velocity=vel,
        velocity_spread=tuple(m.value for m in spread),
        velocity_temperature_K=vt,
        visibility=vis,
        count_rate=None if rate is None else tuple(m.value for m in rate),
        counts_per_bin=cpb,
        phase_noise=None if noise is None else noise.value,
        scan_time=scan_time,
        n_voltages=n_volt,
        ladder=ladder,
        voltage_limit=vlim,
        visibility_floor=vfloor,
        temperature_criterion=crit,
        rehearsal=rehearsal,
        **acquisition,
        **limits,
    )


@dataclass(frozen=True)
class PlanCompound:
    """One row of the planning compounds file: mass and where its α, μ come from."""

    name: str
    mass: Measured | None
    smiles: str | None
    alpha_A3: Measured | None
    dipole_D: Measured | None
    line: int
    problem: str | None = None


def _read_plan_compounds(path: Path) -> list[PlanCompound]:
    table = read_table(path, ("compound",), "compounds")
    out: list[PlanCompound] = []
    seen: set[str] = set()
    for i, row in enumerate(table.rows):
        name = row.get("compound", "").strip(CELL_BLANKS)
        line = table.lines[i]
        try:
            if "__bad__" in row:
                raise CompoundError(f"{table.name} line {line}: {row['__bad__']}")
            if not name:
                raise CompoundError(f"{table.name} line {line}: empty compound name")
            if name in seen:
                raise CompoundError(f"{table.name} line {line}: compound {name!r} listed twice")
            seen.add(name)
            mass = None
            if row.get("mass_u", "").strip():
                m = table.number(i, "mass_u", positive=True)
                dm = table.number(i, "mass_err_u", nonnegative=True, default=0.0)
                mass = Measured(m * AMU, dm * AMU)
            alpha = dip = None
            if row.get("alpha_A3", "").strip():
                alpha = Measured(
                    table.number(i, "alpha_A3", positive=True),
                    table.number(i, "alpha_err_A3", nonnegative=True, default=0.0),
                )
            if row.get("dipole_D", "").strip():
                dip = Measured(
                    table.number(i, "dipole_D", nonnegative=True),
                    table.number(i, "dipole_err_D", nonnegative=True, default=0.0),
                )
            smiles = row.get("smiles", "").strip() or None
            out.append(PlanCompound(name, mass, smiles, alpha, dip, line))
        except CompoundError as exc:
            out.append(PlanCompound(name or f"line {line}", None, None, None, None, line, str(exc)))
    if not out:
        raise InputError(f"{path.name}: expected at least one compound row, found none")
    return out


def load_plan(path: str | Path):
    """Read a planning campaign: ``(Campaign without data, PlanSettings, compounds)``.

    Raises
    ------
    InputError
        Structural problems, missing or bad ``[plan]`` keys (one line naming file and key).
    """
    path = Path(path)
    fname = path.name
    doc = cm.read_toml(path)
    if "plan" not in doc:
        raise InputError(
            f"{fname} [plan]: required table missing (a planning campaign describes the planned "
            "temperatures, velocity, count rate and visibility there)"
        )
    plan_table = doc.pop("plan")
    if not isinstance(plan_table, dict):
        raise InputError(f"{fname}: [plan] expected a table, found {type(plan_table).__name__}")
    cm.check_keys(doc, fname)
    data = doc.get("data", {})
    for key in ("shifts", "scans"):
        if key in data:
            raise InputError(
                f"{fname} [data] {key}: a planning campaign has no measurements yet; remove it "
                "(the rehearsal writes its own scans)"
            )
    inst, defl = doc.get("instrument", {}), doc.get("deflector", {})
    layout = cm.require_str(inst, "layout", f"{fname} [instrument]", cm.LAYOUTS)
    model = cm.require_str(defl, "model", f"{fname} [deflector]", cm.DEFLECTOR_MODELS)
    if layout == "beam-profile":
        raise InputError(
            f"{fname} [instrument] layout: planning needs a fringe layout (talbot-lau or "
            "time-domain), found 'beam-profile'"
        )
    title = doc.get("campaign", {}).get("title", path.stem)
    if not isinstance(title, str):
        raise InputError(f"{fname} [campaign] title: expected a string, found {title!r}")
    stated = cm.stated_inputs(doc, fname, layout, model)
    settings = cm.analysis_settings(doc, fname)
    base = path.parent
    field_map, waveform = cm.deflector_files(defl, base, fname, layout, model)
    camp = cm.Campaign(
        path=path,
        title=title,
        layout=layout,
        model=model,
        stated=stated,
        settings=settings,
        compounds=(),
        field_map=field_map,
        waveform=waveform,
        raw=doc,
        structures=cm.load_structures(base, doc, fname),
    )
    cm.check_geometry(camp)
    plan = _parse_settings(plan_table, fname, layout)
    compounds_path = cm.data_path(base, doc, "compounds", fname)
    compounds = _read_plan_compounds(compounds_path)
    if "gratings" in doc:  # a light-grating power ladder as well (contract.visibility)
        vis = load_visibility_plan(doc, plan_table, fname, layout, stated, compounds_path)
        camp = replace(camp, visibility=vis)
    return camp, plan, compounds
