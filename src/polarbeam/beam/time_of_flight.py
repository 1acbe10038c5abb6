"""Time of flight: a measured arrival-time trace → the detected velocity distribution.

Set-up (SI throughout). A rectangular gate opens at t = 0 and stays open for ``gate`` seconds; a
molecule of velocity v that passes it at τ ∈ [0, gate] reaches the detector at

    t = τ + L/v + t₀,

with L the flight length from the gate to the detector and t₀ a constant offset (electronics,
the gate's opening edge). The beam is steady while the gate is open, so τ is uniform on the gate.
The trace is recorded with the same detector as the fringes, so the velocities it samples are the
*detected* distribution D(v) — the weight every velocity average of polarbeam needs.

Forward model of one trace with bins [tⱼ, tⱼ + Δ) (equal widths):

    μⱼ = N · Pⱼ + B,    Pⱼ = ∫ D(v) · |[tⱼ, tⱼ+Δ) ∩ [t₀ + L/v, t₀ + L/v + gate)| / gate dv,

the gate convolution integrated over each bin, exactly: with T = L/v the flight time,
F₁(T) = P(flight time < T) and F₂(x) = ∫₀ˣ F₁ dT = x F₁(x) − E[T; T < x],

    Pⱼ = [F₂(Aⱼ + Δ) − F₂(Aⱼ) − F₂(Aⱼ + Δ − gate) + F₂(Aⱼ − gate)] / gate,   Aⱼ = tⱼ − t₀.

N is the number of molecules through the gate and B a flat background per bin.

Shape assumed for D(v): the flux form of a supersonic beam, D(v) ∝ v³ exp(−(v − u)²/a²)
(u = 0: an effusive beam; u may go below 0, down to −1.5·a, so that the effusive shape lies
inside the family rather than on its edge). Its tail integrals are closed forms (erfc and
Gaussians), so F₁, F₂, ⟨v⁻²⟩ and the tabulated nodes are exact. The fit maximises the Poisson
likelihood of the counts over (u, a, N, B ≥ 0); the covariance is the inverse Fisher
information at the optimum (a parameter at its bound is held there). The flight length and the
time offset are not fitted: the fit fixes the flight-time distribution, and a true length L or
offset t₀ + δ turn it into velocities v = L/(T − δ), so their errors are propagated exactly
through ⟨v⁻²⟩ = ⟨(T − δ)²⟩/L².
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import uncertainties

from polarbeam._util.optional import lazy

special = lazy("scipy.special", "numerical routines")

__all__ = [
    "FluxShape",
    "TimeOfFlightFit",
    "TraceSetup",
    "bin_probabilities",
    "expected_counts",
    "fit_trace",
    "flight_time_estimate",
    "mean_inverse_square_uncertain",
    "tabulate",
]

_SQRT_PI = math.sqrt(math.pi)
#: u may go down to −U_FLOOR·a: an effusive beam (u = 0) is then inside the fitted family, not on
#: its edge, so the likelihood and its covariance stay regular there (a negative u is a shape
#: parameter, not a stream velocity).
U_FLOOR = 1.5


def _tail_moments(x: np.ndarray, kmax: int) -> list[np.ndarray]:
    """T_k(X) = ∫_X^∞ x^k e^{−x²} dx for k = 0…kmax (all ≥ 0 for k ≤ 3; exact recurrences)."""
    x = np.clip(np.asarray(x, dtype=float), -40.0, 40.0)  # beyond: exact to e^{-1600}
    g = np.exp(-(x**2))
    out = [0.5 * _SQRT_PI * special.erfc(x), 0.5 * g]
    for k in range(2, kmax + 1):
        out.append(0.5 * x ** (k - 1) * g + 0.5 * (k - 1) * out[k - 2])
    return out


@dataclass(frozen=True)
class FluxShape:
    """D(v) ∝ v^power · exp(−(v − u)²/a²) on v > 0 (power 3: the flux form; u = 0: effusive)."""

    u: float
    a: float
    power: int = 3

    def __post_init__(self):
        ok = math.isfinite(self.u) and math.isfinite(self.a) and self.a > 0
        if not (ok and self.u >= -2 * U_FLOOR * self.a):
            raise ValueError(
                f"flux shape expects a > 0 and u ≥ −{2 * U_FLOOR:g}·a, found u={self.u}, a={self.a}"
            )

    def _tail(self, m: int, v) -> np.ndarray:
        """∫_V^∞ v^m e^{−(v−u)²/a²} dv in units of a^{m+1} (V ≥ 0), for m ≥ 0."""
        v = np.maximum(np.asarray(v, dtype=float), 0.0)
        s = self.u / self.a
        x = v / self.a - s
        t = _tail_moments(x, m)
        return sum(math.comb(m, j) * s ** (m - j) * t[j] for j in range(m + 1))

    def _norm(self) -> float:
        return float(self._tail(self.power, 0.0))

    def survival(self, v) -> np.ndarray:
        """P(velocity > v)."""
        return self._tail(self.power, v) / self._norm()

    def partial_moment(self, k: int, v) -> np.ndarray:
        """E[v^k; velocity > v] for k ≥ −power (m/s)^k."""
        m = self.power + k
        return self._tail(m, v) * self.a**k / self._norm()

    def moment(self, k: int) -> float:
        """⟨v^k⟩ over the whole distribution."""
        return float(self.partial_moment(k, 0.0))

    def density(self, v) -> np.ndarray:
        """D(v), normalised to 1 (1/(m/s))."""
        v = np.asarray(v, dtype=float)
        x = v / self.a
        d = np.where(v > 0, np.abs(x) ** self.power * np.exp(-((x - self.u / self.a) ** 2)), 0.0)
        return d / (self.a * self._norm())

    def support(self, width: float = 8.0) -> tuple[float, float]:
        """A velocity interval holding all but ~e^{−width²} of the distribution."""
        lo = max(0.0, self.u - width * self.a)
        hi = self.u + width * self.a + (self.power * self.a if self.u < self.a else 0.0)
        return lo, hi


@dataclass(frozen=True)
class TraceSetup:
    """The instrument of one trace: flight length (m), gate open time (s), time offset (s)."""

    flight_length: float
    gate: float
    time_offset: float = 0.0

    def __post_init__(self):
        if not (self.flight_length > 0 and self.gate > 0):
            raise ValueError(
                f"time of flight expects flight_length > 0 and gate > 0, found "
                f"{self.flight_length}, {self.gate}"
            )


def _cdf_flight(shape: FluxShape, length: float, x: np.ndarray):
    """(F₁(x), F₂(x)) of the flight time T = L/v: P(T < x) and ∫₀ˣ P(T < s) ds."""
    x = np.asarray(x, dtype=float)
    pos = x > 0
    xs = np.where(pos, x, 1.0)
    vmin = length / xs
    f1 = np.where(pos, shape.survival(vmin), 0.0)
    # E[T; T < x] = L · E[v⁻¹; v > L/x]
    et = length * shape.partial_moment(-1, vmin)
    f2 = np.where(pos, xs * f1 - et, 0.0)
    return f1, np.maximum(f2, 0.0)


def bin_probabilities(
    shape: FluxShape, setup: TraceSetup, starts: np.ndarray, width: float
) -> np.ndarray:
    """Pⱼ: probability that a molecule through the gate is counted in bin [tⱼ, tⱼ + width).

    Exact (closed-form) gate convolution integrated over each bin; see the module text.
    """
    a = np.asarray(starts, dtype=float) - setup.time_offset
    g = setup.gate
    pts = np.stack([a + width, a, a + width - g, a - g])
    _, f2 = _cdf_flight(shape, setup.flight_length, pts)
    p = (f2[0] - f2[1] - f2[2] + f2[3]) / g
    return np.maximum(p, 0.0)


def expected_counts(
    shape: FluxShape,
    setup: TraceSetup,
    starts: np.ndarray,
    width: float,
    total: float,
    background: float = 0.0,
) -> np.ndarray:
    """μⱼ = N·Pⱼ + B (counts per bin)."""
    return total * bin_probabilities(shape, setup, starts, width) + background


def flight_time_estimate(starts, counts, width: float, gate: float, offset: float) -> float:
    """Mean flight time from the trace's centroid: ⟨t⟩ + Δ/2 − gate/2 − t₀ (s; NaN: no counts)."""
    counts = np.asarray(counts, dtype=float)
    total = counts.sum()
    if not total > 0:
        return math.nan
    centre = float(np.sum(counts * (np.asarray(starts, dtype=float) + 0.5 * width)) / total)
    return centre - 0.5 * gate - offset


@dataclass(frozen=True)
class TimeOfFlightFit:
    """Poisson maximum-likelihood fit of one trace (SI).

    ``parameters`` are (u, a, N, B); ``covariance`` their 4×4 covariance (rows of a parameter
    held at its bound are zero). ``deviance`` is the Poisson deviance 2Σ[n ln(n/μ) − (n − μ)],
    ≈ χ² with ``ndof`` degrees of freedom.
    """

    shape: FluxShape
    setup: TraceSetup
    starts: np.ndarray
    width: float
    counts: np.ndarray
    parameters: np.ndarray
    covariance: np.ndarray
    deviance: float
    ndof: int
    held: tuple[str, ...] = ()
    model: np.ndarray = field(default_factory=lambda: np.zeros(0))

    @property
    def total(self) -> float:
        return float(self.parameters[2])

    @property
    def background(self) -> float:
        return float(self.parameters[3])


_NAMES = ("u", "a", "N", "B")


def _nll(mu: np.ndarray, n: np.ndarray) -> float:
    mu = np.maximum(mu, 1e-300)
    return float(np.sum(mu - n * np.log(mu)))


def _start_points(setup: TraceSetup, starts, counts, width):
    """Guesses of (u, a, N, B) from the trace's moments (supersonic- and effusive-like)."""
    n = np.asarray(counts, dtype=float)
    bg = float(np.percentile(n, 10)) if n.size >= 10 else 0.0
    sig = np.clip(n - bg, 0.0, None)
    if sig.sum() <= 0:
        sig = n
    mid = np.asarray(starts) + 0.5 * width
    tbar = float(np.sum(sig * mid) / sig.sum())
    var = float(np.sum(sig * (mid - tbar) ** 2) / sig.sum())
    tflight = max(tbar - 0.5 * setup.gate - setup.time_offset, 0.5 * width, 1e-9)
    var_t = max(var - setup.gate**2 / 12 - width**2 / 12, (0.02 * tflight) ** 2)
    v0 = setup.flight_length / tflight
    sv = v0 * math.sqrt(var_t) / tflight
    total = max(float(sig.sum()), 1.0)
    guesses = [(v0, max(math.sqrt(2.0) * sv, 0.02 * v0), total, bg)]
    guesses.append((0.0, v0 / 1.33, total, bg))  # effusive-like: ⟨v⟩ ≈ 1.33 a for power 3
    guesses.append((0.6 * v0, 0.6 * v0, total, bg))
    return guesses, v0


def _jacobian(theta, setup, starts, width, power, held):
    """∂μ/∂θ (bins × 4): closed form for N and B, central differences for u and a."""
    u, a, total, _ = theta
    p0 = bin_probabilities(FluxShape(u, a, power), setup, starts, width)
    cols = []
    for k, val in enumerate((u, a)):
        h = 1e-5 * max(abs(u), a)
        lo = val - h
        hi = val + h
        args_lo = (lo, a) if k == 0 else (u, lo)
        args_hi = (hi, a) if k == 0 else (u, hi)
        d = (
            bin_probabilities(FluxShape(*args_hi, power), setup, starts, width)
            - bin_probabilities(FluxShape(*args_lo, power), setup, starts, width)
        ) / (hi - lo)
        cols.append(total * d)
    cols.append(p0)
    cols.append(np.ones_like(p0))
    jac = np.column_stack(cols)
    for name in held:
        jac[:, _NAMES.index(name)] = 0.0
    return jac


def _scoring(theta, n, model, jacobian, bounds_low, held, iterations=300, bounds_high=None):
    """Damped Fisher scoring (Levenberg–Marquardt on the Poisson likelihood) within bounds."""
    theta = np.array(theta, dtype=float)
    free = np.array([name not in held for name in _NAMES])
    mu = model(theta)
    cur = _nll(mu, n)
    lam = 1e-3
    for _ in range(iterations):
        full = jacobian(theta)
        gfull = full.T @ (n / np.maximum(mu, 1e-300) - 1.0)
        # a parameter at its bound with the likelihood rising beyond it stays there this step
        free = np.array([name not in held for name in _NAMES]) & ~(
            (theta <= bounds_low) & (gfull <= 0)
        )
        jac = full[:, free]
        grad = gfull[free]
        hess = jac.T @ (jac / np.maximum(mu, 1e-300)[:, None])
        diag = np.diag(hess).copy()
        diag[diag <= 0] = 1.0
        improved = False
        for _ in range(30):
            try:
                step = np.linalg.solve(hess + lam * np.diag(diag), grad)
            except np.linalg.LinAlgError:
                lam *= 10
                continue
            trial = theta.copy()
            trial[free] = np.maximum(theta[free] + step, bounds_low[free])
            if bounds_high is not None:
                trial[free] = np.minimum(trial[free], bounds_high[free])
            mu_t = model(trial)
            val = _nll(mu_t, n)
            if np.isfinite(val) and val <= cur:
                improved = True
                break
            lam *= 4
        if not improved:
            break
        gain = cur - val
        theta, mu, cur = trial, mu_t, val
        lam = max(lam / 5, 1e-9)
        if gain < 1e-8:  # log-likelihood units: 0.5 is one standard deviation
            break
    return theta, cur


def fit_trace(
    setup: TraceSetup, starts, counts, width: float, *, power: int = 3, background: bool = True
) -> TimeOfFlightFit:
    """Fit D(v) ∝ v^power·exp(−(v−u)²/a²) (and a flat background) to one trace.

    Raises :class:`ValueError` when the likelihood has no usable optimum (a caller names the
    trace in its message).
    """
    starts = np.asarray(starts, dtype=float)
    n = np.asarray(counts, dtype=float)
    guesses, v0 = _start_points(setup, starts, n, width)
    held0 = () if background else ("B",)
    low = np.array([-U_FLOOR * v0 / 1.33, 1e-3 * v0, 1e-9 * max(n.sum(), 1.0), 0.0])
    high = np.array([30.0 * v0, 30.0 * v0, 1e6 * max(n.sum(), 1.0), 1e3 * max(n.max(), 1.0)])

    def model(th):
        if th[0] < -2 * U_FLOOR * th[1]:
            return np.full(n.shape, np.nan)  # outside the family: rejected by the scoring
        return expected_counts(FluxShape(th[0], th[1], power), setup, starts, width, th[2], th[3])

    best = None
    for g in guesses:
        g = (g[0], g[1], g[2], g[3] if background else 0.0)
        theta, val = _scoring(
            g,
            n,
            model,
            lambda th: _jacobian(th, setup, starts, width, power, held0),
            low,
            held0,
            bounds_high=high,
        )
        if best is None or val < best[1]:
            best = (theta, val)
    theta = best[0]
    held = list(held0)
    if theta[0] <= low[0] * (1 - 1e-9) or theta[0] < -U_FLOOR * theta[1]:
        theta[0] = max(theta[0], -U_FLOOR * theta[1])
        held.append("u")
    if "B" not in held and theta[3] <= 1e-9 * max(float(n.mean()), 1.0):
        theta[3] = 0.0
        held.append("B")
    if len(held) > len(held0):  # re-polish with the parameter held at its bound
        theta, _ = _scoring(
            theta,
            n,
            model,
            lambda th: _jacobian(th, setup, starts, width, power, tuple(held)),
            low,
            tuple(held),
            bounds_high=high,
        )
    shape = FluxShape(theta[0], theta[1], power)
    mu = model(theta)
    jac = _jacobian(theta, setup, starts, width, power, tuple(held))
    fisher = jac.T @ (jac / np.maximum(mu, 1e-300)[:, None])
    free = [k for k, name in enumerate(_NAMES) if name not in held]
    cov = np.zeros((4, 4))
    try:
        sub = np.linalg.inv(fisher[np.ix_(free, free)])
    except np.linalg.LinAlgError:
        raise ValueError("the Fisher information of the fit is singular") from None
    if not (np.all(np.isfinite(sub)) and np.all(np.diag(sub) > 0)):
        raise ValueError("the fit gave no usable covariance")
    cov[np.ix_(free, free)] = sub
    with np.errstate(divide="ignore", invalid="ignore"):
        term = np.where(n > 0, n * np.log(n / mu), 0.0)
    deviance = float(2.0 * np.sum(term - (n - mu)))
    return TimeOfFlightFit(
        shape=shape,
        setup=setup,
        starts=starts,
        width=float(width),
        counts=n,
        parameters=np.array(theta, dtype=float),
        covariance=cov,
        deviance=deviance,
        ndof=int(n.size - len(free)),
        held=tuple(held),
        model=mu,
    )


def mean_inverse_square_uncertain(fit: TimeOfFlightFit, length_u, offset_u, tag: str):
    """⟨v⁻²⟩ (s²/m²) as an :mod:`uncertainties` number: fit covariance (tagged ``tag``), the
    flight length and the time offset (the tagged numbers given, shared by every series).

    The fit fixes the flight-time distribution at the nominal L₀ and t₀; a true length L and
    offset t₀ + δ give ⟨v⁻²⟩ = (L₀²⟨v_f⁻²⟩ − 2δL₀⟨v_f⁻¹⟩ + δ²)/L², with v_f the fitted
    velocities. ``length_u``/``offset_u`` may be plain floats (no error).
    """
    l0, t0 = fit.setup.flight_length, fit.setup.time_offset
    power = fit.shape.power
    u, a = fit.parameters[:2]

    def m(k, uu, aa):
        return FluxShape(uu, aa, power).moment(k)

    m2, m1 = m(-2, u, a), m(-1, u, a)
    # the fitted moments as correlated numbers (linear in the (u, a) covariance)
    cov = fit.covariance[:2, :2]
    grads = []
    for k in (-2, -1):
        g = []
        for j in range(2):
            h = 1e-6 * max(abs(u), a)
            p = [u, a]
            q = [u, a]
            p[j] += h
            q[j] -= h
            g.append((m(k, *p) - m(k, *q)) / (p[j] - q[j]))
        grads.append(g)
    grads = np.array(grads)
    mcov = grads @ cov @ grads.T
    if np.all(np.diag(mcov) > 0):
        m2_u, m1_u = uncertainties.correlated_values([m2, m1], mcov, tags=[tag, tag])
    else:
        m2_u, m1_u = m2, m1
    delta = offset_u - t0
    return (l0**2 * m2_u - 2.0 * delta * l0 * m1_u + delta**2) / length_u**2


def tabulate(shape: FluxShape, n: int = 120) -> tuple[np.ndarray, np.ndarray]:
    """(velocities, weights) of ``n`` equal velocity cells over the support of ``shape``.

    Each weight is the exact probability of its cell; each node is the velocity whose v⁻² is the
    cell's mean v⁻², so Σ wᵢ vᵢ⁻² is ⟨v⁻²⟩ exactly and the table reads the same as discrete
    classes or as density samples on an even grid (normalised weights sum to 1).
    """
    lo, hi = shape.support(6.0)  # beyond: below e^{-36} of the peak
    edges = np.linspace(lo, hi, n + 1)
    surv = shape.survival(edges)
    w = surv[:-1] - surv[1:]
    pm = shape.partial_moment(-2, edges)
    inv2 = pm[:-1] - pm[1:]
    keep = w > 1e-14 * w.max()
    mid = 0.5 * (edges[:-1] + edges[1:])
    exact = (w > 1e-9 * w.max()) & (inv2 > 0)  # far-tail cells: the midpoint (no rounding)
    v = np.where(exact, np.sqrt(np.where(exact, w, 1.0) / np.where(exact, inv2, 1.0)), mid)
    v, w = v[keep], w[keep]
    return v, w / w.sum()
