"""Benchmark: library-scale batches through ``polarbeam analyze``.

Run on demand (not part of the test suite)::

    PYTHONPATH=src python benchmarks/bench_batch.py [--sizes 250,500,1000] [--json out.json]

Simulates campaigns of 250, 500 and 1,000 compounds (3 source temperatures × 10 voltages each,
Talbot–Lau layout, written by :mod:`polarbeam.simulation.campaigns`), then times the command-line
run end to end as a subprocess (load, analysis, per-compound records, CSV/JSON/Markdown, report.html
and figures/):

* scaling: ``--jobs 2 --report-details 0`` for every size (the report has its table but no
  figure sections, whose cost does not grow with the library): wall time, compounds per second,
  peak memory (resident set of the whole process tree, sampled every 50 ms);
* end to end at the largest size with the default report (figures for the first 20 compounds):
  ``--jobs 2``, and ``--jobs 1`` as the baseline of the ratio, timed in the same run.

Targets: 1,000 compounds with ``--jobs 2`` under 60 s and under 1 GB on a 2-core machine; time
linear in the number of compounds (a straight-line fit of time against size, and the time per
compound at each size).
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np

from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign


def make_campaign(folder: Path, n: int, seed: int = 2026) -> Path:
    rng = np.random.default_rng(seed)
    comps = [
        CompoundTruth(
            f"lib-{i:05d}",
            float(rng.uniform(80, 600)),
            float(rng.uniform(10, 80)),
            float(rng.uniform(0, 3)),
            (300.0, 450.0, 600.0),
        )
        for i in range(n)
    ]
    simulate_campaign(folder, comps, spec=InstrumentSpec.talbot_lau(), seed=rng, n_voltages=10)
    return folder / "campaign.toml"


def _tree_rss(pid: int) -> int:
    import psutil

    try:
        p = psutil.Process(pid)
        procs = [p, *p.children(recursive=True)]
    except psutil.NoSuchProcess:
        return 0
    total = 0
    for q in procs:
        try:
            total += q.memory_info().rss
        except psutil.NoSuchProcess:
            pass
    return total


def run_cli(campaign: Path, out: Path, jobs: int, details: int | None = None) -> dict:
    env = dict(os.environ)
    src = str(Path(__file__).resolve().parents[1] / "src")
    env["PYTHONPATH"] = src + os.pathsep + env.get("PYTHONPATH", "")
    cmd = [sys.executable, "-m", "polarbeam", "analyze", str(campaign), "-o", str(out)]
    cmd += ["--jobs", str(jobs), "--quiet"]
    if details is not None:
        cmd += ["--report-details", str(details)]
    peak = [0]
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)

    def sample():
        while proc.poll() is None:
            peak[0] = max(peak[0], _tree_rss(proc.pid))
            time.sleep(0.05)

    have_psutil = True
    try:
        import psutil  # noqa: F401
    except ImportError:
        have_psutil = False
    th = threading.Thread(target=sample, daemon=True) if have_psutil else None
    if th:
        th.start()
    _, stderr = proc.communicate()
    wall = time.perf_counter() - t0
    if th:
        th.join()
    if proc.returncode not in (0, 1):
        raise SystemExit(f"polarbeam analyze failed ({proc.returncode}): {stderr.decode()[-2000:]}")
    return {
        "wall_s": wall,
        "peak_MB": peak[0] / 2**20 if have_psutil else None,
        "load_1min_after": os.getloadavg()[0],  # other work on the machine skews the times
    }


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--sizes", default="250,500,1000")
    ap.add_argument("--json", type=Path, default=None)
    args = ap.parse_args(argv)
    sizes = [int(s) for s in args.sizes.split(",")]
    rows = []
    with tempfile.TemporaryDirectory(prefix="pb-bench-") as tmp:
        tmp = Path(tmp)
        camps = {}
        for n in sizes:
            t = time.perf_counter()
            camps[n] = make_campaign(tmp / f"c{n}", n)
            print(f"simulated {n} compounds in {time.perf_counter() - t:.1f} s", flush=True)

        def show(r):
            what = "default report" if r["details"] is None else "no figures"
            print(
                f"n={r['n']:5d} jobs={r['jobs']} {what:14s} wall {r['wall_s']:6.1f} s  "
                f"{r['n'] / r['wall_s']:6.1f} compounds/s  "
                f"peak {r['peak_MB'] or float('nan'):5.0f} MB  (load {r['load_1min_after']:.1f})",
                flush=True,
            )

        for n in sizes:
            r = {"n": n, "jobs": 2, "details": 0, **run_cli(camps[n], tmp / f"s{n}", 2, 0)}
            rows.append(r)
            show(r)
        nmax = max(sizes)
        big = {"n": nmax, "jobs": 2, "details": None, **run_cli(camps[nmax], tmp / "e2", 2)}
        rows.append(big)
        show(big)
        base = {"n": nmax, "jobs": 1, "details": None, **run_cli(camps[nmax], tmp / "e1", 1)}
        rows.append(base)
        show(base)
        same = all(
            (tmp / "e1" / f).read_bytes() == (tmp / "e2" / f).read_bytes()
            for f in ("series.csv", "properties.csv", "results.json", "report.md", "report.html")
        )
    j2 = [r for r in rows if r["details"] == 0]
    x = np.array([r["n"] for r in j2], dtype=float)
    y = np.array([r["wall_s"] for r in j2])
    slope, intercept = np.polyfit(x, y, 1)
    fit = slope * x + intercept
    r2 = 1 - float(np.sum((y - fit) ** 2) / np.sum((y - y.mean()) ** 2)) if len(x) > 2 else 1.0
    summary = {
        "rows": rows,
        "ratio_jobs1_over_jobs2": base["wall_s"] / big["wall_s"],
        "linear_fit": {"s_per_compound": slope, "fixed_s": intercept, "r2": r2},
        "ms_per_compound": {int(r["n"]): 1e3 * r["wall_s"] / r["n"] for r in j2},
        "jobs1_equals_jobs2_bytes": same,
        "cpus": os.cpu_count(),
        "load_average_1min": os.getloadavg()[0],
    }
    print(
        f"ratio jobs1/jobs2 at n={nmax}: {summary['ratio_jobs1_over_jobs2']:.2f}; "
        f"linear fit {1e3 * slope:.1f} ms/compound + {intercept:.1f} s fixed (R² {r2:.4f}); "
        f"jobs 1 and 2 give the same bytes: {same}; "
        f"target <60 s and <1 GB at 1,000: "
        f"{'met' if big['wall_s'] < 60 and (big['peak_MB'] or 0) < 1024 else 'NOT met'}"
    )
    print(
        f"load average during the run: {summary['load_average_1min']:.2f} on {os.cpu_count()} CPUs"
    )
    if args.json:
        args.json.write_text(json.dumps(summary, indent=1) + "\n")


if __name__ == "__main__":
    main()
