"""Files a ``[deflector]`` table names: a field map (``z_m, field_factor_m3``) and a switching
waveform (``t_s, amplitude``), read and validated with one-line errors (both are structural: a
bad file concerns every compound)."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from polarbeam._util.tables import read_table
from polarbeam.contract.paths import resolve_data_file
from polarbeam.errors import CompoundError, InputError

__all__ = ["deflector_files"]


def _read_profile(path: Path, cols: tuple[str, str], what: str):
    table = read_table(path, cols, what)
    xs, ys = [], []
    for i in range(len(table.rows)):
        try:
            xs.append(table.number(i, cols[0]))
            ys.append(table.number(i, cols[1]))
        except CompoundError as exc:  # a bad map is structural: it concerns every compound
            raise InputError(str(exc)) from exc
    order = np.argsort(xs)
    return tuple(np.asarray(xs)[order]), tuple(np.asarray(ys)[order])


def _read_waveform(path: Path):
    """Waveform CSV ``t_s, amplitude``: t relative to the switch-on, amplitude in 0..1."""
    table = read_table(path, ("t_s", "amplitude"), "waveform")
    ts, amps = [], []
    try:
        for i in range(len(table.rows)):
            if "__bad__" in table.rows[i]:
                raise InputError(f"{table.name} line {table.lines[i]}: {table.rows[i]['__bad__']}")
            ts.append(table.number(i, "t_s"))
            a = table.number(i, "amplitude")
            if not 0.0 <= a <= 1.0:
                raise InputError(
                    f"{table.name} line {table.lines[i]}: column 'amplitude' expected a relative "
                    f"amplitude in 0..1, found {table.rows[i]['amplitude']!r}"
                )
            amps.append(a)
            if i and ts[-1] <= ts[-2]:
                raise InputError(
                    f"{table.name} line {table.lines[i]}: column 't_s' expected increasing times, "
                    f"found {table.rows[i]['t_s']!r} after {table.rows[i - 1]['t_s']!r}"
                )
    except CompoundError as exc:  # a bad waveform is structural: it concerns every compound
        raise InputError(str(exc)) from None
    if len(ts) < 2:
        raise InputError(
            f"{table.name}: expected at least two rows (t_s, amplitude), found {len(ts)}"
        )
    if max(amps) <= 0:
        raise InputError(f"{table.name}: column 'amplitude' is zero everywhere; the field is off")
    return tuple(ts), tuple(amps)


def deflector_files(defl: dict, base: Path, fname: str, layout: str, model: str):
    """(field map, waveform) profiles named in ``[deflector]``, read and validated (or None)."""
    field_map = waveform = None
    if model == "field-map" and layout != "time-domain":
        fm = defl["field_map"]
        if not isinstance(fm, str):
            raise InputError(f"{fname} [deflector] field_map: expected a file path, found {fm!r}")
        fm_path = resolve_data_file(base, fm, f"{fname} [deflector] field_map")
        field_map = _read_profile(fm_path, ("z_m", "field_factor_m3"), "field map")
    if "waveform" in defl:
        wf = defl["waveform"]
        if not isinstance(wf, str):
            raise InputError(f"{fname} [deflector] waveform: expected a file path, found {wf!r}")
        waveform = _read_waveform(resolve_data_file(base, wf, f"{fname} [deflector] waveform"))
    return field_map, waveform
