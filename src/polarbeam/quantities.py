"""Quantities at the edges: parse ``"1.20 ± 0.05 mm"`` strings into SI value and 1σ error.

Accepted forms (the error is optional and is a 1σ standard uncertainty)::

    "0.52 m"            "0.52 ± 0.001 m"      "0.52 +/- 0.001 m"
    "(0.52 ± 0.001) m"  "520 mm ± 1 mm"       "1.21e5 ± 600 m^-3"
    0.52                "0.52"                (a bare number is SI)

The SI units and prefixes a campaign normally states (``m``, ``mm``, ``nm``, ``K``, ``kV``,
``m/s^2``, ``rad^2/s`` …) are converted by a small table that repeats pint's definitions and its
order of multiplication, so the numbers are bit-identical to pint's (tests/core compare every
entry); any other unit string is read by :mod:`pint`, which loads only then (it is slow to import
and to build its registry). The dimension is checked against what the key expects, and the error
message names the key, the expected unit and what was found.
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


# --- the light unit table -------------------------------------------------------------------
# Each entry repeats pint's definition (default_en.txt): scale and reference in pint's order, or
# a base dimension. Conversions walk them exactly as pint's ``_get_root_units`` does, so the
# floating-point products agree bit for bit; anything not here falls back to pint.
#: unit name → ("base", dimension) or (scale, ((referenced unit, exponent), ...)).
UNIT_DEFINITIONS: dict[str, tuple] = {
    "meter": ("base", "length"),
    "second": ("base", "time"),
    "ampere": ("base", "current"),
    "gram": ("base", "mass"),
    "kelvin": ("base", "temperature"),
    "radian": ("base", ""),  # dimensionless in pint
    "π": (3.141592653589793, ()),
    "degree": (0.005555555555555556, (("π", 1), ("radian", 1))),
    "minute": (60, (("second", 1),)),
    "hour": (60, (("minute", 1),)),
    "hertz": (1.0, (("second", -1),)),
    "kilogram": (1000.0, (("gram", 1),)),
    "newton": (1.0, (("kilogram", 1), ("meter", 1), ("second", -2))),
    "joule": (1, (("newton", 1), ("meter", 1))),
    "watt": (1.0, (("joule", 1), ("second", -1))),
    "coulomb": (1, (("ampere", 1), ("second", 1))),
    "volt": (1.0, (("joule", 1), ("coulomb", -1))),
    "angstrom": (1e-10, (("meter", 1),)),
}
#: symbol or name as written → unit name (pint's symbols and names; prefixes only on symbols).
UNIT_SYMBOLS: dict[str, str] = {
    "m": "meter", "s": "second", "A": "ampere", "g": "gram", "K": "kelvin", "rad": "radian",
    "deg": "degree", "min": "minute", "h": "hour", "Hz": "hertz", "N": "newton", "J": "joule",
    "W": "watt", "C": "coulomb", "V": "volt", "Å": "angstrom", "\u212b": "angstrom",
    "meter": "meter", "second": "second", "kelvin": "kelvin", "radian": "radian",
    "degree": "degree", "volt": "volt", "watt": "watt", "hour": "hour", "minute": "minute",
}  # fmt: skip
#: prefix symbol → (pint's prefix name, scale).
UNIT_PREFIXES: dict[str, tuple[str, float]] = {
    "f": ("femto", 1e-15), "p": ("pico", 1e-12), "n": ("nano", 1e-09),
    "µ": ("micro", 1e-06), "μ": ("micro", 1e-06), "u": ("micro", 1e-06),
    "m": ("milli", 0.001), "c": ("centi", 0.01), "d": ("deci", 0.1),
    "k": ("kilo", 1000.0), "M": ("mega", 1000000.0), "G": ("giga", 1000000000.0),
}  # fmt: skip
_FAST_FACTOR = re.compile(r"^([^\s*/^()]+)(?:\^(-?\d+))?$")


def _unit_name(symbol: str) -> str | None:
    """pint's name of a (prefixed) symbol, or None when the table does not know it."""
    if symbol in UNIT_SYMBOLS:
        return UNIT_SYMBOLS[symbol]
    prefix, rest = symbol[:1], symbol[1:]
    if prefix in UNIT_PREFIXES and rest in UNIT_SYMBOLS and rest == rest.strip() and len(rest) < 4:
        return UNIT_PREFIXES[prefix][0] + UNIT_SYMBOLS[rest]
    return None


def _definition(name: str) -> tuple:
    if name in UNIT_DEFINITIONS:
        return UNIT_DEFINITIONS[name]
    for pname, scale in UNIT_PREFIXES.values():
        rest = name[len(pname) :]
        if name.startswith(pname) and rest in UNIT_DEFINITIONS:
            return scale, ((rest, 1),)  # pint: prefix scale, reference the unprefixed unit
    raise KeyError(name)


def fast_units(text: str) -> list[tuple[str, int]] | None:
    """Units of ``text`` in the order pint's container holds them; None if the table lacks one.

    Only ``a``, ``a^n`` and ``a**n`` joined by ``*`` and ``/`` (read left to right, as pint
    does), with an optional leading ``1/``, are read here; spaces, parentheses and every other
    form go to pint.
    """
    text = text.strip()
    if not text:
        return []
    units: dict[str, int] = {}
    for i, piece in enumerate(text.replace("**", "^").split("/")):
        if i == 0 and piece == "1":
            continue
        for j, part in enumerate(piece.split("*")):
            m = _FAST_FACTOR.match(part)
            name = _unit_name(m.group(1)) if m else None
            if name is None:
                return None
            exponent = int(m.group(2) or 1)
            units[name] = units.get(name, 0) + (-exponent if i > 0 and j == 0 else exponent)
    return [(n, e) for n, e in units.items() if e != 0]


def _walk(name: str, exponent: int, acc: list, dims: dict[str, int]) -> None:
    """pint's ``_get_root_units_recurse``: multiply the scales in the same order."""
    scale, ref = _definition(name)
    if scale == "base":
        if ref:
            dims[ref] = dims.get(ref, 0) + exponent
        return
    acc[0] *= scale**exponent
    for sub, e in ref:
        _walk(sub, exponent * e, acc, dims)


def fast_convert(number: float, unit: str, expected: str) -> float | None:
    """``number`` in ``unit`` expressed in ``expected``, bit-identical to pint.

    Returns None when the table does not know a unit (the caller asks pint); raises
    :class:`ValueError` when the dimensions differ.
    """
    src = fast_units(unit)
    dst = fast_units(expected)
    if src is None or dst is None:
        return None
    merged = dict(src)
    for name, e in dst:
        merged[name] = merged.get(name, 0) - e
        if merged[name] == 0:
            del merged[name]
    acc: list = [1]
    dims: dict[str, int] = {}
    for name, e in merged.items():
        _walk(name, e, acc, dims)
    if any(dims.values()):
        raise ValueError(f"{unit!r} is not a unit of {expected or 'dimensionless'}")
    return float(number * acc[0])


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
    if not unit:
        return float(number)  # bare number: SI already
    try:
        fast = fast_convert(number, unit, expected)
    except ValueError:
        raise QuantityError(
            f"{where}: expected a unit of {expected or 'dimensionless'}, found {unit!r} "
            f"in {original!r}"
        ) from None
    if fast is not None:
        return fast
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
