"""The light unit table agrees with pint bit for bit on every unit it accepts.

pint (the reference: its default definitions, default_en.txt) is imported here only; the
package converts the common SI units through ``polarbeam.quantities`` without importing it.
"""

import itertools
import subprocess
import sys

import pytest

from polarbeam._util.optional import has, missing_reason
from polarbeam.quantities import (
    UNIT_PREFIXES,
    UNIT_SYMBOLS,
    fast_convert,
    fast_units,
)

pytestmark = pytest.mark.skipif(not has("pint"), reason=missing_reason("pint"))

#: every unit a campaign key expects (contract/ tables), dimensionless included.
EXPECTED = ["", "1/s", "K", "V", "W", "m", "m/s", "m/s^2", "m^-1", "m^-3", "m^2", "rad", "rad/s",
            "rad^2/s", "s", "kg"]  # fmt: skip
NUMBERS = [1.0, 0.52, 1.21e5, 3.3e-7]


def _symbols():
    out = list(UNIT_SYMBOLS)
    for p, u in itertools.product(UNIT_PREFIXES, UNIT_SYMBOLS):
        if len(u) < 4:
            out.append(p + u)
    return out


def _forms(symbol):
    return [symbol, f"{symbol}^2", f"{symbol}^-1", f"{symbol}**-3", f"1/{symbol}", f"m/{symbol}^2",
            f"{symbol}/s", f"{symbol}*s"]  # fmt: skip


@pytest.fixture(scope="module")
def ureg():
    import pint

    return pint.UnitRegistry(autoconvert_offset_to_baseunit=True)


def _pint(ureg, number, unit, expected):
    target = ureg.parse_units(expected) if expected else ureg.dimensionless
    q = ureg.Quantity(number, unit)
    if q.dimensionality != (1 * target).dimensionality:
        return "dimension"
    return float(q.to(target).magnitude)


def test_every_accepted_unit_matches_pint_bit_for_bit(ureg):
    checked = 0
    for symbol in _symbols():
        for unit in _forms(symbol):
            assert fast_units(unit) is not None, unit
            for expected in EXPECTED:
                for x in NUMBERS:
                    ref = _pint(ureg, x, unit, expected)
                    try:
                        got = fast_convert(x, unit, expected)
                    except ValueError:
                        got = "dimension"
                    assert got == ref, (x, unit, expected, got, ref)
                    checked += 1
    assert checked > 10_000


@pytest.mark.parametrize(
    "unit", ["meters", "degC", "(m/s)", "m s", "m^0.5", "Torr", "cm^-1 s", "counts/s", "µ"]
)
def test_other_units_are_left_to_pint(unit):
    assert fast_units(unit) is None


def test_common_units_do_not_import_pint():
    code = (
        "import sys; from polarbeam.quantities import parse_quantity as p;"
        "p('520 mm ± 1 mm', 'm'); p('10 kV', 'V'); p('3 us', 's'); p('1.2e5 m^-3', 'm^-3');"
        "print('pint' in sys.modules)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
