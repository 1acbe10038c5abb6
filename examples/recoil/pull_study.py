"""Pull study of the photon-recoil analysis: many random simulated campaigns, analysed.

Run from the repository root (about 0.1 s per campaign on one core)::

    PYTHONPATH=src python examples/recoil/pull_study.py 1000 --seed 1

Prints the fraction of |pull| < 1 (68.3 % expected for honest 1σ errors), the mean and the
standard deviation of the pulls of σ, overall and per layout and re-emission mode, and of the
fitted fluorescence yields.  With ``--effects`` the campaigns exercise, in turn, the effects of
issue 20 (beam height, hit fraction, cw, fixed cw power, standing wave, shared references,
Rician ratios) and the pulls are grouped by effect::

    PYTHONPATH=src python examples/recoil/pull_study.py 700 --seed 2 --effects
"""

from __future__ import annotations

import argparse
import collections
import tempfile
from pathlib import Path

import numpy as np

from polarbeam.pipeline.analysis import analyze
from polarbeam.simulation.recoil import (
    RECOIL_EFFECTS,
    random_recoil_campaign,
    random_recoil_modes_campaign,
)


def _line(name: str, p) -> str:
    p = np.asarray(p)
    return (
        f"{name:<28} n={p.size:5d}  |pull|<1: {np.mean(np.abs(p) < 1):.3f}  "
        f"mean {p.mean():+.3f}  sd {p.std():.3f}"
    )


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("n", type=int, nargs="?", default=300)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--effects", action="store_true", help="the issue-20 effects, in turn")
    args = ap.parse_args()
    rng = np.random.default_rng(args.seed)
    groups = collections.defaultdict(list)
    yields = []
    with tempfile.TemporaryDirectory() as tmp:
        for i in range(args.n):
            if args.effects:
                mode = RECOIL_EFFECTS[i % len(RECOIL_EFFECTS)]
                truth = random_recoil_modes_campaign(Path(tmp) / str(i), rng, mode)
            else:
                mode = ("off", "stated", "fit")[i % 3]
                truth = random_recoil_campaign(Path(tmp) / str(i), rng, reemission=mode)
            res = analyze(truth.path / "campaign.toml")
            (c,) = res.recoil.compounds
            t = truth.compounds["sample"]
            if c.status == "failed":
                print("failed:", c.message)
                continue
            for f in c.fits:
                pull = (f.cross_section_cm2 - t.cross_sections_cm2[f.laser]) / (
                    f.cross_section_err_cm2
                )
                groups["all"].append(pull)
                groups[f"layout {res.layout}"].append(pull)
                groups[f"effect {mode}" if args.effects else f"re-emission {mode}"].append(pull)
            if c.yield_fitted:
                q = c.fluorescence_yield
                yields.append((q.nominal_value - t.fluorescence_yield) / q.std_dev)
    for name in sorted(groups):
        print(_line(f"sigma, {name}", groups[name]))
    if yields:
        print(_line("fluorescence yield (fitted)", yields))


if __name__ == "__main__":
    main()
