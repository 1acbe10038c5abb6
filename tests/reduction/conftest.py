"""Fixtures of the reduction tests: small simulated series (data invented by the simulator)."""

from __future__ import annotations

import numpy as np
import pytest

from polarbeam.simulation.scans import simulate_series


@pytest.fixture
def small_series():
    # Acquisition order: R0 S1 S2 R3 S4 S5 R6 S7 S8 R9
    rng = np.random.default_rng(21)
    v = np.array([1000.0, 2000.0, 1000.0, 2000.0, 1000.0, 2000.0])
    return simulate_series(1e-7 * v**2, v, rng=rng, visibility=0.3, signal_per_bin=150.0)


@pytest.fixture
def tiny_table():
    rng = np.random.default_rng(2)
    sim = simulate_series([0.1, 0.2], [1000.0, 2000.0], rng=rng, bins=8, reference_every=1)
    return sim.table
