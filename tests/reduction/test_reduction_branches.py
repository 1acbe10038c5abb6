"""Choice of the 2π branch of drift-corrected phases (polarbeam.reduction.branches)."""

from __future__ import annotations

import numpy as np
import pytest

from polarbeam.errors import InputError
from polarbeam.reduction import choose_branches, reduce_table
from polarbeam.reduction.branches import grouped_branches
from polarbeam.simulation.scans import simulate_series

PERIOD = 2.0e-7


def _wrap(phi):
    return np.pi - np.mod(np.pi - phi, 2 * np.pi)


def test_branch_follows_v_squared_trend():
    rng = np.random.default_rng(13)
    v = np.repeat(np.linspace(200.0, 2000.0, 10), 2)
    v = rng.permutation(v)
    shifts = 3.0e-6 * v**2  # up to 12 rad: almost two turns
    sim = simulate_series(shifts, v, rng=rng, visibility=0.3, signal_per_bin=300.0)
    red = reduce_table(sim.table, PERIOD)
    truth = sim.truth[~sim.truth.is_reference].reset_index(drop=True)
    np.testing.assert_allclose(red.table["phase_rad"], truth["shift_rad"], atol=0.5)


def test_branch_with_expected_phase_or_sign():
    v = np.array([1000.0, 1000.0, 1500.0, 2000.0])
    true = -4.0e-6 * v**2  # -4 rad at the lowest voltage: nearest-zero would be wrong
    wrapped = _wrap(true + 0.01)
    trend = choose_branches(wrapped, v)
    assert trend[0] == pytest.approx(true[0] + 0.01 + 2 * np.pi)
    signed = choose_branches(wrapped, v, shift_sign=-1)
    np.testing.assert_allclose(signed, true + 0.01)
    expected = choose_branches(wrapped, v, expected=lambda volts: -4.0e-6 * volts**2)
    np.testing.assert_allclose(expected, true + 0.01)
    with pytest.raises(InputError, match="shift_sign must be"):
        choose_branches(wrapped, v, shift_sign=2)


def test_choose_branches_grouped_equals_per_series():
    rng = np.random.default_rng(9)
    v = rng.choice([-3000.0, -1000.0, 1000.0, 2000.0, 3000.0], 60)
    group = np.repeat([0, 1, 2], 20)
    slope = np.array([4e-7, -2e-7, 1e-6])[group]
    phase = _wrap(slope * v**2 + rng.normal(0, 0.05, 60))
    err = np.full(60, 0.05)
    for sign in (None, 1, -1):
        together = grouped_branches(phase, v, 1 / err**2, group, 3, sign)
        for g in range(3):
            sel = group == g
            alone = choose_branches(phase[sel], v[sel], err[sel], shift_sign=sign)
            np.testing.assert_allclose(together[sel], alone, rtol=1e-12)
