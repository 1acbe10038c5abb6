"""The worker side of a batch and the runners that hand out work: in this process, in local
processes, or on a Dask cluster.

A worker rebuilds the campaign itself from the campaign path
(:func:`~polarbeam.contract.campaign.load_campaign` and
:func:`~polarbeam.extraction.context.build_context`, cached per process) and sends back each
compound's result as a record (:func:`~polarbeam.batch.records.encode_compound`).
"""

from __future__ import annotations

import ctypes
import os
import re
import signal
import sys
import threading
import time
from collections.abc import Iterator, Mapping, Sequence
from typing import Any

from uncertainties import UFloat

from polarbeam._util.optional import has
from polarbeam.batch.inputs import campaign_key, compound_hashes
from polarbeam.batch.records import decode_compound, encode_compound
from polarbeam.contract.campaign import load_campaign
from polarbeam.errors import InputError
from polarbeam.pipeline.analysis import analyze_compound, build_context
from polarbeam.report.html import compound_figure_files
from polarbeam.results.objects import CompoundResult

__all__ = [
    "InlineRunner",
    "analyze_chunk",
    "chunks",
    "failed_record",
    "make_runner",
    "one_line",
    "prime_worker_cache",
    "render_chunk",
]

_WORKER_CACHE: dict[tuple[str, str], tuple] = {}


def one_line(text: str) -> str:
    return " ".join(str(text).split())


def failed_record(name: str, message: str, input_hash: str | None) -> tuple:
    r = CompoundResult(name, "failed", one_line(message))
    return name, input_hash, encode_compound(r)


def _load_for_worker(path: str, key: str, settings: Mapping[str, Any]):
    hit = _WORKER_CACHE.get((path, key))
    if hit is None:
        c = load_campaign(path)
        ctx = build_context(c)
        hashes = compound_hashes(c, campaign_key(c, settings))
        by_name = {cd.name: cd for cd in c.compounds}
        hit = (c, ctx, hashes, by_name)
        _WORKER_CACHE.clear()  # a worker serves one campaign at a time
        _WORKER_CACHE[(path, key)] = hit
    return hit


def _shared_inputs(ctx) -> list:
    ratio = ctx.coupling_ratio
    return list(ratio.derivatives) if isinstance(ratio, UFloat) else []


def analyze_chunk(
    path: str, key: str, names: Sequence[str], settings: Mapping[str, Any]
) -> list[tuple]:
    """Analyse the named compounds of one campaign: [(name, input hash, record), ...]."""
    try:
        c, ctx, hashes, by_name = _load_for_worker(path, key, settings)
    except Exception as exc:  # the campaign could not be rebuilt here: fail these compounds
        msg = f"the worker could not load {path} ({type(exc).__name__}: {exc})"
        return [failed_record(n, msg, None) for n in names]
    shared = _shared_inputs(ctx)
    out = []
    for name in names:
        cd = by_name.get(name)
        if cd is None:
            out.append(failed_record(name, f"compound {name!r}: not in {path} any more", None))
            continue
        try:
            r = analyze_compound(cd, c, ctx)
            out.append((name, hashes.get(name), encode_compound(r, shared)))
        except Exception as exc:  # isolate: one compound never stops the batch
            out.append(
                failed_record(
                    name,
                    f"compound {name!r}: unexpected error ({type(exc).__name__}: {exc})",
                    hashes.get(name),
                )
            )
    return out


def render_chunk(
    items: Sequence[tuple[int, dict]], magnetic: bool = False
) -> list[tuple[int, dict]]:
    """Figures of recorded compounds: [(index, {kind: (svg, png)}), ...] (never raises);
    ``magnetic``: the figures of a magnetic campaign."""
    out = []
    for i, rec in items:
        try:
            out.append((i, compound_figure_files(decode_compound(rec), magnetic=magnetic)))
        except Exception:  # a figure that cannot be drawn leaves the section without it
            out.append((i, {}))
    return out


_PR_SET_PDEATHSIG = 1  # from <linux/prctl.h>


def _die_with_parent(parent: int) -> None:  # pragma: no cover - runs in the worker processes
    """End this worker when ``parent`` (the batch's main process) dies, even by SIGKILL.

    On Linux the kernel sends SIGKILL when the parent goes (``prctl(PR_SET_PDEATHSIG)``); a
    daemon thread that checks the parent pid once a second covers other systems and the moment
    before the ``prctl``.  With the workers gone, the multiprocessing resource tracker (kept alive
    by the pipe its children share) ends too.
    """
    if sys.platform.startswith("linux"):
        try:
            libc = ctypes.CDLL(None, use_errno=True)
            libc.prctl(_PR_SET_PDEATHSIG, signal.SIGKILL, 0, 0, 0)
        except (OSError, AttributeError):
            pass

    def watch() -> None:
        while True:
            if os.getppid() != parent:
                os._exit(1)
            time.sleep(1.0)

    if os.getppid() != parent:  # the parent died before the prctl took effect
        os._exit(1)
    threading.Thread(target=watch, name="polarbeam-parent-watch", daemon=True).start()


def _worker_init(parent: int | None = None) -> None:  # pragma: no cover - in the workers
    # Ctrl-C is the main process's business: it stops handing out work and keeps what is done.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    if parent is not None:
        _die_with_parent(parent)


def prime_worker_cache(path: str, key: str, entry: tuple) -> None:
    """Hand an already loaded campaign ``(campaign, context, hashes, by_name)`` to the in-process
    worker, so that it is not loaded a second time."""
    _WORKER_CACHE.clear()
    _WORKER_CACHE[(path, key)] = entry


def chunks(names: list[str], workers: int) -> list[list[str]]:
    if not names:
        return []
    size = max(1, min(8, len(names) // (4 * max(1, workers)) or 1))
    if workers <= 1:
        size = 1  # in-process: each compound is written as soon as it is done
    return [names[i : i + size] for i in range(0, len(names), size)]


class InlineRunner:
    workers = 1

    def run(self, tasks: list[tuple], fn=None) -> Iterator[tuple[tuple, list | BaseException]]:
        fn = fn or analyze_chunk
        for t in tasks:
            yield t, fn(*t)

    def close(self) -> None:
        pass


class _Processes:
    def __init__(self, jobs: int):
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor

        self.workers = jobs
        self._make = lambda: ProcessPoolExecutor(
            max_workers=jobs,
            mp_context=multiprocessing.get_context("spawn"),
            initializer=_worker_init,
            initargs=(os.getpid(),),
        )
        self.pool = self._make()

    def run(self, tasks, fn=None):
        from concurrent.futures import as_completed
        from concurrent.futures.process import BrokenProcessPool

        futures = {self.pool.submit(fn or analyze_chunk, *t): t for t in tasks}
        broken = False
        try:
            for fut in as_completed(futures):
                try:
                    yield futures[fut], fut.result()
                except BrokenProcessPool as exc:
                    broken = True
                    yield futures[fut], exc
                except Exception as exc:
                    yield futures[fut], exc
        except BaseException:
            self.pool.shutdown(wait=False, cancel_futures=True)
            raise
        if broken:  # a worker died (killed, out of memory): start afresh for what follows
            self.pool.shutdown(wait=False, cancel_futures=True)
            self.pool = self._make()

    def close(self) -> None:
        self.pool.shutdown(wait=True, cancel_futures=True)


class _Dask:
    def __init__(self, scheduler: str, jobs: int | None, dashboard: bool):
        if not has("distributed"):  # pragma: no cover - depends on the install
            raise InputError(
                "--scheduler: Dask's distributed scheduler is not installed; "
                'pip install "polarbeam[batch]"'
            )
        import logging

        from distributed import Client, LocalCluster

        self.cluster = None
        if scheduler == "local":
            n = jobs or os.cpu_count() or 1
            if dashboard:
                if not has("bokeh"):
                    raise InputError(
                        "--dashboard: Dask's dashboard needs bokeh; pip install 'bokeh>=3.1'"
                    )
            # Everything on the loopback interface: the scheduler, the workers and the small
            # HTTP endpoint Dask always opens (health checks; the dashboard only when asked).
            self.cluster = LocalCluster(
                n_workers=n,
                threads_per_worker=1,
                processes=True,
                host="127.0.0.1",
                dashboard_address="127.0.0.1:0",
                worker_dashboard_address=None,
                scheduler_kwargs={"dashboard": dashboard},
                silence_logs=logging.ERROR,
            )
            self.client = Client(self.cluster)
        else:
            if not re.match(r"^(tcp|tls|ucx|inproc)://", scheduler):
                raise InputError(
                    f"--scheduler: expected 'local' or an address like tcp://host:8786, "
                    f"found {scheduler!r}"
                )
            try:
                self.client = Client(scheduler, timeout=30)
            except OSError as exc:
                raise InputError(f"--scheduler: cannot reach {scheduler} ({exc})") from None
            except ValueError as exc:  # a malformed address
                raise InputError(
                    f"--scheduler: expected 'local' or an address like tcp://host:8786, "
                    f"found {scheduler!r} ({exc})"
                ) from None
        self.workers = max(1, sum(self.client.nthreads().values()))
        self.dashboard_link = self.client.dashboard_link if dashboard else None

    def run(self, tasks, fn=None):
        from distributed import as_completed

        futures = {}
        for t in tasks:
            futures[self.client.submit(fn or analyze_chunk, *t, pure=False)] = t
        try:
            for fut in as_completed(list(futures)):
                try:
                    yield futures[fut], fut.result()
                except Exception as exc:
                    yield futures[fut], exc
        except BaseException:
            self.client.cancel(list(futures))
            raise

    def close(self) -> None:
        self.client.close()
        if self.cluster is not None:
            self.cluster.close()


def make_runner(jobs: int | None, scheduler: str | None, dashboard: bool):
    if scheduler:
        return _Dask(scheduler, jobs, dashboard)
    n = 1 if jobs is None else (os.cpu_count() or 1) if jobs == 0 else jobs
    if n < 0:
        raise InputError(f"--jobs: expected 0 (all cores) or a positive number, found {jobs}")
    return InlineRunner() if n == 1 else _Processes(n)
