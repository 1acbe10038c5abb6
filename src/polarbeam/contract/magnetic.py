"""The magnetic deflector contract: ``[deflector] field = "magnetic"`` and ``current_A`` tables.

.. code-block:: toml

    [deflector]
    field = "magnetic"                      # default "electric"
    model = "uniform"                       # or "field-map" (z_m, field_factor_T2_m_A2)
    entrance = "0.52 ± 0.001 m"
    length = "0.10 ± 0.0005 m"
    field_factor = "35 ± 0.5 T^2/(m A^2)"   # (B·∂B/∂x)/I²
    field_per_ampere = "0.06 T/A"           # optional: |B|/I

A campaign is electric or magnetic, never both: an electric key in a magnetic deflector (or a
magnetic key in an electric one) and a ``voltage_V`` column in a magnetic campaign are one-line
:class:`~polarbeam.errors.InputError` s naming the key or column.  The stated inputs keep the
electric names (``deflector.field_factor`` …) in SI so the error budget, the coupling and the
fits are shared; the field factor is then in T²/(m A²) and the fitted "α" is χ_m/μ0 (J/T²).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from polarbeam._util.tables import read_table
from polarbeam.contract.paths import resolve_data_file
from polarbeam.errors import CompoundError, InputError
from polarbeam.instrument.magnets import MAGNET_MODELS, MagneticDeflector
from polarbeam.quantities import Measured, parse_quantity

__all__ = [
    "FIELDS",
    "MAGNETIC_DEFLECTOR_KEYS",
    "MAGNETIC_DRIVE",
    "MagneticSettings",
    "check_drive_columns",
    "electric_keys_only",
    "magnetic_deflector",
    "magnetic_settings",
]

FIELDS = ("electric", "magnetic")
#: the drive column of every magnetic data table (shifts, profiles)
MAGNETIC_DRIVE = "current_A"
ELECTRIC_DRIVE = "voltage_V"
#: keys of a magnetic [deflector] → SI unit (None: not a quantity)
MAGNETIC_DEFLECTOR_KEYS: dict[str, str | None] = {
    "field": None,
    "model": None,
    "entrance": "m",
    "length": "m",
    "field_factor": "T^2/(m A^2)",
    "field_per_ampere": "T/A",
    "field_map": None,
}
_MAGNETIC_ONLY = ("field_per_ampere",)
_REQUIRED = {
    "uniform": ("entrance", "length", "field_factor"),
    "field-map": ("entrance", "field_map"),
}
_MAP_COLUMNS = ("z_m", "field_factor_T2_m_A2")


@dataclass(frozen=True)
class MagneticSettings:
    """A magnetic [deflector]: its model, stated inputs (SI) and field map (or None)."""

    model: str
    stated: dict[str, Measured]
    field_map: tuple[tuple[float, ...], tuple[float, ...]] | None = None
    drive: str = MAGNETIC_DRIVE


def electric_keys_only(doc: dict) -> dict:
    """The document without the magnetic-only ``[deflector]`` keys (``field``,
    ``field_per_ampere``), for the electric key check; they are checked here."""
    defl = doc.get("deflector")
    if not isinstance(defl, dict) or not ({"field", *_MAGNETIC_ONLY} & set(defl)):
        return doc
    return {
        **doc,
        "deflector": {k: v for k, v in defl.items() if k not in ("field", *_MAGNETIC_ONLY)},
    }


def _field(defl: dict, fname: str) -> str:
    val = defl.get("field", "electric")
    if not isinstance(val, str) or val not in FIELDS:
        raise InputError(
            f"{fname} [deflector] field: expected one of {', '.join(FIELDS)}, found {val!r}"
        )
    return val


def magnetic_settings(doc: dict, fname: str, layout: str, base: Path) -> MagneticSettings | None:
    """The magnetic deflector of a campaign document, validated; None for an electric one.

    Raises :class:`InputError` for a key of the other kind of deflector, a missing key, a unit
    that is not the expected one, or a layout without a magnetic model (time-domain)."""
    defl = doc.get("deflector", {})
    if _field(defl, fname) == "electric":
        for k in _MAGNETIC_ONLY:
            if k in defl:
                raise InputError(
                    f"{fname} [deflector] {k}: a magnetic key in an electric deflector; remove it "
                    'or set field = "magnetic"'
                )
        return None
    bad = [k for k in defl if k not in MAGNETIC_DEFLECTOR_KEYS]
    if bad:
        raise InputError(
            f"{fname} [deflector] {', '.join(bad)}: an electric key in a magnetic deflector "
            f'(field = "magnetic"); expected only {", ".join(MAGNETIC_DEFLECTOR_KEYS)}'
        )
    if layout not in ("talbot-lau", "beam-profile"):
        raise InputError(
            f"{fname} [deflector] field: 'magnetic' expects layout talbot-lau or beam-profile, "
            f"found {layout!r}"
        )
    data = doc.get("data", {})
    for k in ("scans", "profiles", "recoil", "visibilities"):
        if k in data:
            raise InputError(
                f"{fname} [data] {k}: not read for a magnetic deflector; expected 'shifts' "
                f"(columns {MAGNETIC_DRIVE}, …)"
            )
    model = defl.get("model")
    if model not in MAGNET_MODELS:
        raise InputError(
            f"{fname} [deflector] model: expected one of {', '.join(MAGNET_MODELS)} for a "
            f"magnetic deflector, found {model!r}"
        )
    for k in _REQUIRED[model]:
        if k not in defl:
            raise InputError(f"{fname} [deflector] {k}: required for a magnetic {model!r} magnet")
    if model == "field-map" and "field_factor" in defl:
        raise InputError(
            f"{fname} [deflector] field_factor: not used by model 'field-map' (the map holds "
            "field_factor_T2_m_A2); remove it"
        )
    stated = {}
    for k, raw in defl.items():
        unit = MAGNETIC_DEFLECTOR_KEYS[k]
        if unit is None:
            continue
        stated[f"deflector.{k}"] = parse_quantity(raw, unit, where=f"{fname} [deflector] {k}")
    field_map = None
    if model == "field-map":
        fm = defl["field_map"]
        if not isinstance(fm, str):
            raise InputError(f"{fname} [deflector] field_map: expected a file path, found {fm!r}")
        field_map = _read_map(resolve_data_file(base, fm, f"{fname} [deflector] field_map"))
    return MagneticSettings(model, stated, field_map)


def _read_map(path: Path):
    table = read_table(path, _MAP_COLUMNS, "field map")
    xs, ys = [], []
    for i in range(len(table.rows)):
        try:
            xs.append(table.number(i, _MAP_COLUMNS[0]))
            ys.append(table.number(i, _MAP_COLUMNS[1]))
        except CompoundError as exc:  # a bad map concerns every compound
            raise InputError(str(exc)) from exc
    order = np.argsort(xs)
    return tuple(np.asarray(xs)[order]), tuple(np.asarray(ys)[order])


def magnetic_deflector(m: MagneticSettings, v: dict[str, float], source: str = "field map"):
    """The :class:`MagneticDeflector` for parameter values ``v`` (``deflector.*`` keys, SI)."""
    z, g = m.field_map if m.field_map is not None else (None, None)
    return MagneticDeflector(
        gradient_factor=v.get("deflector.field_factor", 1.0),
        entrance=v["deflector.entrance"],
        length=v.get("deflector.length"),
        field_per_ampere=v.get("deflector.field_per_ampere"),
        model=m.model,
        z=z,
        g=g,
        source=source,
    )


def check_drive_columns(path: Path | None, magnetic: bool, what: str = "shifts") -> str:
    """The drive column of a data table (``voltage_V`` or ``current_A``); a magnetic campaign's
    table with a ``voltage_V`` column is an :class:`InputError` naming the column."""
    if not magnetic:
        return ELECTRIC_DRIVE
    if path is not None and path.is_file():
        table = read_table(path, (), what)
        if ELECTRIC_DRIVE in table.columns:
            raise InputError(
                f"{table.name}: column '{ELECTRIC_DRIVE}' in a magnetic campaign ([deflector] "
                f"field = \"magnetic\"); expected '{MAGNETIC_DRIVE}' (the magnet current)"
            )
    return MAGNETIC_DRIVE
