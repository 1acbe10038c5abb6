"""Plausibility of the inputs: values that parse but lie far outside any beam experiment.

A unit slip ("266 mm" for "266 nm") passes every structural check and turns into a confident,
wrong result.  These checks do not stop the run; each gives one warning that names the key (or
the file and row of a table value), the value, the expected range and, where one fits, the
likely slip.  The warnings travel with the campaign (:attr:`Campaign.warnings`) into the
result's notes (results.json, report.md) and onto stderr (``warning: …``).

The ranges are deliberately wide (orders of magnitude beyond working instruments):

* grating period 10 nm – 100 µm (near-field and far-field matter-wave gratings);
* a deflector no longer than the layout it sits in;
* field below ≈ 1e8 V/m, the order of magnitude of vacuum-gap breakdown for centimetre
  electrodes (from memory; Latham, *High Voltage Vacuum Insulation*, gives 10–100 MV/m);
* voltages up to 1e6 V;
* beam velocities 1 – 1e5 m/s;
* masses 1 – 1e8 u (a hydrogen atom to a large virus).
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable, Mapping
from typing import Any

__all__ = [
    "FIELD_MAX_V_M",
    "GRATING_PERIOD_RANGE_M",
    "MASS_RANGE_U",
    "VELOCITY_RANGE_M_S",
    "VOLTAGE_MAX_V",
    "input_warnings",
    "unit_slip",
]

GRATING_PERIOD_RANGE_M = (10e-9, 100e-6)
FIELD_MAX_V_M = 1e8
VOLTAGE_MAX_V = 1e6
VELOCITY_RANGE_M_S = (1.0, 1e5)
MASS_RANGE_U = (1.0, 1e8)
AMU_KG = 1.66053906660e-27  # scipy.constants.atomic_mass (CODATA 2018)

_PREFIXES = {-12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M", 9: "G"}
_PREFIX_EXP = {"p": -12, "n": -9, "µ": -6, "μ": -6, "u": -6, "m": -3, "": 0, "k": 3, "M": 6}
_UNIT_TEXT = re.compile(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?\s*\)?\s*(\S*)\s*$")


def _num(x: float) -> str:
    return f"{x:.4g}"


def _fits(value: float, lo: float, hi: float) -> bool:
    return lo <= value <= hi


def _shift(value: float, lo: float, hi: float) -> int | None:
    """The power of ten (a multiple of 3, smallest first) that brings ``value`` into range."""
    for s in (3, 6, 9, 12):
        for sign in (-1,) if value > hi else (1,):
            if _fits(value * 10.0 ** (sign * s), lo, hi):
                return sign * s
    return None


def _stated_unit(raw: Any, base: str) -> str:
    """The unit the user wrote for ``raw`` ("266 mm" → "mm"), or ``base`` for a bare number."""
    if not isinstance(raw, str):
        return base
    text = raw.split("±")[-1].split("+/-")[-1]
    m = _UNIT_TEXT.search(text.strip())
    unit = m.group(1) if m else ""
    return unit or base


def unit_slip(value: float, lo: float, hi: float, base: str, written: str | None = None) -> str:
    """The likely slip for a value outside [lo, hi] in unit ``base`` ("mm for nm?"), or ""."""
    s = _shift(value, lo, hi)
    if s is None:
        return ""
    written = written or base
    prefix = written[: len(written) - len(base)] if written.endswith(base) else None
    exp = _PREFIX_EXP.get(prefix) if prefix is not None else None
    want = _PREFIXES.get(exp + s) if exp is not None else None
    if want is None:
        return f"; off by about 1e{s:+d}: a unit slip?"
    return f"; a unit slip ({written} for {want}{base}?)"


def _range_text(lo: float, hi: float, unit: str) -> str:
    return f"{_num(lo)}–{_num(hi)} {unit}"


def _key_warnings(fname: str, raw: Mapping[str, Any], stated, layout: str) -> list[str]:
    out = []
    inst = raw.get("instrument", {})
    period = stated.get("instrument.grating_period")
    if period is not None:
        lo, hi = GRATING_PERIOD_RANGE_M
        if not _fits(period.value, lo, hi):
            slip = unit_slip(
                period.value, lo, hi, "m", _stated_unit(inst.get("grating_period"), "m")
            )
            out.append(
                f"{fname} [instrument] grating_period = {_num(period.value)} m: expected "
                f"10 nm–100 µm{slip}"
            )
    length = stated.get("deflector.length")
    extent = _layout_extent(stated, layout)
    if length is not None and extent is not None and length.value > extent[0]:
        written = _stated_unit(raw.get("deflector", {}).get("length"), "m")
        slip = unit_slip(length.value, 0.0, extent[0], "m", written)
        out.append(
            f"{fname} [deflector] length = {_num(length.value)} m: longer than the layout "
            f"({_num(extent[0])} m {extent[1]}){slip}"
        )
    return out


def _layout_extent(stated, layout: str) -> tuple[float, str] | None:
    if layout == "talbot-lau":
        z1 = stated.get("instrument.grating_positions[0]")
        z3 = stated.get("instrument.grating_positions[2]")
        if z1 is not None and z3 is not None:
            return z3.value - z1.value, "from the first to the last grating"
    if layout == "beam-profile":
        zd = stated.get("instrument.detector_position")
        if zd is not None:
            return zd.value, "to the detector"
    return None  # time-domain: the field is switched in time, its duration may span the pulses


def _rows(what: str, name: str, hits: list[tuple[str, float]], expected: str, slip: str) -> str:
    where, value = hits[0]
    more = f" (and {len(hits) - 1} more row(s))" if len(hits) > 1 else ""
    return f"{name} {where}: {what} = {_num(value)}: expected {expected}{slip}{more}"


def _column_slip(value: float, lo: float, hi: float, base: str) -> str:
    s = _shift(value, lo, hi)
    want = _PREFIXES.get(s) if s is not None else None
    return f"; a unit slip (values in {want}{base}? the column is in {base})" if want else ""


def _table_warnings(
    compounds_file: str,
    masses: Iterable[tuple[str, float]],
    shifts_file: str,
    rows: Iterable[tuple[str, float, float | None]],
    field_per_volt: float | None,
) -> list[str]:
    """Masses (``(row, u)``) and shift rows (``(row, voltage V, velocity m/s or None)``)."""
    out = []
    lo, hi = MASS_RANGE_U
    bad = [(w, m) for w, m in masses if not _fits(m, lo, hi)]
    if bad:
        m = bad[0][1]
        slip = "; a unit slip (kg for u?)" if _fits(m / AMU_KG, lo, hi) else ""
        out.append(_rows("mass_u", compounds_file, bad, _range_text(lo, hi, "u"), slip))
    rows = list(rows)
    volts = [(w, v) for w, v, _ in rows if abs(v) > VOLTAGE_MAX_V]
    if volts:
        slip = _column_slip(abs(volts[0][1]), 0.0, VOLTAGE_MAX_V, "V")
        out.append(_rows("voltage_V", shifts_file, volts, f"|V| ≤ {VOLTAGE_MAX_V:g} V", slip))
    lo, hi = VELOCITY_RANGE_M_S
    fast = [(w, v) for w, _, v in rows if v is not None and not _fits(v, lo, hi)]
    if fast:
        slip = _column_slip(fast[0][1], lo, hi, "m/s")
        out.append(_rows("velocity_m_s", shifts_file, fast, _range_text(lo, hi, "m/s"), slip))
    if field_per_volt and rows:
        where, v, _ = max(rows, key=lambda r: abs(r[1]))
        e = abs(field_per_volt * v)
        if e > FIELD_MAX_V_M:
            out.append(
                f"{shifts_file} {where}: field = field_per_volt × |voltage_V| = "
                f"{_num(abs(field_per_volt))} m⁻¹ × {_num(abs(v))} V = {_num(e)} V/m: above the "
                f"≈{FIELD_MAX_V_M:g} V/m breakdown of vacuum gaps; check the units of the "
                "voltages and of the electrode geometry"
            )
    return out


def input_warnings(
    fname: str,
    raw: Mapping[str, Any],
    stated,
    layout: str,
    *,
    compounds_file: str = "compounds.csv",
    masses: Iterable[tuple[str, float]] = (),
    shifts_file: str = "shifts.csv",
    rows: Iterable[tuple[str, float, float | None]] = (),
    field_per_volt: float | None = None,
) -> tuple[str, ...]:
    """Every plausibility warning of a loaded campaign, one line each.

    ``stated`` maps keys (``"instrument.grating_period"``) to SI :class:`Measured` values,
    ``raw`` is the TOML document (for the unit the user wrote); ``masses`` and ``rows`` are the
    table values with their row labels (``"line 7"``); ``field_per_volt`` (m⁻¹) is the
    deflector's E/V where the model knows it.
    """
    fpv = field_per_volt if field_per_volt is not None and math.isfinite(field_per_volt) else None
    return tuple(
        _key_warnings(fname, raw, stated, layout)
        + _table_warnings(compounds_file, masses, shifts_file, rows, fpv)
    )
