"""What-if for light-grating visibility curves: the predicted curve and a power ladder chosen by
Fisher information (D-optimal for Re α and Im α), as the voltage ladders are for deflection.

The information of one measured visibility about its expectation ν is the Rician Fisher
information I(ν) = E[(∂_ν ln p(V|ν, σ))²] (→ 1/σ² for ν ≫ σ, → 0 as ν → 0, where the modulus
loses the sign); the information about θ = (Re α, Im α) is Σ_i I(ν_i) ∇ν_i ∇ν_iᵀ. The ladder is
built greedily from a grid of powers (repeats allowed), each step adding the power that most
increases ln det F.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from polarbeam.beam.distributions import GaussianVelocity
from polarbeam.beam.talbot import TalbotLauInterferometer, absorption_cross_section
from polarbeam.constants import ANGSTROM3_SI
from polarbeam.contract.visibility import VisibilityPlanInputs

__all__ = [
    "VISIBILITY_PLAN_COLUMNS",
    "PowerLadderPlan",
    "VisibilityLadder",
    "design_power_ladder",
    "plan_visibility",
    "rician_fisher",
    "visibility_fisher",
]


def rician_fisher(nu, sigma, points: int = 801):
    """Fisher information about ν of one Rician visibility of width σ (per measurement)."""
    nu = np.atleast_1d(np.asarray(nu, dtype=float))
    out = np.empty(nu.shape)
    for i, n in enumerate(nu):
        v = np.linspace(0.0, n + 12.0 * sigma, points)[1:]
        z = v * n / sigma**2
        # p(V) = V/σ² exp(−(V − ν)²/(2σ²)) I0e(Vν/σ²), scaled to avoid overflow
        p = v / sigma**2 * np.exp(-((v - n) ** 2) / (2 * sigma**2)) * special.i0e(z)
        score = (v * special.i1e(z) / special.i0e(z) - n) / sigma**2
        out[i] = np.trapezoid(p * score**2, v) / np.trapezoid(p, v)
    return out


def visibility_fisher(
    tl: TalbotLauInterferometer,
    mass,
    velocity,
    powers,
    alpha_re_A3,
    alpha_im_A3,
    sigma_v,
    nodes: int = 48,
):
    """(Fisher matrix 2×2 for (Re α, Im α) in Å³, predicted visibilities) at ``powers``."""
    powers = np.asarray(powers, dtype=float)
    lam = tl.second.wavelength

    def model(re, im):
        sig = float(absorption_cross_section(im * ANGSTROM3_SI, lam))
        return tl.visibility(mass, velocity, powers, re * ANGSTROM3_SI, sig, nodes=nodes)

    nu = model(alpha_re_A3, alpha_im_A3)
    h_re = 1e-4 * max(alpha_re_A3, 1.0)
    h_im = 1e-4 * max(alpha_re_A3, 1.0)
    d_re = (model(alpha_re_A3 + h_re, alpha_im_A3) - model(alpha_re_A3 - h_re, alpha_im_A3)) / (
        2 * h_re
    )
    d_im = model(alpha_re_A3, alpha_im_A3 + h_im) - model(alpha_re_A3, abs(alpha_im_A3 - h_im))
    d_im = d_im / (h_im + min(h_im, alpha_im_A3))
    info = rician_fisher(nu, sigma_v)
    jac = np.stack([d_re, d_im], axis=1)
    return (jac * info[:, None]).T @ jac, nu


@dataclass(frozen=True)
class PowerLadderPlan:
    """A chosen power ladder, its predicted curves and the expected 1σ errors."""

    powers: np.ndarray
    predicted_quantum: np.ndarray
    predicted_classical: np.ndarray
    sigma_alpha_A3: float
    sigma_im_A3: float
    even_sigma_alpha_A3: float
    even_sigma_im_A3: float


def _errors(fisher) -> tuple[float, float]:
    try:
        cov = np.linalg.inv(fisher)
    except np.linalg.LinAlgError:
        return float("inf"), float("inf")
    d = np.diag(cov)
    return tuple(float(np.sqrt(x)) if x > 0 else float("inf") for x in d)  # type: ignore[return-value]


def design_power_ladder(
    tl: TalbotLauInterferometer,
    mass: float,
    velocity,
    alpha_re_A3: float,
    alpha_im_A3: float,
    sigma_v: float,
    power_max: float,
    n_powers: int,
    grid: int = 40,
    nodes: int = 48,
) -> PowerLadderPlan:
    """Greedy D-optimal ladder of ``n_powers`` powers in (0, power_max] (repeats allowed)."""
    cand = np.linspace(power_max / grid, power_max, grid)
    per_point = []
    fisher_all, _ = visibility_fisher(
        tl, mass, velocity, cand, alpha_re_A3, alpha_im_A3, sigma_v, nodes
    )
    # per-candidate rank-one information matrices
    for p in cand:
        f, _ = visibility_fisher(tl, mass, velocity, [p], alpha_re_A3, alpha_im_A3, sigma_v, nodes)
        per_point.append(f)
    ridge = 1e-9 * np.trace(fisher_all) * np.eye(2) / grid
    chosen: list[int] = []
    total = ridge.copy()
    for _ in range(n_powers):
        scores = [np.linalg.slogdet(total + f)[1] for f in per_point]
        k = int(np.argmax(scores))
        chosen.append(k)
        total = total + per_point[k]
    powers = np.sort(cand[chosen])
    f_opt, nu_q = visibility_fisher(
        tl, mass, velocity, powers, alpha_re_A3, alpha_im_A3, sigma_v, nodes
    )
    even = np.linspace(power_max / n_powers, power_max, n_powers)
    f_even, _ = visibility_fisher(
        tl, mass, velocity, even, alpha_re_A3, alpha_im_A3, sigma_v, nodes
    )
    sig = float(absorption_cross_section(alpha_im_A3 * ANGSTROM3_SI, tl.second.wavelength))
    nu_c = tl.visibility(
        mass, velocity, powers, alpha_re_A3 * ANGSTROM3_SI, sig, model="classical", nodes=nodes
    )
    sa, si = _errors(f_opt)
    ea, ei = _errors(f_even)
    return PowerLadderPlan(powers, nu_q, nu_c, sa, si, ea, ei)


VISIBILITY_PLAN_COLUMNS = (
    "compound",
    "laser_power_W",
    "visibility_quantum",
    "visibility_classical",
    "alpha_opt_err_A3",
    "alpha_opt_err_even_ladder_A3",
)


@dataclass(frozen=True)
class VisibilityLadder:
    """The planned power ladder of one compound (or why there is none)."""

    compound: str
    status: str
    message: str = ""
    plan: PowerLadderPlan | None = None

    def rows(self) -> list[dict]:
        """Rows of ``visibility_plan.csv``: one per planned power."""
        if self.plan is None:
            return []
        p = self.plan
        return [
            {
                "compound": self.compound,
                "laser_power_W": float(w),
                "visibility_quantum": float(q),
                "visibility_classical": float(c),
                "alpha_opt_err_A3": p.sigma_alpha_A3,
                "alpha_opt_err_even_ladder_A3": p.even_sigma_alpha_A3,
            }
            for w, q, c in zip(p.powers, p.predicted_quantum, p.predicted_classical, strict=True)
        ]

    def summary(self) -> dict:
        out = {"compound": self.compound, "status": self.status, "message": self.message}
        if self.plan is not None:
            p = self.plan
            out.update(
                {
                    "laser_power_W": p.powers.tolist(),
                    "visibility_quantum": p.predicted_quantum.tolist(),
                    "visibility_classical": p.predicted_classical.tolist(),
                    "alpha_opt_err_A3": p.sigma_alpha_A3,
                    "alpha_im_err_A3": p.sigma_im_A3,
                    "even_ladder_alpha_opt_err_A3": p.even_sigma_alpha_A3,
                    "even_ladder_alpha_im_err_A3": p.even_sigma_im_A3,
                }
            )
        return out


def plan_visibility(inputs: VisibilityPlanInputs, plan) -> tuple[VisibilityLadder, ...]:
    """Power ladders for every compound of a planning campaign with ``[gratings]``.

    The velocity distribution is the plan's first (``velocity``, ``velocity_spread``).
    """
    tl = inputs.gratings.build()
    dist = GaussianVelocity(plan.velocity[0].value, plan.velocity_spread[0])
    out = []
    for c in inputs.compounds:
        if c.problem is not None:
            out.append(VisibilityLadder(c.name, "failed", c.problem))
            continue
        ladder = design_power_ladder(
            tl,
            c.mass,
            dist,
            c.alpha_re_A3,
            c.alpha_im_A3,
            inputs.noise,
            inputs.power_max,
            inputs.n_powers,
        )
        out.append(VisibilityLadder(c.name, "ok", "", ladder))
    return tuple(out)
