"""Drift correction (polarbeam.reduction.drift, .noise, .reduce): interpolation, noise, pulls.

Outside references used below:

* Brownian motion: increments over Δt are independent N(0, D Δt) (definition; the Monte Carlo
  below simulates it directly).
* The normal distribution (``scipy.stats.norm``): a correctly whitened residual is N(0, 1) and
  ``P(|z| < 1) = 0.6827``.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from polarbeam.reduction import (
    NO_REFERENCE_AFTER,
    NO_REFERENCE_BEFORE,
    corrected_phase_covariance,
    estimate_excess_noise,
    interpolation_weights,
    reduce_table,
)
from polarbeam.reduction.noise import noise_moments
from polarbeam.simulation.scans import simulate_scan_table, simulate_series

PERIOD = 2.0e-7


# --------------------------------------------------------------------------------------------
# (c) Drift correction: interpolation, noise estimate, covariance, pulls
# --------------------------------------------------------------------------------------------


def test_interpolation_weights_and_bracketing():
    tr = np.array([0.0, 10.0, 30.0])
    w, flags = interpolation_weights([-1.0, 0.0, 2.5, 20.0, 30.0, 31.0], tr)
    assert flags[0] == NO_REFERENCE_BEFORE and flags[-1] == NO_REFERENCE_AFTER
    assert (flags[1:-1] == 0).all()
    np.testing.assert_allclose(w[1], [1, 0, 0])
    np.testing.assert_allclose(w[2], [0.75, 0.25, 0])
    np.testing.assert_allclose(w[3], [0, 0.5, 0.5])
    np.testing.assert_allclose(w[4], [0, 0, 1])
    assert not w[0].any() and not w[-1].any()
    # A linear function of time is interpolated exactly.
    np.testing.assert_allclose(w[1:-1] @ (3 + 2 * tr), 3 + 2 * np.array([0.0, 2.5, 20.0, 30.0]))


def test_covariance_formula_against_monte_carlo():
    # Analytic covariance against a direct simulation of a random walk sampled at the scan times
    # (increments N(0, D Δt): definition of Brownian motion) plus independent statistical noise.
    rng = np.random.default_rng(3)
    t_ref = np.array([0.0, 60.0, 130.0, 200.0])
    t_sig = np.array([20.0, 40.0, 80.0, 110.0, 150.0, 170.0, 190.0])
    sig_err = np.full(t_sig.size, 0.05)
    ref_err = np.array([0.04, 0.06, 0.05, 0.03])
    diff, jit = 4e-4, 0.02**2
    w, flags = interpolation_weights(t_sig, t_ref)
    assert not flags.any()
    cov = corrected_phase_covariance(
        w, sig_err**2, ref_err**2, t_sig, t_ref, diffusion_rad2_s=diff, jitter_rad2=jit
    )
    n_mc = 40000
    t_all = np.r_[t_ref, t_sig]
    order = np.argsort(t_all)
    steps = rng.normal(size=(n_mc, t_all.size)) * np.sqrt(diff * np.r_[0, np.diff(t_all[order])])
    walk = np.empty_like(steps)
    walk[:, order] = np.cumsum(steps, axis=1)
    phase = walk + rng.normal(size=walk.shape) * math.sqrt(jit)
    phase += rng.normal(size=walk.shape) * np.r_[ref_err, sig_err]
    delta = phase[:, 4:] - phase[:, :4] @ w.T
    emp = np.cov(delta, rowvar=False)
    # Standard error of a sample covariance ~ sqrt((C_ii C_jj + C_ij²)/n).
    se = np.sqrt((np.outer(np.diag(cov), np.diag(cov)) + cov**2) / n_mc)
    assert np.all(np.abs(emp - cov) < 5 * se)
    # Scans in the same reference interval are positively correlated, others not at all via walk.
    assert cov[0, 1] > 0.3 * math.sqrt(cov[0, 0] * cov[1, 1])


def test_banded_covariance_equals_general_formula():
    rng = np.random.default_rng(9)
    t_ref = np.sort(rng.uniform(0, 1000, 12))
    t_sig = np.r_[t_ref[3], rng.uniform(t_ref[0], t_ref[-1], 30)]  # one scan exactly on a ref
    w, flags = interpolation_weights(t_sig, t_ref)
    assert not flags.any()
    var_s = rng.uniform(0.001, 0.01, t_sig.size)
    a = rng.normal(size=(12, 12))
    for ref_cov in (rng.uniform(0.001, 0.01, 12), a @ a.T * 1e-3):
        kw = dict(diffusion_rad2_s=3e-5, jitter_rad2=2e-3)
        fast = corrected_phase_covariance(w, var_s, ref_cov, t_sig, t_ref, **kw)
        dense = corrected_phase_covariance(w, var_s, ref_cov, t_sig, t_ref, method="dense", **kw)
        np.testing.assert_allclose(fast, dense, rtol=1e-10, atol=1e-13)
        assert (fast == fast.T).all()
        assert np.linalg.eigvalsh(fast).min() > 0


@pytest.mark.parametrize("model", ["random-walk", "jitter"])
def test_banded_noise_moments_equal_dense_matrices(model):
    rng = np.random.default_rng(10)
    t = np.cumsum(rng.uniform(20, 200, 15)) + 1e5
    phase = rng.normal(size=t.size)
    var = rng.uniform(1e-3, 1e-2, t.size)
    m = t.size
    p = np.zeros((m - 2, m))  # chord residuals written out densely
    for row, j in enumerate(range(1, m - 1)):
        gap = t[j + 1] - t[j - 1]
        p[row, [j - 1, j, j + 1]] = [-(t[j + 1] - t[j]) / gap, 1.0, -(t[j] - t[j - 1]) / gap]
    kern = np.minimum.outer(t, t) - t[0] if model == "random-walk" else np.eye(m)
    s_mat, k_mat = p @ np.diag(var) @ p.T, p @ kern @ p.T
    got = noise_moments(t, phase, var, model)
    want = dict(
        q=(p @ phase) @ (p @ phase),
        trs=np.trace(s_mat),
        trk=np.trace(k_mat),
        ss=np.sum(s_mat**2),
        sk=np.sum(s_mat * k_mat),
        kk=np.sum(k_mat**2),
    )
    for key, value in want.items():
        assert got[key] == pytest.approx(value, rel=1e-9, abs=1e-12), key


def test_noise_estimate_unbiased():
    # Mean of the method-of-moments estimate over many series equals the simulated diffusion.
    rng = np.random.default_rng(4)
    d_true, n_series = 5e-4, 400
    t = np.cumsum(rng.uniform(40, 90, 25))
    err = rng.uniform(0.03, 0.06, t.size)
    est = []
    for _ in range(n_series):
        walk = np.cumsum(rng.normal(size=t.size) * np.sqrt(d_true * np.r_[0, np.diff(t)]))
        phase = 1.0 + 3e-3 * t + walk + rng.normal(size=t.size) * err
        est.append(estimate_excess_noise(t, phase, err**2).level)
    est = np.array(est)
    assert est.mean() == pytest.approx(d_true, rel=3 * est.std() / math.sqrt(n_series) / d_true)
    # Without excess noise the estimate is mostly clipped at zero and small.
    zero = [
        estimate_excess_noise(t, 1.0 + 3e-3 * t + rng.normal(size=t.size) * err, err**2).level
        for _ in range(100)
    ]
    assert np.median(zero) < 0.1 * d_true


def _pull_campaign(seed=5, n_series=120):
    rng = np.random.default_rng(seed)
    volts = np.array([400.0, 800, 1200, 1600, 2000, 2400])
    specs = []
    for i in range(n_series):
        v = rng.permutation(np.tile(volts, 5))
        specs.append(dict(shifts_rad=6e-7 * v**2, voltages_V=v, compound=f"demo-{i:03d}"))
    return simulate_scan_table(
        specs,
        rng=rng,
        signal_per_bin=100.0,
        dark_per_bin=1.0,
        visibility=0.3,
        drift_rad_s=2e-3,
        random_walk_rad2_s=3e-4,
        reference_every=2,
    )


def _pulls(red, truth):
    truth = truth.set_index("scan")
    table = red.table.set_index("scan")
    z_all, q_all, lag_z, lag_q = [], [], [], []
    for key, cov in red.covariance.items():
        scans = red.kept_scans(key)
        r = table.loc[scans, "phase_rad"].to_numpy() - truth.loc[scans, "shift_rad"].to_numpy()
        z = np.linalg.solve(np.linalg.cholesky(cov), r)  # whitened residuals
        q = r / np.sqrt(np.diag(cov))
        z_all.append(z)
        q_all.append(q)
        lag_z.append(np.c_[z[:-1], z[1:]])
        lag_q.append(np.c_[q[:-1], q[1:]])
    lag_z, lag_q = np.concatenate(lag_z), np.concatenate(lag_q)
    return (
        np.concatenate(z_all),
        np.corrcoef(lag_z.T)[0, 1],
        np.corrcoef(lag_q.T)[0, 1],
    )


@pytest.fixture(scope="module")
def pull_campaign():
    return _pull_campaign()


@pytest.mark.parametrize("scope", ["series", "pooled"])
def test_drift_corrected_pulls(pull_campaign, scope):
    sim = pull_campaign
    red = reduce_table(sim.table, PERIOD, noise_scope=scope)
    assert red.table["phase_rad"].notna().all()
    z, lag_z, lag_q = _pulls(red, sim.truth)
    within_1 = stats.norm.cdf(1) - stats.norm.cdf(-1)  # 0.6827 (scipy.stats.norm)
    assert z.size == 3600
    assert z.std() == pytest.approx(1.0, abs=0.07)
    assert np.mean(np.abs(z) < 1) == pytest.approx(within_1, abs=0.07)
    assert abs(z.mean()) < 4 / math.sqrt(z.size)  # no bias left by the drift
    # Neighbours sharing references are correlated; the full covariance whitens that away.
    assert lag_q > 0.15
    assert abs(lag_z) < 0.06


def test_pulls_too_wide_without_noise_model(pull_campaign):
    # The same data without the random-walk term: errors too small (the check can fail).
    red = reduce_table(pull_campaign.table, PERIOD, noise_model="none")
    z, _, _ = _pulls(red, pull_campaign.truth)
    assert z.std() > 1.15


def test_drift_corrected_phases_recover_truth_and_sign():
    rng = np.random.default_rng(12)
    v = np.tile([600.0, 1200.0, 1800.0], 6)
    sim = simulate_series(1e-6 * v**2, v, rng=rng, drift_rad_s=5e-3, visibility=0.25)
    red = reduce_table(sim.table, PERIOD)
    truth = sim.truth[~sim.truth.is_reference].reset_index(drop=True)
    assert list(red.table["scan"]) == list(truth["scan"])
    assert (red.table["phase_rad"] > 0).all()  # positive shifts (0.36-3.2 rad) stay so
    pull = (red.table["phase_rad"] - truth["shift_rad"]) / red.table["phase_err_rad"]
    assert np.abs(pull).max() < 4.5
    # Reference visibility and the relative visibility of the rows.
    vis_ref, vis_ref_err = red.reference_visibility[("demo-molecule", 300.0)]
    assert vis_ref == pytest.approx(truth["observed_visibility"].iloc[0], abs=4 * vis_ref_err)
    rel = red.relative_visibility()
    assert rel["relative_visibility"].mean() == pytest.approx(1.0, abs=0.05)
