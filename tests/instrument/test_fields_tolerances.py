"""Propagation of electrode tolerances into the field factor.

References used below:
* the two-wire field: potential K arg((w - a)/(w + a)) of the line pair at (+-a, 0), whose
  equipotentials are the circular arcs through (+-a, 0) (classic two-wire deflector field;
  the formulas are written out in polarbeam.instrument.fields.analytic.two_wire_analytic);
* the on-axis derivative dg/dy of the two-wire field factor, derived in closed form beside the
  check (elementary calculus on the formulas above).
"""

from __future__ import annotations

import math

import pytest

from polarbeam.instrument.fields import (
    Beam,
    beam_field,
    monte_carlo_tolerances,
    propagate_tolerances,
    solve_laplace,
    two_wire_analytic,
    two_wire_constant,
    two_wire_cross_section,
    two_wire_from_radii,
)

# Worked two-wire case (line-charge model): a = 2.0 mm, y1 = 1.6 mm, y2 = 3.4 mm, 10 kV.
A, Y1, Y2, V = 2.0e-3, 1.6e-3, 3.4e-3, 1.0e4


def _g_analytic(r_convex, r_trough, gap, beam_offset):
    a, y1, y2 = two_wire_from_radii(r_convex, r_trough, gap)
    return float(two_wire_analytic(0.0, y1 + beam_offset, a, y1, y2, 1.0)["field_factor"])


R1 = (A**2 + Y1**2) / (2 * Y1)
R2 = (A**2 + Y2**2) / (2 * Y2)
PARAMS = {
    "r_convex": (R1, 10e-6),
    "r_trough": (R2, 10e-6),
    "gap": (Y2 - Y1, 10e-6),
    "beam_offset": (1.2 * A - Y1, 20e-6),
}


def test_tolerance_sensitivity_matches_analytic_derivative():
    # d g / d y on the axis in closed form: g = -C y/(a² + y²)³ with C = 8 a² K²/V², so
    # dg/dy = -C (a² - 5 y²)/(a² + y²)⁴.
    res = propagate_tolerances(_g_analytic, PARAMS)
    K = two_wire_constant(A, Y1, Y2, 1.0)
    y = 1.2 * A
    dgdy = -8 * A**2 * K**2 * (A**2 - 5 * y**2) / (A**2 + y**2) ** 4
    assert res.sensitivities["beam_offset"] == pytest.approx(dgdy, rel=1e-4)
    assert sum(res.budget.values()) == pytest.approx(1.0)
    assert res.sigma == pytest.approx(math.sqrt(sum(c**2 for c in res.contributions.values())))


def test_tolerance_propagation_agrees_with_monte_carlo():
    lin = propagate_tolerances(_g_analytic, PARAMS)
    mc = monte_carlo_tolerances(_g_analytic, PARAMS, n=4000, seed=3)
    print("linear sigma", lin.sigma, "MC sigma", mc.sigma, "+-", mc.sigma_of_sigma)
    assert mc.sigma == pytest.approx(lin.sigma, abs=3 * mc.sigma_of_sigma + 0.01 * lin.sigma)
    assert mc.mean == pytest.approx(
        lin.nominal, abs=4 * mc.sigma / math.sqrt(4000) + 1e-3 * abs(lin.nominal)
    )
    # correlated radii (e.g. machined with the same tool offset) change the answer
    corr = propagate_tolerances(_g_analytic, PARAMS, correlations={("r_convex", "r_trough"): 0.9})
    mcc = monte_carlo_tolerances(
        _g_analytic, PARAMS, n=4000, seed=4, correlations={("r_convex", "r_trough"): 0.9}
    )
    assert mcc.sigma == pytest.approx(corr.sigma, abs=3 * mcc.sigma_of_sigma + 0.01 * corr.sigma)


def test_tolerance_propagation_through_the_solver():
    # The gap sensitivity from finite-difference solves equals the analytic one.
    def g_num(gap):
        a, y1, y2 = two_wire_from_radii(R1, R2, gap)
        cs = two_wire_cross_section(a, y1, y2, 1.0)
        return beam_field(solve_laplace(cs, 0.04e-3), Beam(0.0, y1 + 0.8e-3)).field_factor

    def g_an(gap):
        return _g_analytic(R1, R2, gap, 0.8e-3)

    num = propagate_tolerances(g_num, {"gap": (Y2 - Y1, 20e-6)})
    an = propagate_tolerances(g_an, {"gap": (Y2 - Y1, 20e-6)})
    assert num.sensitivities["gap"] == pytest.approx(an.sensitivities["gap"], rel=2e-3)
