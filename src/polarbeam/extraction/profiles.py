"""Profile data: a Poisson-likelihood fit of whole deflection profiles of a rigid compound.

Each series (one source temperature) holds profiles recorded at several voltages, one of them at
V = 0 (the undeflected beam: its Gaussian centre and width and a flat background are fitted
with the rest, shared by the series' profiles; each profile has its own amplitude). The deflected
profiles follow :func:`polarbeam.beam.rotors.profiles.expected_counts`: the sum over rotational
states (Stark states of the rotor response, adiabatic, Boltzmann at T_rot) and velocity classes
(Gauss–Hermite nodes) of the undeflected shape displaced by each one's deflection. Fitted: μ, the
rotational temperature of every series that does not state it, α unless it is known, and the
beam-shape nuisances; the errors are those of the Fisher information of the Poisson likelihood at
the optimum (the Jacobian of the deviance residuals).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from threadpoolctl import threadpool_limits

from polarbeam._util.optional import lazy
from polarbeam.beam.distributions import GaussianVelocity
from polarbeam.beam.rotors.profiles import (
    Profile,
    ProfileSeries,
    expected_counts,
    reweighted_populations,
)
from polarbeam.constants import ANGSTROM3_SI, si_from_debye
from polarbeam.errors import CompoundError, FitError

_optimize = lazy("scipy.optimize", "numerical routines")

__all__ = [
    "Profile",
    "ProfileFit",
    "ProfileSeries",
    "fit_profiles",
    "profile_model",
    "profile_moments",
]

_UM = 1e-6
#: starting dipoles (D) tried before the fit; the one with the lowest deviance is kept
START_DIPOLES_D = (0.3, 0.7, 1.5, 3.0, 6.0)


@dataclass(frozen=True)
class ProfileFit:
    """μ (C·m), the rotational temperatures (K) and α (C·m²/V) with their 1σ errors."""

    dipole: float
    dipole_err: float
    rotational_k: tuple[float, ...]
    rotational_err_k: tuple[float, ...]  # 0 where stated
    alpha: float
    alpha_err: float  # 0 when known
    deviance: float
    ndof: int
    evaluations: int
    #: expected counts of every profile at the optimum, per series (same order as the data)
    models: tuple[tuple[np.ndarray, ...], ...] = ()
    #: fitted flat background (counts per bin) of every series
    backgrounds: tuple[float, ...] = ()


def profile_moments(
    positions: np.ndarray, counts: np.ndarray, background: float
) -> tuple[float, float, float, float]:
    """(centroid, its error, rms width, its error) in m of one profile above a flat background.

    The moments of the background-subtracted counts n_i − b; the errors are first-order
    propagation of independent Poisson counts (var n_i = n_i, at least 1): for the centroid
    c = Σ x_i w_i / N, var c = Σ (x_i − c)² n_i / N²; for the width σ = √(Σ (x_i − c)² w_i / N),
    var σ = Σ ((x_i − c)² − σ²)² n_i / (2σN)².  The model's own moments (no error) come from the
    same formula applied to its expected counts."""
    x = np.asarray(positions, dtype=float)
    n = np.asarray(counts, dtype=float)
    w = n - background
    total = float(np.sum(w))
    if not total > 0:
        return math.nan, math.nan, math.nan, math.nan
    c = float(np.sum(x * w) / total)
    d2 = (x - c) ** 2
    var_w = np.maximum(n, 1.0)
    width2 = float(np.sum(d2 * w) / total)
    c_err = math.sqrt(float(np.sum(d2 * var_w)) / total**2)
    if not width2 > 0:
        return c, c_err, math.nan, math.nan
    width = math.sqrt(width2)
    w_err = math.sqrt(float(np.sum((d2 - width2) ** 2 * var_w))) / (2.0 * width * total)
    return c, c_err, width, w_err


class _States:
    """Stark states per (μ, E) at a reference temperature, reused while T varies."""

    def __init__(self, response, t_ref: float):
        self.response, self.t_ref, self.cache = response, t_ref, {}

    def get(self, mu: float, field: float):
        key = (round(mu, 40), round(field, 6))
        if key not in self.cache:
            if len(self.cache) > 256:
                self.cache.clear()
            self.cache[key] = self.response.states(mu, self.t_ref, field)
        return self.cache[key]


def profile_model(
    series, states, mu, t_rot, alpha, shape, amplitudes, coupling_over_mass, fpv, nodes: int = 12
):
    """Expected counts of every profile of one series (list of arrays)."""
    centre, width, background = shape
    v, wv = GaussianVelocity(series.velocity, series.spread).nodes(nodes)
    out = []
    for prof, amp in zip(series.profiles, amplitudes, strict=True):
        bw = float(np.median(np.diff(np.sort(prof.positions)))) if prof.positions.size > 1 else 1.0
        if prof.voltage == 0.0:
            out.append(expected_counts(prof.positions, bw, centre, width, background, amp))
            continue
        field = fpv * abs(prof.voltage)
        st = states.get(mu, field)
        pop = reweighted_populations(st, states.t_ref, t_rot)
        a_s = alpha + st.mu_eff / field
        kappa = a_s * coupling_over_mass * prof.voltage**2
        shifts = kappa[:, None] / v[None, :] ** 2
        weights = pop[:, None] * wv[None, :]
        out.append(
            expected_counts(prof.positions, bw, centre, width, background, amp, shifts, weights)
        )
    return out


def _deviance_residuals(n, m):
    m = np.maximum(m, 1e-300)
    with np.errstate(divide="ignore", invalid="ignore"):
        term = np.where(n > 0, n * np.log(n / m), 0.0)
    d = np.maximum(2.0 * (m - n + term), 0.0)
    return np.sign(n - m) * np.sqrt(d)


def fit_profiles(
    series: list[ProfileSeries],
    response,
    coupling_over_mass: float,
    field_per_volt: float | None,
    *,
    name: str = "compound",
    alpha_known: float | None = None,
    dipole_guess: float | None = None,
    rotational_guess_k: float = 10.0,
    nodes: int = 12,
) -> ProfileFit:
    """Poisson fit of μ, T_rot (where not stated) and α (unless known) to whole profiles."""
    if not field_per_volt:
        raise CompoundError(
            f"compound {name!r}: profile data need the field magnitude; expected a deflector "
            "with field_per_volt (uniform, field-map) or one that computes it (two-wire, "
            "numerical), found none"
        )
    for s in series:
        if not any(p.voltage == 0.0 for p in s.profiles):
            raise CompoundError(
                f"compound {name!r}: series {s.label} expected a profile at V = 0 (the "
                "undeflected beam), found voltages "
                + ", ".join(f"{p.voltage:g}" for p in s.profiles)
            )
    free_t = [i for i, s in enumerate(series) if s.rotational_k is None]
    t_max = max(
        [rotational_guess_k * 3.0] + [1.2 * s.rotational_k for s in series if s.rotational_k]
    )
    states = _States(response, t_max)
    # starting values: the shape from each series' V = 0 profile (moments)
    theta0 = [math.log(dipole_guess / si_from_debye(1.0)) if dipole_guess else 0.0]
    lo, hi = [-7.0], [math.log(20.0)]
    theta0 += [math.log(rotational_guess_k)] * len(free_t)
    lo += [math.log(0.3)] * len(free_t)
    hi += [math.log(t_max)] * len(free_t)
    if alpha_known is None:
        theta0.append(10.0)
        lo.append(-1e3)
        hi.append(1e4)
    for s in series:
        p0 = next(p for p in s.profiles if p.voltage == 0.0)
        w = np.maximum(p0.counts, 0.0)
        x = p0.positions
        bg = float(np.percentile(w, 10))
        ws = np.maximum(w - bg, 0.0) + 1e-12
        c = float(np.sum(ws * x) / np.sum(ws))
        sd = float(np.sqrt(np.sum(ws * (x - c) ** 2) / np.sum(ws)))
        bw = float(np.median(np.diff(np.sort(x))))
        theta0 += [c / _UM, math.log(max(sd, bw) / _UM), max(bg, 0.1)]
        lo += [-np.inf, -np.inf, 0.0]
        hi += [np.inf, np.inf, np.inf]
        area = max(float(np.sum(ws)), 1.0)
        for _ in s.profiles:
            theta0.append(math.log(area))
            lo.append(-np.inf)
            hi.append(np.inf)
    theta0 = np.clip(np.array(theta0), np.array(lo) + 1e-9, np.array(hi) - 1e-9)
    data = np.concatenate([p.counts for s in series for p in s.profiles]).astype(float)
    counter = [0]

    def unpack(th):
        k = 0
        mu = si_from_debye(math.exp(th[k]))
        k += 1
        temps = [s.rotational_k for s in series]
        for i in free_t:
            temps[i] = math.exp(th[k])
            k += 1
        if alpha_known is None:
            alpha = th[k] * ANGSTROM3_SI
            k += 1
        else:
            alpha = alpha_known
        per = []
        for s in series:
            shape = (th[k] * _UM, math.exp(th[k + 1]) * _UM, th[k + 2])
            k += 3
            amps = np.exp(th[k : k + len(s.profiles)])
            k += len(s.profiles)
            per.append((shape, amps))
        return mu, temps, alpha, per

    def model(th):
        counter[0] += 1
        mu, temps, alpha, per = unpack(th)
        parts = []
        for s, t, (shape, amps) in zip(series, temps, per, strict=True):
            parts += profile_model(
                s, states, mu, t, alpha, shape, amps, coupling_over_mass, field_per_volt, nodes
            )
        return np.concatenate(parts)

    def resid(th):
        return _deviance_residuals(data, model(th))

    # one BLAS thread: the Stark blocks are many small eigenproblems, which a threaded BLAS
    # slows down many times over on a loaded machine (measured: 0.65 s → 0.019 s per call)
    with threadpool_limits(limits=1, user_api="blas"):
        # start from the best of a few dipoles (the guess among them): from a poor start the
        # fit can slide to μ → 0 with a high T_rot, where μ no longer moves the profiles
        starts = [theta0[0]] + [
            math.log(d) for d in START_DIPOLES_D if abs(math.log(d) - theta0[0]) > 0.1
        ]
        scores = []
        for t0 in starts:
            trial = theta0.copy()
            trial[0] = min(max(t0, lo[0] + 1e-9), hi[0] - 1e-9)
            scores.append((float(np.sum(resid(trial) ** 2)), trial[0]))
        theta0[0] = min(scores)[1]
        res = _optimize.least_squares(resid, theta0, bounds=(lo, hi), x_scale="jac", diff_step=1e-5)
        final = model(res.x)
    if not res.success:
        raise FitError(f"compound {name!r}: the profile fit did not converge ({res.message})")
    jac = res.jac
    try:
        cov = np.linalg.inv(jac.T @ jac)
    except np.linalg.LinAlgError as exc:
        raise FitError(f"compound {name!r}: the profile fit has no usable covariance") from exc
    mu, temps, alpha, per = unpack(res.x)
    parts = iter(
        np.split(final, np.cumsum([p.counts.size for s in series for p in s.profiles])[:-1])
    )
    models = tuple(tuple(next(parts) for _ in s.profiles) for s in series)
    k = 1
    t_err = [0.0] * len(series)
    for i in free_t:
        t_err[i] = temps[i] * math.sqrt(max(cov[k, k], 0.0))
        k += 1
    a_err = 0.0
    if alpha_known is None:
        a_err = math.sqrt(max(cov[k, k], 0.0)) * ANGSTROM3_SI
    return ProfileFit(
        dipole=mu,
        dipole_err=mu * math.sqrt(max(cov[0, 0], 0.0)),
        rotational_k=tuple(float(t) for t in temps),
        rotational_err_k=tuple(t_err),
        alpha=alpha,
        alpha_err=a_err,
        deviance=float(2.0 * res.cost),
        ndof=int(data.size - res.x.size),
        evaluations=counter[0],
        models=models,
        backgrounds=tuple(float(shape[2]) for shape, _ in per),
    )
