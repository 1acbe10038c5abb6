"""Time-of-flight round trip: simulated traces (rectangular gate, time offset, flat background,
Poisson counts) → fitted distribution → ⟨v⁻²⟩ with every error (fit, flight length, offset).

Each trace is drawn with a true flight length and time offset taken from their stated errors, so
the stated 1σ of ⟨v⁻²⟩ must cover all three: the fraction of |pull| < 1 must be near 68.3 %
(0.62–0.75) and the mean pull within 0.25.
"""

from __future__ import annotations

import numpy as np
import pytest
import uncertainties

from polarbeam.beam.time_of_flight import (
    FluxShape,
    TraceSetup,
    expected_counts,
    fit_trace,
    mean_inverse_square_uncertain,
)

LENGTH, LENGTH_ERR = 1.25, 0.002
GATE = 20e-6
OFFSET_ERR = 2e-6
WIDTH = 5e-6
STARTS = np.arange(0.2e-3, 4.0e-3, WIDTH)
SHAPES = (
    FluxShape(750.0, 90.0),  # supersonic, σ/v̄ ≈ 8 %
    FluxShape(500.0, 220.0),  # a broad, partly effusive beam
    FluxShape(0.0, 480.0),  # effusive (u = 0)
)


@pytest.mark.slow
def test_time_of_flight_round_trip_pulls_are_honest():
    rng = np.random.default_rng(20261202)
    length_u = uncertainties.ufloat(LENGTH, LENGTH_ERR, tag="beam: flight_length")
    offset_u = uncertainties.ufloat(0.0, OFFSET_ERR, tag="beam: time_offset")
    pulls, shares = [], []
    for k in range(204):
        shape = SHAPES[k % 3]
        true = TraceSetup(
            LENGTH + LENGTH_ERR * rng.standard_normal(), GATE, OFFSET_ERR * rng.standard_normal()
        )
        total = rng.uniform(8e3, 4e4)
        n = rng.poisson(expected_counts(shape, true, STARTS, WIDTH, total, rng.uniform(0.5, 3)))
        fit = fit_trace(TraceSetup(LENGTH, GATE, 0.0), STARTS, n, WIDTH)
        m2 = mean_inverse_square_uncertain(fit, length_u, offset_u, "fit")
        pulls.append((m2.nominal_value - shape.moment(-2)) / m2.std_dev)
        comps = {v.tag: c for v, c in m2.error_components().items()}
        shares.append(comps["beam: flight_length"] ** 2 / m2.std_dev**2)
    pulls = np.array(pulls)
    inside = float(np.mean(np.abs(pulls) < 1))
    assert 0.62 <= inside <= 0.75, (inside, pulls.mean(), pulls.std())
    assert abs(pulls.mean()) < 0.25
    # the flight-length error is in the budget: 2·δL/L = 0.32 % of ⟨v⁻²⟩, a sizeable share for
    # the narrow supersonic traces
    assert np.median(shares[0::3]) > 0.2
