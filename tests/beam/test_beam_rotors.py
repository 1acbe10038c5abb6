"""Rigid-rotor Stark physics against textbook formulas, published constants and limits.

Sources: second-order and first-order Stark energies of linear rotors and symmetric tops
(Townes & Schawlow, *Microwave Spectroscopy*, ch. 10; Gordy & Cook, *Microwave Molecular
Spectra*, ch. 10 — formulas from memory); OCS constants μ = 0.71521 D and B = 6081.4921 MHz and
its Stark coefficients as stated in issue 19 (computed there from the textbook formulas);
pendular states (Friedrich & Herschbach's harmonic-libration limit, from memory); h, k, the
debye from scipy.constants (CODATA).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants as sc

from polarbeam.beam.rotors import (
    asymmetric_states,
    classical_asymmetric_ratio,
    first_order_energy,
    linear_states,
    second_order_energy,
    symmetric_high_temperature_ratio,
    symmetric_states,
    truncation_j_max,
    weak_field_ratio,
)
from polarbeam.beam.rotors.operators import basis_states, cosine_matrices

H, K_B = sc.h, sc.k
DEBYE = 1e-21 / sc.c
OCS_MU = 0.71521 * DEBYE
OCS_B = 6081.4921e6 * H


def _ratio(states, mu, field, kt):
    return states.mean_mu_eff / field / (mu**2 / (3 * kt))


def test_direction_cosines_are_a_unit_vector():
    # Φ_Zx² + Φ_Zy² + Φ_Zz² = 1: independent of any phase convention (exact away from the
    # truncation edge, where the J + 1 partners are missing)
    for m in (0, 1, 3):
        j, k = basis_states(9, m)
        zx, zy, zz = cosine_matrices(j, k, m)
        total = zx @ zx + (zy @ zy).real + zz @ zz
        inner = j <= 7
        np.testing.assert_allclose(total[np.ix_(inner, inner)], np.eye(inner.sum()), atol=1e-12)
        for phi in (zx, zy, zz):
            np.testing.assert_allclose(phi, phi.conj().T, atol=1e-14)


def test_ocs_stark_coefficients():
    # issue 19: J = 0: −3.5527, J = 1 M = 0: +2.1316, J = 1 |M| = 1: −1.0658 Hz/(V/cm)²
    field = 100.0  # 1 V/cm
    expected = {(0, 0): -3.5527, (1, 0): 2.1316, (1, 1): -1.0658}
    for (j, m), hz in expected.items():
        w2 = second_order_energy(j, 0, m, OCS_B, OCS_MU, field) / H
        assert w2 == pytest.approx(hz, abs=1e-4)


def test_second_order_linear_rotor_energies_against_diagonalisation():
    # weak field μE = 10⁻³ B: W − W0 = W⁽²⁾ to O((μE/B)⁴)
    field = 1e-3 * OCS_B / OCS_MU
    st = linear_states(OCS_B, OCS_MU, field, K_B * 2.0)
    j, _k, m = st.labels.T
    sel = j <= 6
    w2 = second_order_energy(j[sel], 0, m[sel], OCS_B, OCS_MU, field)
    np.testing.assert_allclose((st.energy - st.energy_free)[sel], w2, rtol=1e-5, atol=1e-12 * H)
    # the sum rule behind the linear rotor's centroid: Σ_M W⁽²⁾ = 0 for J ≥ 1
    for jj in range(1, 6):
        ms = np.arange(-jj, jj + 1)
        assert np.sum(second_order_energy(jj, 0, ms, 1.0, 1.0, 1.0)) == pytest.approx(0, abs=1e-14)


def test_symmetric_top_first_order():
    # W⁽¹⁾ = −μE·KM/(J(J+1)) for K·M ≠ 0, and second order on top of it
    b, a, mu = 2e9 * H, 5e9 * H, 1.5 * DEBYE
    field = 1e-4 * b / mu
    st = symmetric_states(b, a, mu, field, K_B * 1.0)
    j, k, m = st.labels.T
    sel = (k * m != 0) & (j <= 8)
    w1 = first_order_energy(j[sel], k[sel], m[sel], mu, field)
    w2 = second_order_energy(j[sel], k[sel], m[sel], b, mu, field)
    np.testing.assert_allclose((st.energy - st.energy_free)[sel], w1 + w2, rtol=1e-6)
    # Hellmann–Feynman: μ_eff = −∂W/∂E → μ KM/(J(J+1)) in the weak field
    np.testing.assert_allclose(
        st.mu_eff[sel], mu * k[sel] * m[sel] / (j[sel] * (j[sel] + 1)), rtol=1e-3
    )


def test_hellmann_feynman_matches_the_field_derivative():
    b, a, mu, kt = 2e9 * H, 5e9 * H, 1.5 * DEBYE, K_B * 1.0
    field, d = 3.0 * b / mu, 1e-4
    s0 = symmetric_states(b, a, mu, field, kt, j_max=14)
    sp = symmetric_states(b, a, mu, field * (1 + d), kt, j_max=14)
    sm = symmetric_states(b, a, mu, field * (1 - d), kt, j_max=14)
    dw = -(sp.energy - sm.energy) / (2 * d * field)
    np.testing.assert_allclose(s0.mu_eff, dw, atol=1e-6 * mu)


def test_adiabatic_labels_are_continuous_in_the_field():
    # the n-th level of a block stays the n-th: energies move by O(δE), never jump
    mu, b, kt = OCS_MU, OCS_B, K_B * 3.0
    e = 20 * b / mu
    s1 = linear_states(b, mu, e, kt, j_max=25)
    s2 = linear_states(b, mu, 1.001 * e, kt, j_max=25)
    assert np.max(np.abs(s2.energy - s1.energy)) < 2e-3 * mu * e


def test_pendular_limit():
    # μE ≫ B: W ≈ −μE + (2ν + |M| + 1)·√(2BμE) (2-D harmonic libration); ⟨cos θ⟩ → 1
    b, mu = OCS_B, OCS_MU
    field = 1e4 * b / mu
    st = linear_states(b, mu, field, K_B * 0.05, j_max=truncation_j_max(K_B * 0.05, b, mu * field))
    j, _k, m = st.labels.T
    hw = math.sqrt(2 * b * mu * field)
    ground = st.energy[(j == 0) & (m == 0)][0]
    first = st.energy[(j == 1) & (m == 1)][0]
    assert (ground + mu * field) / hw == pytest.approx(1.0, rel=0.01)
    assert (first + mu * field) / hw == pytest.approx(2.0, rel=0.01)
    assert st.mean_mu_eff / mu > 0.98  # saturated: the shift no longer grows as E²


def test_langevin_debye_limit_of_linear_rotors():
    # kT ≫ B, μE ≪ kT: R = 1 − B/(3kT) + O((B/kT)²) + O(μE/kT) (the slowest rotors turn
    # pendular: measured ≈ −0.45 μE/kT, the accuracy of the weak-field fast path)
    b, mu = OCS_B, OCS_MU
    for kt_over_b in (30.0, 100.0, 300.0):
        kt = kt_over_b * b
        field = 0.001 * kt / mu
        r = _ratio(linear_states(b, mu, field, kt), mu, field, kt)
        assert r == pytest.approx(1 - 1 / (3 * kt_over_b), abs=2e-4)
        assert weak_field_ratio(b, None, kt) == pytest.approx(1 - 1 / (3 * kt_over_b), abs=1e-4)
        field = 0.02 * kt / mu  # the largest μE/kT of the fast path: within 1 %
        r = _ratio(linear_states(b, mu, field, kt), mu, field, kt)
        assert r == pytest.approx(weak_field_ratio(b, None, kt), rel=0.01)


def test_truncation_rule_converges():
    b, a, mu = 2e9 * H, 5e9 * H, 2.0 * DEBYE
    for t, e in ((1.0, 1e5), (5.0, 2e6)):
        kt = K_B * t
        jm = truncation_j_max(kt, b, mu * e)
        r1 = symmetric_states(b, a, mu, e, kt, jm).mean_mu_eff
        r2 = symmetric_states(b, a, mu, e, kt, jm + 10).mean_mu_eff
        assert abs(r1 - r2) < 1e-7 * abs(r2)


def test_high_temperature_ratio_closed_form():
    # special values of R(ρ) named in issue 19
    assert symmetric_high_temperature_ratio(1.0) == pytest.approx(2 / 3, rel=1e-12)
    assert symmetric_high_temperature_ratio(2.0) == pytest.approx(math.pi / 2 - 1, rel=1e-12)
    assert symmetric_high_temperature_ratio(1e-4) > 0.99
    assert symmetric_high_temperature_ratio(1 + 1e-7) == pytest.approx(2 / 3, rel=1e-6)
    # against a direct quadrature of ⟨cos²χ⟩ over the anisotropic Gaussian of J
    for rho in (0.2, 0.7, 1.6):
        u = np.linspace(0, 1, 200001)  # cos θ; density ∝ (cos²θ/ρ + sin²θ)^(−3/2)
        dens = (u**2 / rho + 1 - u**2) ** -1.5
        cos2 = np.trapezoid(u**2 * dens, u) / np.trapezoid(dens, u)
        assert symmetric_high_temperature_ratio(rho) == pytest.approx(1 - cos2, rel=1e-6)


def test_weak_field_sum_against_full_and_closed_form():
    b, mu = 2e9 * H, 1.5 * DEBYE
    for a_over_b in (3.0, 1.0):
        a = a_over_b * b
        kt = 50 * b
        field = 1e-4 * kt / mu
        full = _ratio(symmetric_states(b, a, mu, field, kt), mu, field, kt)
        assert full == pytest.approx(weak_field_ratio(b, a, kt), rel=1e-5)
        # hot: the quantum sum reaches the closed form
        hot = weak_field_ratio(b, a, 3000 * b)
        assert hot == pytest.approx(symmetric_high_temperature_ratio(b / a), abs=3e-4)
    # oblate (axis constant C < B)
    hot = weak_field_ratio(b, 0.5 * b, 3000 * b)
    assert hot == pytest.approx(math.pi / 2 - 1, abs=3e-4)


def test_asymmetric_code_reproduces_the_symmetric_code():
    mu, kt = 1.5 * DEBYE, K_B * 0.6
    cases = (
        ((6e9 * H, 2e9 * H, 2e9 * H), (1.0, 0.0, 0.0), (2e9 * H, 6e9 * H)),  # prolate, along a
        ((2e9 * H, 2e9 * H, 1e9 * H), (0.0, 0.0, 1.0), (2e9 * H, 1e9 * H)),  # oblate, along c
    )
    for consts, direction, (b_perp, b_axis) in cases:
        field = 0.3 * b_perp / mu
        asym = asymmetric_states(consts, direction, mu, field, kt, j_max=12)
        sym = symmetric_states(b_perp, b_axis, mu, field, kt, j_max=12)
        assert asym.mean_mu_eff == pytest.approx(sym.mean_mu_eff, rel=1e-9)
        for n in (1, 2):  # the population-weighted moments of the energies agree
            assert np.sum(asym.population * asym.energy**n) == pytest.approx(
                np.sum(sym.population * sym.energy**n), rel=1e-9
            )


def test_spherical_top_does_not_depend_on_the_dipole_direction():
    # isotropy: the perpendicular cosines carry the same physics as Φ_Zz
    b, mu, kt = 2e9 * H, 1.0 * DEBYE, K_B * 0.4
    field = 2.0 * b / mu
    ref = asymmetric_states((b, b, b), (1.0, 0.0, 0.0), mu, field, kt, j_max=10)
    for direction in ((0.6, 0.8, 0.0), (0.0, 0.0, 1.0), (0.48, 0.6, 0.64)):
        other = asymmetric_states((b, b, b), direction, mu, field, kt, j_max=10)
        assert other.mean_mu_eff == pytest.approx(ref.mean_mu_eff, rel=1e-9)


def test_classical_asymmetric_limit():
    # the symmetric limit of the orbit average is the closed form
    assert classical_asymmetric_ratio((3.0, 1.0, 1.0), (1, 0, 0)) == pytest.approx(
        symmetric_high_temperature_ratio(1 / 3), abs=1e-6
    )
    assert classical_asymmetric_ratio((1.0, 1.0, 0.5), (0, 0, 1)) == pytest.approx(
        math.pi / 2 - 1, abs=1e-6
    )
    # μ along the intermediate axis averages out on every orbit: R = 1 (Langevin–Debye)
    assert classical_asymmetric_ratio((3.0, 1.2, 1.0), (0, 1, 0)) == pytest.approx(1.0)
    # against diagonalisation where both apply (kT ≈ 13 C, μE between doublets and kT)
    consts = (3e9 * H, 1.0e9 * H, 0.8e9 * H)
    mu, kt = 2.0 * DEBYE, K_B * 0.5
    field = 0.1 * kt / mu
    full = _ratio(asymmetric_states(consts, (1, 0, 0), mu, field, kt), mu, field, kt)
    assert full == pytest.approx(classical_asymmetric_ratio((3.0, 1.0, 0.8), (1, 0, 0)), abs=0.04)


def test_asymmetric_returns_to_langevin_debye_in_a_weak_field():
    consts = (3e9 * H, 1.0e9 * H, 0.8e9 * H)
    mu, kt = 2.0 * DEBYE, K_B * 0.3
    weak = 1e-6 * consts[2] / mu
    r = _ratio(asymmetric_states(consts, (1, 0, 0), mu, weak, kt), mu, weak, kt)
    assert r > 0.9  # LD up to quantum corrections O(B/kT)
    strong = 0.1 * kt / mu
    r2 = _ratio(asymmetric_states(consts, (1, 0, 0), mu, strong, kt), mu, strong, kt)
    assert r2 < r - 0.05  # below LD once μE exceeds the doublet splittings
