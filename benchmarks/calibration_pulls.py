"""Pull study of the reference-compound calibration (run on demand; numbers in docs/calibration.md).

Simulates campaigns whose uniform field factor is known only through one or two reference
compounds (``polarbeam.simulation.calibration.calibration_campaign``), analyses them and prints,
for the unknowns' α_eff and α, the calibrated g and the references' own α_eff: the number of pulls,
the fraction with |pull| < 1 (68.3 % for honest Gaussian errors), the mean and the spread, and the
time
per campaign.

    python benchmarks/calibration_pulls.py [n_campaigns] [seed]
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from polarbeam.constants import alpha_a3_from_si
from polarbeam.pipeline.analysis import analyze
from polarbeam.simulation.calibration import calibration_campaign


def main(n: int = 400, seed: int = 12) -> None:
    rng = np.random.default_rng(seed)
    pulls: dict[str, list[float]] = {"alpha_eff": [], "alpha": [], "g": [], "reference": []}
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        for i in range(n):
            truth = calibration_campaign(Path(tmp) / f"c{i}", rng, 1 + i % 2)
            res = analyze(truth.path / "campaign.toml")
            cal = res.calibration
            pulls["g"].append(
                (cal["field_factor_per_m3"] - truth.field_factor) / cal["field_factor_err_per_m3"]
            )
            for c in res.compounds:
                key = "reference" if c.extra.get("role") == "reference" else "alpha_eff"
                for s in c.series:
                    ref = truth.simulation.alpha_eff_A3[(c.compound, s.temperature_K)]
                    pulls[key].append((s.alpha_eff_A3 - ref) / s.alpha_eff_err_A3)
                if c.extra.get("role") != "reference" and c.alpha is not None:
                    a = alpha_a3_from_si(c.alpha.nominal_value)
                    da = alpha_a3_from_si(c.alpha.std_dev)
                    pulls["alpha"].append(
                        (a - truth.simulation.compounds[c.compound].alpha_A3) / da
                    )
    dt = time.perf_counter() - t0
    print(f"{n} campaigns, seed {seed}: {dt:.1f} s ({dt / n * 1e3:.0f} ms per campaign)")
    for name, p in pulls.items():
        p = np.asarray(p)
        print(
            f"{name:>10}: n={p.size:5d}  |pull|<1: {np.mean(np.abs(p) < 1):.3f}  "
            f"mean {p.mean():+.3f}  sd {p.std():.3f}"
        )


if __name__ == "__main__":
    args = [int(a) for a in sys.argv[1:3]]
    main(*args)
