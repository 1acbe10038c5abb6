"""Unit conversions against CODATA (scipy.constants) and handbook figures."""

import math

from scipy import constants as sc

from polarbeam import constants as pc


def test_atomic_unit_of_polarizability_in_cubic_angstrom():
    # CODATA: 1 a.u. of polarizability volume = a0³ = 0.148184711 Å³ (a0 = 0.529177211 Å)
    assert math.isclose(pc.alpha_a3_from_si(pc.AU_POLARIZABILITY_SI), 0.148184711, rel_tol=1e-8)
    a0 = sc.physical_constants["Bohr radius"][0]
    assert math.isclose(
        pc.alpha_a3_from_si(pc.AU_POLARIZABILITY_SI), (a0 * 1e10) ** 3, rel_tol=1e-9
    )


def test_debye_in_coulomb_metre():
    # 1 D = 1e-21/c C·m = 3.33564e-30 C·m (definition of the debye; CRC Handbook unit tables)
    assert math.isclose(pc.DEBYE_SI, 3.33564e-30, rel_tol=1e-5)
    assert math.isclose(pc.debye_from_si(pc.si_from_debye(2.5)), 2.5)


def test_langevin_debye_one_debye_at_300_K():
    # μ²/(3kT) for 1 D at 300 K = 8.048 Å³ (worked textbook value, CODATA constants)
    a3 = pc.alpha_a3_from_si(pc.langevin_debye_si(pc.DEBYE_SI, 300.0))
    assert math.isclose(a3, 8.048, abs_tol=5e-4)


def test_round_trip_conversions():
    for a in (0.5, 10.0, 123.4):
        assert math.isclose(pc.alpha_a3_from_si(pc.alpha_si_from_a3(a)), a)
        assert math.isclose(pc.alpha_au_from_si(pc.alpha_si_from_au(a)), a)
    # 1 Å³ = 4π ε0 × 1e-30 C·m²/V = 1.11265e-40 C·m²/V (CODATA ε0)
    assert math.isclose(pc.ANGSTROM3_SI, 1.11265005e-40, rel_tol=1e-7)
