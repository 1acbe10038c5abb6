"""One conformance check over every layout and deflector implementation (the plug points).

Each implementation must satisfy the protocols of polarbeam.instrument.protocols and give a
coupling that agrees with an independent numerical integral of w(s)·g(s) (trapezoid rule on a
fine grid; an independent derivation of the same overlap integral).
"""

from __future__ import annotations

import numpy as np
import pytest

from polarbeam.contract.campaign import load_campaign
from polarbeam.instrument.deflectors import (
    FieldMapDeflector,
    TwoWireDeflector,
    UniformDeflector,
    coupling,
    overlap,
)
from polarbeam.instrument.magnets import MagneticDeflector
from polarbeam.instrument.numerical import NumericalDeflector
from polarbeam.instrument.protocols import DeflectorModel, LayoutModel

ROOT = __import__("pathlib").Path(__file__).resolve().parents[2]


def _examples():
    out = []
    for name in ("demo", "timedomain"):
        c = load_campaign(ROOT / "examples" / name / "campaign.toml")
        out.append((name, *c.build()))
    return out


def _spatial_layout():
    c = load_campaign(ROOT / "examples" / "demo" / "campaign.toml")
    return c.build()[0]


def _deflectors():
    lay = _spatial_layout()
    z0 = float(lay.knots()[0][0])
    span = float(lay.knots()[0][-1]) - z0
    e, length = z0 + 0.4 * span, 0.1 * span
    return [
        ("uniform", UniformDeflector(1.2e5, e, length)),
        # worked case of the README: a = 2 mm, z1 = 1.6 mm, z2 = 3.4 mm, beam at 1.2 a
        ("two-wire", TwoWireDeflector(2e-3, 1.6e-3, 3.4e-3, 2.4e-3, e, length)),
        ("field-map", FieldMapDeflector((0.0, length / 2, length), (0.0, 2e5, 0.0), e)),
        # a solved cross-section over its effective length L + 2·extension
        ("numerical", NumericalDeflector(1.5e5, e, length, 0.01 * length, 4.0e3)),
        # electromagnets (issue 24): g_B in T²/(m A²), a block and a map of (B ∂B/∂x)/I²
        ("magnet", MagneticDeflector(35.0, e, length, 0.06)),
        (
            "magnet-map",
            MagneticDeflector(
                1.0, e, None, model="field-map", z=(0.0, length / 2, length), g=(0.0, 40.0, 0.0)
            ),
        ),
    ]


@pytest.mark.parametrize("name,layout,deflector", _examples(), ids=lambda x: str(x)[:12])
def test_example_models_conform(name, layout, deflector):
    assert isinstance(layout, LayoutModel)
    assert isinstance(deflector, DeflectorModel)
    c = coupling(layout, deflector)
    assert np.isfinite(c) and c > 0


@pytest.mark.parametrize("name,deflector", _deflectors(), ids=lambda x: str(x)[:12])
def test_deflectors_conform_and_overlap_matches_a_numerical_integral(name, deflector):
    layout = _spatial_layout()
    assert isinstance(layout, LayoutModel)
    assert isinstance(deflector, DeflectorModel)
    a, b = deflector.span
    s = np.linspace(a, b, 200_001)
    prof = deflector.profile()
    if prof is None:  # a constant block of the stated field factor
        g = np.full_like(s, float(deflector.field_factor))
    else:
        zs, gs = (np.asarray(v, dtype=float) for v in prof)
        g = np.interp(s, zs, gs)
    w = np.asarray(layout.weight(s), dtype=float)
    y = w * g
    expected = float(np.sum((y[1:] + y[:-1]) * np.diff(s)) / 2.0)
    assert overlap(layout, deflector) == pytest.approx(expected, rel=1e-6)
    assert coupling(layout, deflector) == pytest.approx(layout.scale * expected, rel=1e-6)
