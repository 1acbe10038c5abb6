"""The unit conversions of polarbeam.constants against scipy.constants (CODATA), and the
conversion table of docs/preparing.md against polarbeam.constants."""

from __future__ import annotations

import math
import re
from pathlib import Path

import pytest
from scipy import constants as sc

from polarbeam import constants as pc

DOC = Path(__file__).resolve().parents[2] / "docs" / "preparing.md"

A0 = sc.physical_constants["Bohr radius"][0]
HARTREE = sc.physical_constants["Hartree energy"][0]
E = sc.e


def test_constants_are_the_scipy_codata_values():
    # scipy.constants (CODATA): the SI constants polarbeam uses are scipy's, not copies
    assert pc.EPSILON0 == sc.epsilon_0
    assert pc.BOLTZMANN == sc.k
    assert pc.HBAR == sc.hbar
    assert pc.AMU == sc.physical_constants["atomic mass constant"][0]
    assert pc.CONSTANTS["Bohr radius"].value == A0


def test_cubic_angstrom_is_a_polarizability_volume():
    # α/(4πε₀) in m³: 1 Å³ of polarizability volume = 4πε₀ × 1e-30 C·m²/V (scipy.constants ε₀)
    assert math.isclose(pc.ANGSTROM3_SI, 4 * math.pi * sc.epsilon_0 * 1e-30, rel_tol=1e-14)
    assert math.isclose(pc.alpha_si_from_a3(1.0), 4 * math.pi * sc.epsilon_0 * 1e-30)


def test_atomic_unit_of_polarizability_from_its_definition():
    # a.u. of polarizability = e² a0² / E_h = 4πε₀ a0³ (scipy.constants e, a0, E_h, ε₀)
    assert math.isclose(pc.AU_POLARIZABILITY_SI, E**2 * A0**2 / HARTREE, rel_tol=1e-9)
    assert math.isclose(pc.AU_POLARIZABILITY_SI, 4 * math.pi * sc.epsilon_0 * A0**3, rel_tol=1e-9)
    # as a volume it is a0³ in Å³
    assert math.isclose(
        pc.alpha_a3_from_si(pc.AU_POLARIZABILITY_SI), (A0 * 1e10) ** 3, rel_tol=1e-9
    )
    assert math.isclose(pc.alpha_au_from_si(pc.ANGSTROM3_SI), 1e-30 / A0**3, rel_tol=1e-9)


def test_debye_from_its_definition():
    # 1 D = 1e-21/c C·m (definition of the unit; scipy.constants c); e·a0 is the atomic unit
    assert pc.DEBYE_SI == 1e-21 / sc.c
    assert math.isclose(pc.debye_from_si(E * A0), 1 / (1e-21 / sc.c / (E * A0)), rel_tol=1e-12)


_SUP = str.maketrans("⁰¹²³⁴⁵⁶⁷⁸⁹⁻", "0123456789-")


def _doc_number(label: str) -> float:
    """The number in the value cell of the row of docs/preparing.md starting with ``label``."""
    for line in DOC.read_text(encoding="utf-8").splitlines():
        if line.startswith(f"| {label} |"):
            cell = line.split("|")[2]
            cell = cell.split("=")[-1]
            m = re.search(r"([0-9.]+)(?: × 10([⁰¹²³⁴⁵⁶⁷⁸⁹⁻]+))?", cell)
            assert m, line
            exp = int(m.group(2).translate(_SUP)) if m.group(2) else 0
            return float(m.group(1)) * 10.0**exp
    raise AssertionError(f"no row {label!r} in {DOC}")


@pytest.mark.parametrize(
    ("label", "value"),
    [
        ("1 Å³ (polarizability volume) as α", pc.ANGSTROM3_SI),
        ("atomic unit of polarizability, e²a₀²/E_h = 4πε₀a₀³", pc.AU_POLARIZABILITY_SI),
        ("1 atomic unit as a volume (a₀³)", pc.alpha_a3_from_si(pc.AU_POLARIZABILITY_SI)),
        ("1 Å³ in atomic units", pc.alpha_au_from_si(pc.ANGSTROM3_SI)),
        ("1 debye (10⁻²¹/c C·m)", pc.DEBYE_SI),
        ("1 debye in atomic units (e·a₀)", pc.DEBYE_SI / (E * A0)),
        (
            "μ²/(3kT) for μ = 1 D at T = 300 K",
            pc.alpha_a3_from_si(pc.langevin_debye_si(pc.DEBYE_SI, 300.0)),
        ),
    ],
)
def test_preparing_page_conversion_table(label, value):
    # the page prints 7 significant digits
    assert math.isclose(_doc_number(label), value, rel_tol=1e-6)
