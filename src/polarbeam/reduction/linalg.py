"""Stacks of symmetric 3×3 systems, solved in closed form (the normal equations of the fits).

A stack of symmetric 3×3 matrices is held as its six distinct elements (:data:`Sym6`), each a
contiguous vector over the stack.
"""

from __future__ import annotations

import numpy as np

__all__ = ["Sym6", "cofactors6", "inv6", "quad6", "solve6", "solve_sym3", "sym3", "sym6_of"]


def sym3(a00, a01, a02, a11, a12, a22) -> np.ndarray:
    """Stack of symmetric 3×3 matrices from their six distinct elements."""
    m = np.empty((len(a00), 3, 3))
    m[:, 0, 0], m[:, 1, 1], m[:, 2, 2] = a00, a11, a22
    m[:, 0, 1] = m[:, 1, 0] = a01
    m[:, 0, 2] = m[:, 2, 0] = a02
    m[:, 1, 2] = m[:, 2, 1] = a12
    return m


# A stack of symmetric 3×3 matrices is held as its six distinct elements, each a contiguous
# vector over the stack: (m00, m01, m02, m11, m12, m22).
Sym6 = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]


def cofactors6(m: Sym6) -> tuple[Sym6, np.ndarray]:
    """Cofactors (the adjugate, symmetric) and determinants of a stack of symmetric 3×3."""
    a, b, c, d, e, f = m
    cof = (d * f - e * e, c * e - b * f, b * e - c * d, a * f - c * c, b * c - a * e, a * d - b * b)
    return cof, a * cof[0] + b * cof[1] + c * cof[2]


def sym6_of(m: np.ndarray) -> Sym6:
    """The six distinct elements of a stack of symmetric 3×3 matrices of shape (N, 3, 3)."""
    return tuple(np.ascontiguousarray(m[:, i, j]) for i, j in _UPPER)  # type: ignore[return-value]


_UPPER = ((0, 0), (0, 1), (0, 2), (1, 1), (1, 2), (2, 2))


def solve6(m: Sym6, rhs: np.ndarray) -> np.ndarray:
    """Solve symmetric 3×3 systems ``m x = rhs`` (rhs and x of shape (3, N)): by cofactors where
    well conditioned (10x faster than LAPACK for 3×3), by :func:`numpy.linalg.solve` (pivoted
    LU) for the others."""
    (c00, c01, c02, c11, c12, c22), det = cofactors6(m)
    r0, r1, r2 = rhs
    x = np.empty_like(rhs)
    with np.errstate(divide="ignore", invalid="ignore"):
        inv_det = 1.0 / det
        np.multiply(c00 * r0 + c01 * r1 + c02 * r2, inv_det, out=x[0])
        np.multiply(c01 * r0 + c11 * r1 + c12 * r2, inv_det, out=x[1])
        np.multiply(c02 * r0 + c12 * r1 + c22 * r2, inv_det, out=x[2])
    poor = ~(np.abs(det) > 1e-6 * np.abs(m[0] * m[3] * m[5]))
    if poor.any():
        a = sym3(*(v[poor] for v in m))
        x[:, poor] = np.linalg.solve(a, rhs[:, poor].T[:, :, None])[:, :, 0].T
    return x


def solve_sym3(a: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """Solve a stack of symmetric 3×3 systems ``a[k] x[k] = rhs[k]`` (shapes (N,3,3), (N,3))."""
    return solve6(sym6_of(a), np.ascontiguousarray(np.asarray(rhs, float).T)).T


def inv6(m: Sym6) -> Sym6:
    """Inverses of a stack of symmetric 3×3 matrices by cofactors (NaN where singular)."""
    cof, det = cofactors6(m)
    with np.errstate(divide="ignore", invalid="ignore"):
        inv_det = np.where(det != 0, 1.0 / det, np.nan)
    return tuple(c * inv_det for c in cof)  # type: ignore[return-value]


def quad6(u, v, c: Sym6) -> np.ndarray:
    """``Σ_ij u_i v_j C_ij`` for a stack of symmetric C (u, v: three vectors or scalars)."""
    c00, c01, c02, c11, c12, c22 = c
    return (
        u[0] * v[0] * c00
        + u[1] * v[1] * c11
        + u[2] * v[2] * c22
        + (u[0] * v[1] + u[1] * v[0]) * c01
        + (u[0] * v[2] + u[2] * v[0]) * c02
        + (u[1] * v[2] + u[2] * v[1]) * c12
    )
