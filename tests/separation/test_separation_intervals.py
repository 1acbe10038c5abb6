"""Unified (Feldman–Cousins) intervals for a Gaussian mean bounded at zero.

Checked three ways: against Table X of Feldman & Cousins, Phys. Rev. D 57, 3873 (1998) (90 % CL,
values quoted from memory to two decimals); by the defining property of the construction (the
interval's edges are where the acceptance region just reaches the observation); and by toy Monte
Carlo coverage, including the undercoverage of the "flip-flop" rule the unified intervals replace.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from polarbeam.separation.intervals import acceptance_region, unified_interval

# x0 → (lower, upper), 90 % CL, unit σ (Feldman & Cousins 1998, Table X; from memory)
TABLE_X = {
    -3.0: (0.00, 0.26),
    -2.0: (0.00, 0.40),
    0.0: (0.00, 1.64),
    1.0: (0.00, 2.64),
    2.0: (0.58, 3.64),
    3.0: (1.37, 4.64),
}


@pytest.mark.parametrize("x0", sorted(TABLE_X))
def test_against_the_published_table(x0):
    lo, hi = TABLE_X[x0]
    i = unified_interval(x0, 1.0, 0.90)
    assert i.lower == pytest.approx(lo, abs=0.011)
    assert i.upper == pytest.approx(hi, abs=0.011)


def test_far_from_the_boundary_the_interval_is_central():
    # common practice: the usual ±z σ interval once the boundary is irrelevant
    i = unified_interval(20.0, 2.0, 0.683)
    z = stats.norm.ppf(0.5 + 0.683 / 2)
    assert i.lower == pytest.approx(20.0 - 2.0 * z, rel=1e-6)
    assert i.upper == pytest.approx(20.0 + 2.0 * z, rel=1e-6)


@pytest.mark.parametrize("x0", [-1.7, -0.3, 0.0, 0.4, 0.9, 1.3, 2.2, 5.0])
@pytest.mark.parametrize("cl", [0.683, 0.95])
def test_edges_are_where_the_region_just_reaches_the_observation(x0, cl):
    i = unified_interval(x0, 1.0, cl)
    x1_hi, _ = acceptance_region(i.upper, cl)
    assert x1_hi == pytest.approx(x0, abs=1e-8)
    if i.lower > 0:
        _, x2_lo = acceptance_region(i.lower, cl)
        assert x2_lo == pytest.approx(x0, abs=1e-8)
    else:  # the region at μ = 0 already holds x0
        assert acceptance_region(0.0, cl)[1] >= x0
    # every region has the stated probability (the belt's defining property)
    for mu in (0.0, 0.3, i.upper):
        a, b = acceptance_region(mu, cl)
        assert stats.norm.cdf(b - mu) - stats.norm.cdf(a - mu) == pytest.approx(cl, abs=1e-9)


def _belt(cl, mus):
    return np.array([acceptance_region(float(m), cl) for m in mus])


@pytest.mark.parametrize("cl", [0.683, 0.95])
def test_coverage_by_toys_and_the_flip_flop_undercovers(cl):
    """Toys x ~ N(μ, 1) for true μ from 0 to 6σ: the unified interval covers within ±2 % at every
    μ; quoting a central interval when x > 3 and an upper limit otherwise does not."""
    rng = np.random.default_rng(20261202)
    mus = np.linspace(0.0, 6.0, 13)
    n = 4000
    print(f"\ncoverage at CL {cl}: true μ, unified, flip-flop")
    worst_ff = 0.0
    for mu in mus:
        x = rng.normal(mu, 1.0, n)
        # μ is in the unified interval of x exactly when x is in μ's acceptance region
        x1, x2 = acceptance_region(float(mu), cl)
        unified = float(np.mean((x >= x1) & (x <= x2)))
        # flip-flop: central interval above 3σ, else the classical upper limit x + z_cl
        z_c = stats.norm.ppf(0.5 + cl / 2)
        z_u = stats.norm.ppf(cl)
        central = (x > 3.0) & (np.abs(x - mu) <= z_c)
        limit = (x <= 3.0) & (mu <= np.maximum(x, 0.0) + z_u)
        flip = float(np.mean(central | limit))
        worst_ff = max(worst_ff, abs(flip - cl))
        print(f"  {mu:4.1f}  {unified:.3f}  {flip:.3f}")
        assert abs(unified - cl) < 0.02
    assert worst_ff > 0.02  # the flip-flop rule misses its nominal coverage somewhere


def test_the_interval_function_agrees_with_the_belt_on_toys():
    rng = np.random.default_rng(5)
    for x in rng.normal(1.0, 1.5, 12):
        i = unified_interval(float(x), 1.0, 0.683)
        for mu in (i.lower + 1e-6, i.upper - 1e-6):
            if mu >= 0:
                a, b = acceptance_region(mu, 0.683)
                assert a - 1e-6 <= x <= b + 1e-6


def test_bad_arguments():
    with pytest.raises(ValueError, match="σ > 0"):
        unified_interval(1.0, 0.0, 0.9)
    with pytest.raises(ValueError, match="0 < cl < 1"):
        acceptance_region(1.0, 1.5)
