"""Reduction messages reach their compound: a series with too few references for its own noise
estimate says so in that compound's notes (and only there)."""

from __future__ import annotations

import numpy as np

from polarbeam.contract.scans import series_from_reduction
from polarbeam.reduction import reduce_table
from polarbeam.simulation.scans import simulate_scan_table


def test_pooled_noise_note_is_attached_to_its_compound():
    rng = np.random.default_rng(5)
    volts = np.resize(np.array([500.0, 1000.0, 1500.0]), 30)
    sim = simulate_scan_table(
        [
            dict(
                shifts_rad=2e-7 * volts**2, voltages_V=volts, compound="many", temperature_K=300.0
            ),
            dict(
                shifts_rad=2e-7 * volts[:2] ** 2,
                voltages_V=volts[:2],
                compound="few",
                temperature_K=300.0,
            ),
        ],
        rng=rng,
        bins=12,
        reference_every=2,
        random_walk_rad2_s=1e-5,
    )
    red = reduce_table(sim.table, 2.0e-7, source="scans.csv")
    _, _, notes = series_from_reduction(red)
    few = [
        n for n in notes.get("few", []) if "excess phase noise taken from all series pooled" in n
    ]
    assert few and "series (few, 300 K)" in few[0]
    assert not any("pooled" in n for n in notes.get("many", []))
