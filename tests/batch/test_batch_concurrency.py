"""Two runs into one results folder, and a run killed with SIGKILL.

Software checks of the folder lock, the manifest and the worker processes (no physics): the
reference for "same result" is the project's own uninterrupted in-process run.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from _batch_helpers import make_campaign, output_files

import polarbeam
from polarbeam._util.optional import has, require
from polarbeam._util.outfolder import LOCK_FILE, MANIFEST_FILE

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="flock and SIGKILL are POSIX")

# Slows each compound in every process of the child run (sitecustomize runs before polarbeam
# is imported, so the workers pick up the slow version too).
_SLOW_SITE = """
import os
import time

if os.environ.get("PB_TEST_SLOW"):
    import polarbeam.pipeline.analysis as _p

    _real = _p.analyze_compound

    def _slow(*a, **k):
        time.sleep(float(os.environ["PB_TEST_SLOW"]))
        return _real(*a, **k)

    _p.analyze_compound = _slow
"""


def _child_env(tmp_path: Path, slow: float) -> dict[str, str]:
    site = tmp_path / "site"
    site.mkdir(exist_ok=True)
    (site / "sitecustomize.py").write_text(_SLOW_SITE)
    src = Path(polarbeam.__file__).resolve().parents[1]
    return dict(os.environ, PYTHONPATH=f"{site}{os.pathsep}{src}", PB_TEST_SLOW=str(slow))


def _analyze(camp: Path, out: Path, *more: str) -> list[str]:
    return [sys.executable, "-m", "polarbeam", "analyze", str(camp), "-o", str(out), *more]


def _wait_for(cond, timeout: float = 90.0, what: str = "") -> None:
    deadline = time.monotonic() + timeout
    while not cond():
        if time.monotonic() > deadline:
            raise AssertionError(f"timed out waiting for {what}")
        time.sleep(0.02)


def _holds_lock(out: Path, pid: int) -> bool:
    try:
        return (out / LOCK_FILE).read_text(encoding="utf-8").strip() == str(pid)
    except OSError:
        return False


def test_two_campaigns_into_one_folder_at_once(tmp_path):
    """The second run gets one line naming the folder and the first run's pid (exit 2); the first
    run's outputs are complete and hold its compounds only."""
    first = make_campaign(tmp_path / "first", n=4, seed=3)
    second = make_campaign(tmp_path / "second", n=3, seed=4)
    for name in ("shifts.csv", "compounds.csv"):  # the second campaign's compounds differ
        p = second.parent / name
        p.write_text(p.read_text().replace("mol-", "other-"))
    out = tmp_path / "out"
    proc = subprocess.Popen(
        [*_analyze(first, out, "--quiet", "--report-details", "1")],
        env=_child_env(tmp_path, 0.5),
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
    )
    try:
        _wait_for(lambda: _holds_lock(out, proc.pid), what="the first run to hold the folder")
        assert proc.poll() is None, "the first run ended before the second started"
        clash = subprocess.run(
            _analyze(second, out, "--quiet"),
            env=_child_env(tmp_path, 0.0),
            capture_output=True,
            text=True,
            timeout=120,
        )
        assert proc.poll() is None, "the first run ended while the second ran: no overlap shown"
    finally:
        _, err = proc.communicate(timeout=180)
    assert clash.returncode == 2, clash.stderr
    lines = clash.stderr.strip().splitlines()
    assert lines == [
        f"error: {out.resolve()}: results folder in use by another polarbeam run "
        f"(pid {proc.pid}); wait for it to finish or choose another --out"
    ]
    assert proc.returncode == 0, err.decode()
    manifest = json.loads((out / MANIFEST_FILE).read_text())
    assert manifest["complete"] is True
    files = output_files(out)  # every output of the first run is there
    assert sorted(k for k in files if k.startswith("compounds/")) == sorted(
        f"compounds/{p.name}" for p in (out / "compounds").glob("mol-*.json")
    )
    assert len([k for k in files if k.startswith("compounds/")]) == 4
    props = (out / "properties.csv").read_text()
    assert props.count("mol-") == 4 and "other-" not in props
    results = json.loads((out / "results.json").read_text())
    assert [c["compound"] for c in results["compounds"]] == [f"mol-{i}" for i in range(4)]
    assert json.loads((out / "batch-state.json").read_text())["complete"] is True
    assert not list(out.rglob(".*.tmp"))


def _alive(pid: int) -> bool:
    """Running (a zombie waiting to be reaped has ended)."""
    if has("psutil"):
        psutil = require("psutil", "watching the worker processes")
        try:
            return psutil.Process(pid).status() != psutil.STATUS_ZOMBIE
        except psutil.NoSuchProcess:
            return False
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii") as fh:
            return fh.read().rsplit(")", 1)[1].split()[0] not in ("Z", "X")
    except OSError:
        return False


def _descendants(pid: int) -> set[int]:
    """The processes started by ``pid`` (workers and the resource tracker), from /proc."""
    if has("psutil"):
        psutil = require("psutil", "watching the worker processes")
        return {p.pid for p in psutil.Process(pid).children(recursive=True)}
    kids: dict[int, list[int]] = {}
    for d in Path("/proc").iterdir():
        if d.name.isdigit():
            try:
                ppid = int((d / "stat").read_text().rsplit(")", 1)[1].split()[1])
            except (OSError, ValueError, IndexError):
                continue
            kids.setdefault(ppid, []).append(int(d.name))
    found, todo = set(), [pid]
    while todo:
        for k in kids.get(todo.pop(), []):
            if k not in found:
                found.add(k)
                todo.append(k)
    return found


@pytest.mark.skipif(
    not (has("psutil") or Path("/proc/self/stat").exists()),
    reason="needs psutil or /proc to see the worker processes",
)
def test_sigkill_leaves_no_worker_and_resume_is_byte_identical(camp, inline_run, tmp_path):
    """SIGKILL of `polarbeam analyze --jobs 2`: workers and the resource tracker end within
    5 s; `--resume` then gives the bytes of an uninterrupted run."""
    out = tmp_path / "out"
    proc = subprocess.Popen(
        _analyze(camp, out, "-j", "2", "--quiet", "--report-details", "1"),
        env=_child_env(tmp_path, 0.6),
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )
    try:
        _wait_for(
            lambda: list((out / "compounds").glob("*.json")) or proc.poll() is not None,
            what="the first compound record",
        )
        kids = _descendants(proc.pid)
        assert proc.poll() is None, "the run ended before it could be killed"
        assert len(kids) >= 2, f"expected two workers, found {kids}"
        os.kill(proc.pid, signal.SIGKILL)
    finally:
        proc.wait(timeout=30)
    assert proc.returncode == -signal.SIGKILL
    deadline = time.monotonic() + 5.0
    while any(_alive(k) for k in kids) and time.monotonic() < deadline:
        time.sleep(0.05)
    orphans = [k for k in kids if _alive(k)]
    for k in orphans:  # clean up before failing
        os.kill(k, signal.SIGKILL)
    assert not orphans, f"processes alive 5 s after their parent was killed: {orphans}"
    state = json.loads((out / "batch-state.json").read_text())
    assert state["complete"] is False
    manifest = json.loads((out / MANIFEST_FILE).read_text())
    assert manifest["complete"] is False
    (out / "compounds" / ".mol-0.json.ab12cd34.tmp").write_text("{half")  # as a kill leaves it
    resumed = subprocess.run(
        _analyze(camp, out, "-j", "2", "--quiet", "--resume", "--report-details", "1"),
        env=_child_env(tmp_path, 0.0),
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert resumed.returncode == 0, resumed.stderr
    assert output_files(out) == output_files(inline_run[0])
    assert not list(out.rglob(".*.tmp"))
    assert json.loads((out / MANIFEST_FILE).read_text())["complete"] is True
