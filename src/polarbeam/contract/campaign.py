"""Campaign loading: ``campaign.toml`` plus its data tables into validated, frozen objects.

The contract (kept stable; see README):

.. code-block:: toml

    [campaign]
    title = "…"
    [instrument]
    layout = "talbot-lau"              # or "beam-profile", "time-domain"
    grating_period = "250 nm"
    grating_positions = ["0 m", "0.6 m", "1.2 m"]
    [deflector]
    model = "uniform"                  # or "two-wire", "field-map"
    entrance = "0.52 ± 0.001 m"
    length = "0.05 ± 0.0005 m"
    field_factor = "1.21e5 ± 600 m^-3"
    [data]
    shifts = "shifts.csv"
    compounds = "compounds.csv"

Structural problems raise :class:`~polarbeam.errors.InputError`; a bad value in a data row is
kept with its compound (``CompoundData.problem``) so that only that compound fails.
"""

from __future__ import annotations

import tomllib
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from polarbeam import chemistry as st
from polarbeam._util.tables import CELL_BLANKS, Table, read_table
from polarbeam._util.text import close_name
from polarbeam.chemistry import read_computed, read_sdf
from polarbeam.constants import AMU, alpha_si_from_a3, si_from_debye
from polarbeam.contract.deflector_files import deflector_files
from polarbeam.contract.grating_contrast import attach_grating_contrast
from polarbeam.contract.magnetic import (
    check_drive_columns,
    electric_keys_only,
    magnetic_deflector,
    magnetic_settings,
)
from polarbeam.contract.numerical import (
    NUMERICAL_KEYS,
    numerical_deflector,
    numerical_error_inputs,
    numerical_stated_inputs,
)
from polarbeam.contract.paths import resolve_data_file
from polarbeam.contract.plausibility import input_warnings
from polarbeam.contract.profiles import load_profiles
from polarbeam.contract.recoil import load_recoil
from polarbeam.contract.rotors import auto_response
from polarbeam.contract.scans import reduce_scans_file, series_from_reduction
from polarbeam.contract.schema import (
    OBSERVABLE_COLUMNS,
    ROTATIONAL_COLUMNS,
    SHIFT_COLUMNS_COMMON,
    AnalysisSettings,
    CompoundData,
    SeriesData,
)
from polarbeam.contract.temperatures import row_rotational, series_rotational, thermometer_offset
from polarbeam.contract.time_of_flight import (
    TOF_BEAM_KEYS,
    time_of_flight_settings,
    velocity_models_with_traces,
)
from polarbeam.contract.velocity import (
    BEAM_KEYS,
    INSTRUMENT_VELOCITY_KEYS,
    VelocitySettings,
    row_velocity_extras,
    series_velocity_extras,
    velocity_models,
    velocity_settings,
)
from polarbeam.contract.visibility import (
    GRATING_KEYS,
    load_visibilities,
    visibility_velocity_tables,
)
from polarbeam.errors import CompoundError, InputError, QuantityError
from polarbeam.instrument.deflectors import (
    DEFLECTOR_MODELS,
    UNCALIBRATED_FIELD_FACTOR,
    FieldMapDeflector,
    SwitchedField,
    TwoWireDeflector,
    UniformDeflector,
)
from polarbeam.instrument.layouts import LAYOUTS, BeamProfile, TalbotLau, TimeDomain
from polarbeam.quantities import Measured, parse_quantity

__all__ = [
    "Campaign",
    "load_campaign",
]

# key -> expected SI unit (pint syntax); None marks a non-quantity key
_SCHEMA: dict[str, dict[str, str | None]] = {
    "campaign": {"title": None, "description": None},
    "instrument": {
        "layout": None,
        "grating_period": "m",
        "grating_positions": "m",
        "detector_position": "m",
        "pulse_times": "s",
        **INSTRUMENT_VELOCITY_KEYS,
    },
    "deflector": {
        "model": None,
        "entrance": "m",
        "length": "m",
        "field_factor": "m^-3",
        "field_per_volt": "m^-1",
        "line_half_spacing": "m",
        "convex_crossing": "m",
        "concave_crossing": "m",
        "beam_height": "m",
        "field_map": None,
        "field_scale": "",
        "field_on": "s",
        "field_duration": "s",
        "waveform": None,
    },
    "data": {
        "shifts": None,
        "scans": None,
        "compounds": None,
        "structures": None,
        "computed": None,
        "computed_outputs": None,
        "recoil": None,
        "visibilities": None,
        "time_of_flight": None,
        "velocities": None,
        "profiles": None,
    },
    "analysis": {
        "velocity_nodes": None,
        "fit_offset": None,
        "scale_errors": None,
        "upper_limit_cl": None,
        "dipole_significance": None,
        "orientation_warning": None,
        "structure_check": None,
        "conformers": None,
        "conformer_seed": None,
        "calibration": None,
        "mass": None,
    },
    "source": {"thermometer_offset": "K"},
    "gratings": dict(GRATING_KEYS),  # polarbeam.contract.visibility
    "beam": {**BEAM_KEYS, **TOF_BEAM_KEYS},
}
# the numerical model's cross-section keys (fieldmodel.py; docs/calibration.md)
_SCHEMA["deflector"].update(
    {k: u for k, u in NUMERICAL_KEYS.items() if k not in _SCHEMA["deflector"]}
)

# top-level arrays of tables ([[laser]]): their keys are checked by polarbeam.extraction.recoil
_ARRAY_TABLES = ("laser",)

_LAYOUT_KEYS = {
    "talbot-lau": {"grating_period", "grating_positions"},
    "beam-profile": {"detector_position"},
    "time-domain": {"grating_period", "pulse_times"},
}
_MODEL_KEYS = {
    "uniform": (set(), {"field_factor", "field_per_volt"}),  # no field_factor: calibrate
    "two-wire": ({"line_half_spacing", "convex_crossing", "concave_crossing"}, {"beam_height"}),
    "field-map": ({"field_map"}, {"field_scale", "field_per_volt"}),
    "numerical": (set(), set(NUMERICAL_KEYS)),  # combinations checked in fieldmodel.py
}
_SPATIAL_KEYS = ({"entrance"}, {"length"})
_TIME_KEYS = ({"field_on"}, {"field_duration", "waveform"})


@dataclass(frozen=True)
class Campaign:
    """A loaded campaign: instrument description, stated inputs with errors, and compounds."""

    path: Path
    title: str
    layout: str
    model: str
    stated: dict[str, Measured]
    settings: AnalysisSettings
    compounds: tuple[CompoundData, ...]
    unmeasured: tuple[str, ...] = ()
    field_map: tuple[tuple[float, ...], tuple[float, ...]] | None = None
    waveform: tuple[tuple[float, ...], tuple[float, ...]] | None = None
    raw: dict[str, Any] = field(default_factory=dict)
    structures: dict[str, Any] = field(default_factory=dict)  # name → RDKit Mol or error text
    computed_paths: tuple[Path, ...] = ()
    computed_patterns: tuple[str, ...] = ()
    reduction: Any = None  # fringes.ReducedPhases when the campaign starts from raw scans
    ignored_columns: tuple[str, ...] = ()  # shifts.csv columns the layout does not use
    recoil: Any = None  # polarbeam.extraction.recoil.RecoilData when [data] recoil is given
    visibility: Any = None  # contract.visibility.VisibilityData ([data] visibilities)
    table_notes: tuple[str, ...] = ()  # comment lines skipped above the headers of the tables
    warnings: tuple[str, ...] = ()  # implausible inputs (likely unit slips), one line each
    thermometer_offset: Measured | None = None  # [source]: one error common to every series' T
    velocity: VelocitySettings = field(default_factory=VelocitySettings)  # [beam], tables
    magnetic: Any = None  # contract.magnetic.MagneticSettings: [deflector] field = "magnetic"

    @property
    def observable(self) -> str:
        return OBSERVABLE_COLUMNS[self.layout][0]

    def nominal(self) -> dict[str, float]:
        return {k: m.value for k, m in self.stated.items()}

    def build(self, values: dict[str, float] | None = None):
        """(layout, deflector) for the given parameter values (nominal when omitted)."""
        v = self.nominal() if values is None else values
        return build_layout(self.layout, v), build_deflector(self, v)


def build_layout(name: str, v: dict[str, float]):
    if name == "talbot-lau":
        return TalbotLau(
            v["instrument.grating_positions[0]"],
            v["instrument.grating_positions[1]"],
            v["instrument.grating_positions[2]"],
            v["instrument.grating_period"],
        )
    if name == "beam-profile":
        return BeamProfile(v["instrument.detector_position"])
    return TimeDomain(
        v["instrument.pulse_times[0]"],
        v["instrument.pulse_times[1]"],
        v["instrument.pulse_times[2]"],
        v["instrument.grating_period"],
    )


def build_deflector(c: Campaign, v: dict[str, float]):
    if c.magnetic is not None:  # an electromagnet (contract/magnetic.py)
        return magnetic_deflector(c.magnetic, v)
    g = v.get
    if c.layout == "time-domain":
        if c.model != "uniform":
            raise InputError(
                f"{c.path.name} [deflector] model: the time-domain layout expects 'uniform', "
                f"found {c.model!r}"
            )
        return SwitchedField(
            g("deflector.field_factor", UNCALIBRATED_FIELD_FACTOR),
            v["deflector.field_on"],
            g("deflector.field_duration"),
            c.waveform,
            g("deflector.field_per_volt"),
            origin=v["instrument.pulse_times[0]"],  # field_on is measured from the first pulse
            source=str(c.raw.get("deflector", {}).get("waveform", "waveform")),
        )
    if c.model == "uniform":
        return UniformDeflector(
            g("deflector.field_factor", UNCALIBRATED_FIELD_FACTOR),
            v["deflector.entrance"],
            v["deflector.length"],
            g("deflector.field_per_volt"),
        )
    if c.model == "two-wire":
        a = v["deflector.line_half_spacing"]
        return TwoWireDeflector(
            a,
            v["deflector.convex_crossing"],
            v["deflector.concave_crossing"],
            g("deflector.beam_height", 1.2 * a),
            v["deflector.entrance"],
            v["deflector.length"],
        )
    if c.model == "numerical":
        return numerical_deflector(c, v)
    z, gz = c.field_map
    return FieldMapDeflector(
        z,
        gz,
        v["deflector.entrance"],
        g("deflector.length"),
        g("deflector.field_scale", 1.0),
        g("deflector.field_per_volt"),
    )


def check_keys(doc: dict, fname: str) -> None:
    unknown = [k for k in doc if k not in _SCHEMA and k not in _ARRAY_TABLES]
    if unknown == ["plan"]:
        raise InputError(
            f"{fname}: a [plan] table makes this a planning campaign (no data to analyse): "
            "run `polarbeam plan` on it, or analyse its rehearsal/ folder"
        )
    if unknown:
        raise InputError(
            f"{fname}: unknown table(s) {', '.join(repr(k) for k in unknown)}; expected "
            f"{', '.join([*_SCHEMA, *(f'[[{t}]]' for t in _ARRAY_TABLES)])}"
        )
    for table, keys in _SCHEMA.items():
        sub = doc.get(table, {})
        if not isinstance(sub, dict):
            raise InputError(f"{fname}: [{table}] expected a table, found {type(sub).__name__}")
        bad = [k for k in sub if k not in keys]
        if bad:
            raise InputError(
                f"{fname}: unknown key(s) in [{table}]: {', '.join(repr(k) for k in bad)}; "
                f"expected one of {', '.join(keys)}{key_hint(bad[0], table)}"
            )


def key_hint(key: str, table: str) -> str:
    """ " (did you mean 'x'?)" for a misspelt key, or where a key of another table belongs."""
    home = [t for t, keys in _SCHEMA.items() if t != table and key in keys]
    if home:
        return f" ({key!r} belongs in [{home[0]}])"
    near = close_name(key, _SCHEMA[table])
    return f" (did you mean {near!r}?)" if near else ""


def require_str(table: dict, key: str, where: str, choices=None) -> str:
    if key not in table:
        raise InputError(f"{where} {key}: required key missing")
    val = table[key]
    if not isinstance(val, str):
        raise InputError(f"{where} {key}: expected a string, found {val!r}")
    if choices is not None and val not in choices:
        raise InputError(f"{where} {key}: expected one of {', '.join(choices)}, found {val!r}")
    return val


def stated_inputs(doc: dict, fname: str, layout: str, model: str) -> dict[str, Measured]:
    stated: dict[str, Measured] = {}
    inst, defl = doc.get("instrument", {}), doc.get("deflector", {})

    def quantity(table: str, key: str, raw):
        unit = _SCHEMA[table][key]
        return parse_quantity(raw, unit or "", where=f"{fname} [{table}] {key}")

    need = _LAYOUT_KEYS[layout]
    other = set().union(*_LAYOUT_KEYS.values()) - need
    for k in sorted(other & set(inst)):
        raise InputError(f"{fname} [instrument] {k}: not used by layout {layout!r}; remove it")
    for k in sorted(need):
        if k not in inst:
            raise InputError(f"{fname} [instrument] {k}: required for layout {layout!r}")
        raw = inst[k]
        if k in ("grating_positions", "pulse_times"):
            if not (isinstance(raw, list) and len(raw) == 3):
                raise InputError(
                    f"{fname} [instrument] {k}: expected a list of three quantities, found {raw!r}"
                )
            for i, item in enumerate(raw):
                stated[f"instrument.{k}[{i}]"] = quantity("instrument", k, item)
        else:
            stated[f"instrument.{k}"] = quantity("instrument", k, raw)

    if (
        model == "none"
    ):  # no [deflector]: a photon-recoil-only campaign (polarbeam.extraction.recoil)
        return stated
    timing = layout == "time-domain"
    req_m, opt_m = _MODEL_KEYS[model]
    req_s, opt_s = _TIME_KEYS if timing else _SPATIAL_KEYS
    allowed = {"model"} | req_m | opt_m | req_s | opt_s
    by_layout = _SPATIAL_KEYS[0] | _SPATIAL_KEYS[1] | _TIME_KEYS[0] | _TIME_KEYS[1]
    wrong = sorted((set(defl) - allowed) & by_layout)
    if wrong:  # name every key of the other layout family at once
        hint = (
            "; the time-domain layout switches the field in time: give field_on and "
            "field_duration (or a waveform)"
            if timing
            else ""
        )
        raise InputError(
            f"{fname} [deflector] {', '.join(wrong)}: not used by layout {layout!r}; "
            f"remove {'it' if len(wrong) == 1 else 'them'}{hint}"
        )
    for k in sorted(set(defl) - allowed):
        raise InputError(f"{fname} [deflector] {k}: not used by model {model!r}; remove it")
    for k in sorted(req_m | req_s):
        if k not in defl:
            why = f"layout {layout!r}" if k in req_s else f"model {model!r}"
            raise InputError(f"{fname} [deflector] {k}: required for {why}")
    if not timing and model in ("uniform", "two-wire") and "length" not in defl:
        raise InputError(
            f"{fname} [deflector] length: required for model {model!r} (the electrode length "
            'along the beam, e.g. "0.1 ± 0.0005 m"), found none'
        )
    if model == "field-map" and timing:
        raise InputError(f"{fname} [deflector] model: 'field-map' is not used by layout {layout!r}")
    if timing and "field_duration" not in defl and "waveform" not in defl:
        raise InputError(f"{fname} [deflector] field_duration: required (or a waveform)")
    if timing and "field_duration" in defl and "waveform" in defl:
        raise InputError(
            f"{fname} [deflector] field_duration, waveform: expected one of them (the waveform "
            "fixes the switching), found both"
        )
    for k, raw in defl.items():
        if k in ("model", "field_map", "waveform") or (
            model == "numerical" and k in NUMERICAL_KEYS
        ):
            continue
        stated[f"deflector.{k}"] = quantity("deflector", k, raw)
    if model == "numerical":
        stated.update(numerical_stated_inputs(defl, fname))
    return stated


def analysis_settings(doc: dict, fname: str) -> AnalysisSettings:
    a = doc.get("analysis", {})
    kinds: dict[str, Callable] = {
        "velocity_nodes": int,
        "fit_offset": bool,
        "scale_errors": str,
        "upper_limit_cl": float,
        "dipole_significance": float,
        "orientation_warning": float,
        "structure_check": bool,
        "conformers": int,
        "conformer_seed": int,
        "calibration": str,
        "mass": str,
    }
    kw = {}
    for k, v in a.items():
        want = kinds[k]
        ok = isinstance(v, want) and not (want is int and isinstance(v, bool))
        if want is float and isinstance(v, int) and not isinstance(v, bool):
            v, ok = float(v), True
        if not ok:
            raise InputError(f"{fname} [analysis] {k}: expected {want.__name__}, found {v!r}")
        kw[k] = v
    try:
        return AnalysisSettings(**kw)
    except InputError as exc:
        raise InputError(f"{fname} {exc}") from None


def data_path(base: Path, doc: dict, key: str, fname: str, required=True) -> Path | None:
    data = doc.get("data", {})
    if key not in data:
        if required:
            raise InputError(f"{fname} [data] {key}: required key missing")
        return None
    val = data[key]
    if not isinstance(val, str):
        raise InputError(f"{fname} [data] {key}: expected a file path string, found {val!r}")
    return resolve_data_file(base, val, f"{fname} [data] {key}")


def _optional_measured(
    table: Table, i: int, col: str, errcol: str, convert, nonnegative: bool = False
) -> Measured | None:
    raw = table.rows[i].get(col, "").strip()
    if not raw:
        return None
    val = table.number(i, col, nonnegative=nonnegative)
    err = table.number(i, errcol, nonnegative=True, default=0.0)
    return Measured(convert(val), abs(convert(err)))


def _structure_mol(name: str, row: dict, structures: dict):
    """The RDKit molecule of a compound's SDF record or SMILES, or None without a structure."""
    rec = structures.get(name)
    smiles = (row.get("smiles") or "").strip()
    if rec is None and not smiles:
        return None
    if isinstance(rec, str):
        raise CompoundError(f"structures file: record {name!r} could not be read ({rec})")
    return rec if rec is not None else st.parse_smiles(smiles, name)


def _structure_mass_u(name: str, row: dict, structures: dict, kind: str) -> float | None:
    """Mass (u) of a compound from its SDF record or SMILES, or None without a structure."""
    mol = _structure_mol(name, row, structures)
    if mol is None:
        return None
    return st.mass_monoisotopic_u(mol) if kind == "monoisotopic" else st.mass_average_u(mol)


def _load_compounds(
    path: Path,
    structures: dict | None = None,
    mass_kind: str = "average",
    table_notes: list[str] | None = None,
):
    structures = structures or {}
    table = read_table(path, ("compound",), "compounds")
    if table.note and table_notes is not None:
        table_notes.append(table.note)
    if "mass_u" not in table.columns and "smiles" not in table.columns and not structures:
        raise InputError(
            f"{table.name}: missing column(s) mass_u; expected compound, mass_u (or a smiles "
            f"column / [data] structures to take the mass from), found {', '.join(table.columns)}"
        )
    info: dict[str, dict] = {}
    for i, row in enumerate(table.rows):
        name = row.get("compound", "").strip(CELL_BLANKS)
        entry: dict[str, Any] = {"extra": {k: v for k, v in row.items() if k != "__bad__"}}
        try:
            table.check_row(i)
            if name in info:
                raise CompoundError(
                    f"{table.name} line {table.lines[i]}: compound {name!r} listed twice"
                )
            if (row.get("mass_u") or "").strip():
                m = table.number(i, "mass_u", positive=True)
            else:  # no stated mass: the structure's (average, or monoisotopic on request)
                m = _structure_mass_u(name, row, structures, mass_kind)
                if m is None:
                    raise CompoundError(
                        f"{table.name} line {table.lines[i]}: column 'mass_u' expected a number "
                        "> 0 (or a structure to take the mass from), found ''"
                    )
                entry["mass_source"] = f"{mass_kind} mass of the structure"
            dm = table.number(i, "mass_err_u", nonnegative=True, default=0.0)
            entry["mass"] = Measured(m * AMU, dm * AMU)
            entry["line"] = table.lines[i]
            entry["alpha_known"] = _optional_measured(
                table, i, "alpha_known_A3", "alpha_known_err_A3", alpha_si_from_a3
            )
            entry["dipole_known"] = _optional_measured(
                table, i, "dipole_known_D", "dipole_known_err_D", si_from_debye, nonnegative=True
            )
            entry["response"], entry["response_reason"] = auto_response(
                table, i, lambda n=name, r=row: _structure_mol(n, r, structures)
            )
        except CompoundError as exc:
            if name in info and "problem" not in info[name]:
                info[name]["problem"] = str(exc)
                continue
            entry["problem"] = str(exc)
        info.setdefault(name, entry)
    return info


def _load_shifts(
    path: Path,
    layout: str,
    table_notes: list[str] | None = None,
    tabled: bool = False,
    drive: str = "voltage_V",
):
    obs, obs_err = OBSERVABLE_COLUMNS[layout]
    required = (*(drive if c == "voltage_V" else c for c in SHIFT_COLUMNS_COMMON), obs, obs_err)
    if layout == "time-domain":
        required = tuple(c for c in required if not c.startswith("velocity"))
    table = read_table(path, required, "shifts")
    if not table.rows:
        raise InputError(f"{table.name}: expected data rows below the header, found none")
    if table.note and table_notes is not None:
        table_notes.append(table.note)
    # the time-domain shift does not depend on velocity: its columns are not read at all
    ignored = (
        tuple(c for c in table.columns if c.startswith("velocity"))
        if layout == "time-domain"
        else ()
    )
    groups: dict[str, dict[float, list]] = {}
    problems: dict[str, str] = {}
    rotational = ROTATIONAL_COLUMNS[0] in table.columns
    for i, row in enumerate(table.rows):
        name = row.get("compound", "").strip(CELL_BLANKS)
        if name in problems:
            continue
        try:
            table.check_row(i)
            num = table.number
            if layout == "time-domain":
                v = dv = sv = 0.0  # placeholders, never used
            else:  # with [data] velocities, empty means "from the table" (checked later)
                v = num(i, "velocity_m_s", positive=True, default=np.nan if tabled else None)
                dv = num(i, "velocity_err_m_s", nonnegative=True)
                sv = num(
                    i, "velocity_spread_m_s", nonnegative=True, default=np.nan if tabled else None
                )
            rec = (
                num(i, drive) if drive == "voltage_V" else num(i, drive, nonnegative=True),
                num(i, obs),
                num(i, obs_err, positive=True),
                v,
                dv,
                sv,
                num(i, "temperature_err_K", nonnegative=True),
                table.lines[i],
                row_rotational(table, i) if rotational else ("", None, 0.0),
                row_velocity_extras(table, i),
            )
            temp = num(i, "temperature_K", positive=True)
        except CompoundError as exc:
            problems[name] = str(exc)
            groups.pop(name, None)
            continue
        groups.setdefault(name, {}).setdefault(temp, []).append(rec)
    series: dict[str, list[SeriesData]] = {}
    for name, by_t in groups.items():
        out = []
        for temp, recs in sorted(by_t.items()):
            arr = np.array([r[:7] for r in recs], dtype=float)
            volts = arr[:, 0]
            if np.unique(np.round(volts**2, 9)).size < 2:
                what = "voltages (|V|)" if drive == "voltage_V" else "currents (|I|)"
                problems[name] = (
                    f"{table.name}: series {name} @ {temp:g} K expected at least two different "
                    f"{what}, found {np.unique(np.abs(volts)).size}"
                )
                break
            try:
                rot = series_rotational(
                    table.name, name, temp, [r[8] for r in recs], [r[7] for r in recs]
                )
            except CompoundError as exc:
                problems[name] = str(exc)
                break
            out.append(
                SeriesData(
                    compound=name,
                    temperature=Measured(temp, float(np.mean(arr[:, 6]))),
                    velocity=Measured(  # 0: empty cells, from the velocity table
                        float(np.nan_to_num(np.mean(arr[:, 3]))), float(np.mean(arr[:, 4]))
                    ),
                    velocities=arr[:, 3],
                    spreads=arr[:, 5],
                    voltages=volts,
                    values=arr[:, 1],
                    errors=arr[:, 2],
                    lines=tuple(r[7] for r in recs),
                    rotational=rot,
                    **series_velocity_extras([r[9] for r in recs]),
                )
            )
        else:
            series[name] = out
    return series, problems, ignored


def check_geometry(camp: Campaign):
    """Build the nominal set-up once: bad geometry is structural (named with the file).

    Returns the nominal deflector (None without one)."""
    try:
        if camp.model == "none":
            build_layout(camp.layout, camp.nominal())
            return None
        return camp.build()[1]
    except QuantityError:
        raise
    except InputError as exc:
        raise InputError(f"{camp.path.name} {exc}") from None


def read_toml(path: Path) -> dict:
    """The TOML document of a campaign file, or a one-line :class:`InputError`."""
    if not path.is_file():
        raise InputError(f"{path}: campaign file not found")
    try:
        return tomllib.loads(path.read_text(encoding="utf-8-sig"))  # a BOM is not TOML: skip it
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path.name}: invalid TOML ({exc})") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: cannot read campaign file ({exc.__class__.__name__})") from None


def load_campaign(path: str | Path) -> Campaign:
    """Load and validate ``campaign.toml`` and its data files.

    Raises
    ------
    InputError
        For any structural problem (the message names file, key, expected and found).
    """
    path = Path(path)
    fname = path.name
    doc = read_toml(path)
    check_keys(electric_keys_only(doc), fname)  # magnetic keys: contract/magnetic.py
    inst = doc.get("instrument", {})
    defl = doc.get("deflector", {})
    layout = require_str(inst, "layout", f"{fname} [instrument]", LAYOUTS)
    data = doc.get("data", {})
    # photon recoil (polarbeam.contract.recoil): [data] recoil makes shifts and [deflector]
    # optional
    has_recoil = "recoil" in data or "laser" in doc or "visibilities" in data
    if has_recoil and not ({"shifts", "scans"} & set(data)) and "deflector" not in doc:
        model = "none"
    else:
        model = require_str(defl, "model", f"{fname} [deflector]", DEFLECTOR_MODELS)
    title = doc.get("campaign", {}).get("title", path.stem)
    if not isinstance(title, str):
        raise InputError(f"{fname} [campaign] title: expected a string, found {title!r}")
    magnetic = magnetic_settings(doc, fname, layout, path.parent)
    stated = stated_inputs(doc, fname, layout, "none" if magnetic else model)
    stated.update(magnetic.stated if magnetic else {})
    settings = analysis_settings(doc, fname)
    offset = thermometer_offset(doc, fname)
    vset = velocity_settings(doc, fname, layout)
    tof = time_of_flight_settings(doc, fname, layout)  # [data] time_of_flight, [beam] keys
    base = path.parent
    field_map, waveform = (
        deflector_files(defl, base, fname, layout, model) if magnetic is None else (None, None)
    )
    data = doc.get("data", {})
    compounds_path = data_path(base, doc, "compounds", fname)
    structures = load_structures(base, doc, fname)
    reduction = None
    profiles: dict = {}
    notes: dict[str, list[str]] = {}
    ignored: tuple[str, ...] = ()
    table_notes: list[str] = []
    if "scans" in data:
        if "shifts" in data:
            raise InputError(f"{fname} [data]: expected either 'shifts' or 'scans', found both")
        if layout == "beam-profile":
            raise InputError(
                f"{fname} [data] scans: raw fringe scans need a fringe layout "
                "(talbot-lau or time-domain), found 'beam-profile'"
            )
        shifts_path = data_path(base, doc, "scans", fname)
        info = _load_compounds(compounds_path, structures, settings.mass, table_notes)
        reduction, bad = reduce_scans_file(shifts_path, stated["instrument.grating_period"].value)
        series, problems, notes = series_from_reduction(reduction)
        problems.update(bad)
    else:
        profiles_path = data_path(base, doc, "profiles", fname, required=False)
        shifts_path = data_path(
            base, doc, "shifts", fname, required=not (has_recoil or "profiles" in data)
        )
        info = _load_compounds(compounds_path, structures, settings.mass, table_notes)
        if profiles_path is not None:  # whole profiles (contract/profiles.py)
            profiles, problems = load_profiles(profiles_path, layout, fname)
            series = {name: () for name in profiles}
            shifts_path = None
        elif shifts_path is not None:
            tabled = vset.tables is not None or tof is not None
            drive = check_drive_columns(shifts_path, magnetic is not None)
            series, problems, ignored = _load_shifts(
                shifts_path, layout, table_notes, tabled, drive
            )
        else:
            series, problems = {}, {}
    vis = None  # [gratings] and visibilities.csv (polarbeam.contract.visibility), tables shared
    if "visibilities" in data:
        tabs = visibility_velocity_tables(doc, base, fname)
        vis = load_visibilities(
            doc, path, layout, stated, info, compounds_path.name, tabs, frozenset(series)
        )
    if shifts_path is not None and tof is not None:  # fitted traces (contract.time_of_flight)
        args = (vset, tof, layout, base, fname, shifts_path.name)
        series = velocity_models_with_traces(series, problems, *args)
    elif shifts_path is not None:  # tables, named shapes (polarbeam.contract.velocity)
        args = (vset, layout, base, fname, shifts_path.name, vis.measured if vis else ((), ()))
        series = velocity_models(series, problems, *args)

    camp = Campaign(
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
        magnetic=magnetic,
    )
    deflector = check_geometry(camp)
    if model == "numerical":  # the solve's mesh-refinement error becomes a stated input
        stated = {**stated, **numerical_error_inputs(camp)}
    recoil = None
    if "recoil" in data or "laser" in doc:  # [[laser]] tables and recoil.csv (extraction.recoil)
        recoil = load_recoil(doc, path, layout, stated, info, compounds_path.name)
    if "gratings" in doc and shifts_path is not None and series:  # contract/grating_contrast.py
        args = (series, problems, info, shifts_path, compounds_path.name, "scans" in data)
        series = attach_grating_contrast(doc, path, layout, stated, *args, table_notes)

    compounds = []
    measured_names = list(dict.fromkeys(list(series) + list(problems)))
    for name in measured_names:
        entry = info.get(name)
        problem = problems.get(name)
        if entry is None:
            problem = problem or (
                f"{compounds_path.name}: compound {name!r} measured in {shifts_path.name} but not "
                "listed (expected a row with its mass_u)"
            )
            compounds.append(CompoundData(name, None, problem=problem))
            continue
        problem = entry.get("problem") or problem
        compounds.append(
            CompoundData(
                name,
                entry.get("mass"),
                tuple(series.get(name, ())) if problem is None else (),
                entry["extra"],
                problem,
                entry.get("alpha_known"),
                entry.get("dipole_known"),
                tuple(notes.get(name, ())),
                entry.get("response"),
                profiles.get(name, ()) if problem is None else (),
                response_reason=entry.get("response_reason"),
            )
        )
    in_recoil = set(recoil.compound_names) if recoil is not None else set()
    in_recoil |= set(vis.compound_names) if vis is not None else set()
    unmeasured = tuple(
        n for n in info if n not in series and n not in problems and n not in in_recoil
    )
    computed = data_path(base, doc, "computed", fname, required=False)
    if computed is not None and not computed.is_file():
        raise InputError(f"{computed}: computed-values file not found ([data] computed)")
    if computed is not None:  # an unreadable file is found now, before the analysis starts
        read_computed(computed, failures=[], as_frame=False)
    patterns = doc.get("data", {}).get("computed_outputs", [])
    if isinstance(patterns, str):
        patterns = [patterns]
    if not (isinstance(patterns, list) and all(isinstance(p, str) for p in patterns)):
        raise InputError(
            f"{fname} [data] computed_outputs: expected a list of glob patterns, found {patterns!r}"
        )
    warnings = input_warnings(
        fname,
        doc,
        stated,
        layout,
        compounds_file=compounds_path.name,
        masses=[(f"line {e['line']}", e["mass"].value / AMU) for e in info.values() if "line" in e],
        shifts_file=shifts_path.name if shifts_path is not None else "",
        rows=table_rows(compounds, layout, "scans" in data),
        field_per_volt=getattr(deflector, "field_per_volt", None) if magnetic is None else None,
    )
    return Campaign(
        path=path,
        title=title,
        layout=layout,
        model=model,
        stated=stated,
        settings=settings,
        compounds=tuple(compounds),
        unmeasured=unmeasured,
        field_map=field_map,
        waveform=waveform,
        raw=doc,
        structures=structures,
        computed_paths=(computed,) if computed is not None else (),
        computed_patterns=tuple(str(base / p) for p in patterns),
        reduction=reduction,
        ignored_columns=ignored,
        recoil=recoil,
        visibility=vis,
        table_notes=tuple(table_notes),
        warnings=warnings,
        thermometer_offset=offset,
        velocity=vset,
        magnetic=magnetic,
    )


def table_rows(compounds, layout: str, scans: bool):
    """(row label, voltage V, velocity m/s or None) of every measured point, for plausibility."""
    word = "scan" if scans else "line"
    for cd in compounds:
        for s in cd.series:
            for k, line in enumerate(s.lines):
                v = None if layout == "time-domain" else float(s.velocities[k])
                yield f"{word} {line}", float(s.voltages[k]), v


def load_structures(base: Path, doc: dict, fname: str) -> dict[str, Any]:
    """Records of the ``[data] structures`` SDF file by name (Mol, or the error text)."""
    path = data_path(base, doc, "structures", fname, required=False)
    if path is None:
        return {}
    if not path.is_file():
        raise InputError(f"{path}: structures file not found ([data] structures)")
    out: dict[str, Any] = {}
    for rec in read_sdf(path):
        out.setdefault(
            rec.compound, rec.mol if rec.mol is not None else (rec.error or "unreadable")
        )
    return out
