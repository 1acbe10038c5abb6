"""Deflector field models: the two-wire field against its potential and a worked case."""

import math

import numpy as np
import pytest

from polarbeam.errors import InputError
from polarbeam.instrument.deflectors import (
    FieldMapDeflector,
    TwoWireDeflector,
    UniformDeflector,
    overlap,
    two_wire_axis_field_per_volt,
    two_wire_field_factor,
    two_wire_potential,
)
from polarbeam.instrument.layouts import TalbotLau

A, Z1, Z2 = 2.0e-3, 1.6e-3, 3.4e-3


def test_worked_case_line_charge_model():
    # Worked case derived from the line-charge (two-wire) model: a = 2.0 mm, crossings 1.6 mm and
    # 3.4 mm, 10 kV, beam at 1.2 a → E = 5.6245 MV/m and |E ∂E/∂x| = 1.5558e16 V²/m³.
    V, h = 1.0e4, 1.2 * A
    E = two_wire_axis_field_per_volt(A, Z1, Z2, h) * V
    assert math.isclose(E, 5.6245e6, rel_tol=1e-4)
    assert math.isclose(two_wire_field_factor(A, Z1, Z2, h) * V**2, 1.5558e16, rel_tol=1e-4)


def test_electrodes_are_equipotentials_with_the_stated_voltage():
    # The arcs through (±a, 0) crossing the axis at z1 and z2 must differ by exactly V.
    v1 = two_wire_potential(0.0, Z1, A, Z1, Z2, 1.0)
    v2 = two_wire_potential(0.0, Z2, A, Z1, Z2, 1.0)
    assert math.isclose(abs(v1 - v2), 1.0, rel_tol=1e-12)
    # another point on the convex circle: centre (0, c), radius r through (a,0) and (0,z1)
    c = (Z1**2 - A**2) / (2 * Z1)
    r = Z1 - c
    th = 0.7
    x, z = r * math.sin(th), c + r * math.cos(th)
    assert math.isclose(two_wire_potential(x, z, A, Z1, Z2, 1.0), v1, rel_tol=1e-10)


@pytest.mark.parametrize("h", [1.8e-3, 2.4e-3, 3.0e-3])
def test_field_and_gradient_against_numerical_differentiation(h):
    # Independent check: differentiate the potential numerically (central differences, 2-D).
    d = 1e-7

    def field(x, z):
        ex = -(two_wire_potential(x + d, z, A, Z1, Z2) - two_wire_potential(x - d, z, A, Z1, Z2))
        ez = -(two_wire_potential(x, z + d, A, Z1, Z2) - two_wire_potential(x, z - d, A, Z1, Z2))
        return math.hypot(ex, ez) / (2 * d)

    e0 = field(0.0, h)
    assert math.isclose(e0, two_wire_axis_field_per_volt(A, Z1, Z2, h), rel_tol=1e-6)
    dd = 1e-6
    grad = (field(0.0, h + dd) - field(0.0, h - dd)) / (2 * dd)
    assert math.isclose(abs(e0 * grad), two_wire_field_factor(A, Z1, Z2, h), rel_tol=1e-5)


def test_two_wire_validation_messages():
    with pytest.raises(InputError, match="convex_crossing"):
        TwoWireDeflector(A, 2.5e-3, Z2, 2.4e-3, 0.1, 0.05)
    with pytest.raises(InputError, match="beam_height"):
        TwoWireDeflector(A, Z1, Z2, 4.0e-3, 0.1, 0.05)
    with pytest.raises(InputError, match="concave_crossing"):
        TwoWireDeflector(A, Z1, 1.9e-3, 1.7e-3, 0.1, 0.05)


def test_field_map_overlap_matches_uniform_block():
    lay = TalbotLau(0.0, 0.5, 1.0, 1e-7)
    uni = UniformDeflector(3.0e8, 0.2, 0.1)
    z = np.linspace(0.0, 0.1, 11)
    fm = FieldMapDeflector(tuple(z), tuple(np.full(11, 3.0e8)), 0.2)
    assert math.isclose(overlap(lay, fm), overlap(lay, uni), rel_tol=1e-12)
    # a map across the second grating (kink in the weight) is integrated exactly
    fm2 = FieldMapDeflector((0.0, 0.2), (1.0, 1.0), 0.4)
    assert math.isclose(overlap(lay, fm2), lay.weight_integral(0.4, 0.6), rel_tol=1e-12)


def test_uniform_rejects_nonpositive():
    with pytest.raises(InputError, match="field_factor"):
        UniformDeflector(-1.0, 0.1, 0.1)
    with pytest.raises(InputError, match="length"):
        UniformDeflector(1.0, 0.1, 0.0)
