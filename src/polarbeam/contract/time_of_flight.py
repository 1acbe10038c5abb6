"""The time-of-flight part of the contract: ``[data] time_of_flight`` (raw traces) with
``[beam] flight_length``, ``gate`` and ``time_offset`` (docs/velocity.md).

Each trace (the rows of one compound at one ``temperature_K``) is checked and fitted here
(:func:`polarbeam.beam.time_of_flight.fit_trace`); the fitted distribution becomes the series'
velocity table, and the errors of the fit, the flight length and the time offset become
``velocity_terms`` of the series: relative changes of a common velocity scale per 1σ of each
tagged input, chosen so that ⟨v⁻²⟩ moves exactly as the propagation gives
(:func:`~polarbeam.beam.time_of_flight.mean_inverse_square_uncertain`).

A bad trace concerns only its compound: its one-line message names the file, the compound, the
temperature and what was expected, and is kept as that compound's problem.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
import uncertainties

from polarbeam._util.tables import CELL_BLANKS, read_table
from polarbeam._util.text import input_label
from polarbeam.beam.distributions import TabulatedVelocity
from polarbeam.beam.time_of_flight import (
    TimeOfFlightFit,
    TraceSetup,
    fit_trace,
    flight_time_estimate,
    mean_inverse_square_uncertain,
    tabulate,
)
from polarbeam.contract.paths import resolve_data_file
from polarbeam.contract.velocity import VelocitySettings, attach_distributions, load_velocity_tables
from polarbeam.errors import CompoundError, InputError
from polarbeam.quantities import Measured, parse_quantity

__all__ = [
    "TOF_BEAM_KEYS",
    "TOF_COLUMNS",
    "TimeOfFlightSettings",
    "Trace",
    "TraceFit",
    "attach_time_of_flight",
    "fit_traces",
    "load_traces",
    "time_of_flight_settings",
    "tof_tag",
    "uncertain_velocity",
    "velocity_models_with_traces",
    "with_traces",
]

#: keys of ``[beam]`` read here (key → SI unit)
TOF_BEAM_KEYS: dict[str, str | None] = {"flight_length": "m", "gate": "s", "time_offset": "s"}
#: columns of the ``[data] time_of_flight`` table
TOF_COLUMNS = ("compound", "temperature_K", "time_s", "counts")
#: relative tolerance of "equal" bin widths (float text of the bin starts)
_WIDTH_TOLERANCE = 1e-6
#: nodes of the tabulated distribution written for each fitted trace
TABLE_NODES = 120


def tof_tag(label: str) -> str:
    """Budget tag of the fit of one series' trace."""
    return f"time-of-flight fit: {label}"


@dataclass(frozen=True)
class TimeOfFlightSettings:
    """``[beam]`` of a campaign with traces: flight length, gate open time, time offset (SI)."""

    flight_length: Measured
    gate: Measured
    time_offset: Measured
    file: str  # the [data] time_of_flight value

    def setup(self) -> TraceSetup:
        return TraceSetup(self.flight_length.value, self.gate.value, self.time_offset.value)


def time_of_flight_settings(
    doc: dict, fname: str, layout: str = "talbot-lau"
) -> TimeOfFlightSettings | None:
    """The time-of-flight keys of a campaign document (None without ``[data] time_of_flight``).

    Raises :class:`InputError` (one line) for a missing or bad key.
    """
    data = doc.get("data", {})
    beam = doc.get("beam", {})
    given = [k for k in TOF_BEAM_KEYS if k in beam]
    if "time_of_flight" not in data:
        if given:
            raise InputError(
                f"{fname} [beam] {', '.join(given)}: used only with [data] time_of_flight "
                "(raw traces), found no traces; remove it or give the traces"
            )
        return None
    if layout == "time-domain":
        raise InputError(
            f"{fname} [data] time_of_flight: not used by layout 'time-domain' (its phase does "
            "not depend on velocity); remove it"
        )
    raw_file = data["time_of_flight"]
    if not isinstance(raw_file, str):
        raise InputError(
            f"{fname} [data] time_of_flight: expected a file path string, found {raw_file!r}"
        )
    values = {}
    for key, unit in TOF_BEAM_KEYS.items():
        where = f"{fname} [beam] {key}"
        if key not in beam:
            if key == "time_offset":
                values[key] = Measured(0.0, 0.0)
                continue
            example = '"1.250 ± 0.002 m"' if key == "flight_length" else '"20 us"'
            raise InputError(f"{where}: required with [data] time_of_flight (e.g. {example})")
        values[key] = parse_quantity(beam[key], unit or "", where=where)
    if not values["flight_length"].value > 0:
        raise InputError(
            f"{fname} [beam] flight_length: expected a length > 0, found {beam['flight_length']!r}"
        )
    if not values["gate"].value > 0:
        raise InputError(f"{fname} [beam] gate: expected an open time > 0, found {beam['gate']!r}")
    return TimeOfFlightSettings(
        values["flight_length"], values["gate"], values["time_offset"], raw_file
    )


@dataclass(frozen=True)
class Trace:
    """One measured trace: bin starts (s, from the gate's opening), counts, the bin width."""

    compound: str
    temperature: float
    starts: np.ndarray
    counts: np.ndarray
    width: float
    lines: tuple[int, ...]

    @property
    def label(self) -> str:
        return f"{self.compound} @ {self.temperature:g} K"


def load_traces(path: Path) -> tuple[dict[tuple[str, float], Trace], dict[str, str]]:
    """Traces of ``[data] time_of_flight``: ({(compound, T): Trace}, {compound: problem}).

    A bad row or trace is its compound's problem (one line naming file, compound, temperature,
    what was expected and found). Raises :class:`InputError` for a missing or unreadable file,
    missing columns, or a file without data rows.
    """
    table = read_table(path, TOF_COLUMNS, "time-of-flight")
    if not table.rows:
        raise InputError(f"{table.name}: expected data rows below the header, found none")
    rows: dict[tuple[str, float], list[tuple[float, float, int]]] = {}
    problems: dict[str, str] = {}
    for i, row in enumerate(table.rows):
        name = row.get("compound", "").strip(CELL_BLANKS)
        if name in problems:
            continue
        try:
            if "__bad__" in row:
                raise CompoundError(f"{table.name} line {table.lines[i]}: {row['__bad__']}")
            if not name:
                raise CompoundError(f"{table.name} line {table.lines[i]}: empty compound name")
            temp = table.number(i, "temperature_K", positive=True)
            t = table.number(i, "time_s")
            raw = (row.get("counts") or "").strip()
            try:
                n = float(raw)
            except ValueError:
                n = math.nan
            if not (math.isfinite(n) and n >= 0 and n == round(n)):
                raise CompoundError(
                    f"{table.name} line {table.lines[i]}: series {name} @ {temp:g} K, column "
                    f"'counts' expected a whole number of counts >= 0, found {raw!r}"
                )
        except CompoundError as exc:
            problems[name] = str(exc)
            continue
        rows.setdefault((name, temp), []).append((t, n, table.lines[i]))
    traces: dict[tuple[str, float], Trace] = {}
    for (name, temp), recs in rows.items():
        if name in problems:
            continue
        try:
            traces[(name, temp)] = _trace(table.name, name, temp, recs)
        except CompoundError as exc:
            problems[name] = str(exc)
    return traces, problems


def _trace(fname: str, name: str, temp: float, recs) -> Trace:
    where = f"{fname}: series {name} @ {temp:g} K"
    recs = sorted(recs)
    t = np.array([r[0] for r in recs])
    n = np.array([r[1] for r in recs])
    if t.size < 8:
        raise CompoundError(f"{where}: expected a trace of at least 8 bins, found {t.size}")
    steps = np.diff(t)
    width = float(np.median(steps))
    if not width > 0 or np.any(np.abs(steps - width) > _WIDTH_TOLERANCE * width + 1e-15):
        k = int(np.argmax(np.abs(steps - width)))
        raise CompoundError(
            f"{where}: expected bins of equal width (time_s steps of {width * 1e6:.6g} us), "
            f"found a step of {steps[k] * 1e6:.6g} us after time_s {t[k]:.9g} "
            f"(line {recs[k + 1][2]})"
        )
    if not n.sum() > 0:
        raise CompoundError(
            f"{where}: expected a trace with counts, found no counts in its {t.size} bins"
        )
    return Trace(name, temp, t, n, width, tuple(r[2] for r in recs))


@dataclass(frozen=True)
class TraceFit:
    """A fitted trace: the fit, its tabulated distribution and the velocity-scale terms."""

    trace: Trace
    fit: TimeOfFlightFit
    velocities: np.ndarray
    weights: np.ndarray
    mean_inverse_square: float  # s²/m²
    mean_inverse_square_err: float  # 1σ, every input
    #: (tag, relative change of a common velocity scale per 1σ of the input)
    velocity_terms: tuple[tuple[str, float], ...]


def _check_gate(trace: Trace, settings: TimeOfFlightSettings, fname: str) -> None:
    gate, off = settings.gate.value, settings.time_offset.value
    flight = flight_time_estimate(trace.starts, trace.counts, trace.width, gate, off)
    where = f"{fname}: series {trace.label}"
    if not flight > 0 or gate >= flight:
        found = (
            f"a flight time of {flight * 1e6:.4g} us from the trace's centroid"
            if math.isfinite(flight)
            else "no flight time"
        )
        raise CompoundError(
            f"{where}: [beam] gate {gate * 1e6:.4g} us expected shorter than the flight time, "
            f"found {found}"
        )


def fit_traces(
    traces: dict[tuple[str, float], Trace],
    settings: TimeOfFlightSettings,
    fname: str,
) -> tuple[dict[tuple[str, float], TraceFit], dict[str, str]]:
    """Fit every trace: ({(compound, T): TraceFit}, {compound: problem})."""
    setup = settings.setup()
    length_u = _uncertain(settings.flight_length, "beam.flight_length")
    offset_u = _uncertain(settings.time_offset, "beam.time_offset")
    fits: dict[tuple[str, float], TraceFit] = {}
    problems: dict[str, str] = {}
    for key, trace in traces.items():
        name = trace.compound
        if name in problems:
            continue
        try:
            _check_gate(trace, settings, fname)
            try:
                fit = fit_trace(setup, trace.starts, trace.counts, trace.width)
            except (ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
                raise CompoundError(
                    f"{fname}: series {trace.label}: expected a trace the flux shape "
                    f"v³·exp(−(v − u)²/a²) can fit, found none ({exc})"
                ) from None
            fits[key] = _with_errors(trace, fit, length_u, offset_u)
        except CompoundError as exc:
            problems[name] = str(exc)
    for key in [k for k in fits if k[0] in problems]:
        fits.pop(key)
    return fits, problems


def _uncertain(m: Measured, key: str):
    return uncertainties.ufloat(m.value, m.error, tag=input_label(key)) if m.error > 0 else m.value


def _with_errors(trace: Trace, fit: TimeOfFlightFit, length_u, offset_u) -> TraceFit:
    tag = tof_tag(trace.label)
    m2 = mean_inverse_square_uncertain(fit, length_u, offset_u, tag)
    nominal = float(getattr(m2, "nominal_value", m2))
    terms: dict[str, float] = {}
    if isinstance(m2, uncertainties.UFloat):
        # ⟨v⁻²⟩ ∝ s⁻² for a common scale s: d ln s = −½ d ln⟨v⁻²⟩
        for var, deriv in m2.derivatives.items():
            if var.std_dev == 0:
                continue
            c = -0.5 * deriv * var.std_dev / nominal
            t = var.tag or tag
            if t == tag:  # the fit's internal variables: one independent term per series
                terms[t] = math.hypot(terms.get(t, 0.0), c)
            else:
                terms[t] = terms.get(t, 0.0) + c
    v, w = tabulate(fit.shape, TABLE_NODES)
    return TraceFit(
        trace=trace,
        fit=fit,
        velocities=v,
        weights=w,
        mean_inverse_square=nominal,
        mean_inverse_square_err=float(getattr(m2, "std_dev", 0.0)),
        velocity_terms=tuple(terms.items()),
    )


def attach_time_of_flight(
    settings: TimeOfFlightSettings,
    path: Path,
    series: dict,
    problems: dict[str, str],
    shifts_name: str,
    tables: dict,
) -> dict[tuple[str, float], TraceFit]:
    """Fit the traces of ``path``: {(compound, T): TraceFit}; each fit's distribution is added to
    ``tables`` (the series' measured tables, as ``[data] velocities`` gives them).

    A bad trace, a trace without its series or with a table too, or a fit that fails is its
    compound's problem (added to ``problems``). Raises :class:`InputError` for an unreadable
    file.
    """
    traces, bad = load_traces(path)
    fname = path.name
    for name, msg in bad.items():
        problems.setdefault(name, msg)
    for (name, temp), _trace in traces.items():
        if name in problems:
            continue
        temps = sorted(s.temperature.value for s in series.get(name, ()))
        if temp not in temps:
            found = ", ".join(f"{t:g} K" for t in temps) or "none"
            problems[name] = (
                f"{fname}: series {name} @ {temp:g} K has a trace but no series in "
                f"{shifts_name}; expected a series of {name} at temperature_K {temp:g}, "
                f"found {found}"
            )
        elif (name, temp) in tables:
            problems[name] = (
                f"{fname}: series {name} @ {temp:g} K has a trace and a [data] velocities table; "
                "expected one of them"
            )
    usable = {k: t for k, t in traces.items() if k[0] not in problems}
    fits, fit_problems = fit_traces(usable, settings, fname)
    for name, msg in fit_problems.items():
        problems.setdefault(name, msg)
    fits = {k: f for k, f in fits.items() if k[0] not in problems}
    for key, tf in fits.items():
        tables[key] = TabulatedVelocity.from_arrays(tf.velocities, tf.weights)
    return fits


def with_traces(series: dict, fits: dict[tuple[str, float], TraceFit]) -> dict:
    """Series with their fitted traces (``time_of_flight`` and ``velocity_terms`` set)."""
    out = {}
    for name, items in series.items():
        out[name] = [_with_trace(s, fits.get((name, s.temperature.value))) for s in items]
    return out


def _with_trace(s, tf: TraceFit | None):
    if tf is None:
        return s
    return replace(s, time_of_flight=tf, velocity_terms=tf.velocity_terms)


def uncertain_velocity(velocity_u, mean: float, terms, units: dict):
    """The series' mean velocity with its time-of-flight terms added as a common scale:
    v̄·(1 + Σ cₖ zₖ), zₖ a unit normal per tag taken from (and kept in) ``units``, so the flight
    length and the time offset are one variable each for every series that shares ``units``."""
    for tag, c in terms:
        z = units.get(tag)
        if z is None:
            z = units[tag] = uncertainties.ufloat(0.0, 1.0, tag=tag)
        velocity_u = velocity_u + mean * c * z
    return velocity_u


def velocity_models_with_traces(
    series: dict,
    problems: dict[str, str],
    vset: VelocitySettings,
    settings: TimeOfFlightSettings,
    layout: str,
    base,
    fname: str,
    shifts_name: str,
) -> dict:
    """The series with their velocity models as :func:`polarbeam.contract.velocity.
    velocity_models` gives them, a series with a trace taking its fitted distribution as its
    table (and its error terms); the time-of-flight keys are refused by the time-domain layout
    (:func:`time_of_flight_settings`)."""
    tables: dict = {}
    bad: dict[str, str] = {}
    if vset.tables is not None:
        path = resolve_data_file(Path(base), vset.tables, f"{fname} [data] velocities")
        tables, bad = load_velocity_tables(path)
    where = f"{fname} [data] time_of_flight"
    tof_path = resolve_data_file(Path(base), settings.file, where)
    fits = attach_time_of_flight(settings, tof_path, series, problems, shifts_name, tables)
    name = Path(vset.tables).name if vset.tables is not None else None
    series = attach_distributions(series, problems, tables, bad, vset.shape, shifts_name, name)
    return with_traces(series, fits)
