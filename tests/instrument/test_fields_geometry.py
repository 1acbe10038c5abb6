"""Electrode geometry validation and one-line errors for bad input."""

from __future__ import annotations

import pytest

from polarbeam.errors import InputError
from polarbeam.instrument.fields import (
    ArcRegion,
    Beam,
    BoundaryBox,
    Circle,
    CrossSection,
    Polygon,
    beam_field,
    propagate_tolerances,
    solve_deflector,
    solve_laplace,
    two_wire_cross_section,
)

# Worked two-wire case (line-charge model): a = 2.0 mm, y1 = 1.6 mm, y2 = 3.4 mm, 10 kV.
A, Y1, Y2, V = 2.0e-3, 1.6e-3, 3.4e-3, 1.0e4


@pytest.fixture(scope="module")
def two_wire():
    return two_wire_cross_section(A, Y1, Y2, V)


def test_electrode_outside_boundary():
    box = BoundaryBox(-1e-3, 1e-3, -1e-3, 1e-3)
    with pytest.raises(InputError, match=r"electrode 'hv' .* extends outside the boundary box"):
        CrossSection((Circle((0.9e-3, 0.0), 0.2e-3, 100.0, name="hv"),), box)
    with pytest.raises(InputError, match=r"electrode 'tr' .* lies outside the boundary box"):
        CrossSection((ArcRegion((0, 0), 0.5e-3, 0.0, clip_offset=2e-3, name="tr"),), box)


def test_overlapping_electrodes():
    box = BoundaryBox(-3e-3, 3e-3, -3e-3, 3e-3)
    c1 = Circle((0.0, 0.0), 1e-3, 100.0, name="a")
    with pytest.raises(InputError, match="electrodes 'a' and 'b' overlap"):
        CrossSection((c1, Circle((1.5e-3, 0.0), 1e-3, 0.0, name="b")), box)
    sq = Polygon(
        ((0.5e-3, -0.2e-3), (2e-3, -0.2e-3), (2e-3, 0.2e-3), (0.5e-3, 0.2e-3)), 0.0, name="b"
    )
    with pytest.raises(InputError, match="electrodes 'a' and 'b' overlap"):
        CrossSection((c1, sq), box)
    # touching is allowed
    CrossSection((c1, Circle((2e-3, 0.0), 1e-3, 0.0, name="b")), box)


def test_beam_inside_or_too_close_to_electrode(two_wire):
    with pytest.raises(InputError, match="overlaps electrode 'convex'"):
        solve_deflector(two_wire, Beam(0.0, 1.5e-3), h=0.1e-3)
    with pytest.raises(InputError, match="overlaps electrode 'trough'"):
        solve_deflector(two_wire, Beam(0.0, 3.0e-3, height=1.0e-3), h=0.1e-3)
    with pytest.raises(InputError, match="within 2 grid spacings"):
        beam_field(solve_laplace(two_wire, 0.1e-3), Beam(0.0, 1.65e-3))


def test_bad_options_and_values():
    box = BoundaryBox(-1e-3, 1e-3, -1e-3, 1e-3)
    with pytest.raises(InputError, match="radius: expected > 0"):
        Circle((0, 0), -1.0, 0.0)
    with pytest.raises(InputError, match="polygon edges 0 and 2 cross"):
        Polygon(((0, 0), (1, 1), (1, 0), (0, 1)), 0.0)
    with pytest.raises(InputError, match=r"boundary box: expected xmin < xmax"):
        BoundaryBox(1.0, 0.0, 0.0, 1.0)
    cs = CrossSection((Circle((0, 0), 0.2e-3, 1.0, name="c"),), box)
    with pytest.raises(InputError, match=r"boundary: expected one of \['shortley-weller'"):
        solve_laplace(cs, 1e-4, boundary="fancy")
    with pytest.raises(InputError, match="two-wire geometry: expected 0 < y1 < a < y2"):
        two_wire_cross_section(A, 2.5e-3, Y2, V)
    with pytest.raises(InputError, match=r"parameter 'gap': expected \(value, sigma\)"):
        propagate_tolerances(lambda gap: gap, {"gap": 1.0})
