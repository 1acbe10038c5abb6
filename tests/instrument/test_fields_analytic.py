"""The closed-form two-wire field used as the solver's reference.

References used below:
* the two-wire field: potential K arg((w - a)/(w + a)) of the line pair at (+-a, 0), whose
  equipotentials are the circular arcs through (+-a, 0) (classic two-wire deflector field;
  the formulas are written out in polarbeam.instrument.fields.analytic.two_wire_analytic);
* central finite differences of the potential as an independent check of E and its gradient
  (elementary numerical analysis).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from polarbeam.errors import InputError
from polarbeam.instrument.fields import two_wire_analytic, two_wire_from_radii

# Worked two-wire case (line-charge model): a = 2.0 mm, y1 = 1.6 mm, y2 = 3.4 mm, 10 kV.
A, Y1, Y2, V = 2.0e-3, 1.6e-3, 3.4e-3, 1.0e4


def test_two_wire_worked_case():
    # Worked case derived from the line-charge model (two singular lines at (+-a, 0)):
    # K = V / (2 [arctan(a/y1) - arctan(a/y2)]), on the axis E = 2 a K / (a² + y²), and
    # E dE/dy = -(2 a K)² 2y / (a² + y²)³; at y = 1.2 a: E = 5.6245 MV/m, |E dE/dy| =
    # 1.5558e16 V²/m³.
    r = two_wire_analytic(0.0, 1.2 * A, A, Y1, Y2, V)
    assert r["E"] == pytest.approx(5.6245e6, rel=2e-5)
    assert abs(r["E_dE_dy"]) == pytest.approx(1.5558e16, rel=5e-5)
    assert r["dE_dy"] < 0  # |E| grows towards the convex electrode
    # the electrodes are equipotentials V apart
    phi = two_wire_analytic(0.0, np.array([Y1, Y2]), A, Y1, Y2, V)["potential"]
    assert phi[0] - phi[1] == pytest.approx(V, rel=1e-12)


def test_two_wire_arcs_are_equipotentials():
    # Circle through (+-a, 0) and (0, y1): every point of its upper arc has the same potential.
    r1 = (A**2 + Y1**2) / (2 * Y1)
    th = np.arctan2(0 - (Y1 - r1), A)  # angle of (a, 0) seen from the centre
    ang = np.linspace(th, math.pi - th, 50)
    x, y = r1 * np.cos(ang), (Y1 - r1) + r1 * np.sin(ang)
    phi = two_wire_analytic(x[1:-1], y[1:-1], A, Y1, Y2, V)["potential"]
    assert np.ptp(phi) < 1e-9 * V


def test_two_wire_field_matches_numerical_differentiation_of_potential():
    # Independent check of the closed-form E and dE/dy: differentiate the potential
    # K arg((w-a)/(w+a)) numerically (central differences, step 1 um) at off-axis points.
    pts = [(0.3e-3, 2.2e-3), (-0.5e-3, 2.6e-3), (0.0, 2.0e-3), (0.8e-3, 2.9e-3)]
    d = 1e-6

    def phi(x, y):
        return two_wire_analytic(x, y, A, Y1, Y2, V)["potential"]

    def efield(x, y):
        ex = -(phi(x + d, y) - phi(x - d, y)) / (2 * d)
        ey = -(phi(x, y + d) - phi(x, y - d)) / (2 * d)
        return math.hypot(ex, ey)

    for x, y in pts:
        r = two_wire_analytic(x, y, A, Y1, Y2, V)
        assert efield(x, y) == pytest.approx(float(r["E"]), rel=1e-6)
        ex = -(phi(x + d, y) - phi(x - d, y)) / (2 * d)
        ey = -(phi(x, y + d) - phi(x, y - d)) / (2 * d)
        assert (ex, ey) == pytest.approx((float(r["Ex"]), float(r["Ey"])), rel=1e-6, abs=1e-3)
        dedy = (efield(x, y + d) - efield(x, y - d)) / (2 * d)
        dedx = (efield(x + d, y) - efield(x - d, y)) / (2 * d)
        assert dedy == pytest.approx(float(r["dE_dy"]), rel=1e-4)
        assert dedx == pytest.approx(float(r["dE_dx"]), rel=1e-4, abs=1e-6 * abs(dedy))
        g_num = efield(x, y) * dedy / V**2
        assert g_num == pytest.approx(float(r["field_factor"]), rel=1e-4)


def test_two_wire_from_radii_round_trip():
    r1 = (A**2 + Y1**2) / (2 * Y1)
    r2 = (A**2 + Y2**2) / (2 * Y2)
    a, y1, y2 = two_wire_from_radii(r1, r2, Y2 - Y1)
    assert (a, y1, y2) == pytest.approx((A, Y1, Y2), rel=1e-10)
    with pytest.raises(InputError, match=r"gap .* is not reachable"):
        two_wire_from_radii(r1, r2, 10 * r2)
