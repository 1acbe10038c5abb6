"""Grouped (per-series) array primitives and phase wrapping.

Entries sorted by a group id (one group per series) are handled in single vectorised passes.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["TWO_PI", "group_heads", "grouped_unwrap", "pairs_within_groups", "wrap"]

TWO_PI = 2.0 * math.pi


def group_heads(group: np.ndarray) -> np.ndarray:
    """Index of the first entry of each entry's group (entries sorted by group)."""
    if group.size == 0:
        return np.zeros(0, dtype=np.int64)
    new = np.r_[True, group[1:] != group[:-1]]
    return np.maximum.accumulate(np.where(new, np.arange(group.size), 0))


def pairs_within_groups(group: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Every unordered pair ``{p, q}`` of entries that share a group id, once (with p == q).

    Entries are taken in group order: the entry at offset ``a`` of a group of size ``s`` pairs
    with the offsets ``a .. s-1``.
    """
    order = np.argsort(group, kind="stable")
    g = group[order]
    if g.size == 0:
        return order, order
    head = group_heads(g)
    size = np.bincount(np.cumsum(np.r_[True, g[1:] != g[:-1]]) - 1)
    count = np.repeat(size, size) - (np.arange(g.size) - head)  # partners at or after each
    p = np.repeat(np.arange(g.size), count)
    q = p + (np.arange(p.size) - np.repeat(np.cumsum(count) - count, count))
    return order[p], order[q]


def grouped_unwrap(phi: np.ndarray, group: np.ndarray) -> np.ndarray:
    """:func:`numpy.unwrap` of each group (entries sorted by group) in one pass."""
    if phi.size < 2:
        return phi.astype(float, copy=True)
    dd = np.diff(phi)
    ddmod = np.mod(dd + np.pi, TWO_PI) - np.pi
    ddmod[(ddmod == -np.pi) & (dd > 0)] = np.pi
    turns = np.rint((ddmod - dd) / TWO_PI)
    turns[(np.abs(dd) < np.pi) | (group[1:] != group[:-1])] = 0.0
    total = np.r_[0.0, np.cumsum(turns)]  # whole turns: exact in floating point
    return phi + TWO_PI * (total - total[group_heads(group)])


def wrap(phi: np.ndarray) -> np.ndarray:
    """Wrap to (-π, π]."""
    return np.pi - np.mod(np.pi - phi, TWO_PI)
