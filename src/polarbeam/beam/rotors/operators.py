"""Matrices of a rigid rotor in the symmetric-top basis |J K M⟩ (plain numpy functions).

Conventions (Townes & Schawlow ch. 4 and 10, Gordy & Cook ch. 2 and 10; from memory, checked in
the tests against identities that do not depend on a phase convention):

* the body axes are called x, y, z; z is the quantisation axis of K, the lab axis Z that of M,
  and the field points along Z;
* the direction cosine between Z and the body z axis has the elements

  ⟨J K M|Φ_Zz|J K M⟩ = K M / (J(J+1)),
  ⟨J K M|Φ_Zz|J+1 K M⟩ = √[((J+1)² − K²)((J+1)² − M²)] / ((J+1) √((2J+1)(2J+3))),

  the product of two Clebsch–Gordan coefficients ⟨J M 1 0|J+1 M⟩⟨J K 1 0|J+1 K⟩ (times
  √((2J+1)/(2J+3))), all positive in the Condon–Shortley convention;
* the perpendicular cosines follow from the commutators with the body-fixed angular momentum,
  Φ_Zx = i[J_y, Φ_Zz] and Φ_Zy = i[J_z, Φ_Zx] (a body-fixed vector operator); their overall
  signs are irrelevant to the Stark energies (a C₂ rotation of the body flips them), and
  Φ_Zx² + Φ_Zy² + Φ_Zz² = 1 is checked in the tests;
* the rigid-rotor Hamiltonian is H = A_x J_x² + A_y J_y² + A_z J_z² (energies in joules).
"""

from __future__ import annotations

import numpy as np

from polarbeam._util.optional import lazy

sparse = lazy("scipy.sparse", "numerical routines")

__all__ = [
    "basis_states",
    "body_angular_momentum",
    "cosine_matrices",
    "cosine_zz",
    "cosine_zz_offdiagonal",
    "rotor_hamiltonian",
]


def basis_states(j_max: int, m: int, k: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """(J, K) of the basis of one M block, J from max(|M|, |K|) to ``j_max``.

    With ``k`` given, only that K (a symmetric top, where K is conserved); else every K of each J
    (an asymmetric top), ordered by J then K.
    """
    if k is not None:
        j = np.arange(max(abs(m), abs(k)), j_max + 1)
        return j, np.full(j.size, k)
    js, ks = [], []
    for jj in range(abs(m), j_max + 1):
        js.extend([jj] * (2 * jj + 1))
        ks.extend(range(-jj, jj + 1))
    return np.array(js, dtype=int), np.array(ks, dtype=int)


def cosine_zz_offdiagonal(j, k, m) -> np.ndarray:
    """⟨J K M|Φ_Zz|J+1 K M⟩ for arrays of J, K, M."""
    j = np.asarray(j, dtype=float)
    k = np.asarray(k, dtype=float)
    m = np.asarray(m, dtype=float)
    num = np.clip(((j + 1) ** 2 - k**2) * ((j + 1) ** 2 - m**2), 0.0, None)
    return np.sqrt(num) / ((j + 1) * np.sqrt((2 * j + 1) * (2 * j + 3)))


def cosine_zz_diagonal(j, k, m) -> np.ndarray:
    """⟨J K M|Φ_Zz|J K M⟩ = K M / (J(J+1)) (0 for J = 0)."""
    j = np.asarray(j, dtype=float)
    jj = np.where(j > 0, j * (j + 1), 1.0)
    return np.asarray(k, dtype=float) * np.asarray(m, dtype=float) / jj


def _index(j: np.ndarray, k: np.ndarray) -> dict[tuple[int, int], int]:
    return {(int(a), int(b)): i for i, (a, b) in enumerate(zip(j, k, strict=True))}


def _cosine_zz_sparse(j: np.ndarray, k: np.ndarray, m: int):
    index = _index(j, k)
    lo = [i for i in range(j.size) if (int(j[i]) + 1, int(k[i])) in index]
    hi = [index[(int(j[i]) + 1, int(k[i]))] for i in lo]
    v = cosine_zz_offdiagonal(j[lo], k[lo], m) if lo else np.zeros(0)
    off = sparse.csr_matrix(
        (np.concatenate([v, v]), (np.array(lo + hi, dtype=int), np.array(hi + lo, dtype=int))),
        shape=(j.size, j.size),
    )
    return off + sparse.diags(cosine_zz_diagonal(j, k, m))


def cosine_zz(j: np.ndarray, k: np.ndarray, m: int) -> np.ndarray:
    """Φ_Zz in the basis (J, K) of one M block (dense, real symmetric)."""
    return _cosine_zz_sparse(j, k, m).toarray()


def _raising(j: np.ndarray, k: np.ndarray):
    index = _index(j, k)
    rows, cols, vals = [], [], []
    for i in range(j.size):
        up = index.get((int(j[i]), int(k[i]) + 1))
        if up is not None:
            jj, kk = float(j[i]), float(k[i])
            rows.append(up)
            cols.append(i)
            vals.append(np.sqrt(jj * (jj + 1) - kk * (kk + 1)))
    return sparse.csr_matrix((vals, (rows, cols)), shape=(j.size, j.size))


def body_angular_momentum(j: np.ndarray, k: np.ndarray):
    """(J_x, J_y, J_z) in the basis (J, K) (sparse; block diagonal in J; J_y imaginary)."""
    jp = _raising(j, k)
    jx = 0.5 * (jp + jp.T)
    jy = -0.5j * (jp - jp.T)
    jz = sparse.diags(k.astype(float))
    return jx.tocsr(), jy.tocsr(), jz.tocsr()


def cosine_matrices(j: np.ndarray, k: np.ndarray, m: int):
    """(Φ_Zx, Φ_Zy, Φ_Zz) in the basis (J, K) of one M block (dense; Φ_Zx real, Φ_Zy
    imaginary)."""
    zz = _cosine_zz_sparse(j, k, m)
    _jx, jy, jz = body_angular_momentum(j, k)
    zx = 1j * (jy @ zz - zz @ jy)
    zy = 1j * (jz @ zx - zx @ jz)
    return zx.toarray().real, zy.toarray(), zz.toarray()


def rotor_hamiltonian(j: np.ndarray, k: np.ndarray, ax: float, ay: float, az: float):
    """H = A_x J_x² + A_y J_y² + A_z J_z² in the basis (J, K) (dense, real symmetric)."""
    jx, jy, jz = body_angular_momentum(j, k)
    h = (ax * (jx @ jx) + ay * (jy @ jy).real + az * (jz @ jz)).toarray()
    return 0.5 * (h + h.T)
