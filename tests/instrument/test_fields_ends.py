"""Fringe fields and the effective length of the deflector.

References used below:
* Maxwell's conformal map of a condenser edge, z = (a/pi)(1 + w + exp(w)) (J. C. Maxwell,
  A Treatise on Electricity and Magnetism, vol. 1, art. 195-196 -- from memory);
* the integral of a tanh-edged plateau (elementary calculus).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate

from polarbeam.errors import InputError
from polarbeam.instrument.fields import (
    BoundaryBox,
    CrossSection,
    Polygon,
    effective_length,
    effective_length_from_map,
    fringe_extension_numerical,
    maxwell_edge_field,
    maxwell_fringe_extension,
    read_fringe_map_csv,
    solve_laplace,
)


def test_maxwell_extension_closed_form_against_quadrature():
    # Maxwell's map gives on the mid-plane E/E0 = 1/(1 + e^u) at z = (a/pi)(1 + u + e^u).
    # Integrate (E/E0)² dz numerically from deep inside (u = -40) and subtract the geometric
    # length up to the edge: the excess must be a/pi = gap/(2 pi).
    gap = 1.0e-3
    a = gap / 2
    u0 = -40.0
    val, _ = integrate.quad(lambda u: (a / math.pi) / (1 + math.exp(u)), u0, 60, limit=200)
    z0 = (a / math.pi) * (1 + u0 + math.exp(u0))
    assert val + z0 == pytest.approx(maxwell_fringe_extension(gap), rel=1e-9)
    # the Newton inversion of the map reproduces that mid-plane profile
    u = np.linspace(-4, 4, 9)
    z = (a / math.pi) * (1 + u + np.exp(u))
    r = maxwell_edge_field(z, np.zeros_like(z), gap, 1.0)
    assert r["E"] == pytest.approx((1.0 / gap) / (1 + np.exp(u)), rel=1e-12)


def test_solver_reproduces_maxwell_edge_field():
    # Thin plates (thinner than the grid) with the box walls held at Maxwell's potential:
    # the solver must reproduce the mid-plane fringe profile and its E² integral.
    gap = 1.0e-3
    a, X, Y = gap / 2, 4e-3, 3e-3
    box = BoundaryBox(
        -X, X, -Y, Y, potential=lambda x, y: maxwell_edge_field(x, y, gap, 1.0)["potential"]
    )
    tt = 1e-9
    up = Polygon(((-X, a), (0, a), (0, a + tt), (-X, a + tt)), 0.5, name="upper")
    lo = Polygon(((-X, -a - tt), (0, -a - tt), (0, -a), (-X, -a)), -0.5, name="lower")
    cs = CrossSection((up, lo), box)
    errs = []
    for n in (161, 321):
        sol = solve_laplace(cs, shape=(n, (n - 1) * 3 // 4 + 1))
        j0 = sol.y.size // 2
        assert sol.y[j0] == pytest.approx(0.0, abs=1e-12)
        E = np.abs((sol.phi[j0 + 1] - sol.phi[j0 - 1]) / (2 * sol.hy))
        Ea = maxwell_edge_field(sol.x, np.zeros_like(sol.x), gap, 1.0)["E"]
        errs.append(abs(integrate.trapezoid(E**2, sol.x) / integrate.trapezoid(Ea**2, sol.x) - 1))
    print("Maxwell E² integral errors", errs)
    assert errs[-1] < 3e-3
    # the plate edge (a slit) limits the scheme to first order: error halves with h
    assert 1.5 < errs[0] / errs[1] < 2.6


def test_fringe_numerical_plates_shield_shortens():
    # Grounded end shields terminate the fringe: smaller extension than open ends.
    open_ = fringe_extension_numerical(6e-3, 1e-3, h=0.1e-3)
    shielded = fringe_extension_numerical(
        6e-3, 1e-3, h=0.1e-3, shield_distance=0.5e-3, shield_aperture=0.5e-3
    )
    assert shielded.extension_per_end < 0.5 * open_.extension_per_end
    # open plates of thickness gap/10 on this coarse grid: within 25 % of Maxwell's gap/(2 pi)
    # for ideal thin semi-infinite plates (thickness and grid both lengthen the fringe)
    assert open_.extension_per_end == pytest.approx(maxwell_fringe_extension(1e-3), rel=0.25)
    assert effective_length(6e-3, 1e-3).effective_length == pytest.approx(6e-3 + 1e-3 / math.pi)


def test_effective_length_from_map_csv(tmp_path):
    # A plateau with tanh edges, g(z) = [tanh((z + L/2)/w) - tanh((z - L/2)/w)]/2, integrates
    # exactly to L (elementary calculus), whatever the edge width w.
    L, w = 0.1, 0.004
    z = np.linspace(-0.1, 0.1, 2001)
    g = 0.5 * (np.tanh((z + L / 2) / w) - np.tanh((z - L / 2) / w))
    p = tmp_path / "map.csv"
    p.write_text(
        "# invented demo map\nz_mm,g_rel\n"
        + "\n".join(f"{zz * 1e3:.6f},{gg:.12g}" for zz, gg in zip(z, g, strict=True))
    )
    zr, gr = read_fringe_map_csv(p)
    res = effective_length_from_map(zr, gr)
    assert res.effective_length == pytest.approx(L, rel=1e-5)
    bad = tmp_path / "bad.csv"
    bad.write_text("z_m,g_rel\n0.0,1\n0.1,abc\n")
    with pytest.raises(InputError, match=r"bad.csv row 3: expected numbers"):
        read_fringe_map_csv(bad)
    with pytest.raises(InputError, match="expected columns 'z_m'"):
        (tmp_path / "h.csv").write_text("z,g\n1,2\n")
        read_fringe_map_csv(tmp_path / "h.csv")
    with pytest.raises(InputError, match="strictly increasing"):
        effective_length_from_map([0, 2, 1], [1, 1, 1])
