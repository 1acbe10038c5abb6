"""Drift correction: reference interpolation and the covariance of the corrected phases.

Reference scans (``voltage_V == 0``) are interleaved in time.  Within each series (one compound at
one temperature) the good reference phases are unwrapped in time (so the interferometer phase
must move by less than π between consecutive references); each non-reference scan gets the
reference phase linearly interpolated between the good references just before and just after
it (:func:`interpolation_weights`), which is subtracted.  A scan without a good reference on one
side is flagged ``no-reference-before`` / ``no-reference-after``.

The interferometer phase is modelled as a smooth drift plus a random walk or white jitter (see
:mod:`polarbeam.reduction.noise`).  Linear interpolation removes the drift (exactly if it is
linear between two references); what remains of a random walk of diffusion ``D`` is a Brownian
bridge between the references, of variance ``D (t - t_j)(t_j+1 - t)/(t_j+1 - t_j)``.  The
covariance of the corrected phases (:func:`corrected_phase_covariance`) adds the scan's own
variance, the interpolated reference covariance ``W R Wᵀ`` (scans sharing a reference are
correlated) and the random-walk (or jitter) term.  For linear interpolation it is banded: only
scans sharing a reference or an interval are correlated (:func:`banded_triplets`).
"""

from __future__ import annotations

from typing import Literal

import numpy as np
from numpy.typing import ArrayLike

from polarbeam._util.optional import lazy
from polarbeam.errors import InputError
from polarbeam.reduction.flags import NO_REFERENCE_AFTER, NO_REFERENCE_BEFORE
from polarbeam.reduction.groups import pairs_within_groups

sparse = lazy("scipy.sparse", "numerical routines")

__all__ = [
    "SymmetricTriplets",
    "banded_triplets",
    "corrected_phase_covariance",
    "grouped_bracket",
    "interpolation_weights",
]


def interpolation_weights(
    t_signal: ArrayLike, t_reference: ArrayLike
) -> tuple[np.ndarray, np.ndarray]:
    """Linear-interpolation weights of the references at the signal times.

    Parameters
    ----------
    t_signal : array_like, shape (n,)
        Times of the non-reference scans, s.
    t_reference : array_like, shape (m,)
        Times of the usable reference scans, s, strictly increasing.

    Returns
    -------
    weights : ndarray, shape (n, m)
        Row ``i`` holds ``1 - w`` and ``w`` on the references just before and after scan ``i``
        (``w = (t - t_j)/(t_j+1 - t_j)``); a scan at the time of a reference gets weight 1 on it.
        Rows of scans that cannot be bracketed are zero.
    flags : ndarray of int, shape (n,)
        ``NO_REFERENCE_BEFORE`` / ``NO_REFERENCE_AFTER`` bits for scans that are not bracketed.
    """
    weights, flags = _interpolation_sparse(t_signal, t_reference)
    return weights.toarray(), flags


def grouped_bracket(
    ts: np.ndarray,
    s_sig: np.ndarray,
    tr: np.ndarray,
    s_ref: np.ndarray,
    r_start: np.ndarray,
    r_count: np.ndarray,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Reference interval of each signal time within its own group (series).

    ``tr`` holds the reference times of all groups one after the other (group ``g`` at
    ``r_start[g] : r_start[g] + r_count[g]``, times strictly increasing within it); ``s_sig``
    and ``s_ref`` are the groups of the signals and references.  Returns ``(left, w, exact,
    flags)``: ``left`` indexes ``tr`` (the reference just before or at the signal time), ``w`` is
    the weight of the one after it (0 for ``exact`` hits), ``flags`` the bracketing flags
    (unbracketed signals get ``left`` at their group's start).
    """
    flags = np.zeros(ts.size, dtype=np.int64)
    if tr.size == 0:
        flags[:] = NO_REFERENCE_BEFORE | NO_REFERENCE_AFTER
        zero = np.zeros(ts.size, dtype=np.int64)
        return zero, np.zeros(ts.size), np.zeros(ts.size, dtype=bool), flags
    # Exact integer keys (group, rank of the time among all times): one searchsorted for all
    # groups, with ties (a signal at a reference time) compared exactly.
    _, rank = np.unique(np.concatenate((tr, ts)), return_inverse=True)
    base = np.int64(rank.size + 1)
    key_r = s_ref.astype(np.int64) * base + rank[: tr.size]
    key_s = s_sig.astype(np.int64) * base + rank[tr.size :]
    local = np.searchsorted(key_r, key_s, side="right") - 1 - r_start[s_sig]
    m = r_count[s_sig]
    before = local < 0
    flags[before] |= NO_REFERENCE_BEFORE
    flags[m == 0] |= NO_REFERENCE_AFTER
    left = np.minimum(r_start[s_sig] + np.clip(local, 0, np.maximum(m - 1, 0)), tr.size - 1)
    exact = ~before & (tr[left] == ts)
    after = ~before & ~exact & (local >= m - 1)
    flags[after] |= NO_REFERENCE_AFTER
    mid = ~before & ~exact & ~after
    w = np.zeros(ts.size)
    jm = left[mid]
    w[mid] = (ts[mid] - tr[jm]) / (tr[jm + 1] - tr[jm])
    return left, w, exact, flags


def _bracket(
    t_signal: ArrayLike, t_reference: ArrayLike
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Reference interval of each signal time: ``(left, w, exact, flags)``.

    ``left`` is the reference just before (or at) the time, ``w`` the weight of the reference
    after it (0 for ``exact`` hits), ``flags`` the bracketing flags (unbracketed: left = 0).
    """
    ts = np.asarray(t_signal, dtype=float)
    tr = np.asarray(t_reference, dtype=float)
    if tr.size > 1 and np.any(np.diff(tr) <= 0):
        raise InputError("interpolation_weights: reference times must be strictly increasing")
    one = np.zeros(1, dtype=np.int64)
    return grouped_bracket(
        ts,
        np.zeros(ts.size, dtype=np.int64),
        tr,
        np.zeros(tr.size, dtype=np.int64),
        one,
        np.array([tr.size]),
    )


def _interpolation_sparse(
    t_signal: ArrayLike, t_reference: ArrayLike
) -> tuple[sparse.csr_matrix, np.ndarray]:
    """:func:`interpolation_weights` as a sparse matrix (at most two entries per row)."""
    left, w, exact, flags = _bracket(t_signal, t_reference)
    m = np.asarray(t_reference).size
    ok = np.flatnonzero(flags == 0)
    inner = ok[~exact[ok]]
    r = np.r_[ok, inner]
    c = np.r_[left[ok], left[inner] + 1]
    v = np.r_[1.0 - w[ok], w[inner]]
    weights = sparse.csr_matrix((v, (r, c)), shape=(left.size, m))
    weights.eliminate_zeros()
    return weights, flags


class SymmetricTriplets:
    """A symmetric matrix held as its upper-triangle entries (duplicates add up)."""

    __slots__ = ("col", "n", "row", "val")

    def __init__(self, n: int, row: np.ndarray, col: np.ndarray, val: np.ndarray):
        self.n, self.row, self.col, self.val = n, row, col, val

    @property
    def shape(self) -> tuple[int, int]:
        return (self.n, self.n)

    def diagonal(self) -> np.ndarray:
        on = self.row == self.col
        return np.bincount(self.row[on], weights=self.val[on], minlength=self.n)

    def tocsr(self) -> sparse.csr_matrix:
        off = self.row != self.col
        return sparse.csr_matrix(
            (
                np.concatenate((self.val, self.val[off])),
                (
                    np.concatenate((self.row, self.col[off])),
                    np.concatenate((self.col, self.row[off])),
                ),
            ),
            shape=self.shape,
        )

    def toarray(self) -> np.ndarray:
        n, off = self.n, self.row != self.col
        flat = np.bincount(
            np.concatenate((self.row * n + self.col, self.col[off] * n + self.row[off])),
            weights=np.concatenate((self.val, self.val[off])),
            minlength=n * n,
        )
        return flat.reshape(n, n)


def banded_triplets(
    left: np.ndarray,
    w: np.ndarray,
    exact: np.ndarray,
    var_s: np.ndarray,
    var_r: np.ndarray,
    t_s: np.ndarray | None,
    t_r: np.ndarray | None,
    diffusion: np.ndarray | float,
    jitter: np.ndarray | float,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Upper-triangle entries ``(row, col, value)`` of the banded corrected-phase covariance.

    Scans may belong to several series at once: ``left`` indexes the references of all series
    together, so only scans of one series ever share a reference; ``diffusion`` and ``jitter``
    are per-scan (the level of the scan's series) or scalars.  Entries come in three runs
    (own variance, shared references, Brownian bridge), each ordered by reference, so by series
    when the scans and references are ordered by series.  Duplicates add up.
    """
    n = var_s.size
    diffusion = np.broadcast_to(np.asarray(diffusion, dtype=float), (n,))
    jitter = np.broadcast_to(np.asarray(jitter, dtype=float), (n,))
    inner = np.flatnonzero(~exact)
    rows, cols, vals = [np.arange(n)], [np.arange(n)], [var_s + jitter]
    # W (R + τ² I) Wᵀ: entries (scan, reference, weight), paired by reference.
    e_sig = np.concatenate((np.arange(n), inner))
    e_ref = np.concatenate((left, left[inner] + 1))
    e_w = np.concatenate((1.0 - w, w[inner]))
    # (each term is symmetric in the pair: stored once, as row <= col)
    p, q = pairs_within_groups(e_ref)
    i, k = e_sig[p], e_sig[q]
    rows.append(np.minimum(i, k))
    cols.append(np.maximum(i, k))
    vals.append(e_w[p] * e_w[q] * (var_r[e_ref[p]] + jitter[i]))
    if inner.size and np.any(diffusion[inner] > 0):
        # Brownian bridge within each reference interval.
        p, q = pairs_within_groups(left[inner])
        i, k = inner[p], inner[q]
        i, k = np.minimum(i, k), np.maximum(i, k)
        bridged = diffusion[i] > 0
        i, k = i[bridged], k[bridged]
        u = t_s - t_r[left]
        length = t_r[np.minimum(left + 1, t_r.size - 1)] - t_r[left]
        lo, hi = np.minimum(u[i], u[k]), np.maximum(u[i], u[k])
        rows.append(i)
        cols.append(k)
        vals.append(diffusion[i] * lo * (length[i] - hi) / length[i])
    return np.concatenate(rows), np.concatenate(cols), np.concatenate(vals)


def _banded_covariance(
    left: np.ndarray,
    w: np.ndarray,
    exact: np.ndarray,
    var_s: np.ndarray,
    var_r: np.ndarray,
    t_s: np.ndarray | None,
    t_r: np.ndarray | None,
    diffusion: float,
    jitter: float,
    sparse_out: bool = False,
):
    """:func:`corrected_phase_covariance` for linear interpolation and independent references.

    Only scans sharing a reference or an interval are correlated: their pairs are enumerated
    (upper triangle, then mirrored, :func:`banded_triplets`) and accumulated with one
    ``bincount`` (dense), or kept as triplets (``sparse_out``: the memory and time grow with the
    band, not with n²).
    """
    n = var_s.size
    row, col, val = banded_triplets(left, w, exact, var_s, var_r, t_s, t_r, diffusion, jitter)
    triplets = SymmetricTriplets(n, row, col, val)
    return triplets if sparse_out else triplets.toarray()


def _brownian_kernel(ta: np.ndarray, tb: np.ndarray, t0: float) -> np.ndarray:
    return np.minimum.outer(ta - t0, tb - t0)


def _interpolation_structure(wm: sparse.csr_matrix):
    """``(left, right_weight, exact)`` when every row interpolates between two adjacent columns
    (or sits on one column) with weights summing to 1; None otherwise."""
    nnz = np.diff(wm.indptr)
    if wm.shape[0] == 0 or np.any((nnz < 1) | (nnz > 2)):
        return None
    first = wm.indptr[:-1]
    left = wm.indices[first]
    w_left = wm.data[first]
    two = nnz == 2
    second = np.where(two, first + 1, first)
    if np.any(wm.indices[second][two] != left[two] + 1):
        return None
    w_right = np.where(two, wm.data[second], 0.0)
    if np.any(np.abs(w_left + w_right - 1.0) > 1e-9):
        return None
    return left, w_right, ~two


def corrected_phase_covariance(
    weights: ArrayLike,
    signal_var: ArrayLike,
    reference_cov: ArrayLike,
    t_signal: ArrayLike | None = None,
    t_reference: ArrayLike | None = None,
    *,
    diffusion_rad2_s: float = 0.0,
    jitter_rad2: float = 0.0,
    method: Literal["auto", "dense"] = "auto",
) -> np.ndarray:
    """Covariance of drift-corrected phases ``delta = phi_s - W phi_ref``.

    Parameters
    ----------
    weights : array_like or scipy sparse matrix, shape (n, m)
        Interpolation weights from :func:`interpolation_weights` (rows summing to 1).
    signal_var : array_like, shape (n,)
        Statistical variances of the signal-scan phases, rad².
    reference_cov : array_like, shape (m,) or (m, m)
        Variances (or covariance) of the reference phases, rad².
    t_signal, t_reference : array_like, optional
        Scan times, s; needed when ``diffusion_rad2_s > 0``.
    diffusion_rad2_s : float, optional
        Random-walk diffusion ``D`` of the interferometer phase, rad²/s.
    jitter_rad2 : float, optional
        Variance of white phase jitter added independently to every scan, rad².
    method : {"auto", "dense"}, optional
        ``"auto"`` uses the banded structure of linear interpolation when the weights have it
        (O(n) work besides the output); ``"dense"`` always evaluates the general formula.

    Returns
    -------
    ndarray, shape (n, n)
        ``diag(var_s) + W R Wᵀ + D (K_ss - K_sr Wᵀ - W K_rs + W K_rr Wᵀ) + τ² (I + W Wᵀ)``
        with the random-walk kernel ``K(t, t') = min(t, t') - t0``.  For linear interpolation
        the random-walk term is the Brownian bridge: ``D min(u, u')(L - max(u, u'))/L`` for two
        scans at offsets ``u, u'`` in the same reference interval of length ``L``, 0 otherwise.
    """
    if method not in ("auto", "dense"):
        raise InputError(f"method must be 'auto' or 'dense', found {method!r}")
    var_s = np.asarray(signal_var, dtype=float)
    r = np.asarray(reference_cov, dtype=float)
    if diffusion_rad2_s > 0 and (t_signal is None or t_reference is None):
        raise InputError("corrected_phase_covariance: times are needed for a random walk")
    wsp = sparse.csr_matrix(weights, dtype=float)
    wsp.eliminate_zeros()
    wsp.sort_indices()
    structure = _interpolation_structure(wsp) if method == "auto" else None
    if structure is None:
        return _covariance_dense(
            wsp.toarray(), var_s, r, t_signal, t_reference, diffusion_rad2_s, jitter_rad2
        )
    left, w_right, exact = structure
    ts = None if t_signal is None else np.asarray(t_signal, dtype=float)
    tr = None if t_reference is None else np.asarray(t_reference, dtype=float)
    if r.ndim == 1:
        return _banded_covariance(
            left, w_right, exact, var_s, r, ts, tr, diffusion_rad2_s, jitter_rad2
        )
    # A full reference covariance: the banded terms plus the dense W R Wᵀ.
    cov = _banded_covariance(
        left, w_right, exact, var_s, np.zeros(r.shape[0]), ts, tr, diffusion_rad2_s, jitter_rad2
    )
    full = wsp @ (wsp @ r).T
    return cov + 0.5 * (full + full.T)


def _covariance_dense(wm, var_s, r, t_signal, t_reference, diffusion, jitter) -> np.ndarray:
    """The general formula of :func:`corrected_phase_covariance` with dense matrices."""
    if r.ndim == 1:
        r = np.diag(r)
    cov = np.diag(var_s) + wm @ r @ wm.T
    if diffusion > 0:
        ts = np.asarray(t_signal, dtype=float)
        tr = np.asarray(t_reference, dtype=float)
        t0 = min(ts.min(initial=np.inf), tr.min(initial=np.inf))
        k_ss = _brownian_kernel(ts, ts, t0)
        k_sr = _brownian_kernel(ts, tr, t0)
        k_rr = _brownian_kernel(tr, tr, t0)
        kw = k_sr @ wm.T
        cov += diffusion * (k_ss - kw - kw.T + wm @ k_rr @ wm.T)
    if jitter > 0:
        cov += jitter * (np.eye(len(var_s)) + wm @ wm.T)
    return 0.5 * (cov + cov.T)
