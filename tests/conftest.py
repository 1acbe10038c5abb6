"""Shared fixtures: small campaigns written by the project's simulator."""

from __future__ import annotations

import numpy as np
import pytest

from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign


@pytest.fixture
def simple_campaign(tmp_path):
    """A three-compound, three-temperature Talbot–Lau campaign with known truth."""
    comps = [
        CompoundTruth("polar-one", 180.0, 20.0, 2.5, (300.0, 450.0, 600.0)),
        CompoundTruth("apolar-two", 250.0, 35.0, 0.0, (300.0, 450.0, 600.0)),
        CompoundTruth("single-three", 120.0, 12.0, 1.0, (400.0,)),
    ]
    truth = simulate_campaign(
        tmp_path / "camp", comps, spec=InstrumentSpec.talbot_lau(), seed=np.random.default_rng(7)
    )
    return truth
