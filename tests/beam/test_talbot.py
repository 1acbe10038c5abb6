"""Talbot–Lau visibility: closed forms against independent derivations and numerics.

Sources named beside each check. "derived here" means derived for polarbeam in docs/visibility.md;
the Bessel generating function and the Poisson statistics are textbook facts (Abramowitz & Stegun
9.6.33 and 9.1.41, from memory); the Gaussian-beam intensity 2P/(π w_y w_z) is textbook optics
(from memory) and is re-derived numerically below by integrating the beam profile.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate, special

from polarbeam.beam.distributions import GaussianVelocity
from polarbeam.beam.talbot import (
    LightGrating,
    MaterialGrating,
    TalbotLauInterferometer,
    absorption_cross_section,
    coefficient_by_quadrature,
    exp_cos_sin_coefficient,
    light_coefficient,
    light_kernel,
    material_coefficient,
    material_kernel,
    mean_absorbed_photons,
    phase_amplitude,
    ray_harmonics,
    slit_coefficient,
    talbot_parameter,
    wave_harmonics,
)

F = 0.42
AMU = sc.physical_constants["atomic mass constant"][0]


def light_interferometer(absorbed="kept"):
    return TalbotLauInterferometer(
        0.105,
        266e-9,
        MaterialGrating(F),
        LightGrating(532e-9, 900e-6, absorbed),
        MaterialGrating(F),
    )


# --- the Talbot coefficients ---------------------------------------------------------------


@pytest.mark.parametrize("absorbed", ["kept", "lost"])
@pytest.mark.parametrize("model", ["quantum", "classical"])
@pytest.mark.parametrize("m", [0, 1, 2, -2, 3])
def test_light_coefficients_match_quadrature_of_their_defining_integral(absorbed, model, m):
    # defining integral B_m(ξ) = (1/d)∫ R(x, ξd) e^{−2πimx/d} dx (derived here), adaptive quadrature
    for xi, phi0, n0 in [(0.31, 3.0, 0.0), (0.73, 6.5, 2.2), (1.37, 2.0, 4.0), (2.6, 9.0, 0.7)]:
        closed = light_coefficient(m, xi, phi0, n0, absorbed, model)
        quad = coefficient_by_quadrature(
            m, xi, lambda x, s, p=phi0, n=n0: light_kernel(x, s, p, n, absorbed, model)
        )
        assert abs(closed - quad) <= 1e-10


@pytest.mark.parametrize("m", [0, 2, 3])
def test_material_coefficients_match_quadrature(m):
    for f in (0.25, 0.42, 0.7):
        for xi in (0.0, 0.2, 0.5, 0.77, 1.3, 2.45):
            closed = material_coefficient(m, xi, f)
            kernel = lambda x, s, f=f: material_kernel(x, s, f)  # noqa: E731
            edges = sorted({(c + e) % 1.0 for c in (xi / 2, -xi / 2) for e in (f / 2, -f / 2)})
            quad = coefficient_by_quadrature(m, xi, kernel, points=edges)
            assert abs(closed - quad) <= 1e-10
    # ξ = 0: B_m(0) = f sinc(πmf), the Fourier coefficient of |t|² (definition)
    assert material_coefficient(m, 0.0, 0.42) == pytest.approx(slit_coefficient(m, 0.42))


def test_generating_function_special_cases():
    # exp(i b sin θ) = Σ J_m(b) e^{imθ} (Jacobi–Anger, A&S 9.1.41, from memory)
    b = np.linspace(-7, 7, 29)
    for m in (-3, 0, 1, 2, 5):
        assert np.allclose(exp_cos_sin_coefficient(m, 0 * b, b), special.jv(m, b), atol=1e-14)
        # exp(a cos θ) = Σ I_m(a) e^{imθ} (A&S 9.6.33, from memory)
        assert np.allclose(exp_cos_sin_coefficient(m, b, 0 * b), special.iv(m, b), atol=1e-12)
    # a = b: exp(a e^{iθ}) has the Taylor coefficients a^m/m!
    assert exp_cos_sin_coefficient(3, 2.0, 2.0) == pytest.approx(8 / 6)
    assert exp_cos_sin_coefficient(-1, 2.0, 2.0) == 0


# --- the visibility formula -----------------------------------------------------------------


def test_zero_power_gives_zero_visibility():
    tl = light_interferometer()
    v = tl.visibility(500 * AMU, GaussianVelocity(150.0, 30.0), [0.0], 1e-38, 1e-21)
    assert v[0] == 0.0  # B₂ = J₂(0) = 0 (derived here)


def test_no_absorption_is_the_bessel_formula():
    # V = 2 sinc²(πf)|J₂(φ0 sin πξ)| for a pure phase grating (derived here; the Jacobi–Anger
    # expansion of exp(iφ0 cos²(πx/d)))
    tl = light_interferometer()
    mass, vel, alpha = 700 * AMU, 180.0, 60.0 * 4 * math.pi * sc.epsilon_0 * 1e-30
    powers = np.linspace(0.1, 12.0, 9)
    xi = talbot_parameter(0.105, 266e-9, mass, vel)
    phi0 = phase_amplitude(alpha, powers, 900e-6, vel)
    expected = 2 * np.sinc(F) ** 2 * np.abs(special.jv(2, phi0 * np.sin(np.pi * xi)))
    assert np.allclose(tl.visibility(mass, vel, powers, alpha, 0.0), expected, rtol=1e-12)


def test_small_phase_expansion():
    # second-order Taylor expansion of the kernel pref·exp(a cos θ + i b sin θ): its e^{2iθ}
    # component is pref·(a + b)²/8 (derived here); J₂(z) ≈ z²/8 (A&S 9.1.7, from memory)
    for xi in (0.3, 0.8, 1.6):
        phi0, n0 = 1e-3, 0.0
        b2 = light_coefficient(2, xi, phi0, n0).real
        assert b2 == pytest.approx((phi0 * math.sin(math.pi * xi)) ** 2 / 8, rel=1e-6)
        # lost: a = −n0 cos(πξ)/2, b = φ0 sin πξ, pref e^{−n0/2}
        phi0, n0 = 1e-3, 2e-3
        a, b = -0.5 * n0 * math.cos(math.pi * xi), phi0 * math.sin(math.pi * xi)
        lost = light_coefficient(2, xi, phi0, n0, "lost").real
        assert lost == pytest.approx(math.exp(-n0 / 2) * (a + b) ** 2 / 8, rel=1e-5)
        # kept: a = n0(1 − cos πξ)/2, pref e^{−a}
        a = 0.5 * n0 * (1 - math.cos(math.pi * xi))
        kept = light_coefficient(2, xi, phi0, n0, "kept").real
        assert kept == pytest.approx(math.exp(-a) * (a + b) ** 2 / 8, rel=1e-5)
    # the visibility at small power grows as P²: V ≈ 2 sinc²(πf)(φ0 sin πξ)²/8
    tl = light_interferometer()
    mass, vel, alpha = 700 * AMU, 180.0, 60.0 * 4 * math.pi * sc.epsilon_0 * 1e-30
    xi = talbot_parameter(0.105, 266e-9, mass, vel)
    phi0 = phase_amplitude(alpha, 1e-3, 900e-6, vel)
    small = 2 * np.sinc(F) ** 2 * (phi0 * math.sin(math.pi * xi)) ** 2 / 8
    assert tl.visibility(mass, vel, [1e-3], alpha)[0] == pytest.approx(small, rel=1e-4)


def test_quantum_vanishes_at_integer_talbot_parameter_classical_does_not():
    # pure phase grating: sin(πξ) = 0 at integer ξ (derived here); straight rays keep πξφ0
    for xi in (1.0, 2.0, 3.0):
        assert abs(light_coefficient(2, xi, 5.0, 0.0)) < 1e-15
        assert abs(light_coefficient(2, xi, 5.0, 0.0, model="classical")) > 1e-3
    # with absorption and the molecules kept, the quantum coefficient vanishes at even ξ
    assert abs(light_coefficient(2, 2.0, 5.0, 3.0, "kept")) < 1e-15
    # and at the mass where ξ = 1 the quantum visibility is zero but the classical one is not
    tl = light_interferometer()
    mass = 0.105 * sc.h / (200.0 * (266e-9) ** 2)
    alpha = 80.0 * 4 * math.pi * sc.epsilon_0 * 1e-30
    assert tl.visibility(mass, 200.0, [3.0], alpha)[0] < 1e-12
    assert tl.visibility(mass, 200.0, [3.0], alpha, model="classical")[0] > 1e-2


@pytest.mark.parametrize("absorbed", ["kept", "lost"])
def test_quantum_tends_to_classical_as_xi_goes_to_zero(absorbed):
    # the quantum kernel tends to its first-order (straight-ray) expansion (derived here)
    ratios = []
    for xi in (1e-1, 1e-2, 1e-3):
        phi0 = 2.5 / xi  # keep the classical kick πξφ0 fixed
        q = light_coefficient(2, xi, phi0, 0.8, absorbed)
        c = light_coefficient(2, xi, phi0, 0.8, absorbed, "classical")
        ratios.append(abs(q - c) / abs(c))
    assert ratios[2] < ratios[1] < ratios[0]
    assert ratios[2] < 1e-4


def test_material_gratings_quantum_and_classical():
    # classical three-slit-grating moiré: V = 2 sinc(πf₁)sinc(πf₃)sinc(2πf₂) (derived here)
    f1, f2, f3 = 0.4, 0.3, 0.5
    tl = TalbotLauInterferometer(
        0.3, 1e-6, MaterialGrating(f1), MaterialGrating(f2), MaterialGrating(f3)
    )
    mass = 1000 * AMU
    v_cl = tl.visibility(mass, 150.0, [0.0], model="classical")[0]
    assert v_cl == pytest.approx(2 * abs(np.sinc(f1) * np.sinc(f3) * np.sinc(2 * f2)), rel=1e-12)
    # quantum at ξ → 0 equals the classical shadow; at ξ = 1/2 (the half Talbot length) the
    # overlap formula is checked against the wave model below
    xi = talbot_parameter(0.3, 1e-6, mass, 150.0)
    expected = 2 * np.sinc(f1) * np.sinc(f3) * abs(material_coefficient(2, xi, f2)) / f2
    assert tl.visibility(mass, 150.0, [0.0])[0] == pytest.approx(expected, rel=1e-12)


# --- the full numerical checks (no Talbot coefficients) -------------------------------------


@pytest.mark.parametrize("absorbed", ["kept", "lost"])
def test_point_source_waves_reproduce_the_harmonics(absorbed):
    # wave propagation from point sources in G1 through G2, integrated over G3 (derived here)
    a1, a0 = slit_coefficient(1, F) ** 2, F * F
    for xi, phi0, n0 in [(0.3, 3.0, 0.0), (0.7, 5.0, 2.0), (1.3, 4.0, 1.5), (1.0, 3.0, 2.0)]:
        c1, c0 = wave_harmonics(xi, F, F, phi0, n0, absorbed)
        b2 = light_coefficient(2, xi, phi0, n0, absorbed)
        b0 = light_coefficient(0, 0.0, phi0, n0, absorbed).real
        assert c1 == pytest.approx(a1 * b2, abs=2e-8)
        assert c0 == pytest.approx(a0 * b0, rel=1e-6)


def test_point_source_waves_material_gratings():
    a1 = slit_coefficient(1, F) ** 2
    for xi in (0.3, 0.8, 1.4):
        c1, _ = wave_harmonics(xi, F, F, second_open_fraction=0.4)
        assert c1 == pytest.approx(a1 * material_coefficient(2, xi, 0.4), abs=5e-6)


@pytest.mark.parametrize("absorbed", ["kept", "lost"])
def test_straight_rays_reproduce_the_classical_harmonics(absorbed):
    a1, a0 = slit_coefficient(1, F) ** 2, F * F
    for xi, phi0, n0 in [(0.3, 3.0, 0.0), (0.7, 5.0, 2.0), (1.3, 4.0, 1.5)]:
        c1, c0 = ray_harmonics(xi, F, F, phi0, n0, absorbed)
        b2 = light_coefficient(2, xi, phi0, n0, absorbed, "classical")
        b0 = light_coefficient(0, 0.0, phi0, n0, absorbed, "classical").real
        assert c1 == pytest.approx(a1 * b2, abs=1e-12)
        assert c0 == pytest.approx(a0 * b0, rel=1e-10)


class _Nodes:
    """A VelocityDistribution given by its nodes and weights (the protocol, nothing more)."""

    def __init__(self, v, w):
        self.v, self.w = np.asarray(v), np.asarray(w)

    @property
    def key(self):
        return ("nodes", tuple(self.v))

    def nodes(self, n=48):
        return self.v, self.w

    def contrast(self, n=48):
        return None


def test_gaussian_velocity_average_converges():
    # the uniform-grid trapezoid average against a 20001-point reference (numerical check)
    tl = light_interferometer()
    powers = np.linspace(0.5, 10, 9)
    for mass_u, v0, sv, a3 in [
        (879, 125.5, 15.06, 152),
        (1500, 170, 20, 100),
        (2500, 150, 18, 200),
    ]:
        alpha = a3 * 4 * math.pi * sc.epsilon_0 * 1e-30
        vv = np.linspace(v0 - 6 * sv, v0 + 6 * sv, 20001)
        ww = np.exp(-0.5 * ((vv - v0) / sv) ** 2)
        ref = tl.visibility(mass_u * AMU, _Nodes(vv, ww / ww.sum()), powers, alpha, 5e-22)
        fast = tl.visibility(mass_u * AMU, GaussianVelocity(v0, sv), powers, alpha, 5e-22)
        assert np.max(np.abs(fast - ref)) < 1e-6


def test_velocity_average_sums_the_first_harmonic_not_the_visibilities():
    # incoherent sum of the signals of each velocity class (derived here), against the wave model
    tl = light_interferometer("lost")
    mass, alpha, sigma = 3000 * AMU, 100.0 * 4 * math.pi * sc.epsilon_0 * 1e-30, 2e-21
    dist = GaussianVelocity(160.0, 45.0)
    power = 14.0
    v, w = dist.nodes(24)
    c1s, c0s = [], []
    for vel in v:
        xi = talbot_parameter(0.105, 266e-9, mass, vel)
        phi0, n0 = tl.second.strengths(alpha, sigma, power, vel)
        c1, c0 = wave_harmonics(float(xi), F, F, float(phi0), float(n0), "lost", grid=8192)
        c1s.append(c1)
        c0s.append(c0)
    wave = 2 * abs(w @ np.array(c1s)) / (w @ np.array(c0s))
    model = tl.visibility(mass, _Nodes(v, w), [power], alpha, sigma)[0]
    assert model == pytest.approx(wave, rel=1e-5)
    # the harmonic changes sign across the distribution: the mean of |V| is not the answer
    single = [tl.visibility(mass, float(x), [power], alpha, sigma)[0] for x in v]
    signed = np.sign(np.array(c1s).real)
    assert signed.min() < 0 < signed.max()
    # (0.210 against 0.110 with the truncated-Gaussian rule of beam.distributions)
    assert float(w @ np.array(single)) > 1.8 * model


# --- the light-grating prefactors -----------------------------------------------------------


def _standing_wave_time_integrals(power, wy, wz, v, alpha):
    """∫U dt and the absorbed energy/ħω at an antinode, from the fields (numerical)."""
    # running-wave amplitude E0 from the power: P = ∫∫ ½ε0 c E0² e^{−2y²/wy²−2z²/wz²} dy dz
    prof = integrate.dblquad(
        lambda z, y: math.exp(-2 * y * y / wy**2 - 2 * z * z / wz**2),
        -6 * wy,
        6 * wy,
        -6 * wz,
        6 * wz,
        epsabs=0,
        epsrel=1e-12,
    )[0]
    e0 = math.sqrt(2 * power / (sc.epsilon_0 * sc.c * prof))
    # standing wave at an antinode: E(t') = 2 E0 g(z) cos(ωt'); time average over an optical
    # cycle by sampling the phase ωt'
    ph = 2 * math.pi * (np.arange(64) + 0.5) / 64
    cyc_e = 2 * np.cos(ph)
    cyc_dp = 2 * (-alpha.real * np.sin(ph) + alpha.imag * np.cos(ph))  # d(α·E)/d(ωt')/E0
    mean_e2 = np.mean(cyc_e**2)
    mean_edp = np.mean(cyc_e * cyc_dp)

    def g2(t):
        return math.exp(-2 * (v * t) ** 2 / wz**2)

    tmax = 8 * wz / v
    fl = integrate.quad(g2, -tmax, tmax, epsabs=0, epsrel=1e-12)[0]
    u_int = -0.5 * alpha.real * e0**2 * mean_e2 * fl  # U = −½ Re α ⟨E²⟩
    omega = 2 * math.pi * sc.c / 532e-9
    absorbed_energy = omega * e0**2 * mean_edp * fl  # ⟨E · dp/dt⟩
    return u_int, absorbed_energy / (sc.hbar * omega)


def test_phase_and_photon_number_prefactors_from_the_dipole_potential():
    # time integral of the dipole potential of a retro-reflected Gaussian beam (derived here)
    power, wy, wz, v = 4.0, 900e-6, 25e-6, 170.0
    alpha = complex(85.0, 3.0) * 4 * math.pi * sc.epsilon_0 * 1e-30
    u_int, n_num = _standing_wave_time_integrals(power, wy, wz, v, alpha)
    phi0 = phase_amplitude(alpha.real, power, wy, v)
    assert phi0 == pytest.approx(-u_int / sc.hbar, rel=1e-9)
    sigma = absorption_cross_section(alpha.imag, 532e-9)
    n0 = mean_absorbed_photons(sigma, power, wy, v, 532e-9)
    assert n0 == pytest.approx(n_num, rel=1e-9)
    # the rate relation for a weak absorber (derived here): n0/φ0 = 2 Im α / Re α
    assert n0 / phi0 == pytest.approx(2 * alpha.imag / alpha.real, rel=1e-12)
    # both ∝ P/(v w_y) and independent of the waist along the molecular beam
    assert _standing_wave_time_integrals(power, wy, 3 * wz, v, alpha)[0] == pytest.approx(
        u_int, rel=1e-9
    )
    assert phase_amplitude(alpha.real, 2 * power, 2 * wy, 2 * v) == pytest.approx(phi0 / 2)


def test_light_grating_period_must_be_half_the_wavelength():
    with pytest.raises(ValueError, match="laser_wavelength/2"):
        TalbotLauInterferometer(
            0.1, 250e-9, MaterialGrating(F), LightGrating(532e-9, 1e-3), MaterialGrating(F)
        )
    with pytest.raises(ValueError, match="open_fraction"):
        MaterialGrating(1.2)
