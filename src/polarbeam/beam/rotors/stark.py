"""Stark states of rigid rotors by diagonalisation, adiabatic following and Hellmann–Feynman.

For a rotor entering the field slowly (adiabatically), each field-free state |n⟩ becomes the
Stark state that keeps its rank among the states of its symmetry block: within a block levels do
not cross (von Neumann–Wigner), so the n-th level at E = 0 is the n-th level at any E. The
population of a state is the Boltzmann population of its field-free parent at the rotational
temperature (the field is switched on after the rotational distribution is frozen), and the
force on it is μ_eff ∂E/∂x with μ_eff = −∂W/∂E = μ⟨ψ|Φ_Zμ|ψ⟩ (Hellmann–Feynman).

Symmetry blocks:

* linear rotor: M (K = 0); M and −M are degenerate (weight 2 for M > 0);
* symmetric top: (K, M), K conserved; (K, M) and (−K, −M) are degenerate;
* asymmetric top: M; within M, the parity of K when the dipole lies along one principal axis
  (a C₂ rotation about it), and for M = 0 the exchange K ↔ −K when it commutes with H.

The basis is truncated at J_max (:func:`truncation_j_max`): every state whose field-free
population is above ~10⁻⁹ of the ground state's, plus room for the field's mixing (the pendular
states spread over ~√(μE/B) values of J), plus a margin; the tests check that raising J_max by 10
changes the mean μ_eff by less than 10⁻⁷ of it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from polarbeam.beam.rotors.operators import (
    basis_states,
    cosine_matrices,
    cosine_zz_diagonal,
    cosine_zz_offdiagonal,
    rotor_hamiltonian,
)

__all__ = [
    "StarkStates",
    "asymmetric_states",
    "linear_states",
    "symmetric_states",
    "truncation_j_max",
]

#: ln(1/ε) for the population cut of the basis (ε = 10⁻⁹ of the ground state's population).
POPULATION_CUT_LN = 20.7


@dataclass(frozen=True)
class StarkStates:
    """Adiabatic Stark states: field-free energy W0 and energy W (J), μ_eff (C·m, without the
    αE term) and the population of each (weights summing to 1, degeneracies included)."""

    energy_free: np.ndarray
    energy: np.ndarray
    mu_eff: np.ndarray
    population: np.ndarray
    j_max: int
    #: the (J, K, M) of each state's field-free parent (linear rotors and symmetric tops; the
    #: M > 0 entries stand for ±M, and (K, M) for (−K, −M) too)
    labels: np.ndarray | None = None

    @property
    def mean_mu_eff(self) -> float:
        """⟨μ_eff⟩ over the populations (C·m): the centroid force per ∂E/∂x."""
        return float(np.sum(self.population * self.mu_eff))


def truncation_j_max(kt: float, b_min: float, mu_e: float) -> int:
    """J_max of the basis: thermal reach + field reach + margin (see the module docstring).

    ``kt``, ``b_min`` (the smallest rotational constant) and ``mu_e`` (μE) in joules.
    """
    thermal = math.sqrt(POPULATION_CUT_LN * kt / b_min + 0.25) - 0.5
    field = 2.0 * math.sqrt(max(mu_e, 0.0) / b_min)
    return math.ceil(thermal + field) + 6


def _populations(w0: np.ndarray, mult: np.ndarray, kt: float) -> np.ndarray:
    p = mult * np.exp(-(w0 - w0.min()) / kt)
    return p / p.sum()


def linear_states(
    b: float, mu: float, field: float, kt: float, j_max: int | None = None
) -> StarkStates:
    """Stark states of a linear rotor (B in J, μ in C·m, E in V/m, kT in J)."""
    return symmetric_states(b, b, mu, field, kt, j_max, linear=True)


def symmetric_states(
    b_perp: float,
    b_axis: float,
    mu: float,
    field: float,
    kt: float,
    j_max: int | None = None,
    *,
    linear: bool = False,
) -> StarkStates:
    """Stark states of a symmetric top, dipole along the figure axis.

    W0(J, K) = B_⊥ J(J+1) + (B_axis − B_⊥) K² (B_axis = A for a prolate top, C for an oblate
    one); the field couples J to J ± 1 at fixed K and M.
    """
    mu_e = mu * field
    if j_max is None:
        j_max = truncation_j_max(kt, min(b_perp, b_axis), mu_e)
    w0s, ws, phis, mults, labels = [], [], [], [], []
    # the blocks (K, M) with the same s = max(|K|, M) have the same size: diagonalise them
    # together (batched dense eigh of the tridiagonal matrices)
    for s in range(0, j_max + 1):
        if linear:
            km = [(0, s)]
        else:
            km = [(k, s) for k in range(-s, s + 1)] + [(s, m) for m in range(0, s)]
            km += [(-s, m) for m in range(1, s)]  # (−s, 0) is (s, 0)
        k = np.array([p[0] for p in km], dtype=float)[:, None]
        m = np.array([p[1] for p in km], dtype=float)[:, None]
        j = np.arange(s, j_max + 1, dtype=float)[None, :]
        diag0 = b_perp * j * (j + 1.0) + (b_axis - b_perp) * k * k + 0.0 * m
        dcos = cosine_zz_diagonal(j, k, m)
        ecos = cosine_zz_offdiagonal(j[:, :-1], k, m)
        n = j.shape[1]
        mat = np.zeros((len(km), n, n))
        idx = np.arange(n)
        mat[:, idx, idx] = diag0 - mu_e * dcos
        mat[:, idx[:-1], idx[1:]] = -mu_e * ecos
        mat[:, idx[1:], idx[:-1]] = -mu_e * ecos
        w, v = np.linalg.eigh(mat)
        phi = np.sum(dcos[:, :, None] * v**2, axis=1) + 2.0 * np.sum(
            ecos[:, :, None] * v[:, :-1, :] * v[:, 1:, :], axis=1
        )
        w0s.append(np.sort(diag0, axis=1).ravel())
        ws.append(w.ravel())
        phis.append(phi.ravel())
        single = (k == 0) & (m == 0)
        mults.append(np.broadcast_to(np.where(single, 1.0, 2.0), (len(km), n)).ravel())
        labels.append(np.stack(np.broadcast_arrays(j, k, m), axis=-1).reshape(-1, 3).astype(int))
    w0 = np.concatenate(w0s)
    return StarkStates(
        w0,
        np.concatenate(ws),
        mu * np.concatenate(phis),
        _populations(w0, np.concatenate(mults), kt),
        j_max,
        np.concatenate(labels),
    )


def _symmetry_subspaces(h0, dip, j, k, m, tol=1e-10):
    """The symmetry subspaces of one M block of an asymmetric top (K parity; K ↔ −K for M = 0),
    each used only where it commutes with H0 and the dipole: a boolean selection of basis states,
    or orthonormal columns (the K ↔ −K combinations)."""
    n = k.size
    scale = max(np.abs(h0).max(), 1e-300)
    parity = k % 2
    mixed = parity[:, None] != parity[None, :]
    use_parity = np.abs(dip[mixed]).max(initial=0.0) < tol and (
        np.abs(h0[mixed]).max(initial=0.0) < tol * scale
    )
    u = np.eye(n)
    labels = [parity if use_parity else np.zeros(n, dtype=int)]
    if m == 0:
        perm = np.arange(n)
        index = {(i_j, i_k): i for i, (i_j, i_k) in enumerate(zip(j, k, strict=True))}
        for i in range(n):
            perm[i] = index[(j[i], -k[i])]
        swap = np.ix_(perm, perm)  # P X P (P: K ↔ −K, an involution)
        commutes = np.abs(dip[swap] - dip).max() < tol and (
            np.abs(h0[swap] - h0).max() < tol * scale
        )
        if commutes:
            cols, sym = [], []
            for i in range(n):
                if k[i] >= 0:
                    e = np.zeros(n)
                    e[i] = 1.0
                    if k[i] == 0:
                        cols.append(e)
                        sym.append(0)
                        continue
                    f = np.zeros(n)
                    f[perm[i]] = 1.0
                    cols.extend([(e + f) / math.sqrt(2.0), (e - f) / math.sqrt(2.0)])
                    sym.extend([0, 1])
            u = np.column_stack(cols)
            par = np.array([parity[np.argmax(np.abs(c))] for c in cols])
            labels = [par if use_parity else np.zeros(n, dtype=int), np.array(sym)]
    key = np.stack(labels, axis=1) if len(labels) > 1 else labels[0][:, None]
    out = []
    for lab in np.unique(key, axis=0):
        sel = np.all(key == lab, axis=1)
        out.append(sel if len(labels) == 1 else u[:, sel])
    return out


def asymmetric_states(
    constants: tuple[float, float, float],
    direction: tuple[float, float, float],
    mu: float,
    field: float,
    kt: float,
    j_max: int | None = None,
) -> StarkStates:
    """Stark states of an asymmetric top by diagonalisation per M (dense; cost ∝ J_max⁷).

    ``constants`` (A, B, C) in J along the a, b, c axes; ``direction`` the unit components of
    the dipole along a, b, c. The body z axis is the axis of the largest dipole component (the
    next largest is x), so a dipole along one axis keeps the K-parity symmetry.
    """
    mu_e = mu * field
    if j_max is None:
        j_max = truncation_j_max(kt, min(constants), mu_e)
    comps = np.abs(np.asarray(direction, dtype=float))
    order = np.argsort(-comps, kind="stable")  # z, x, y
    az, ax, ay = (constants[i] for i in order)
    uz, ux, uy = (float(direction[i]) for i in order)
    w0s, ws, phis, mults = [], [], [], []
    for m in range(0, j_max + 1):
        j, k = basis_states(j_max, m)
        h0 = rotor_hamiltonian(j, k, ax, ay, az)
        zx, zy, zz = cosine_matrices(j, k, m)
        dip = uz * zz + ux * zx + (uy * zy if uy != 0.0 else 0.0)
        for u in _symmetry_subspaces(h0, dip, j, k, m):
            if u.dtype == bool:  # a selection of basis states
                hb, db = h0[np.ix_(u, u)], dip[np.ix_(u, u)]
            else:
                hb, db = u.conj().T @ h0 @ u, u.conj().T @ dip @ u
            w0 = np.linalg.eigvalsh(hb)
            w, v = np.linalg.eigh(hb - mu_e * db)
            phi = np.real(np.sum(v.conj() * (db @ v), axis=0))
            w0s.append(w0)
            ws.append(w)
            phis.append(phi)
            mults.append(np.full(w.size, 1.0 if m == 0 else 2.0))
    w0 = np.concatenate(w0s)
    return StarkStates(
        w0,
        np.concatenate(ws),
        mu * np.concatenate(phis),
        _populations(w0, np.concatenate(mults), kt),
        j_max,
    )
