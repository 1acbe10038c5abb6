"""Small input checks and formatting shared by the field modules.

Numbers given by the user are checked here so that bad input gives the same one-line
:class:`~polarbeam.errors.InputError` wherever it enters; lengths are stored in metres and printed
in millimetres in messages only.
"""

from __future__ import annotations

import math

from polarbeam.errors import InputError

__all__ = ["MM", "finite", "fmt_mm", "point"]

MM = 1e3  # metres -> mm, for messages only


def fmt_mm(v: float) -> str:
    """A length in metres as millimetres with 6 significant digits (for messages)."""
    return f"{v * MM:.6g}"


def finite(value, what: str) -> float:
    """``value`` as a finite float, or :class:`InputError` naming ``what``."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{what}: expected a finite number, found {value!r}") from None
    if not math.isfinite(v):
        raise InputError(f"{what}: expected a finite number, found {value!r}")
    return v


def point(value, what: str) -> tuple[float, float]:
    """``value`` as a point ``(x, y)`` of finite floats, or :class:`InputError`."""
    try:
        x, y = value
    except (TypeError, ValueError):
        raise InputError(f"{what}: expected a point (x, y), found {value!r}") from None
    return (finite(x, what), finite(y, what))
