"""Quantities given on the command line (``--voltage "10 kV"``), checked like those of the files."""

from __future__ import annotations

import math

from polarbeam.errors import InputError
from polarbeam.quantities import parse_quantity

__all__ = [
    "parse_voltage",
]


def parse_voltage(voltage) -> float:
    """The magnitude of a non-zero voltage in volts (``"10 kV"``, ``"-5000 V"``, ``2e4``)."""
    v = parse_quantity(voltage, "V", where="--voltage").value
    if not (math.isfinite(v) and v != 0):
        raise InputError(f"--voltage: expected a non-zero voltage, found {voltage!r}")
    return abs(v)
