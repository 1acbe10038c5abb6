"""Velocity distributions: the first plug point of the beam stage.

Every velocity average in polarbeam (the centroid's ⟨v⁻²⟩, the fringe phasor ⟨e^{iκ/v²}⟩, the
photon-recoil mixture) is a quadrature over the nodes and weights a distribution gives. A measured
distribution (a table, a time-of-flight trace) is a new implementation of
:class:`VelocityDistribution`; nothing else in the pipeline changes.

Implementations (docs/velocity.md):

* :class:`GaussianVelocity` — mean v̄, standard deviation σ, truncated at v > 0.02·v̄ (the cut
  keeps ⟨v⁻²⟩ finite: a Gaussian is non-zero at v = 0, where ⟨v⁻²⟩ of a Gaussian cut only at
  v > 0 diverges). Integrated by a composite Gauss–Legendre rule of fixed panels (graded towards
  the cut when it is inside ten standard deviations), so ⟨v⁻²⟩ does not depend on the requested
  node count and no rule overflows.
* :class:`FluxVelocity` — the supersonic flux form v³·exp(−(v − u)²/a²) (``supersonic``), and its
  u = 0 limit (``effusive``, σ/v̄ ≈ 0.363), moment-matched to a mean and a spread.
* :class:`TabulatedVelocity` — measured velocity classes (a table or a time-of-flight fit): each
  row one class (a histogram bin reaching halfway to its neighbours) with its population weight
  and optional relative fringe contrast.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Protocol, runtime_checkable

import numpy as np

from polarbeam._util.optional import lazy

optimize = lazy("scipy.optimize", "numerical routines")
special = lazy("scipy.special", "numerical routines")

__all__ = [
    "EFFUSIVE_SPREAD_RATIO",
    "GAUSSIAN_CUT",
    "GAUSSIAN_WARN_RATIO",
    "SHAPES",
    "FluxVelocity",
    "GaussianVelocity",
    "TabulatedVelocity",
    "VelocityDistribution",
    "density_curve",
    "distribution_from_moments",
    "distribution_summary",
]

#: The Gaussian is truncated at v > GAUSSIAN_CUT·v̄.
GAUSSIAN_CUT = 0.02
#: Above this σ/v̄ the truncated Gaussian's ⟨v⁻²⟩ depends on the cut: a warning is given.
GAUSSIAN_WARN_RATIO = 0.25
#: Names accepted by ``[beam] velocity_distribution``.
SHAPES = ("gaussian", "supersonic", "effusive")

_POINTS_MIN = 8  # Gauss–Legendre points per panel (the converged minimum)


@runtime_checkable
class VelocityDistribution(Protocol):
    """Nodes and normalised weights of the detected velocity distribution (v > 0, m/s)."""

    @property
    def key(self) -> tuple:
        """A hashable identity (caches of the phase tables are keyed by it)."""
        ...

    def nodes(self, n: int) -> tuple[np.ndarray, np.ndarray]:
        """(velocities, weights summing to 1); ``n`` is the requested quadrature order."""
        ...

    def contrast(self, n: int) -> np.ndarray | None:
        """Relative fringe contrast of each node (None: the same for every velocity)."""
        ...


@lru_cache(maxsize=64)
def _legendre(m: int) -> tuple[np.ndarray, np.ndarray]:
    x, w = np.polynomial.legendre.leggauss(m)  # stable (eigenvalue method) for any m used here
    return x, w


def _composite(edges: np.ndarray, n: int, log_density) -> tuple[np.ndarray, np.ndarray]:
    """Composite Gauss–Legendre nodes on the panels ``edges`` with at least ``n`` nodes in all,
    weights ∝ panel weight × density (computed from its log, so no tail overflows)."""
    panels = edges.size - 1
    m = max(_POINTS_MIN, math.ceil(n / panels))
    x, w = _legendre(m)
    a, b = edges[:-1, None], edges[1:, None]
    v = (0.5 * (b - a) * x[None, :] + 0.5 * (a + b)).ravel()
    ww = (0.5 * (b - a) * w[None, :]).ravel()
    logd = log_density(v)
    keep = logd > logd.max() - 80.0  # below e^-80 of the peak a node adds nothing
    v, ww, logd = v[keep], ww[keep], logd[keep]
    dens = ww * np.exp(logd - logd.max())
    return v, dens / dens.sum()


@dataclass(frozen=True)
class GaussianVelocity:
    """A Gaussian of mean ``mean`` and standard deviation ``spread`` (0: monochromatic),
    truncated at v > 0.02·mean and integrated by a composite Gauss–Legendre rule."""

    mean: float
    spread: float = 0.0

    def __post_init__(self):
        if not (math.isfinite(self.mean) and self.mean > 0):
            raise ValueError(f"expected a mean velocity > 0, found {self.mean!r}")
        if not (math.isfinite(self.spread) and self.spread >= 0):
            raise ValueError(f"expected a velocity spread >= 0, found {self.spread!r}")

    @property
    def key(self) -> tuple:
        return ("gaussian", float(self.mean), float(self.spread))

    @property
    def shape(self) -> str:
        return "gaussian"

    def edges(self) -> np.ndarray:
        """Panel edges (m/s): steps of 2σ over ±9σ, cut at 0.02·v̄ and graded towards it."""
        mu, s = float(self.mean), float(self.spread)
        cut = GAUSSIAN_CUT * mu
        lo = max(cut, mu - 9.0 * s)
        hi = mu + 9.0 * s
        z = np.arange(-9.0, 9.0 + 1e-9, 2.0)
        grid = mu + s * z
        grid = grid[(grid > lo) & (grid < hi)]
        edges = [lo, *grid, hi]
        if lo == cut:  # 1/v² near the cut: panels growing geometrically from it
            g = cut * 1.5 ** np.arange(1, 40)
            g = g[g < 0.75 * mu]
            edges = [lo, *g, *grid, hi]
        return np.unique(np.asarray(edges, dtype=float))

    def nodes(self, n: int = 48) -> tuple[np.ndarray, np.ndarray]:
        if self.spread <= 0:
            return np.array([float(self.mean)]), np.array([1.0])
        mu, s = float(self.mean), float(self.spread)
        return _composite(self.edges(), n, lambda v: -0.5 * ((v - mu) / s) ** 2)

    def contrast(self, n: int = 48) -> None:
        return None

    def scaled(self, factor: float) -> GaussianVelocity:
        """Every velocity times ``factor`` (a calibration scale)."""
        return GaussianVelocity(self.mean * factor, self.spread * factor)

    def widened(self, factor: float) -> GaussianVelocity:
        """The spread times ``factor``, the mean kept."""
        return GaussianVelocity(self.mean, self.spread * factor)


def _flux_integrals(xi: float, top: int = 6) -> np.ndarray:
    """I_n(ξ) = ∫_0^∞ t^n exp(−(t − ξ)²) dt for n = 0…top (closed form, ξ ≥ 0)."""
    e = math.exp(-xi * xi)
    j = np.zeros(top + 1)
    j[0] = 0.5 * math.sqrt(math.pi) * special.erfc(-xi)
    j[1] = 0.5 * e
    for k in range(2, top + 1):
        j[k] = 0.5 * (-xi) ** (k - 1) * e + 0.5 * (k - 1) * j[k - 2]
    out = np.zeros(top + 1)
    for n in range(top + 1):
        out[n] = sum(math.comb(n, k) * xi ** (n - k) * j[k] for k in range(n + 1))
    return out


def _flux_ratio(xi: float) -> float:
    i = _flux_integrals(xi)
    return math.sqrt(max(i[5] * i[3] / i[4] ** 2 - 1.0, 0.0))


#: σ/v̄ of the effusive flux form v³·exp(−v²/a²): sqrt(2/(9π/16) − 1) ≈ 0.3634.
EFFUSIVE_SPREAD_RATIO = _flux_ratio(0.0)


@lru_cache(maxsize=256)
def _xi_for_ratio(ratio: float) -> float:
    if ratio >= EFFUSIVE_SPREAD_RATIO:
        return 0.0
    hi = 1.0
    while _flux_ratio(hi) > ratio:
        hi *= 2.0
    return float(optimize.brentq(lambda x: _flux_ratio(x) - ratio, 0.0, hi, xtol=1e-13))


@dataclass(frozen=True)
class FluxVelocity:
    """The flux form f(v) ∝ v³·exp(−(v − u)²/a²) on v > 0, moment-matched to ``mean`` and
    ``spread`` (``effusive``: u = 0, so σ/v̄ = 0.363 and ``spread`` is not used).

    Raises ValueError when a supersonic spread is not below the effusive ratio 0.363·mean.
    """

    mean: float
    spread: float = 0.0
    effusive: bool = False

    def __post_init__(self):
        if not (math.isfinite(self.mean) and self.mean > 0):
            raise ValueError(f"expected a mean velocity > 0, found {self.mean!r}")
        if self.effusive:
            return
        if not (math.isfinite(self.spread) and 0 <= self.spread):
            raise ValueError(f"expected a velocity spread >= 0, found {self.spread!r}")
        if self.spread >= EFFUSIVE_SPREAD_RATIO * self.mean:
            raise ValueError(
                f"expected a supersonic spread below {EFFUSIVE_SPREAD_RATIO:.4f} × the mean "
                f"(the effusive limit), found {self.spread / self.mean:.4f} × the mean"
            )

    @property
    def shape(self) -> str:
        return "effusive" if self.effusive else "supersonic"

    @property
    def key(self) -> tuple:
        return (self.shape, float(self.mean), 0.0 if self.effusive else float(self.spread))

    def parameters(self) -> tuple[float, float]:
        """(u, a) in m/s of v³·exp(−(v − u)²/a²)."""
        xi = 0.0 if self.effusive else _xi_for_ratio(self.spread / self.mean)
        i = _flux_integrals(xi)
        a = self.mean / (i[4] / i[3])
        return xi * a, a

    def edges(self) -> np.ndarray:
        u = self.parameters()[0]
        mean = self.mean
        sd = EFFUSIVE_SPREAD_RATIO * mean if self.effusive else self.spread
        lo = max(0.0, min(u, mean) - 12.0 * sd)
        hi = max(u, mean) + 12.0 * sd
        return np.linspace(lo, hi, 11)

    def nodes(self, n: int = 48) -> tuple[np.ndarray, np.ndarray]:
        if not self.effusive and self.spread <= 0:
            return np.array([float(self.mean)]), np.array([1.0])
        u, a = self.parameters()
        edges = self.edges()

        def logd(v):
            return 3.0 * np.log(np.maximum(v, 1e-300)) - ((v - u) / a) ** 2

        return _composite(edges, n, logd)

    def contrast(self, n: int = 48) -> None:
        return None

    def scaled(self, factor: float) -> FluxVelocity:
        return FluxVelocity(self.mean * factor, self.spread * factor, self.effusive)

    def widened(self, factor: float) -> FluxVelocity:
        return self if self.effusive else FluxVelocity(self.mean, self.spread * factor)


@dataclass(frozen=True)
class TabulatedVelocity:
    """Measured velocity classes: ``velocities`` (m/s, > 0, at least two different), population
    ``weights`` (≥ 0, any normalisation, not all 0) and optional relative fringe ``contrast``
    per class (≥ 0; None: 1 for every class). ``scale`` multiplies every velocity (a common
    calibration factor, 1 as measured).

    Raises ValueError for a table that is not a distribution (the caller names the file).
    """

    velocities: tuple[float, ...]
    weights: tuple[float, ...]
    contrasts: tuple[float, ...] | None = None
    scale: float = 1.0

    def __post_init__(self):
        v = np.asarray(self.velocities, dtype=float)
        w = np.asarray(self.weights, dtype=float)
        if v.size != w.size:
            raise ValueError(f"expected one weight per velocity, found {w.size} for {v.size}")
        if not np.all(np.isfinite(v)) or np.any(v <= 0):
            bad = v[~(np.isfinite(v) & (v > 0))][0]
            raise ValueError(f"expected velocities > 0 m/s, found {bad:g}")
        if np.unique(v).size < 2:
            raise ValueError(
                f"expected at least two different velocities, found {np.unique(v).size}"
            )
        if not np.all(np.isfinite(w)) or np.any(w < 0):
            bad = w[~(np.isfinite(w) & (w >= 0))][0]
            raise ValueError(f"expected weights >= 0, found {bad:g}")
        if not w.sum() > 0:
            raise ValueError("expected at least one weight > 0, found all 0")
        if self.contrasts is not None:
            c = np.asarray(self.contrasts, dtype=float)
            if c.size != v.size:
                raise ValueError(f"expected one contrast per velocity, found {c.size}")
            if not np.all(np.isfinite(c)) or np.any(c < 0):
                bad = c[~(np.isfinite(c) & (c >= 0))][0]
                raise ValueError(f"expected contrasts >= 0, found {bad:g}")
            if not np.sum(c * w) > 0:
                raise ValueError("expected a contrast > 0 where the weight is > 0, found none")
        if not (math.isfinite(self.scale) and self.scale > 0):
            raise ValueError(f"expected a velocity scale > 0, found {self.scale!r}")

    @classmethod
    def from_arrays(cls, velocities, weights, contrasts=None, scale: float = 1.0):
        """A table from array-likes (sorted by velocity)."""
        v = np.asarray(velocities, dtype=float)
        order = np.argsort(v, kind="stable")
        w = np.asarray(weights, dtype=float)
        c = None if contrasts is None else tuple(np.asarray(contrasts, dtype=float)[order])
        return cls(tuple(v[order]), tuple(w[order]), c, float(scale))

    @property
    def shape(self) -> str:
        return "table"

    @property
    def key(self) -> tuple:
        return ("table", self.velocities, self.weights, self.contrasts, float(self.scale))

    def nodes(self, n: int = 48) -> tuple[np.ndarray, np.ndarray]:
        """The table's classes themselves (``n`` is not used: a measurement has its classes)."""
        v = np.asarray(self.velocities, dtype=float) * self.scale
        w = np.asarray(self.weights, dtype=float)
        return v, w / w.sum()

    def contrast(self, n: int = 48) -> np.ndarray | None:
        return None if self.contrasts is None else np.asarray(self.contrasts, dtype=float)

    def spans(self, n: int = 48) -> np.ndarray:
        """Width in 1/v² (s²/m²) of each class's bin: a row stands for the velocities halfway to
        its neighbours (the end rows as far out as on their inner side, at most half their own
        velocity below). The fringe phasor averages each class's phase over its bin."""
        v = np.asarray(self.velocities, dtype=float) * self.scale
        mid = 0.5 * (v[1:] + v[:-1])
        lo = np.concatenate([[max(v[0] - (mid[0] - v[0]), 0.5 * v[0])], mid])
        hi = np.concatenate([mid, [v[-1] + (v[-1] - mid[-1])]])
        return 1.0 / lo**2 - 1.0 / hi**2

    @property
    def mean(self) -> float:
        v, w = self.nodes()
        return float(np.sum(w * v))

    @property
    def spread(self) -> float:
        v, w = self.nodes()
        return float(np.sqrt(max(np.sum(w * v**2) - np.sum(w * v) ** 2, 0.0)))

    def scaled(self, factor: float) -> TabulatedVelocity:
        return TabulatedVelocity(self.velocities, self.weights, self.contrasts, self.scale * factor)

    def widened(self, factor: float) -> TabulatedVelocity:
        """Every class moved away from the weighted mean by ``factor`` (classes kept > 0)."""
        v = np.asarray(self.velocities, dtype=float)
        w = np.asarray(self.weights, dtype=float)
        m = float(np.sum(w * v) / w.sum())
        nv = np.maximum(m + factor * (v - m), 1e-6 * m)
        return TabulatedVelocity(tuple(nv), self.weights, self.contrasts, self.scale)


def distribution_from_moments(shape: str, mean: float, spread: float):
    """The named shape (``gaussian``, ``supersonic`` or ``effusive``) with this mean and spread.

    Raises ValueError for an unknown shape or moments the shape cannot have.
    """
    if shape == "gaussian":
        return GaussianVelocity(mean, spread)
    if shape == "supersonic":
        return FluxVelocity(mean, spread)
    if shape == "effusive":
        return FluxVelocity(mean, EFFUSIVE_SPREAD_RATIO * mean, effusive=True)
    raise ValueError(f"expected one of {', '.join(SHAPES)}, found {shape!r}")


def density_curve(dist, points: int = 200):
    """(velocities, probability density per m/s, relative contrast or None) to draw a
    distribution: a table's classes with weight / bin width, a named shape on a grid."""
    if isinstance(dist, TabulatedVelocity):
        v = np.asarray(dist.velocities, dtype=float) * dist.scale
        mid = 0.5 * (v[1:] + v[:-1])
        lo = np.concatenate([[v[0] - (mid[0] - v[0])], mid])
        hi = np.concatenate([mid, [v[-1] + (v[-1] - mid[-1])]])
        _, w = dist.nodes()
        return v, w / (hi - lo), dist.contrast()
    v_n, _ = dist.nodes(48)
    if v_n.size == 1:
        return v_n, np.array([np.inf]), None
    v = np.linspace(float(v_n.min()), float(v_n.max()), points)
    if isinstance(dist, FluxVelocity):
        u, a = dist.parameters()
        p = v**3 * np.exp(-(((v - u) / a) ** 2))
    else:
        p = np.exp(-0.5 * ((v - dist.mean) / dist.spread) ** 2)
    area = float(np.sum(0.5 * (p[1:] + p[:-1]) * np.diff(v)))  # trapezoid (numpy 1.26 too)
    return v, p / area, None


def distribution_summary(dist, n: int = 48) -> dict[str, float]:
    """Mean, rms spread and ⟨v⁻²⟩ of a distribution's nodes (for reports)."""
    v, w = dist.nodes(n)
    mean = float(np.sum(w * v))
    return {
        "mean_m_s": mean,
        "spread_m_s": float(np.sqrt(max(np.sum(w * v**2) - mean**2, 0.0))),
        "mean_inverse_square_s2_m2": float(np.sum(w / v**2)),
    }
