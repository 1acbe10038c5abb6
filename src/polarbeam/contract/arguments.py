"""Quantities given on the command line (``--voltage "10 kV"``), checked like those of the files."""

from __future__ import annotations

import math

from polarbeam.errors import InputError
from polarbeam.quantities import parse_quantity

__all__ = [
    "parse_duration",
    "parse_temperature",
    "parse_voltage",
]


def parse_voltage(voltage) -> float:
    """The magnitude of a non-zero voltage in volts (``"10 kV"``, ``"-5000 V"``, ``2e4``)."""
    v = parse_quantity(voltage, "V", where="--voltage").value
    if not (math.isfinite(v) and v != 0):
        raise InputError(f"--voltage: expected a non-zero voltage, found {voltage!r}")
    return abs(v)


def parse_temperature(
    temperature, option: str = "--temperature", *, positive: bool = True
) -> float:
    """A temperature in kelvin (``"300 K"``, ``"27 degC"``, or a bare number in K), > 0.

    ``positive=False`` checks only the unit: for an option whose range the step that uses it
    checks (so a temperature a run does not use is not refused).
    """
    t = parse_quantity(temperature, "K", where=option).value
    if positive and not (math.isfinite(t) and t > 0):
        raise InputError(f"{option}: expected a temperature > 0 K, found {temperature!r}")
    return t


def parse_duration(duration, option: str = "--max-seconds") -> float:
    """A time > 0 in seconds (``"30 min"``, ``"2 h"``, or a bare number in s)."""
    t = parse_quantity(duration, "s", where=option).value
    if not (math.isfinite(t) and t > 0):
        raise InputError(f"{option}: expected a time > 0 s, found {duration!r}")
    return t
