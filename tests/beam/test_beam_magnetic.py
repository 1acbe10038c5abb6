"""Magnetic deflection physics (polarbeam.beam.magnetic, polarbeam.constants): checked against
closed forms, limits and numerical integration."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate

from polarbeam.beam.magnetic import (
    ELECTRON_G,
    brillouin,
    curie_force_constant,
    force_constant,
    langevin,
    mean_moment_brillouin,
    spin_only_moment,
    stern_gerlach_components,
    superparamagnetic_force,
)
from polarbeam.constants import (
    CURIE_CONSTANT_CGS,
    chi_cgs_from_force_constant,
    chi_cgs_from_molecular_si,
    chi_molecular_si_from_cgs,
    curie_constant_cgs,
    muB_from_si,
    si_from_muB,
)

MU_B = sc.physical_constants["Bohr magneton"][0]


def test_curie_constant_from_scipy_constants():
    # C = N_A μ0 μ_B²/(3k) = 0.12505 cm³ K/mol per μ_B² (O. Kahn, Molecular Magnetism, VCH 1993,
    # ch. 1, quotes 0.12505; from memory); derived independently here from scipy.constants
    c_si = sc.N_A * sc.mu_0 * MU_B**2 / (3 * sc.k)  # m³ K/mol (rationalised SI)
    c_cgs = c_si / (4 * math.pi * 1e-6)
    assert c_cgs == pytest.approx(0.12505, abs=2e-5)
    assert CURIE_CONSTANT_CGS == pytest.approx(c_cgs, rel=1e-12)
    # a free S = 1/2 (g = 2): χT = 0.375 cm³ K/mol, the textbook spin-only value (Kahn, from memory)
    assert curie_constant_cgs(spin_only_moment(0.5, g=2.0)) == pytest.approx(0.375, abs=2e-4)


def test_cgs_molar_round_trip_and_scale():
    # -54.8e-6 cm³/mol (a benzene-like diamagnet) per molecule in SI: χ_mol,SI = 4π·10⁻⁶ χ_cgs
    chi = chi_molecular_si_from_cgs(-54.8e-6)
    assert chi == pytest.approx(-54.8e-6 * 4 * math.pi * 1e-6 / sc.N_A, rel=1e-12)
    assert chi_cgs_from_molecular_si(chi) == pytest.approx(-54.8e-6, rel=1e-12)
    assert chi_cgs_from_force_constant(chi / sc.mu_0) == pytest.approx(-54.8e-6, rel=1e-12)
    assert muB_from_si(si_from_muB(1.73)) == pytest.approx(1.73)


def test_force_constant_and_curie_law_agree_with_molar_chi():
    # χ_eff(T) = χ_dia + C μ_eff²/T in cm³/mol from the force constant χ_m/μ0 + m²/(3kT)
    chi_dia, mu, t = -80e-6, 1.73, 300.0
    a = force_constant(chi_molecular_si_from_cgs(chi_dia), si_from_muB(mu), t)
    assert chi_cgs_from_force_constant(a) == pytest.approx(chi_dia + CURIE_CONSTANT_CGS * mu**2 / t)
    assert curie_force_constant(0.0, t) == 0.0


def test_langevin_limits_and_series():
    x = np.array([1e-6, 1e-4, 1e-3 * 0.999, 1e-3 * 1.001, 0.1, 1.0, 30.0])
    exact = np.array([1 / math.tanh(v) - 1 / v if v > 1e-3 else v / 3 for v in x])
    assert np.allclose(langevin(x), exact, rtol=1e-6)
    assert langevin(-2.0) == pytest.approx(-langevin(2.0))
    assert langevin(1e4) == pytest.approx(1.0, abs=2e-4)


@pytest.mark.parametrize("j", [0.5, 1.0, 1.5, 3.5])
def test_brillouin_against_direct_thermal_sum(j):
    # B_J from the partition function: ⟨m⟩/J with weights exp(m x/J), m = −J..J (Kittel ch. 11)
    ms = np.arange(-j, j + 0.5, 1.0)
    for x in (1e-5, 0.05, 0.7, 3.0, 12.0):
        w = np.exp(ms * x / j)
        assert brillouin(j, x) == pytest.approx((ms * w).sum() / w.sum() / j, rel=1e-9, abs=1e-12)
    assert brillouin(0.5, 0.8) == pytest.approx(math.tanh(0.8))  # S = 1/2: tanh x
    assert brillouin(2000.0, 2.0) == pytest.approx(langevin(2.0), rel=1e-3)  # classical limit


def test_brillouin_weak_field_is_the_curie_term():
    s, g, t, b = 1.5, ELECTRON_G, 300.0, 1e-3
    m_eff = g * MU_B * math.sqrt(s * (s + 1))
    slope = mean_moment_brillouin(s, g, b, t) / b
    assert slope == pytest.approx(m_eff**2 / (3 * sc.k * t), rel=1e-6)
    # strong field, cold: saturation at g μ_B S
    assert mean_moment_brillouin(s, g, 10.0, 0.01) == pytest.approx(g * MU_B * s, rel=1e-9)


@pytest.mark.parametrize("s", [0.5, 1.0, 1.5])
def test_stern_gerlach_components(s):
    ms, f, w = stern_gerlach_components(s, 100.0)
    assert ms.size == round(2 * s + 1)
    assert np.allclose(np.diff(f), -ELECTRON_G * MU_B * 100.0)
    assert np.allclose(w, 1 / ms.size)
    assert (f * w).sum() == pytest.approx(0.0, abs=1e-30)  # no net force at equal populations
    # thermal populations: the mean force is the Brillouin mean moment times ∂B/∂x
    ms, f, w = stern_gerlach_components(s, 100.0, field_t=2.0, temperature_k=5.0)
    mean = mean_moment_brillouin(s, ELECTRON_G, 2.0, 5.0) * 100.0
    assert (f * w).sum() == pytest.approx(mean, rel=1e-9)
    with pytest.raises(ValueError, match="S = 1/2"):
        stern_gerlach_components(0.7, 1.0)


def test_superparamagnetic_force_one_sided_and_weak_field():
    m, t, grad = 50 * MU_B, 100.0, 200.0
    fields = np.array([1e-6, 0.01, 0.5, 3.0])
    f = superparamagnetic_force(m, fields, grad, t)
    assert np.all(f > 0) and np.all(np.diff(f) > 0)
    # weak field: m²/(3kT) B ∂B/∂x
    assert f[0] == pytest.approx(m**2 / (3 * sc.k * t) * fields[0] * grad, rel=1e-6)
    # the Langevin mean projection as an orientation integral ∫ cosθ e^{x cosθ} dΩ / ∫ e^{x cosθ}
    x = m * 0.5 / (sc.k * t)
    num = integrate.quad(lambda c: c * math.exp(x * c), -1, 1)[0]
    den = integrate.quad(lambda c: math.exp(x * c), -1, 1)[0]
    assert f[2] == pytest.approx(m * num / den * grad, rel=1e-8)


def test_spin_only_moments():
    # g√(S(S+1)) with g = 2: 1.73, 2.83, 3.87 μ_B (any inorganic text, from memory)
    assert [round(spin_only_moment(s, 2.0), 2) for s in (0.5, 1, 1.5)] == [1.73, 2.83, 3.87]
