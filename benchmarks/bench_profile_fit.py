"""Benchmark: one compound's whole-profile fit (15 K linear rotor, 5 voltages × 200 bins).

Run on demand, in a fresh process as a user's analysis would::

    PYTHONPATH=src python benchmarks/bench_profile_fit.py [--repeat 3]

Prints the wall and CPU time of the fit (target: < 10 s on 2 cores), the ratio against a
baseline timed in the same run (one evaluation of the expected counts of every profile, the unit
of work the fit repeats), the import time, and the peak resident memory of the process.
"""

from __future__ import annotations

import argparse
import resource
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests" / "extraction"))

T_IMPORT = time.perf_counter()
import numpy as np  # noqa: E402
from test_extraction_profiles import COM, FPV, _simulate  # noqa: E402

from polarbeam.beam.rotors import LinearRotor  # noqa: E402
from polarbeam.constants import alpha_si_from_a3, si_from_debye  # noqa: E402
from polarbeam.extraction.profiles import fit_profiles  # noqa: E402

T_IMPORT = time.perf_counter() - T_IMPORT


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    rotor = LinearRotor(5000e6)
    walls, cpus, base = [], [], []
    for k in range(args.repeat):
        rng = np.random.default_rng(3 + k)
        t0 = time.perf_counter()
        s = _simulate(rng, rotor, 1.5, 15.0)  # baseline: the model evaluated once per profile
        base.append(time.perf_counter() - t0)
        t0, c0 = time.perf_counter(), time.process_time()
        fit = fit_profiles(
            [s],
            rotor,
            COM,
            FPV,
            alpha_known=alpha_si_from_a3(8.0),
            dipole_guess=si_from_debye(1.0),
        )
        walls.append(time.perf_counter() - t0)
        cpus.append(time.process_time() - c0)
    wall, cpu, b = (float(np.median(x)) for x in (walls, cpus, base))
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"imports {T_IMPORT:.2f} s; baseline (one model evaluation of 5 profiles) {b:.3f} s")
    print(
        f"profile fit: median {wall:.2f} s wall, {cpu:.2f} s CPU over {args.repeat} runs "
        f"(= {wall / b:.0f}x the baseline, {fit.evaluations} evaluations); peak RSS {peak:.0f} MB"
    )
    print(f"target < 10 s wall on 2 cores: {'met' if wall < 10 else 'MISSED'}")


if __name__ == "__main__":
    main()
