"""Benchmark: what a user waits for in a fresh process (start-up, and analyze on the demo).

Run on demand (not part of the test suite)::

    PYTHONPATH=src python benchmarks/bench_fresh.py [--repeat 3] [--json out.json]

Each case runs as a fresh ``python3`` subprocess under ``/usr/bin/time`` (wall, user+system CPU
and peak resident memory of the whole process: whole-process numbers only), next to a baseline
timed in the same run:

* ``import+load``: ``import polarbeam`` and ``polarbeam.load_campaign(examples/demo)``;
  baseline ``python3 -c "import numpy"`` (the floor any numerical tool pays).
  Target: <= 0.3 s wall on 2 cores.
* ``analyze demo``: ``polarbeam analyze examples/demo`` into a fresh folder, full report
  (report.html, figures/ in SVG and PNG); baseline the same run with ``--report-details 0``
  (no figure sections) and, separately, ``--resume`` into the folder just written (the figures'
  content keys match: nothing is redrawn). Target: <= 2 s wall on 2 cores.

The load average is printed with every row: other work on a shared machine inflates wall times,
the CPU columns less so.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "examples" / "demo"
TIME = "/usr/bin/time"


def measure(args: list[str]) -> dict:
    """Wall s, CPU s (user + system) and peak RSS (MB) of one fresh process."""
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT / "src") + os.pathsep + env.get("PYTHONPATH", "")
    with tempfile.NamedTemporaryFile("r", suffix=".time") as fmt:
        cmd = [TIME, "-o", fmt.name, "-f", "%e %U %S %M", *args]
        done = subprocess.run(cmd, env=env, capture_output=True, text=True, cwd=ROOT)
        if done.returncode not in (0, 1):
            raise SystemExit(f"{' '.join(args)} failed: {done.stderr[-2000:]}")
        wall, user, system, rss_kb = fmt.read().split()[-4:]
    return {
        "wall_s": float(wall),
        "cpu_s": float(user) + float(system),
        "peak_MB": int(rss_kb) / 1024,
        "load": os.getloadavg()[0],
    }


def cases(tmp: Path) -> list[tuple[str, list[str], list[str], callable]]:
    py = sys.executable
    load = f"import polarbeam; polarbeam.load_campaign({str(DEMO / 'campaign.toml')!r})"
    out = tmp / "out"

    def fresh():
        shutil.rmtree(out, ignore_errors=True)

    analyze = [py, "-m", "polarbeam", "analyze", str(DEMO), "-o", str(out), "-q"]
    return [
        ("import+load", [py, "-c", load], [py, "-c", "import numpy"], None),
        ("analyze demo", analyze, [*analyze, "--report-details", "0"], fresh),
    ]


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--json", type=Path)
    args = ap.parse_args(argv)
    if not Path(TIME).exists():
        raise SystemExit(f"{TIME} is needed (GNU time)")
    rows = []
    with tempfile.TemporaryDirectory(prefix="pb-fresh-") as tmp:
        tmp = Path(tmp)
        for name, cmd, base_cmd, reset in cases(tmp):
            for k in range(args.repeat):
                if reset:
                    reset()
                m = measure(cmd)
                if reset:
                    reset()
                b = measure(base_cmd)
                row = {"case": name, "run": k + 1, **m, "baseline": b}
                row["ratio_wall"] = m["wall_s"] / b["wall_s"]
                if name == "analyze demo":  # the folder written by the baseline: a full run first
                    reset()
                    measure(cmd)
                    row["resume"] = measure([*cmd, "--resume"])
                rows.append(row)
                extra = ""
                if "resume" in row:
                    r = row["resume"]
                    extra = f" | --resume {r['wall_s']:.2f} s wall {r['cpu_s']:.2f} s CPU"
                print(
                    f"{name:13s} run {k + 1}: {m['wall_s']:6.2f} s wall {m['cpu_s']:6.2f} s CPU "
                    f"{m['peak_MB']:6.0f} MB | baseline {b['wall_s']:6.2f} s wall "
                    f"{b['cpu_s']:6.2f} s CPU | ratio {row['ratio_wall']:5.2f}{extra} "
                    f"(load {m['load']:.1f})",
                    flush=True,
                )
    if args.json:
        args.json.write_text(json.dumps(rows, indent=1) + "\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
