"""Propagating machining and alignment tolerances into the field factor.

:func:`propagate_tolerances` is first-order (central finite differences, optional correlations);
:func:`monte_carlo_tolerances` samples the same Gaussian tolerances as a cross-check.  Both take
any ``builder(**values)`` returning a number or the dict of
:func:`~polarbeam.instrument.fields.field_at_beam`.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np

from polarbeam.errors import InputError
from polarbeam.instrument.fields.checks import finite

__all__ = [
    "MonteCarloResult",
    "ToleranceBudget",
    "monte_carlo_tolerances",
    "propagate_tolerances",
]


def _value_of(result) -> float:
    if isinstance(result, Mapping):
        return float(result["field_factor_per_m3"])
    return float(result)


def _check_params(params: Mapping) -> dict[str, tuple[float, float]]:
    if not params:
        raise InputError("tolerances: expected at least one parameter, found none")
    out = {}
    for name, vs in params.items():
        try:
            v, s = vs
        except (TypeError, ValueError):
            raise InputError(
                f"tolerances: parameter {name!r}: expected (value, sigma), found {vs!r}"
            ) from None
        v = finite(v, f"tolerances: parameter {name!r} value")
        s = finite(s, f"tolerances: parameter {name!r} sigma")
        if s < 0:
            raise InputError(f"tolerances: parameter {name!r}: expected sigma >= 0, found {s!r}")
        out[str(name)] = (v, s)
    return out


def _correlation_matrix(names, correlations):
    n = len(names)
    C = np.eye(n)
    for (a, b), rho in (correlations or {}).items():
        if a not in names or b not in names:
            raise InputError(f"tolerances: correlation ({a!r}, {b!r}) names an unknown parameter")
        rho = finite(rho, f"tolerances: correlation ({a!r}, {b!r})")
        if not -1 <= rho <= 1:
            raise InputError(f"tolerances: correlation ({a!r}, {b!r}): expected in [-1, 1]")
        i, j = names.index(a), names.index(b)
        C[i, j] = C[j, i] = rho
    return C


@dataclass(frozen=True)
class ToleranceBudget:
    """Linear propagation of parameter tolerances into one output (the field factor)."""

    nominal: float
    sigma: float
    sensitivities: dict[str, float]  # d output / d parameter
    contributions: dict[str, float]  # |sensitivity| * sigma_parameter
    budget: dict[str, float]  # share of the variance (uncorrelated part), sums to 1 without corr.
    steps: dict[str, float]

    @property
    def relative_sigma(self) -> float:
        return self.sigma / abs(self.nominal) if self.nominal else math.inf

    def summary(self) -> dict:
        return {
            "nominal": self.nominal,
            "sigma": self.sigma,
            "relative_sigma": self.relative_sigma,
            "sensitivities": dict(self.sensitivities),
            "contributions": dict(self.contributions),
            "budget": dict(self.budget),
        }


def propagate_tolerances(
    builder: Callable[..., float | Mapping],
    params: Mapping[str, tuple[float, float]],
    *,
    step: float = 1.0,
    correlations: Mapping[tuple[str, str], float] | None = None,
) -> ToleranceBudget:
    """First-order propagation of tolerances by central finite differences.

    Parameters
    ----------
    builder
        ``builder(**values)`` returns the output (a float, or a dict with
        ``field_factor_per_m3`` as from :func:`field_at_beam`).
    params
        ``{name: (value, sigma)}`` (SI).
    step
        Difference step in units of each sigma (``value +- step*sigma``); 1 is the usual
        one-at-a-time tolerance study.  With a numerical solver the step must be large compared
        with the grid-induced noise of the output.
    correlations
        Optional ``{(name_a, name_b): rho}``.

    Returns
    -------
    ToleranceBudget
        ``sigma**2 = J C J^T`` with ``J_i = (df/dp_i) sigma_i`` and correlation matrix ``C``.
    """
    p = _check_params(params)
    names = list(p)
    base = {k: v for k, (v, _s) in p.items()}
    f0 = _value_of(builder(**base))
    sens, steps = {}, {}
    for k, (v, s) in p.items():
        if s == 0:
            sens[k] = 0.0
            steps[k] = 0.0
            continue
        dk = step * s
        up = _value_of(builder(**{**base, k: v + dk}))
        dn = _value_of(builder(**{**base, k: v - dk}))
        sens[k] = (up - dn) / (2 * dk)
        steps[k] = dk
    J = np.array([sens[k] * p[k][1] for k in names])
    C = _correlation_matrix(names, correlations)
    var = float(J @ C @ J)
    sigma = math.sqrt(max(var, 0.0))
    contrib = {k: float(abs(J[i])) for i, k in enumerate(names)}
    tot = float(np.sum(J**2))
    budget = {k: (float(J[i] ** 2 / tot) if tot > 0 else 0.0) for i, k in enumerate(names)}
    return ToleranceBudget(f0, sigma, sens, contrib, budget, steps)


@dataclass(frozen=True, eq=False)
class MonteCarloResult:
    """Monte Carlo propagation: mean, standard deviation and the samples."""

    mean: float
    sigma: float
    samples: np.ndarray

    @property
    def sigma_of_sigma(self) -> float:
        """Approximate standard error of ``sigma`` (Gaussian): ``sigma / sqrt(2 (n - 1))``."""
        return self.sigma / math.sqrt(2 * (self.samples.size - 1))


def monte_carlo_tolerances(
    builder: Callable[..., float | Mapping],
    params: Mapping[str, tuple[float, float]],
    *,
    n: int = 1000,
    seed: int | None = 0,
    correlations: Mapping[tuple[str, str], float] | None = None,
) -> MonteCarloResult:
    """Propagate Gaussian tolerances by sampling ``builder`` ``n`` times (cross-check)."""
    p = _check_params(params)
    names = list(p)
    n = int(n)
    if n < 2:
        raise InputError(f"monte carlo: expected n >= 2 samples, found {n}")
    C = _correlation_matrix(names, correlations)
    sig = np.array([p[k][1] for k in names])
    mu = np.array([p[k][0] for k in names])
    rng = np.random.default_rng(seed)
    draws = rng.multivariate_normal(mu, C * np.outer(sig, sig), size=n, method="eigh")
    out = np.array([_value_of(builder(**dict(zip(names, row, strict=True)))) for row in draws])
    return MonteCarloResult(float(out.mean()), float(out.std(ddof=1)), out)
