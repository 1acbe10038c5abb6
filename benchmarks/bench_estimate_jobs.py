"""Benchmark: ``polarbeam estimate --dipoles --jobs 2`` against ``--jobs 1`` in the same run.

Run on demand (not part of the test suite)::

    PYTHONPATH=src python benchmarks/bench_estimate_jobs.py [N] [--conformers 10]

Writes N generated SMILES (the generator of bench_estimate.py), then runs the command line twice
as fresh processes under ``/usr/bin/time`` (whole-process wall, CPU and peak memory): ``--jobs 1``
is the baseline, ``--jobs 2`` the measured case; the two CSV files must be byte-identical.
Goal: the ratio approaches 0.5 on 2 free cores (the conformer work is bounded per molecule).
"""

from __future__ import annotations

import argparse
import csv
import os
import subprocess
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_estimate import generate

ROOT = Path(__file__).resolve().parents[1]


def run(inp: Path, out: Path, jobs: int, conformers: int) -> dict:
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT / "src") + os.pathsep + env.get("PYTHONPATH", "")
    with tempfile.NamedTemporaryFile("r", suffix=".time") as fmt:
        cmd = ["/usr/bin/time", "-o", fmt.name, "-f", "%e %U %S %M", sys.executable, "-m"]
        cmd += ["polarbeam", "estimate", str(inp), "-o", str(out), "--dipoles"]
        cmd += ["--conformers", str(conformers), "--jobs", str(jobs)]
        done = subprocess.run(cmd, env=env, capture_output=True, text=True)
        if done.returncode not in (0, 1):
            raise SystemExit(done.stderr[-2000:])
        wall, user, system, rss = fmt.read().split()[-4:]
    # peak of the largest process of the run (GNU time reports the maximum over the waited-for
    # process tree's members)
    return {"wall_s": float(wall), "cpu_s": float(user) + float(system), "peak_MB": int(rss) / 1024}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("n", nargs="?", type=int, default=200)
    ap.add_argument("--conformers", type=int, default=10)
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory(prefix="pb-est-") as td:
        td = Path(td)
        inp = td / "in.csv"
        with inp.open("w", newline="") as fh:
            w = csv.writer(fh)
            w.writerow(["compound", "smiles"])
            w.writerows((f"m{i}", s) for i, s in enumerate(generate(args.n)))
        base = run(inp, td / "one.csv", 1, args.conformers)
        two = run(inp, td / "two.csv", 2, args.conformers)
        same = (td / "one.csv").read_bytes() == (td / "two.csv").read_bytes()
    print(
        f"estimate --dipoles, {args.n} molecules x {args.conformers} conformers: "
        f"--jobs 2 {two['wall_s']:.1f} s wall ({two['peak_MB']:.0f} MB) | baseline --jobs 1 "
        f"{base['wall_s']:.1f} s wall ({base['peak_MB']:.0f} MB) | ratio "
        f"{two['wall_s'] / base['wall_s']:.2f} | files identical: {same} "
        f"(load {os.getloadavg()[0]:.1f})"
    )
    return 0 if same else 1


if __name__ == "__main__":
    sys.exit(main())
