"""Whitening of correlated residuals: r ↦ L⁻¹ r with C = L Lᵀ the covariance of a series.

The drift-corrected phases of a raw-scan series are correlated only between scans that share a
reference (a band a few scans wide), so their covariance comes from the reduction as a sparse
matrix. A long monitoring series (tens of thousands of scans) must never be made dense: its
Cholesky factor is computed in LAPACK's banded storage (``scipy.linalg.cholesky_banded``) and
applied with a banded triangular solve, O(n·b²) time and O(n·b) memory for a bandwidth b.
Small series (the usual case) keep the dense factorisation, whose results the banded one
reproduces to rounding.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from polarbeam._util.optional import lazy

linalg = lazy("scipy.linalg", "numerical routines")
sparse = lazy("scipy.sparse", "numerical routines")

__all__ = ["DENSE_LIMIT", "bandwidth", "whitener"]

#: Series up to this many points are factorised densely (n² memory is small there).
DENSE_LIMIT = 2000


def bandwidth(cov) -> int:
    """Largest |i − j| over the stored non-zero entries of a sparse symmetric matrix."""
    coo = sparse.coo_matrix(cov)
    nz = coo.data != 0
    return int(np.max(np.abs(coo.row[nz] - coo.col[nz]), initial=0))


def _banded_lower(cov, b: int) -> np.ndarray:
    """Lower banded storage ab[i − j, j] = C[i, j] (i ≥ j) of a sparse symmetric matrix."""
    coo = sparse.coo_matrix(cov)
    low = coo.row >= coo.col
    ab = np.zeros((b + 1, coo.shape[0]))
    np.add.at(ab, (coo.row[low] - coo.col[low], coo.col[low]), coo.data[low])
    return ab


def whitener(cov, errors: np.ndarray, dense_limit: int = DENSE_LIMIT) -> Callable:
    """A function r ↦ L⁻¹ r for the covariance ``cov`` (dense, sparse or None).

    ``None`` means independent points with standard deviations ``errors``. A sparse covariance
    above ``dense_limit`` points whose band is narrow is factorised in banded storage; anything
    else densely. Raises :class:`numpy.linalg.LinAlgError` when ``cov`` is not positive definite.
    """
    if cov is None:
        inv = 1.0 / np.asarray(errors, dtype=float)
        return lambda r: r * (inv if np.ndim(r) == 1 else inv[:, None])
    if sparse.issparse(cov):
        n = cov.shape[0]
        b = bandwidth(cov)
        if n > dense_limit and (b + 1) ** 2 < n:
            chol = linalg.cholesky_banded(_banded_lower(cov, b), lower=True)
            return lambda r: linalg.solve_banded((b, 0), chol, r)
        cov = cov.toarray()
    chol = linalg.cholesky(np.asarray(cov, dtype=float), lower=True)
    return lambda r: linalg.solve_triangular(chol, r, lower=True)
