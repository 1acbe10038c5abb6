"""The velocity part of the contract: ``[beam] velocity_distribution``, ``[instrument]
background_acceleration``, ``[data] velocities`` (measured tables) and the optional shifts.csv
columns ``velocity_spread_err_m_s``, ``visibility`` and ``visibility_err`` (docs/velocity.md).

A bad table concerns only its compound: its one-line message names the file, the compound, the
temperature and what was expected, and is kept as that compound's problem.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from polarbeam._util.tables import CELL_BLANKS, Table, read_table
from polarbeam.beam.distributions import (
    GAUSSIAN_WARN_RATIO,
    SHAPES,
    TabulatedVelocity,
    density_curve,
    distribution_from_moments,
)
from polarbeam.contract.paths import resolve_data_file
from polarbeam.contract.schema import SeriesData
from polarbeam.errors import CompoundError, InputError
from polarbeam.quantities import Measured, parse_quantity

__all__ = [
    "BEAM_KEYS",
    "INSTRUMENT_VELOCITY_KEYS",
    "SHIFT_VELOCITY_COLUMNS",
    "VELOCITY_TABLE_COLUMNS",
    "VelocitySettings",
    "attach_distributions",
    "load_velocity_tables",
    "row_velocity_extras",
    "series_velocity_extras",
    "velocity_curve",
    "velocity_extra",
    "velocity_models",
    "velocity_settings",
    "velocity_warnings",
]

#: keys of the ``[beam]`` table (key → SI unit, None for a non-quantity)
BEAM_KEYS: dict[str, str | None] = {"velocity_distribution": None}
#: velocity keys of ``[instrument]``
INSTRUMENT_VELOCITY_KEYS: dict[str, str | None] = {"background_acceleration": "m/s^2"}
#: required columns of ``[data] velocities`` (``contrast`` is optional)
VELOCITY_TABLE_COLUMNS = ("compound", "temperature_K", "velocity_m_s", "weight")
#: optional shifts.csv columns read here
SHIFT_VELOCITY_COLUMNS = ("velocity_spread_err_m_s", "visibility", "visibility_err")


@dataclass(frozen=True)
class VelocitySettings:
    """``[beam] velocity_distribution`` and ``[instrument] background_acceleration``."""

    shape: str = "gaussian"
    acceleration: Measured | None = None  # m/s², along the grating vector (Talbot–Lau)
    tables: str | None = None  # name of the [data] velocities file, when given


def velocity_settings(doc: dict, fname: str, layout: str) -> VelocitySettings:
    """The velocity options of a campaign document (one-line :class:`InputError` when bad)."""
    beam = doc.get("beam", {})
    shape = beam.get("velocity_distribution", "gaussian")
    if not isinstance(shape, str) or shape not in SHAPES:
        raise InputError(
            f"{fname} [beam] velocity_distribution: expected one of {', '.join(SHAPES)}, "
            f"found {shape!r}"
        )
    acc = None
    raw = doc.get("instrument", {}).get("background_acceleration")
    if raw is not None:
        if layout != "talbot-lau":
            raise InputError(
                f"{fname} [instrument] background_acceleration: used by layout 'talbot-lau' "
                f"only, found layout {layout!r}; remove it"
            )
        where = f"{fname} [instrument] background_acceleration"
        acc = parse_quantity(raw, "m/s^2", where=where)
    tables = doc.get("data", {}).get("velocities")
    if tables is not None and not isinstance(tables, str):
        raise InputError(
            f"{fname} [data] velocities: expected a file path string, found {tables!r}"
        )
    return VelocitySettings(shape, acc, tables)


def row_velocity_extras(table: Table, i: int) -> tuple[float, float, float]:
    """(spread error, visibility, visibility error) of one shifts.csv row (0, NaN, NaN absent)."""
    cols = table.columns
    se = (
        table.number(i, "velocity_spread_err_m_s", nonnegative=True, default=0.0)
        if "velocity_spread_err_m_s" in cols
        else 0.0
    )
    vis = verr = math.nan
    if "visibility" in cols:
        vis = table.number(i, "visibility", nonnegative=True, default=math.nan)
        if "visibility_err" in cols and not math.isnan(vis):
            verr = table.number(i, "visibility_err", positive=True, default=math.nan)
    return se, vis, verr


def series_velocity_extras(extras: list[tuple[float, float, float]]) -> dict:
    """SeriesData keywords from the rows' :func:`row_velocity_extras`."""
    arr = np.asarray(extras, dtype=float).reshape(-1, 3)
    out: dict = {"spread_error": float(np.mean(arr[:, 0])) if arr.size else 0.0}
    if arr.size and not np.all(np.isnan(arr[:, 1])):
        out["visibility"] = arr[:, 1]
        out["visibility_err"] = arr[:, 2]
    return out


def load_velocity_tables(path: Path):
    """Tables of ``[data] velocities``: ({(compound, T): TabulatedVelocity}, {compound: problem}).

    Raises :class:`InputError` for a missing or unreadable file or missing columns.
    """
    table = read_table(path, VELOCITY_TABLE_COLUMNS, "velocities")
    if not table.rows:
        raise InputError(f"{table.name}: expected data rows below the header, found none")
    has_contrast = "contrast" in table.columns
    rows: dict[tuple[str, float], list[tuple[float, float, float]]] = {}
    problems: dict[str, str] = {}
    for i, row in enumerate(table.rows):
        name = row.get("compound", "").strip(CELL_BLANKS)
        if name in problems:
            continue
        try:
            table.check_row(i)
            temp = table.number(i, "temperature_K", positive=True)
            rec = (
                table.number(i, "velocity_m_s"),
                table.number(i, "weight"),
                table.number(i, "contrast", default=1.0) if has_contrast else 1.0,
            )
        except CompoundError as exc:
            problems[name] = str(exc)
            continue
        rows.setdefault((name, temp), []).append(rec)
    tables: dict[tuple[str, float], TabulatedVelocity] = {}
    for (name, temp), recs in rows.items():
        if name in problems:
            continue
        arr = np.asarray(recs, dtype=float)
        try:
            tables[(name, temp)] = TabulatedVelocity.from_arrays(
                arr[:, 0], arr[:, 1], arr[:, 2] if has_contrast else None
            )
        except ValueError as exc:
            problems[name] = (
                f"{table.name}: series {name} @ {temp:g} K: the table is not a velocity "
                f"distribution: {exc}"
            )
    return tables, problems


def attach_distributions(
    series: dict[str, list[SeriesData]],
    problems: dict[str, str],
    tables: dict,
    table_problems: dict[str, str],
    shape: str,
    shifts_name: str,
    tables_name: str | None,
    other_compounds: frozenset[str] = frozenset(),
    other_series: frozenset[tuple[str, float]] = frozenset(),
) -> dict[str, list[SeriesData]]:
    """Series with their velocity model: a table where one is given, else the named shape of the
    mean and spread columns (checked here). New problems are added to ``problems``.

    ``other_compounds`` and ``other_series`` (compound, T) are measured in other data (the
    visibilities of :mod:`polarbeam.contract.visibility`): their tables are not this data's."""
    for name, msg in table_problems.items():
        if name not in series and name in other_compounds:
            continue
        problems.setdefault(name, msg)
        series.pop(name, None)
    used = set()
    out: dict[str, list[SeriesData]] = {}
    for name, items in series.items():
        if name in problems:
            continue
        new = []
        try:
            for s in items:
                t = s.temperature.value
                dist = tables.get((name, t))
                if dist is not None:
                    used.add((name, t))
                    n = s.velocities.size
                    new.append(
                        replace(
                            s,
                            distribution=dist,
                            velocity=Measured(dist.mean, s.velocity.error),
                            velocities=np.full(n, dist.mean),
                            spreads=np.full(n, dist.spread),
                            shape="table",
                            spread_error=0.0,
                        )
                    )
                    continue
                if np.any(np.isnan(s.velocities)) or np.any(np.isnan(s.spreads)):
                    raise CompoundError(
                        f"{shifts_name}: series {name} @ {t:g} K expected velocity_m_s and "
                        f"velocity_spread_m_s (or its rows in {tables_name or '[data] velocities'})"
                        ", found empty cells and no table"
                    )
                for v, sp in set(zip(s.velocities.tolist(), s.spreads.tolist(), strict=True)):
                    try:
                        distribution_from_moments(shape, v, sp)
                    except ValueError as exc:
                        raise CompoundError(
                            f"{shifts_name}: series {name} @ {t:g} K, column "
                            f"'velocity_spread_m_s' ([beam] velocity_distribution = {shape!r}): "
                            f"{exc}"
                        ) from None
                new.append(replace(s, shape=shape))
        except CompoundError as exc:
            problems[name] = str(exc)
            continue
        out[name] = new
    for (name, t), _dist in tables.items():
        if (name, t) in used or name in problems or (name, t) in other_series:
            continue
        if name not in series and name in other_compounds:
            continue
        temps = sorted(s.temperature.value for s in series.get(name, ()))
        found = ", ".join(f"{x:g} K" for x in temps) or "none"
        problems[name] = (
            f"{tables_name}: series {name} @ {t:g} K has a table but no series in {shifts_name}; "
            f"expected a series of {name} at temperature_K {t:g}, found {found}"
        )
        out.pop(name, None)
    return out


def velocity_models(
    series, problems, vset: VelocitySettings, layout, base, fname, shifts_name, others=((), ())
):
    """The series with their velocity models (:func:`attach_distributions`), the tables of
    ``[data] velocities`` read first; the time-domain layout reads no velocities (its tables
    are checked, not used). ``others``: (compounds, (compound, T) series) measured in other
    data, whose tables are checked there."""
    tables: dict = {}
    bad: dict[str, str] = {}
    if vset.tables is not None:
        path = resolve_data_file(Path(base), vset.tables, f"{fname} [data] velocities")
        tables, bad = load_velocity_tables(path)
    if layout == "time-domain":
        return series
    name = Path(vset.tables).name if vset.tables is not None else None
    return attach_distributions(
        series,
        problems,
        tables,
        bad,
        vset.shape,
        shifts_name,
        name,
        frozenset(others[0]),
        frozenset(others[1]),
    )


def velocity_extra(s: SeriesData, layout: str) -> dict:
    """Result columns of a series' velocity model (its kind, the spread error) when it is not
    the default Gaussian (so that Gaussian campaigns keep their columns), and the laser power
    of the ``[gratings]`` contrast model when the series has one."""
    model = getattr(s, "grating_contrast", None)
    extra: dict = {} if model is None else {"contrast_model_power_W": float(model.power)}
    if layout == "time-domain" or (s.distribution is None and s.shape == "gaussian"):
        return extra
    out: dict = {"velocity_distribution": s.shape, **extra}
    if s.spread_error > 0:
        out["velocity_spread_err_m_s"] = s.spread_error
    return out


def velocity_curve(s: SeriesData, layout: str):
    """(velocities, density, contrast) of the series' velocity model for the report, or None."""
    if layout == "time-domain":
        return None
    dist = s.distribution
    if dist is None:
        if not s.velocities.size or not np.all(s.velocities == s.velocities[0]):
            return None  # several velocity classes in one series: no single curve
        dist = distribution_from_moments(s.shape, float(s.velocities[0]), float(s.spreads[0]))
    return density_curve(dist)


def velocity_warnings(s: SeriesData, layout: str) -> list[str]:
    """Warnings about a series' velocity model (a broad Gaussian: ⟨v⁻²⟩ depends on its cut)."""
    if layout == "time-domain" or s.distribution is not None or s.shape != "gaussian":
        return []
    v = float(np.mean(s.velocities))
    sp = float(np.max(s.spreads)) if s.spreads.size else 0.0
    if v > 0 and sp / v > GAUSSIAN_WARN_RATIO:
        return [
            f"{s.label}: velocity spread σ/v̄ = {sp / v:.2f} > {GAUSSIAN_WARN_RATIO}: the "
            "Gaussian's ⟨v⁻²⟩ depends on its cut at 0.02 v̄ (a real beam has no such tail); "
            "give the measured distribution ([data] velocities) or a flux shape "
            "([beam] velocity_distribution)"
        ]
    return []
