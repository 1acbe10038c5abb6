"""The measured fringe visibility as a check of the velocity model.

In a Talbot–Lau interferometer every velocity class turns by its own phase, so the detected
visibility falls with voltage as the modulus of the phasor average, |Z(κ)|/|Z(0)|. A wrong velocity
distribution (a Gaussian for a skewed beam, a wrong spread, a missing contrast slope) shows in
that fall before it shows in the phase. :func:`visibility_departures` scales the model modulus to
the measured visibility (one weighted least-squares factor, the zero-field visibility) and names
every voltage where the two differ by more than three standard errors.
"""

from __future__ import annotations

import numpy as np

from polarbeam.contract.schema import SeriesData

__all__ = ["VISIBILITY_PULL_LIMIT", "visibility_departures"]

#: measured and model visibility differing by more than this many σ give a warning
VISIBILITY_PULL_LIMIT = 3.0


def visibility_departures(s: SeriesData, modulus: np.ndarray) -> list[str]:
    """One warning (with numbers) when the measured visibility of ``s`` departs from the model
    modulus by more than 3σ at some voltage; [] when it does not or nothing was measured."""
    if s.visibility is None or s.visibility_err is None:
        return []
    vis = np.asarray(s.visibility, dtype=float)
    err = np.asarray(s.visibility_err, dtype=float)
    mod = np.asarray(modulus, dtype=float)
    ok = np.isfinite(vis) & np.isfinite(err) & (err > 0) & np.isfinite(mod)
    if vis.shape != mod.shape or ok.sum() < 2:
        return []
    w = 1.0 / err[ok] ** 2
    scale = float(np.sum(w * vis[ok] * mod[ok]) / np.sum(w * mod[ok] ** 2))
    pull = np.full(vis.shape, np.nan)
    pull[ok] = (vis[ok] - scale * mod[ok]) / err[ok]
    bad = np.flatnonzero(np.abs(np.nan_to_num(pull)) > VISIBILITY_PULL_LIMIT)
    if bad.size == 0:
        return []
    worst = bad[np.argsort(-np.abs(pull[bad]))][:3]
    shown = "; ".join(
        f"{s.voltages[k]:g} V: measured {vis[k]:.3f} ± {err[k]:.3f}, model {scale * mod[k]:.3f} "
        f"({pull[k]:+.1f}σ)"
        for k in sorted(worst, key=lambda k: s.voltages[k])
    )
    return [
        f"{s.label}: the measured visibility departs from the velocity model's phasor modulus by "
        f"more than {VISIBILITY_PULL_LIMIT:g}σ at {bad.size} of {int(ok.sum())} voltages "
        f"({shown}); the velocity distribution (shape, spread or contrast) may not describe "
        "the beam"
    ]
