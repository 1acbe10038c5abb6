"""``[gratings]`` in a deflection campaign: the interferometer model's contrast per velocity class.

When a Talbot–Lau deflection campaign states what its gratings are (the ``[gratings]`` table of
:mod:`polarbeam.contract.visibility`), every series gets the near-field model's fringe contrast
of each velocity class (quantum model; :class:`polarbeam.beam.talbot.GratingContrast`), which
the deflection phasor multiplies into the class weights (docs/visibility.md §11). What it needs:

* the compound's mass (compounds.csv);
* with a light grating (``second = "light"``): the laser power of each series, the
  ``laser_power_W`` column of shifts.csv (one value per series; without the column the series
  keep no model contrast and the campaign gets a note), and the compound's optical
  polarizability ``alpha_opt_A3`` (Re α at the laser wavelength, Å³) and absorption
  cross-section ``sigma_abs_m2`` (default 0: no absorption) in compounds.csv — the columns the
  planner reads, and the values optical.csv reports for a visibility campaign. **Stated default**
  for an empty ``alpha_opt_A3``: the structure's additive static polarizability (the default
  scheme of :func:`polarbeam.chemistry.estimate`, from the compound's ``smiles``), which is the
  optical value far from any absorption band (the electronic part of α barely disperses below
  the first band); the campaign notes say which compounds use it. Without a structure the
  compound fails with one line.

A ``contrast`` column of velocities.csv, where given, takes precedence over the model. A missing
or bad value fails its compound only, with one line naming the file, line and column.
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

from polarbeam._util.tables import read_table
from polarbeam.beam.talbot import GratingContrast
from polarbeam.chemistry.estimates import estimate
from polarbeam.constants import ANGSTROM3_SI
from polarbeam.contract.schema import SeriesData
from polarbeam.contract.visibility import parse_gratings
from polarbeam.errors import CompoundError, InputError

__all__ = ["GRATING_CONTRAST_COLUMNS", "attach_grating_contrast", "default_optical_alpha_A3"]

#: optional columns read here: shifts.csv (power), compounds.csv (optical α, σ_abs)
GRATING_CONTRAST_COLUMNS = {
    "shifts": ("laser_power_W",),
    "compounds": ("alpha_opt_A3", "sigma_abs_m2"),
}


def _number(raw: str, where: str, column: str, expected: str, minimum: float, strict: bool):
    text = (raw or "").strip()
    try:
        x = float(text)
    except ValueError:
        x = math.nan
    if not math.isfinite(x) or x < minimum or (strict and x <= minimum):
        raise CompoundError(f"{where}: column {column!r} expected {expected}, found {text!r}")
    return x


def default_optical_alpha_A3(name: str, smiles: str) -> float | None:
    """The stated default optical polarizability (Å³) of a compound without ``alpha_opt_A3``:
    its structure's additive static α, or None without a usable structure."""
    if not (smiles or "").strip():
        return None
    value = estimate(smiles.strip(), name).alpha_additive_A3
    return value if math.isfinite(value) and value > 0 else None


def _optical(
    entry: dict, compounds_file: str, light: bool, name: str = "?", notes: list[str] | None = None
) -> tuple[float, float]:
    """(Re α SI, σ_abs m²) of a compound from its compounds.csv row."""
    if not light:
        return 0.0, 0.0
    extra = entry.get("extra", {})
    where = f"{compounds_file} line {entry.get('line', '?')}"
    raw = extra.get("alpha_opt_A3", "")
    if not (raw or "").strip():
        default = default_optical_alpha_A3(name, extra.get("smiles", ""))
        if default is not None:
            raw = repr(default)
            if notes is not None:
                notes.append(
                    f"{compounds_file} line {entry.get('line', '?')}: {name} has no "
                    f"alpha_opt_A3; the light grating's contrast uses the structure's additive "
                    f"static α, {default:.3g} Å³ (the stated default; docs/visibility.md §11)"
                )
    alpha = _number(
        raw,
        where,
        "alpha_opt_A3",
        "the optical polarizability in Å³ (> 0, or a smiles for the structure's default) for "
        "the light grating's contrast per velocity",
        0.0,
        True,
    )
    sigma = 0.0
    if (extra.get("sigma_abs_m2") or "").strip():
        sigma = _number(extra["sigma_abs_m2"], where, "sigma_abs_m2", "a number >= 0", 0.0, False)
    return alpha * ANGSTROM3_SI, sigma


def _series_power(s: SeriesData, cells: dict[int, str], shifts_name: str) -> float:
    where = f"{shifts_name}: series {s.label}"
    raws = [(cells.get(line) or "").strip() for line in s.lines]
    values = {_number(r, where, "laser_power_W", "a power >= 0 W", 0.0, False) for r in raws}
    if len(values) != 1:
        found = ", ".join(f"{p:g} W" for p in sorted(values))
        raise CompoundError(f"{where}: column 'laser_power_W' expected one value, found {found}")
    return values.pop()


def attach_grating_contrast(
    doc: dict,
    campaign_path: Path,
    layout: str,
    stated: dict,
    series: dict[str, list[SeriesData]],
    problems: dict[str, str],
    info: dict[str, dict],
    shifts_path: Path,
    compounds_file: str,
    scans: bool = False,
    notes: list[str] | None = None,
) -> dict[str, list[SeriesData]]:
    """The series with the model's contrast per velocity class (``grating_contrast``); compounds
    whose inputs are missing or bad move to ``problems``. A light grating without a
    ``laser_power_W`` column in shifts.csv leaves the series as they are, with a note (the
    campaign's visibility data may be all the ``[gratings]`` table is for).

    Raises :class:`InputError` for a bad ``[gratings]`` table, or a light grating with raw scans
    (which carry no laser power per series).
    """
    fname = campaign_path.name
    spec = parse_gratings(doc, fname, layout, stated)
    if spec.light and scans:
        raise InputError(
            f"{fname} [gratings] second: the light grating's contrast per velocity needs each "
            "series' laser power (shifts.csv column 'laser_power_W'), found raw scans "
            "([data] scans), which carry none"
        )
    tl = spec.build()
    cells = None
    if spec.light:
        table = read_table(shifts_path, ("compound",), "shifts")
        if "laser_power_W" not in table.columns:
            if notes is not None:
                notes.append(
                    f"{fname} [gratings]: {shifts_path.name} has no 'laser_power_W' column, so "
                    "the deflection series use no model contrast per velocity class (give the "
                    "light grating's power of each series to use it; docs/visibility.md §11)"
                )
            return series
        cells = {
            line: row.get("laser_power_W", "")
            for line, row in zip(table.lines, table.rows, strict=True)
        }
    out: dict[str, list[SeriesData]] = {}
    for name, items in series.items():
        entry = info.get(name)
        if name in problems or entry is None or entry.get("problem") or "mass" not in entry:
            out[name] = items
            continue
        try:
            alpha, sigma = _optical(entry, compounds_file, spec.light, name, notes)
            new = []
            for s in items:
                power = _series_power(s, cells or {}, shifts_path.name) if spec.light else 0.0
                model = GratingContrast(tl, float(entry["mass"].value), power, alpha, sigma)
                new.append(replace(s, grating_contrast=model))
        except CompoundError as exc:
            problems[name] = str(exc)
            continue
        out[name] = new
    return out
