"""``[data] profiles = "profiles.csv"``: whole beam profiles (beam-profile layout).

Columns: ``compound, temperature_K, velocity_m_s, velocity_err_m_s, velocity_spread_m_s,
voltage_V, position_m, counts`` and optionally ``rotational_temperature_K`` (empty: fitted).
Rows of one compound at one temperature form a series, rows of one voltage a profile. A bad cell
fails only its compound (one line naming the file, line and column).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from polarbeam._util.tables import CELL_BLANKS, read_table
from polarbeam.beam.rotors.profiles import Profile, ProfileSeries
from polarbeam.errors import CompoundError, InputError

__all__ = ["PROFILE_COLUMNS", "load_profiles"]

PROFILE_COLUMNS = (
    "compound",
    "temperature_K",
    "velocity_m_s",
    "velocity_err_m_s",
    "velocity_spread_m_s",
    "voltage_V",
    "position_m",
    "counts",
)


def load_profiles(path: Path, layout: str, fname: str):
    """(compound → tuple of ProfileSeries, compound → problem line)."""
    if layout != "beam-profile":
        raise InputError(
            f"{fname} [data] profiles: whole profiles need the 'beam-profile' layout, found "
            f"{layout!r}"
        )
    table = read_table(path, PROFILE_COLUMNS, "profiles")
    if not table.rows:
        raise InputError(f"{table.name}: expected data rows below the header, found none")
    rot_col = "rotational_temperature_K" in table.columns
    groups: dict[str, dict[float, dict]] = {}
    problems: dict[str, str] = {}
    for i, row in enumerate(table.rows):
        name = row.get("compound", "").strip(CELL_BLANKS)
        if name in problems:
            continue
        try:
            table.check_row(i)
            num = table.number
            temp = num(i, "temperature_K", positive=True)
            g = groups.setdefault(name, {}).setdefault(
                temp, {"v": [], "dv": [], "sv": [], "rot": set(), "by_v": {}}
            )
            g["v"].append(num(i, "velocity_m_s", positive=True))
            g["dv"].append(num(i, "velocity_err_m_s", nonnegative=True))
            g["sv"].append(num(i, "velocity_spread_m_s", nonnegative=True))
            raw_rot = (row.get("rotational_temperature_K") or "").strip() if rot_col else ""
            g["rot"].add(num(i, "rotational_temperature_K", positive=True) if raw_rot else None)
            volt = num(i, "voltage_V")
            pos = num(i, "position_m")
            counts = num(i, "counts", nonnegative=True)
            g["by_v"].setdefault(volt, []).append((pos, counts))
        except CompoundError as exc:
            problems[name] = str(exc)
            groups.pop(name, None)
    out: dict[str, tuple[ProfileSeries, ...]] = {}
    for name, by_t in groups.items():
        series = []
        for temp, g in sorted(by_t.items()):
            label = f"{name} @ {temp:g} K"
            if len(g["rot"]) > 1:
                problems[name] = (
                    f"{table.name}: series {label}: column 'rotational_temperature_K' expected "
                    "the same value (or empty) on every row of the series, found several"
                )
                break
            profiles = []
            for volt, pts in sorted(g["by_v"].items()):
                arr = np.array(sorted(pts), dtype=float)
                profiles.append(Profile(volt, arr[:, 0], arr[:, 1]))
            series.append(
                ProfileSeries(
                    label,
                    float(np.mean(g["v"])),
                    float(np.mean(g["sv"])),
                    tuple(profiles),
                    next(iter(g["rot"])),
                    temp,
                )
            )
        else:
            out[name] = tuple(series)
    for name in problems:
        out.pop(name, None)
    return out, problems
