"""Langevin–Debye separation of α and μ against exact synthetic values."""

from __future__ import annotations

import math

import pytest
from scipy import constants as sc
from scipy import integrate, optimize, stats
from uncertainties import ufloat

from polarbeam.separation.debye import bounded_upper_limit, debye_fit
from polarbeam.separation.dipole import dipole_statement

K_B = sc.k  # Boltzmann constant, scipy.constants (CODATA)
DEBYE = 1e-21 / sc.c  # 1 D = 1e-21/c C·m = 3.33564e-30 C·m (definition; c from scipy.constants)
A3 = 4 * math.pi * sc.epsilon_0 * 1e-30  # 1 Å³ polarizability volume in C·m²/V (SI definition)


def test_debye_unit_is_the_stated_value():
    assert math.isclose(DEBYE, 3.33564e-30, rel_tol=1e-5)


@pytest.mark.parametrize("alpha_a3,mu_d", [(20.0, 2.5), (35.0, 0.8), (12.0, 4.0)])
def test_exact_alpha_eff_gives_back_alpha_and_mu2(alpha_a3, mu_d):
    alpha = alpha_a3 * A3
    mu2 = (mu_d * DEBYE) ** 2
    temps = (300.0, 450.0, 600.0)
    # α_eff = α + μ²/(3kT): Langevin–Debye, weak-field high-temperature limit (any textbook on
    # dielectrics, e.g. Böttcher's "Theory of Electric Polarization"), computed here by hand
    eff = [ufloat(alpha + mu2 / (3 * K_B * t), 0.01 * alpha, tag=f"series {t:g} K") for t in temps]
    fit = debye_fit(eff, [ufloat(t, 0.5, tag=f"temperature {t:g} K") for t in temps])
    assert math.isclose(fit.alpha.nominal_value, alpha, rel_tol=1e-10)
    assert math.isclose(fit.mu2.nominal_value, mu2, rel_tol=1e-9)
    assert math.isclose(fit.slope.nominal_value, mu2 / (3 * K_B), rel_tol=1e-9)
    assert fit.chi2 < 1e-16 and fit.ndof == 1
    assert fit.alpha.std_dev > 0 and fit.mu2.std_dev > 0


def _flat_prior_upper_limit(m: float, s: float, cl: float) -> float:
    """Upper limit U with ∫₀^U N(x; m, s) dx = cl·∫₀^∞ N(x; m, s) dx, by quadrature and root
    finding (scipy.integrate.quad + scipy.optimize.brentq), independent of the package's closed
    form (Bayesian limit with a flat prior on x ≥ 0)."""
    pdf = stats.norm(m, s).pdf
    total, _ = integrate.quad(pdf, 0.0, m + 40 * s)
    return optimize.brentq(
        lambda u: integrate.quad(pdf, 0.0, u)[0] - cl * total, 1e-12 * s, m + 40 * s, xtol=1e-14 * s
    )


@pytest.mark.parametrize("ratio", [-0.5, 0.0, 1.0, 1.9])
def test_flat_prior_upper_limit(ratio):
    # the planner's predicted limit (a Bayesian limit with a flat prior on ⟨μ²⟩ ≥ 0)
    s = (1.0 * DEBYE) ** 2
    upper = math.sqrt(bounded_upper_limit(ratio * s, s, 0.95))
    ref = math.sqrt(_flat_prior_upper_limit(ratio * s, s, 0.95))
    assert math.isclose(upper, ref, rel_tol=1e-7)
    assert upper > math.sqrt(max(ratio, 0.0) * s)


@pytest.mark.parametrize("ratio", [-0.5, 0.0, 1.0, 1.5])
def test_mu2_compatible_with_zero_gives_an_upper_limit(ratio):
    s = (1.0 * DEBYE) ** 2
    st = dipole_statement(ufloat(ratio * s, s, tag="fit"))
    assert st.value is None and st.limit is not None
    assert st.limit > math.sqrt(max(ratio, 0.0) * s)
    assert 0.0 <= st.lower <= st.upper <= st.limit


def test_significant_mu2_gives_a_value():
    mu2 = ufloat((2.5 * DEBYE) ** 2, 0.1 * (2.5 * DEBYE) ** 2, tag="fit")
    st = dipole_statement(mu2)
    assert st.limit is None
    assert math.isclose(st.value.nominal_value, 2.5 * DEBYE, rel_tol=1e-12)
    # far from the boundary the half width tends to σ_μ² / (2μ) (first-order propagation of a
    # square root); the unified interval of μ² is central there
    expected = 0.1 * (2.5 * DEBYE) ** 2 / (2 * 2.5 * DEBYE)
    assert math.isclose(st.value.std_dev, expected, rel_tol=0.01)
    assert st.lower < st.value.nominal_value < st.upper
