"""The finite-difference operator: 5-point Laplacian with Shortley-Weller boundaries.

Nodes are classified (inside an electrode, on the box wall, free); for free nodes next to a
curved surface each of the four grid links is cut where it meets the electrode, and the 3-point
second difference uses the unequal arms (second order).  ``boundary="staircase"`` instead holds
every node inside an electrode at its potential (first order, kept for comparison).  Assembly is
vectorised into one :mod:`scipy.sparse` matrix.
"""

from __future__ import annotations

import numpy as np

from polarbeam._util.optional import lazy
from polarbeam.instrument.fields.geometry import CrossSection

sp = lazy("scipy.sparse", "numerical routines")

__all__ = ["assemble"]


def _classify(cs: CrossSection, X, Y, hx, hy):
    """Owner index per node (-1 free), signed distances near electrodes."""
    owner = np.full(X.shape, -1, dtype=np.int64)
    near = []  # per electrode: flat indices of nodes within one link of its surface
    scale = max(cs.box.width, cs.box.height)
    tol = 1e-12 * scale
    hmax = max(hx, hy)
    x1d = X[0]
    y1d = Y[:, 0]
    for k, e in enumerate(cs.electrodes):
        bx0, bx1, by0, by1 = e.bounds()
        i0 = np.searchsorted(x1d, bx0 - 1.01 * hmax)
        i1 = np.searchsorted(x1d, bx1 + 1.01 * hmax, side="right")
        j0 = np.searchsorted(y1d, by0 - 1.01 * hmax)
        j1 = np.searchsorted(y1d, by1 + 1.01 * hmax, side="right")
        if i0 >= i1 or j0 >= j1:
            near.append(np.empty(0, dtype=np.int64))
            continue
        sub = (slice(j0, j1), slice(i0, i1))
        sd = e.signed_distance(X[sub], Y[sub])
        inside = sd <= tol
        o = owner[sub]
        o[inside & (o < 0)] = k
        owner[sub] = o
        jj, ii = np.nonzero((sd > tol) & (sd <= 1.01 * hmax))
        near.append((jj + j0) * X.shape[1] + (ii + i0))
    return owner, near


def assemble(cs: CrossSection, x, y, boundary: str):
    nx, ny = x.size, y.size
    hx, hy = x[1] - x[0], y[1] - y[0]
    X, Y = np.meshgrid(x, y)
    owner, near = _classify(cs, X, Y, hx, hy)
    N = nx * ny
    owner_f = owner.ravel()
    edge = np.zeros((ny, nx), dtype=bool)
    edge[0, :] = edge[-1, :] = edge[:, 0] = edge[:, -1] = True
    edge_f = edge.ravel()
    known = np.full(N, np.nan)
    wall = edge_f & (owner_f < 0)
    known[wall] = cs.box.wall_potential(X.ravel()[wall], Y.ravel()[wall])
    pots = np.array([e.potential for e in cs.electrodes])
    inel = owner_f >= 0
    known[inel] = pots[owner_f[inel]]
    free = ~(edge_f | inel)

    # four directions: (axis, sign, flat offset, spacing)
    dirs = [(0, +1, 1, hx), (0, -1, -1, hx), (1, +1, nx, hy), (1, -1, -nx, hy)]
    s = np.ones((4, N))
    sval = np.full((4, N), np.nan)  # boundary value at the cut point (where s < 1 or hit)
    hit = np.zeros((4, N), dtype=bool)
    if boundary == "shortley-weller":
        Xf, Yf = X.ravel(), Y.ravel()
        for k, e in enumerate(cs.electrodes):
            cand = near[k]
            cand = cand[free[cand]]
            if cand.size == 0:
                continue
            for d, (axis, sign, _off, hd) in enumerate(dirs):
                t = e.first_hit(Xf[cand], Yf[cand], axis, sign, hd)
                better = (t <= 1.0) & (~hit[d, cand] | (t < s[d, cand]))
                idx = cand[better]
                s[d, idx] = np.minimum(t[better], 1.0)
                sval[d, idx] = e.potential
                hit[d, idx] = True
    # neighbours inside an electrode but missed by the hit test (round-off): cut at the node
    fidx = np.nonzero(free)[0]
    for d, (_axis, _sign, off, _hd) in enumerate(dirs):
        nb = fidx + off
        miss = inel[nb] & ~hit[d, fidx]
        if boundary == "staircase":
            miss = inel[nb]
        m = fidx[miss]
        s[d, m] = 1.0
        sval[d, m] = known[m + off]
        hit[d, m] = True
    # nodes sitting on a surface (s ~ 0): snap them to the electrode potential
    snap_tol = 1e-6
    smin = s[:, fidx].min(axis=0)
    snap = fidx[smin < snap_tol]
    if snap.size:
        dmin = np.argmin(s[:, snap], axis=0)
        known[snap] = sval[dmin, snap]
        free[snap] = False
        fidx = np.nonzero(free)[0]
    n = fidx.size
    index = np.full(N, -1, dtype=np.int64)
    index[fidx] = np.arange(n)
    rows, cols, vals = [], [], []
    diag = np.zeros(n)
    rhs = np.zeros(n)
    h2 = hx * hy
    for pair in ((0, 1), (2, 3)):
        hd = dirs[pair[0]][3]
        sp_ = s[pair[0], fidx] * hd
        sm_ = s[pair[1], fidx] * hd
        for d, hh, ho in ((pair[0], sp_, sm_), (pair[1], sm_, sp_)):
            coef = 2.0 * h2 / (hh * (hh + ho))
            diag += coef
            off = dirs[d][2]
            nb = fidx + off
            is_hit = hit[d, fidx]
            unknown = ~is_hit & free[nb]
            kn = ~is_hit & ~free[nb]
            rhs[is_hit] += coef[is_hit] * sval[d, fidx[is_hit]]
            rhs[kn] += coef[kn] * known[nb[kn]]
            r = np.nonzero(unknown)[0]
            rows.append(r)
            cols.append(index[nb[unknown]])
            vals.append(-coef[unknown])
    rows.append(np.arange(n))
    cols.append(np.arange(n))
    vals.append(diag)
    A = sp.csr_matrix(
        (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(n, n)
    )
    regular = free & ~hit.any(axis=0)
    # a node is regular only if its neighbours are unknowns too (no wall/electrode node)
    for _axis, _sign, off, _hd in dirs:
        nb = np.clip(np.arange(N) + off, 0, N - 1)
        regular &= free[nb]
    return A, rhs, known, free, fidx, regular.reshape(ny, nx)
