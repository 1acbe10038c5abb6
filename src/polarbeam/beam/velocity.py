"""Velocity averaging over the detected velocity distribution.

The distribution is any :class:`~polarbeam.beam.distributions.VelocityDistribution`: a Gaussian,
a supersonic or effusive flux form, or a measured table (classes weighted by population ×
relative fringe contrast in the Talbot–Lau phasor).

For a spatial layout the shift of one velocity class is Δx(v) = κ/v² with κ ∝ α_eff V².

* ``beam-profile``: the centroid is ⟨Δx⟩ = κ⟨v⁻²⟩ — linear in α_eff, but not κ/v̄².
* ``talbot-lau``: each class adds its own fringe, so the detected fringe is the phasor average
  Z = ⟨exp(iκ'/v²)⟩ (κ' = 2πκ/d); its argument is the measured phase, its modulus the visibility
  reduction. A table's class is a bin of width Δu in u = 1/v²: its phasor is averaged over it,
  e^{iκ'u}·sinc(κ'Δu/2). The phase is tracked continuously from κ' = 0 (no 2π wrapping), as an
  experiment stepping the voltage up follows it.
"""

from __future__ import annotations

import numpy as np

from polarbeam.beam.distributions import VelocityDistribution

__all__ = [
    "averaged_phasor_phase",
    "class_spans",
    "fringe_nodes",
    "mean_inverse_square",
]


def fringe_nodes(dist: VelocityDistribution, n: int = 48) -> tuple[np.ndarray, np.ndarray]:
    """Quadrature nodes and weights of ``dist``, the weights times the nodes' relative contrast."""
    v, w = dist.nodes(n)
    c = dist.contrast(n)
    return (v, w) if c is None else (v, w * np.asarray(c, dtype=float))


def mean_inverse_square(dist: VelocityDistribution, n: int = 48) -> float:
    """⟨v⁻²⟩ of the distribution (s²/m²)."""
    v, w = dist.nodes(n)
    return float(np.sum(w / v**2))


# The unwrapped phase of one distribution is tracked once along κ and only used to count 2π
# turns: the phase returned is arg Z(κ) evaluated directly plus 2π times that count, so it does not
# depend on which κ were asked for before (a fit's iterations, or other compounds in the same
# worker). The tracking steps adapt to the phasor itself: |dZ/dκ| ≤ Σ|wᵢ|uᵢ, so a step
# h = 0.3·|Z|/Σ|wᵢ|uᵢ turns arg Z by less than 0.43 rad (|Z| falls by at most 30 % within it),
# however fast a sparsely populated slow class spins.
_STEP_RAD = 0.3
_MAX_TABLE = 200_000
_BATCH = 32
_turn_tables: dict[tuple, tuple[np.ndarray, np.ndarray]] = {}


def _phasor(kappa: np.ndarray, u: np.ndarray, w: np.ndarray, du=None) -> np.ndarray:
    """Σ wᵢ e^{iκuᵢ}, each class averaged over a bin of width duᵢ in u = 1/v² when given."""
    arg = np.outer(kappa, u)
    terms = w[None, :] * np.exp(1j * arg)
    if du is not None:
        terms = terms * np.sinc(np.outer(kappa, du) / (2 * np.pi))
    return terms.sum(axis=1)


def class_spans(dist: VelocityDistribution, n: int = 48) -> np.ndarray | None:
    """Bin widths in 1/v² of a distribution's classes (tables), None for point nodes."""
    spans = getattr(dist, "spans", None)
    return None if spans is None else np.asarray(spans(n), dtype=float)


def _track(u, w, du, ks: list, zs: list, ps: list, kmax: float) -> bool:
    """Extend the tracked points (κ, Z, unwrapped phase) to kmax; False when it needs more than
    ``_MAX_TABLE`` points (|Z| too close to 0 somewhere)."""
    rate = float(np.sum(np.abs(w) * (u if du is None else u + du)))
    while ks[-1] < kmax:
        if len(ks) > _MAX_TABLE:
            return False
        z0 = zs[-1]
        h = _STEP_RAD * abs(z0) / rate
        if not h > 0:
            return False
        k_new = ks[-1] + h * np.arange(1, _BATCH + 1)
        z_new = _phasor(k_new, u, w, du)
        mods = np.abs(np.concatenate([[z0], z_new]))
        ok = h <= _STEP_RAD * mods[:-1] / rate * (1 + 1e-12)  # the step bound at every start
        n_ok = int(np.argmin(ok)) if not ok.all() else ok.size
        n_ok = max(n_ok, 1)  # the first step is valid by construction
        prev = np.concatenate([[z0], z_new[: n_ok - 1]])
        dph = np.angle(z_new[:n_ok] / prev)
        ph = ps[-1] + np.cumsum(dph)
        ks.extend(k_new[:n_ok].tolist())
        zs.extend(z_new[:n_ok].tolist())
        ps.extend(ph.tolist())
    return True


def _turn_table(key: tuple, u, w, du, kmax: float):
    """(tracked κ, unwrapped phase there) covering at least [0, kmax], or None."""
    hit = _turn_tables.get(key)
    if hit is not None and hit[0][-1] >= kmax:
        return hit[0], hit[1]
    if hit is not None:
        ks, zs, ps = hit[2], hit[3], hit[4]
    else:
        z = complex(np.sum(w))
        ks, zs, ps = [0.0], [z], [float(np.angle(z))]
    if not _track(u, w, du, ks, zs, ps, kmax):
        return None
    table = (np.asarray(ks), np.asarray(ps), ks, zs, ps)
    if len(_turn_tables) >= 64:  # bounded: a worker walks through compounds one by one
        _turn_tables.pop(next(iter(_turn_tables)))
    _turn_tables.pop(key, None)
    _turn_tables[key] = table
    return table[0], table[1]


def averaged_phasor_phase(kappa, dist: VelocityDistribution, n: int = 48):
    """Continuous phase arg⟨exp(iκ/v²)⟩ and modulus |⟨exp(iκ/v²)⟩| for each κ (rad·m²/s²).

    The phase is odd in κ and followed continuously from κ = 0 along a path fine enough that
    arg Z turns by less than 0.43 rad between neighbouring path points.
    """
    kappa = np.asarray(kappa, dtype=float)
    v, w = fringe_nodes(dist, n)
    u = 1.0 / v**2
    if v.size == 1 and dist.contrast(n) is None:
        return kappa * u[0], np.ones_like(kappa)
    du = class_spans(dist, n)
    kabs = np.abs(kappa).ravel()
    kmax = float(kabs.max(initial=0.0))
    table = _turn_table((*dist.key, int(n)), u, w, du, kmax)
    if table is None:
        return _averaged_phasor_phase_path(kappa, u, w, du)
    ks, ref = table
    z = _phasor(kabs, u, w, du)
    direct = np.angle(z)
    near = ref[np.clip(np.searchsorted(ks, kabs, side="right") - 1, 0, ref.size - 1)]
    turns = np.rint((near - direct) / (2 * np.pi))
    phase = (direct + 2 * np.pi * turns).reshape(kappa.shape) * np.sign(kappa)
    return phase, np.abs(z).reshape(kappa.shape)


def _averaged_phasor_phase_path(kappa, u, w, du=None):
    """Fallback for very large κ: unwrap along a path of at most 20 000 steps up to max |κ|."""
    kabs = np.abs(kappa).ravel()
    kmax = float(kabs.max(initial=0.0))
    nstep = int(min(20000, max(8, np.ceil(kmax * u.max() / _STEP_RAD))))
    grid = np.linspace(0.0, kmax, nstep + 1)
    allk = np.concatenate([grid, kabs])
    order = np.argsort(allk, kind="stable")
    z = _phasor(allk[order], u, w, du)
    ph = np.unwrap(np.angle(z))
    out_phase = np.empty_like(allk)
    out_mod = np.empty_like(allk)
    out_phase[order] = ph
    out_mod[order] = np.abs(z)
    phase = out_phase[grid.size :].reshape(kappa.shape) * np.sign(kappa)
    modulus = out_mod[grid.size :].reshape(kappa.shape)
    return phase, modulus
