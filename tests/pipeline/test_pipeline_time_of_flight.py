"""Time-of-flight round trip through the α_eff fit (issue 17).

Each series has its own true beam (a supersonic or effusive flux shape, σ/v̄ from 6 % to 36 %),
a trace simulated with a 20 us gate, a true flight length and time offset drawn from their stated
errors, a flat background and Poisson counts, and a deflection series (beam-profile shifts or
Talbot–Lau phases) computed with the true distribution. The analysis fits the trace
(:mod:`polarbeam.contract.time_of_flight`), uses the fitted table in the α_eff fit and adds the
trace's error terms (fit, flight length, time offset) as a common velocity scale. Honest error
bars give |pull| < 1 in 68.3 % of series (the Gaussian 1σ coverage, ``scipy.stats.norm``): the
accepted window is 0.62–0.75 over 200 series, with no bias beyond 0.25σ; the flight length must
show in the α_eff budget. Leaving the trace's errors out (fit statistics only) gives pulls that
are too wide: the check that the propagated terms matter.
"""

from __future__ import annotations

import numpy as np
import pytest

from polarbeam.beam.distributions import TabulatedVelocity
from polarbeam.beam.time_of_flight import FluxShape, TraceSetup, tabulate
from polarbeam.contract.schema import SeriesData
from polarbeam.contract.time_of_flight import (
    TimeOfFlightSettings,
    Trace,
    fit_traces,
    uncertain_velocity,
)
from polarbeam.extraction.series import alpha_eff_with_errors, fit_series, observable_model
from polarbeam.quantities import Measured
from polarbeam.simulation.time_of_flight import simulate_trace
from polarbeam.uncertain import variance_budget

LENGTH, LENGTH_ERR, GATE, OFFSET_ERR = 1.25, 0.003, 20e-6, 2e-6
SETTINGS = TimeOfFlightSettings(
    Measured(LENGTH, LENGTH_ERR), Measured(GATE), Measured(0.0, OFFSET_ERR), "tof.csv"
)
ALPHA = 2.0e-39  # C·m²/V (≈ 18 Å³)
MASS = 1.0
VOLTS = np.linspace(-1.0, 1.0, 9)


def _beam(rng):
    """A true flux shape with mean ≈ 400–900 m/s and σ/v̄ in 6–36 %."""
    if rng.random() < 0.2:
        return FluxShape(0.0, rng.uniform(300.0, 650.0))  # effusive: σ/v̄ = 0.36
    u = rng.uniform(400.0, 900.0)
    return FluxShape(u, u * rng.uniform(0.08, 0.45))


def _series(rng, k: int):
    """(SeriesData with the fitted trace's table and terms, TraceFit, layout)."""
    shape = _beam(rng)
    true = TraceSetup(
        LENGTH + LENGTH_ERR * rng.standard_normal(), GATE, OFFSET_ERR * rng.standard_normal()
    )
    t_mean = LENGTH * shape.moment(-1)
    width = 10e-6
    starts = np.arange(max(0.0, 0.25 * t_mean), 2.6 * t_mean, width)
    tr = simulate_trace(
        f"c{k}",
        300.0,
        shape,
        true,
        starts,
        width,
        rng,
        total=rng.uniform(1e4, 5e4),
        background=rng.uniform(0.2, 2.0),
    )
    trace = Trace(tr.compound, 300.0, tr.starts, tr.counts.astype(float), width, ())
    fits, problems = fit_traces({(tr.compound, 300.0): trace}, SETTINGS, "tof.csv")
    assert not problems, problems
    tf = fits[(tr.compound, 300.0)]
    layout = "talbot-lau" if k % 2 else "beam-profile"
    # the deflection series with the true distribution (fine table of the true shape)
    v_true, w_true = tabulate(shape, 400)
    true_table = TabulatedVelocity.from_arrays(v_true, w_true)
    m2 = shape.moment(-2)
    top = rng.uniform(1.0, 2.5) if layout == "talbot-lau" else 1e-6  # rad, or m
    com = top / (ALPHA * m2)
    mask = np.ones(VOLTS.size, dtype=bool)
    model, _ = observable_model(
        ALPHA, VOLTS, com, np.full(9, 1.0), np.full(9, 0.0), layout, groups=[(mask, true_table)]
    )
    # point errors chosen so the fit statistics and the velocity terms weigh alike
    err = 0.0035 * top * rng.uniform(0.5, 2.0)
    y = model + err * rng.standard_normal(VOLTS.size) + 0.05 * err
    dist = TabulatedVelocity.from_arrays(tf.velocities, tf.weights)
    s = SeriesData(
        compound=tr.compound,
        temperature=Measured(300.0, 0.0),
        velocity=Measured(dist.mean, 0.0),
        velocities=np.full(9, dist.mean),
        spreads=np.full(9, dist.spread),
        voltages=VOLTS,
        values=y,
        errors=np.full(9, err),
        lines=tuple(range(2, 11)),
        distribution=dist,
        shape="table",
        time_of_flight=tf,
        velocity_terms=tf.velocity_terms,
    )
    return s, com, layout


@pytest.mark.slow
def test_alpha_eff_round_trip_with_time_of_flight_traces():
    rng = np.random.default_rng(1717)
    pulls, naive, shares = [], [], []
    for k in range(200):
        s, com, layout = _series(rng, k)
        fit = fit_series(s, com, MASS, layout, fit_offset=True, nodes=48)
        vel_u = uncertain_velocity(s.velocity.value, s.velocity.value, s.velocity_terms, {})
        a_eff, _ = alpha_eff_with_errors(fit, s.label, 1.0, 1.0, vel_u)
        pulls.append((a_eff.nominal_value - ALPHA) / a_eff.std_dev)
        naive.append((fit.alpha_si - ALPHA) / np.sqrt(fit.covariance[0, 0]))
        shares.append(variance_budget(a_eff).get("beam: flight_length", 0.0))
    pulls, naive = np.array(pulls), np.array(naive)
    inside = float(np.mean(np.abs(pulls) < 1))
    assert 0.62 <= inside <= 0.75, (inside, pulls.mean(), pulls.std())
    assert abs(pulls.mean()) < 0.25, pulls.mean()
    # the flight length is a visible share of every α_eff budget (2·δL/L = 0.48 % of ⟨v⁻²⟩)
    assert np.median(shares) > 0.1, np.median(shares)
    # without the trace's errors the pulls are too wide: the propagated terms matter
    assert float(np.mean(np.abs(naive) < 1)) < 0.58, float(np.mean(np.abs(naive) < 1))
