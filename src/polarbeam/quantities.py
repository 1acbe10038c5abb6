"""Quantities at the edges: parse ``"1.20 ± 0.05 mm"`` strings into SI value and 1σ error.

Accepted forms (the error is optional and is a 1σ standard uncertainty)::

    "0.52 m"            "0.52 ± 0.001 m"      "0.52 +/- 0.001 m"
    "(0.52 ± 0.001) m"  "520 mm ± 1 mm"       "1.21e5 ± 600 m^-3"
    0.52                "0.52"                (a bare number is SI)

Units are read by :mod:`pint`; the dimension is checked against what the key expects, and the
error message names the key, the expected unit and what was found.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import lru_cache

from polarbeam.errors import QuantityError

__all__ = ["Measured", "format_value_error", "parse_quantity", "value_error_text"]


@dataclass(frozen=True)
class Measured:
    """A stated input: SI value and its 1σ standard uncertainty (0 when none was given)."""

    value: float
    error: float = 0.0

    def __post_init__(self):
        if not math.isfinite(self.value):
            raise QuantityError(f"value must be finite, found {self.value!r}")
        if not (math.isfinite(self.error) and self.error >= 0):
            raise QuantityError(f"error must be finite and >= 0, found {self.error!r}")

    @property
    def relative_error(self) -> float:
        return abs(self.error / self.value) if self.value else math.inf


@lru_cache(maxsize=1)
def _ureg():
    import pint

    return pint.UnitRegistry(autoconvert_offset_to_baseunit=True)


# the ± separator alone (surrounding spaces are stripped from the parts): a pattern that also
# matched the spaces (``\s*±\s*``) retried them at every position, quadratic in their number
_PM = re.compile(r"±|\+/-|\+-")
_UNIT_CHARS = re.compile(r"^[A-Za-zµμÅΩ°][A-Za-z0-9µμÅΩ°^*/ .()-]*$")
# the unit is the rest, stripped afterwards (a lazy ``(.*?)\s*$`` is quadratic in inner spaces)
_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)(.*)$")


def _split_number(text: str, where: str, original: str) -> tuple[float, str]:
    m = _NUMBER.match(text)
    if not m:
        raise QuantityError(f"{where}: expected 'value [± error] unit', found {original!r}")
    return float(m.group(1)), m.group(2).strip()


def _to_si(number: float, unit: str, expected: str, where: str, original: str) -> float:
    if unit and not _UNIT_CHARS.match(unit):
        raise QuantityError(
            f"{where}: unknown unit {unit!r} in {original!r} (expected a unit of {expected or '1'})"
        )
    ureg = _ureg()
    target = ureg.parse_units(expected) if expected else ureg.dimensionless
    try:
        q = ureg.Quantity(number, unit) if unit else None
    except Exception as exc:  # pint raises several types for junk units
        raise QuantityError(
            f"{where}: unknown unit {unit!r} in {original!r} (expected a unit of {expected or '1'})"
        ) from exc
    if q is None:
        return float(number)  # bare number: SI already
    if q.dimensionality != (1 * target).dimensionality:
        raise QuantityError(
            f"{where}: expected a unit of {expected or 'dimensionless'}, found {unit!r} "
            f"in {original!r}"
        )
    return float(q.to(target).magnitude)


def parse_quantity(text, expected: str = "", where: str = "value") -> Measured:
    """Parse a quantity string (or a bare number) into SI :class:`Measured`.

    Parameters
    ----------
    text
        ``"value [± err] [unit]"``; a number is taken as SI.
    expected
        The SI unit the key expects, in pint syntax (``"m"``, ``"m^-3"``, ``"K"``); empty for a
        dimensionless quantity.
    where
        Where the string came from, for the error message (``"campaign.toml [deflector] length"``).
    """
    if isinstance(text, bool):
        raise QuantityError(f"{where}: expected a quantity, found {text!r}")
    if isinstance(text, int | float):
        value = float(text)
        if not math.isfinite(value):
            raise QuantityError(f"{where}: expected a finite number, found {text!r}")
        return Measured(value, 0.0)
    if not isinstance(text, str):
        raise QuantityError(
            f"{where}: expected a quantity string like '1.2 ± 0.1 mm', found {type(text).__name__}"
        )
    original = text
    s = text.strip()
    parts = [p.strip() for p in _PM.split(s)]
    if len(parts) > 2:
        raise QuantityError(f"{where}: more than one ± in {original!r}")
    if len(parts) == 2:
        left, right = parts
        outer_unit = ""
        if left.startswith("("):
            close = right.find(")")
            if close < 0:
                raise QuantityError(f"{where}: unbalanced parenthesis in {original!r}")
            outer_unit = right[close + 1 :].strip()
            right = right[:close]
            left = left[1:]
        v, vu = _split_number(left, where, original)
        e, eu = _split_number(right, where, original)
        if e < 0 or (e == 0 and right.lstrip().startswith("-")):
            raise QuantityError(
                f"{where}: expected a non-negative error after ±, found {original!r}"
            )
        if outer_unit:
            if vu or eu:
                raise QuantityError(f"{where}: units both inside and outside () in {original!r}")
            vu = eu = outer_unit
        elif not vu:
            vu = eu
        elif not eu:
            eu = vu
        value = _to_si(v, vu, expected, where, original)
        err = abs(_to_si(e, eu, expected, where, original))
    else:
        v, vu = _split_number(s, where, original)
        value = _to_si(v, vu, expected, where, original)
        err = 0.0
    if not (math.isfinite(value) and math.isfinite(err)):
        raise QuantityError(f"{where}: expected finite numbers, found {original!r}")
    return Measured(value, err)


def format_value_error(value: float, error: float, digits: int = 2) -> str:
    """Format ``value ± error`` rounded to ``digits`` significant digits of the error."""
    if not math.isfinite(value):
        return "—"
    if not (math.isfinite(error) and error > 0):
        return f"{value:.4g}"
    exponent = math.floor(math.log10(error)) - (digits - 1)
    decimals = max(0, -exponent)
    return f"{value:.{decimals}f} ± {error:.{decimals}f}"


def value_error_text(value: float | None, error: float | None) -> str:
    """:func:`format_value_error`, or "—" when either number is missing."""
    return format_value_error(value, error) if value is not None and error is not None else "—"
