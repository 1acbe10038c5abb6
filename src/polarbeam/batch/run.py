"""Batches: many campaigns, thousands of compounds, several processes or a Dask cluster.

Work is split per compound.  A worker rebuilds the campaign itself from the campaign path
(:func:`~polarbeam.contract.campaign.load_campaign` and :func:`~polarbeam.pipeline.analysis.build_context`, cached
per process) and sends back each compound's result as a plain, JSON-ready *record*
(:func:`encode_compound`).  Records carry every correlated :mod:`uncertainties` value exactly: the
nominal value, the derivative with respect to each independent input and that input's tag and σ,
so :func:`decode_compound` rebuilds values with the same errors, budgets and correlations.  Inputs
stated for the whole campaign (geometry, field) are shared between the compounds decoded together,
as they are in an in-process run.

The main process writes each record as soon as it arrives to ``out/compounds/<name>.json``
(atomically) together with the content hash of that compound's inputs, so an interrupted batch
keeps its finished work and ``resume=True`` only analyses what is missing or changed.  The final
``series.csv``, ``properties.csv``, ``results.json``, ``report.md`` and ``report.html`` are
assembled from the records, in input order: the same inputs give the same bytes whatever the
number of processes or the scheduler.

Every route (in-process, local processes, Dask) goes through the same encode → decode step.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import re
import signal
import sys
import time
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, fields, is_dataclass
from pathlib import Path
from typing import Any

import numpy as np
from uncertainties import UFloat
from uncertainties.core import AffineScalarFunc, LinearCombination, Variable

from polarbeam._util.atomic import write_text_atomic
from polarbeam._util.tables import read_table
from polarbeam._util.text import safe_name
from polarbeam._version import __version__
from polarbeam.calibration.calibrate import calibration_required
from polarbeam.contract.campaign import load_campaign
from polarbeam.errors import InputError, PolarbeamError
from polarbeam.pipeline.analysis import (
    analyze_campaign,
    analyze_compound,
    build_context,
    computed_comparison,
    make_result,
)
from polarbeam.reduction import write_phases
from polarbeam.report.files import render_terminal, write_results
from polarbeam.report.html import compound_figure_files, detail_indices, write_html
from polarbeam.results.objects import CampaignResult, CompoundResult, SeriesResult

__all__ = [
    "BatchOutcome",
    "CampaignRun",
    "ProgressEvent",
    "TerminalProgress",
    "campaign_key",
    "compound_hashes",
    "decode_compound",
    "discover_campaigns",
    "encode_compound",
    "run_batch",
    "run_cli",
]

RECORD_FORMAT = "polarbeam-compound-record/1"
STATE_FILE = "batch-state.json"
COMPOUND_DIR = "compounds"

# --------------------------------------------------------------------------------------------
# records: exact, JSON-ready encoding of a CompoundResult
# --------------------------------------------------------------------------------------------

_CLASSES = {"CompoundResult": CompoundResult, "SeriesResult": SeriesResult}


def _float(x: float):
    return x if math.isfinite(x) else {"float": repr(x)}


class _Encoder:
    def __init__(self, shared: frozenset[int]):
        self.shared = shared
        self.variables: list[dict[str, Any]] = []
        self.index: dict[int, int] = {}
        self._keep: list[Variable] = []  # keep ids valid while encoding

    def var(self, v: Variable) -> int:
        k = id(v)
        if k not in self.index:
            self.index[k] = len(self.variables)
            self._keep.append(v)
            self.variables.append(
                {
                    "tag": v.tag,
                    "nominal": _float(float(v.nominal_value)),
                    "std": _float(float(v.std_dev)),
                    "shared": k in self.shared,
                }
            )
        return self.index[k]

    def __call__(self, x):
        if x is None or isinstance(x, bool | str):
            return x
        if isinstance(x, int):
            return x
        if isinstance(x, float):
            return _float(x)
        if isinstance(x, np.generic):
            return self(x.item())
        if isinstance(x, UFloat):
            return {
                "ufloat": _float(float(x.nominal_value)),
                "d": [[self.var(v), _float(float(d))] for v, d in x.derivatives.items()],
            }
        if isinstance(x, np.ndarray):
            return {"array": [self(v) for v in x.ravel().tolist()], "shape": list(x.shape)}
        if isinstance(x, tuple):
            return {"tuple": [self(v) for v in x]}
        if isinstance(x, list):
            return [self(v) for v in x]
        if isinstance(x, dict):
            return {"dict": [[str(k), self(v)] for k, v in x.items()]}
        if is_dataclass(x) and type(x).__name__ in _CLASSES:
            return {
                "dataclass": type(x).__name__,
                "fields": {f.name: self(getattr(x, f.name)) for f in fields(x)},
            }
        raise TypeError(f"cannot record a value of type {type(x).__name__}")


def encode_compound(result: CompoundResult, shared: Iterable[Any] = ()) -> dict[str, Any]:
    """JSON-ready record of ``result`` that :func:`decode_compound` turns back into an equal one.

    Parameters
    ----------
    shared
        Independent :mod:`uncertainties` variables that belong to the whole campaign (the stated
        instrument inputs); they are marked so that compounds decoded together share them.
    """
    enc = _Encoder(frozenset(id(v) for v in shared))
    body = enc(result)
    return {"variables": enc.variables, "value": body}


def _unfloat(x) -> float:
    return float(x["float"]) if isinstance(x, dict) else float(x)


def decode_compound(record: Mapping[str, Any], registry: dict | None = None) -> CompoundResult:
    """Rebuild the :class:`~polarbeam.results.objects.CompoundResult` of a record.

    ``registry`` (a dict, shared between the compounds of one campaign) maps each shared input to
    one variable, so that those compounds stay correlated through it.
    """
    registry = {} if registry is None else registry
    variables = []
    for v in record["variables"]:
        key = (v["tag"], _unfloat(v["nominal"]), _unfloat(v["std"]))
        if v.get("shared") and key in registry:
            variables.append(registry[key])
            continue
        var = Variable(key[1], key[2], tag=v["tag"])
        if v.get("shared"):
            registry[key] = var
        variables.append(var)

    def dec(x):
        if isinstance(x, list):
            return [dec(v) for v in x]
        if not isinstance(x, dict):
            return x
        if "float" in x:
            return float(x["float"])
        if "ufloat" in x:
            lin = LinearCombination({variables[i]: _unfloat(d) for i, d in x["d"]})
            return AffineScalarFunc(_unfloat(x["ufloat"]), lin)
        if "array" in x:
            return np.array([dec(v) for v in x["array"]], dtype=float).reshape(x["shape"])
        if "tuple" in x:
            return tuple(dec(v) for v in x["tuple"])
        if "dict" in x:
            return {k: dec(v) for k, v in x["dict"]}
        if "dataclass" in x:
            cls = _CLASSES[x["dataclass"]]
            known = {f.name for f in fields(cls)}
            return cls(**{k: dec(v) for k, v in x["fields"].items() if k in known})
        raise ValueError(f"unknown record entry {sorted(x)}")

    out = dec(record["value"])
    if not isinstance(out, CompoundResult):
        raise ValueError("record does not hold a compound result")
    return out


# --------------------------------------------------------------------------------------------
# input hashes
# --------------------------------------------------------------------------------------------


def _sha(obj) -> str:
    text = json.dumps(obj, sort_keys=True, ensure_ascii=False, default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def campaign_key(campaign, settings: Mapping[str, Any] | None = None) -> str:
    """Hash of everything campaign-wide a compound's result depends on.

    The instrument, deflector and analysis tables (and any field map or waveform they name), the
    polarbeam version and extra ``settings`` — not the title or the data file names.
    """
    raw = {k: v for k, v in campaign.raw.items() if k not in ("campaign", "data")}
    return _sha(
        {
            "format": RECORD_FORMAT,
            "version": __version__,
            "layout": campaign.layout,
            "model": campaign.model,
            "raw": raw,
            "field_map": campaign.field_map,
            "waveform": campaign.waveform,
            "settings": dict(settings or {}),
        }
    )


def _data_file(campaign, key: str) -> Path:
    return (campaign.path.parent / campaign.raw["data"][key]).resolve()


def _file_sha(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _rows_by_compound(path: Path, what: str) -> dict[str, list]:
    table = read_table(path, ("compound",), what)
    out: dict[str, list] = {}
    for line, row in zip(table.lines, table.rows, strict=True):
        out.setdefault(row.get("compound", "").strip(), []).append((line, row))
    return out


def compound_hashes(campaign, key: str) -> dict[str, str]:
    """Content hash of each compound's inputs: its rows of the shifts and compounds tables, plus
    the campaign-wide ``key`` (:func:`campaign_key`).

    Row positions enter only for compounds with a row problem (their message names the line).
    """
    data = campaign.raw.get("data", {})
    comps = _data_file(campaign, "compounds")
    crows = _rows_by_compound(comps, "compounds")
    whole = {}  # files whose content every compound depends on
    if "structures" in data:
        whole["structures"] = _file_sha(_data_file(campaign, "structures"))
    if "shifts" in data:
        shifts = _data_file(campaign, "shifts")
        srows = _rows_by_compound(shifts, "shifts")
    else:  # raw scans: the drift/noise estimate may pool series, so the whole file counts
        shifts = _data_file(campaign, "scans")
        whole["scans"] = _file_sha(shifts)
        srows = {}
    if whole:
        key = _sha({"key": key, "files": whole})
    out = {}
    for cd in campaign.compounds:
        with_lines = cd.problem is not None

        def rows(table, name=cd.name, with_lines=with_lines):
            got = table.get(name, [])
            return [(ln, r) if with_lines else r for ln, r in got]

        out[cd.name] = _sha(
            {
                "key": key,
                "compound": cd.name,
                "shifts": rows(srows),
                "compounds": rows(crows),
                "files": [shifts.name, comps.name] if with_lines else None,
            }
        )
    return out


# --------------------------------------------------------------------------------------------
# the worker side
# --------------------------------------------------------------------------------------------

_WORKER_CACHE: dict[tuple[str, str], tuple] = {}


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def _failed_record(name: str, message: str, input_hash: str | None) -> tuple:
    r = CompoundResult(name, "failed", _one_line(message))
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


def _analyze_chunk(
    path: str, key: str, names: Sequence[str], settings: Mapping[str, Any]
) -> list[tuple]:
    """Analyse the named compounds of one campaign: [(name, input hash, record), ...]."""
    try:
        c, ctx, hashes, by_name = _load_for_worker(path, key, settings)
    except Exception as exc:  # the campaign could not be rebuilt here: fail these compounds
        msg = f"the worker could not load {path} ({type(exc).__name__}: {exc})"
        return [_failed_record(n, msg, None) for n in names]
    shared = _shared_inputs(ctx)
    out = []
    for name in names:
        cd = by_name.get(name)
        if cd is None:
            out.append(_failed_record(name, f"compound {name!r}: not in {path} any more", None))
            continue
        try:
            r = analyze_compound(cd, c, ctx)
            out.append((name, hashes.get(name), encode_compound(r, shared)))
        except Exception as exc:  # isolate: one compound never stops the batch
            out.append(
                _failed_record(
                    name,
                    f"compound {name!r}: unexpected error ({type(exc).__name__}: {exc})",
                    hashes.get(name),
                )
            )
    return out


def _render_chunk(items: Sequence[tuple[int, dict]]) -> list[tuple[int, dict]]:
    """Figures of recorded compounds: [(index, {kind: (svg, png)}), ...] (never raises)."""
    out = []
    for i, rec in items:
        try:
            out.append((i, compound_figure_files(decode_compound(rec))))
        except Exception:  # a figure that cannot be drawn leaves the section without it
            out.append((i, {}))
    return out


def _worker_init() -> None:  # pragma: no cover - runs in the worker processes
    # Ctrl-C is the main process's business: it stops handing out work and keeps what is done.
    signal.signal(signal.SIGINT, signal.SIG_IGN)


# --------------------------------------------------------------------------------------------
# runners: in-process, local processes, Dask
# --------------------------------------------------------------------------------------------


class _Inline:
    workers = 1

    def run(self, tasks: list[tuple], fn=None) -> Iterator[tuple[tuple, list | BaseException]]:
        fn = fn or _analyze_chunk
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
        )
        self.pool = self._make()

    def run(self, tasks, fn=None):
        from concurrent.futures import as_completed
        from concurrent.futures.process import BrokenProcessPool

        futures = {self.pool.submit(fn or _analyze_chunk, *t): t for t in tasks}
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
        try:
            from distributed import Client, LocalCluster
        except ImportError:  # pragma: no cover - depends on the install
            raise InputError(
                "--scheduler: Dask's distributed scheduler is not installed; "
                'pip install "polarbeam[batch]"'
            ) from None
        import logging

        self.cluster = None
        if scheduler == "local":
            n = jobs or os.cpu_count() or 1
            if dashboard:
                try:
                    import bokeh  # noqa: F401
                except ImportError:
                    raise InputError(
                        "--dashboard: Dask's dashboard needs bokeh; pip install 'bokeh>=3.1'"
                    ) from None
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
        self.workers = max(1, sum(self.client.nthreads().values()))
        self.dashboard_link = self.client.dashboard_link if dashboard else None

    def run(self, tasks, fn=None):
        from distributed import as_completed

        futures = {}
        for t in tasks:
            futures[self.client.submit(fn or _analyze_chunk, *t, pure=False)] = t
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


# --------------------------------------------------------------------------------------------
# the main side
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ProgressEvent:
    """A step of a batch: a campaign starts (``compound`` None) or a compound is done."""

    campaign: str
    done: int
    total: int
    compound: str | None = None
    status: str | None = None
    message: str | None = None


@dataclass(frozen=True)
class CampaignRun:
    """One campaign of a batch: where it was written and what came out (or why it stopped)."""

    name: str
    path: Path
    out: Path
    result: CampaignResult | None = None
    error: str | None = None
    reused: int = 0
    analysed: int = 0

    @property
    def exit_code(self) -> int:
        return 2 if self.result is None else self.result.exit_code


@dataclass(frozen=True)
class BatchOutcome:
    """Every campaign of a batch, in input order."""

    runs: tuple[CampaignRun, ...]
    seconds: float = 0.0

    @property
    def exit_code(self) -> int:
        """0 when nothing failed, 2 when nothing could be analysed, else 1."""
        codes = [r.exit_code for r in self.runs]
        if not codes or all(c == 2 for c in codes):
            return 2
        return 0 if all(c == 0 for c in codes) else 1

    @property
    def n_compounds(self) -> int:
        return sum(len(r.result.compounds) for r in self.runs if r.result is not None)


def _campaign_label(path: Path) -> str:
    return path.parent.name if path.name == "campaign.toml" else path.stem


def discover_campaigns(inputs: Sequence[str | Path]) -> list[tuple[str, Path]]:
    """(name, campaign file) for each input, in order.

    An input is a campaign ``.toml`` file or a folder: a folder holding ``campaign.toml`` is one
    campaign; otherwise its ``*.toml`` files and its subfolders' ``campaign.toml`` are (sorted).
    A campaign's name is its file stem, or its folder name for a file named ``campaign.toml``.
    """
    found: list[Path] = []
    for raw in inputs:
        p = Path(raw)
        if p.is_file():
            found.append(p)
        elif p.is_dir():
            if (p / "campaign.toml").is_file():
                found.append(p / "campaign.toml")
                continue
            inner = sorted(
                [q for q in p.glob("*.toml") if q.is_file()]
                + [q for q in p.glob("*/campaign.toml") if q.is_file()]
            )
            if not inner:
                raise InputError(
                    f"{p}: expected campaign .toml files or subfolders with campaign.toml, "
                    "found none"
                )
            found.extend(inner)
        elif p.suffix == ".toml":
            raise InputError(f"{p}: campaign file not found")
        else:
            raise InputError(f"{p}: campaign file or folder not found")
    out: list[tuple[str, Path]] = []
    seen: dict[str, Path] = {}
    resolved: set[Path] = set()
    for p in found:
        if p.resolve() in resolved:
            continue
        resolved.add(p.resolve())
        name = _campaign_label(p.resolve() if p.name == "campaign.toml" else p)
        if name in seen:
            raise InputError(
                f"two campaigns would be written to the same subfolder {name!r}: {seen[name]} and "
                f"{p}; rename one of them"
            )
        seen[name] = p
        out.append((name, p))
    return out


def _write_state(out: Path, **state) -> None:
    write_text_atomic(out / STATE_FILE, json.dumps(state, indent=1, ensure_ascii=False) + "\n")


def _chunks(names: list[str], workers: int) -> list[list[str]]:
    if not names:
        return []
    size = max(1, min(8, len(names) // (4 * max(1, workers)) or 1))
    if workers <= 1:
        size = 1  # in-process: each compound is written as soon as it is done
    return [names[i : i + size] for i in range(0, len(names), size)]


def _load_record(path: Path, name: str, want_hash: str) -> dict | None:
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if (
        isinstance(doc, dict)
        and doc.get("format") == RECORD_FORMAT
        and doc.get("compound") == name
        and doc.get("input_hash") == want_hash
        and isinstance(doc.get("record"), dict)
    ):
        return doc["record"]
    return None


def _record_text(name: str, input_hash: str | None, record: dict) -> str:
    value = record["value"]["fields"]
    doc = {
        "format": RECORD_FORMAT,
        "compound": name,
        "input_hash": input_hash,
        "status": value.get("status"),
        "message": value.get("message"),
        "record": record,
    }
    return json.dumps(doc, ensure_ascii=False, allow_nan=False, separators=(",", ":")) + "\n"


def _run_campaign(
    name: str,
    path: Path,
    out: Path,
    runner,
    *,
    resume: bool,
    progress: Callable[[ProgressEvent], None] | None,
    settings: Mapping[str, Any],
    html: bool,
    report_details: int | None,
) -> CampaignRun:
    c = load_campaign(path)
    if c.model == "none" or c.recoil is not None or calibration_required(c):
        # campaign-level fits (reference calibration, photon recoil) tie the compounds
        # together: analyse the campaign in one piece
        return _run_whole_campaign(name, path, out, c, html=html, report_details=report_details)
    ctx = build_context(c)
    key = campaign_key(c, settings)
    hashes = compound_hashes(c, key)
    names = [cd.name for cd in c.compounds]
    cdir = out / COMPOUND_DIR
    files = {n: cdir / f"{safe_name(n)}.json" for n in names}
    detail = {names[i] for i in detail_indices(len(names), report_details)} if html else set()
    registry: dict = {}  # campaign-wide inputs shared by the compounds decoded here
    done: dict[str, CompoundResult] = {}
    kept: dict[str, dict] = {}  # records of the compounds that get figures

    def take(cname: str, rec: dict) -> CompoundResult:
        r = decode_compound(rec, registry)
        done[cname] = r
        if cname in detail:
            kept[cname] = rec
        return r

    if resume:
        for n in names:
            rec = _load_record(files[n], n, hashes[n])
            if rec is not None:
                try:
                    take(n, rec)
                except (KeyError, TypeError, ValueError, IndexError):
                    done.pop(n, None)  # unreadable record: analyse again
    reused = len(done)
    todo = [n for n in names if n not in done]
    total = len(names)
    out.mkdir(parents=True, exist_ok=True)
    _write_state(
        out,
        complete=False,
        campaign=str(path),
        compounds_total=total,
        compounds_done=reused,
        note="interrupted or running: run again with --resume to finish",
    )
    if progress:
        progress(ProgressEvent(name, reused, total))
    if todo:
        if isinstance(runner, _Inline):  # share the already loaded campaign
            _WORKER_CACHE.clear()
            _WORKER_CACHE[(str(path), key)] = (c, ctx, hashes, {cd.name: cd for cd in c.compounds})
        tasks = [(str(path), key, chunk, dict(settings)) for chunk in _chunks(todo, runner.workers)]
        try:
            for task, got in runner.run(tasks):
                if isinstance(got, BaseException):
                    msg = f"the worker stopped ({type(got).__name__}: {got})"
                    got = [_failed_record(n, msg, None) for n in task[2]]
                for cname, h, rec in got:
                    write_text_atomic(files[cname], _record_text(cname, h, rec))
                    r = take(cname, rec)
                    if progress:
                        progress(ProgressEvent(name, len(done), total, cname, r.status, r.message))
        except KeyboardInterrupt:
            _write_state(
                out,
                complete=False,
                campaign=str(path),
                compounds_total=total,
                compounds_done=len(done),
                note="interrupted: run again with --resume to finish",
            )
            raise
    compounds = tuple(done[n] for n in names)
    result = computed_comparison(c, make_result(c, compounds, ctx))
    write_results(result, out)
    _write_phases(c, out)
    if html:
        rendered: dict[int, dict] = {}
        idx = [i for i, n in enumerate(names) if n in kept and compounds[i].status != "failed"]
        if idx and not isinstance(runner, _Inline):
            items = [(i, kept[names[i]]) for i in idx]
            step = max(1, math.ceil(len(items) / (2 * runner.workers)))
            tasks = [(items[k : k + step],) for k in range(0, len(items), step)]
            for _, got in runner.run(tasks, _render_chunk):
                if not isinstance(got, BaseException):
                    rendered.update(dict(got))
        write_html(result, out, details=report_details, rendered=rendered)
    keep = {f.name for f in files.values()}
    if cdir.is_dir():  # records of compounds no longer in the campaign
        for f in cdir.glob("*.json"):
            if f.name not in keep:
                f.unlink(missing_ok=True)
    _write_state(
        out,
        complete=True,
        campaign=str(path),
        compounds_total=total,
        compounds_done=total,
        reused=reused,
        finished_utc=time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
    )
    return CampaignRun(name, path, out, result, None, reused, len(todo))


def _write_phases(c, out: Path) -> None:
    if c.reduction is not None:  # raw scans: the reduced phases, reusable as a shifts file
        write_phases(c.reduction, out / "phases.csv")


def _run_whole_campaign(name, path, out, c, *, html: bool, report_details) -> CampaignRun:
    """Analyse a campaign whose compounds are coupled (calibration, recoil) in one process."""
    out.mkdir(parents=True, exist_ok=True)
    result = computed_comparison(c, analyze_campaign(c))
    write_results(result, out)
    _write_phases(c, out)
    if html:
        write_html(result, out, details=report_details)
    _write_state(
        out,
        complete=True,
        campaign=str(path),
        compounds_total=len(c.compounds),
        compounds_done=len(c.compounds),
        reused=0,
        finished_utc=time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
    )
    n = len(c.compounds)
    return CampaignRun(name, path, out, result, None, 0, n)


def _make_runner(jobs: int | None, scheduler: str | None, dashboard: bool):
    if scheduler:
        return _Dask(scheduler, jobs, dashboard)
    n = 1 if jobs is None else (os.cpu_count() or 1) if jobs == 0 else jobs
    if n < 0:
        raise InputError(f"--jobs: expected 0 (all cores) or a positive number, found {jobs}")
    return _Inline() if n == 1 else _Processes(n)


def run_batch(
    inputs: str | Path | Sequence[str | Path],
    out: str | Path,
    *,
    jobs: int | None = None,
    scheduler: str | None = None,
    dashboard: bool = False,
    resume: bool = False,
    progress: Callable[[ProgressEvent], None] | None = None,
    html: bool = True,
    report_details: int | None = None,
    settings: Mapping[str, Any] | None = None,
    on_runner: Callable[[Any], None] | None = None,
) -> BatchOutcome:
    """Analyse one or more campaigns, compound by compound, keeping finished work on disk.

    Parameters
    ----------
    inputs
        Campaign files or folders (:func:`discover_campaigns`).  One campaign is written directly
        into ``out``; several go to ``out/<name>/`` each, with ``out/campaigns.csv`` listing them.
    jobs
        Local worker processes (1 or None: in this process; 0: one per core).  With ``scheduler``
        the number of local Dask workers (default one per core).
    scheduler
        ``"local"`` starts a Dask distributed cluster on 127.0.0.1 (no dashboard unless
        ``dashboard``); ``"tcp://host:port"`` uses an existing one, whose workers must be able to
        read the campaign files at the same paths.
    resume
        Reuse ``out/compounds/*.json`` records whose input hash still matches.
    progress
        Called with a :class:`ProgressEvent` as each campaign starts and each compound is done;
        an exception it raises (KeyboardInterrupt included) stops the batch, keeping what is done.
    report_details
        How many compounds get figures in ``report.html`` and ``figures/`` (None: the default of
        :func:`polarbeam.report.html.write_html`; -1: all).
    settings
        Extra analysis settings that enter the input hashes.

    Raises
    ------
    InputError
        When the inputs cannot be found.  A campaign that fails to load is reported in its
        :class:`CampaignRun` (``error``) and the others go on.
    """
    if isinstance(inputs, str | Path):
        inputs = [inputs]
    out = Path(out)
    campaigns = discover_campaigns(inputs)
    settings = dict(settings or {})
    t0 = time.perf_counter()
    runner = _make_runner(jobs, scheduler, dashboard)
    if on_runner:
        on_runner(runner)
    runs = []
    try:
        single = len(campaigns) == 1
        for name, path in campaigns:
            dest = out if single else out / name
            try:
                runs.append(
                    _run_campaign(
                        name,
                        path,
                        dest,
                        runner,
                        resume=resume,
                        progress=progress,
                        settings=settings,
                        html=html,
                        report_details=report_details,
                    )
                )
            except PolarbeamError as exc:
                if single:
                    raise
                runs.append(CampaignRun(name, path, dest, None, _one_line(str(exc))))
    finally:
        runner.close()
    outcome = BatchOutcome(tuple(runs), time.perf_counter() - t0)
    if len(campaigns) > 1:
        _write_index(out, outcome)
    return outcome


def _write_index(out: Path, outcome: BatchOutcome) -> None:
    import csv
    import io

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["campaign", "source", "folder", "compounds", "ok", "warning", "failed", "error"])
    for r in outcome.runs:
        counts = {"ok": 0, "warning": 0, "failed": 0}
        if r.result is not None:
            for c in r.result.compounds:
                counts[c.status] += 1
        w.writerow(
            [
                r.name,
                str(r.path),
                r.out.name,
                len(r.result.compounds) if r.result is not None else 0,
                counts["ok"],
                counts["warning"],
                counts["failed"],
                r.error or "",
            ]
        )
    write_text_atomic(out / "campaigns.csv", buf.getvalue())


# --------------------------------------------------------------------------------------------
# terminal progress (used by the CLI)
# --------------------------------------------------------------------------------------------


class TerminalProgress:
    """Progress on stderr: a rich bar with ETA on a terminal, plain lines otherwise."""

    def __init__(self, stream=None, *, plain: bool | None = None, every_s: float = 5.0):
        self.stream = stream or sys.stderr
        tty = getattr(self.stream, "isatty", lambda: False)()
        self.plain = (not tty) if plain is None else plain
        self.every_s = every_s
        self._bar = None
        self._task = None
        self._last = 0.0
        self._first: tuple[float, int] | None = None
        if not self.plain:
            try:
                from rich.console import Console
                from rich.progress import (
                    BarColumn,
                    MofNCompleteColumn,
                    Progress,
                    TextColumn,
                    TimeElapsedColumn,
                    TimeRemainingColumn,
                )
            except ImportError:
                self.plain = True
            else:
                self._bar = Progress(
                    TextColumn("{task.description}"),
                    BarColumn(),
                    MofNCompleteColumn(),
                    TimeElapsedColumn(),
                    TextColumn("ETA"),
                    TimeRemainingColumn(),
                    console=Console(file=self.stream),
                    transient=False,
                )
                self._bar.start()

    def _line(self, text: str) -> None:
        print(text, file=self.stream, flush=True)

    def __call__(self, ev: ProgressEvent) -> None:
        now = time.perf_counter()
        if ev.compound is None:
            self._first, self._last = None, now
            if self._bar is not None:
                if self._task is not None:
                    self._bar.stop_task(self._task)
                self._task = self._bar.add_task(ev.campaign, total=ev.total, completed=ev.done)
            else:
                extra = f" ({ev.done} reused)" if ev.done else ""
                self._line(f"{ev.campaign}: {ev.total} compound(s){extra}")
            return
        if ev.status == "failed":
            msg = f"failed: {ev.compound}: {ev.message}"
            if self._bar is not None:
                self._bar.console.print(msg, markup=False, highlight=False)
            else:
                self._line(f"{ev.campaign}: {msg}")
        if self._bar is not None:
            self._bar.update(self._task, completed=ev.done)
            return
        if self._first is None:  # rates from the first result on (workers take a while to start)
            self._first = (now, ev.done)
            self._last = now
        if ev.done == ev.total or now - self._last >= self.every_s:
            self._last = now
            t1, d1 = self._first
            rate = (ev.done - d1) / (now - t1) if now > t1 else 0.0
            left = (ev.total - ev.done) / rate if rate > 0 else math.inf
            eta = f", ETA {left:.0f} s" if math.isfinite(left) and ev.done < ev.total else ""
            speed = f" ({rate:.1f}/s{eta})" if rate > 0 else ""
            self._line(f"{ev.campaign}: {ev.done}/{ev.total} compounds{speed}")

    def close(self) -> None:
        if self._bar is not None:
            self._bar.stop()
            self._bar = None


def run_cli(
    campaigns: Sequence[Path],
    out: Path,
    *,
    quiet: bool = False,
    jobs: int | None = None,
    scheduler: str | None = None,
    dashboard: bool = False,
    resume: bool = False,
    report_details: int | None = None,
    echo: Callable[..., None] = print,
    table_limit: int = 40,
) -> int:
    """The ``polarbeam analyze`` command: run the batch, print the outcome, return the exit code.

    Ctrl-C stops handing out work; what is done stays in ``out`` for ``--resume``.
    """
    if dashboard and scheduler != "local":
        raise InputError("--dashboard: only with --scheduler local")
    bar = None if quiet else TerminalProgress()

    def on_runner(runner):
        link = getattr(runner, "dashboard_link", None)
        if link:
            echo(f"Dask dashboard: {link}", err=True)

    try:
        outcome = run_batch(
            campaigns,
            out,
            jobs=jobs,
            scheduler=scheduler,
            dashboard=dashboard,
            resume=resume,
            progress=bar,
            report_details=report_details,
            on_runner=on_runner,
        )
    except KeyboardInterrupt:
        if bar is not None:
            bar.close()
        echo(
            f"interrupted: finished compounds are kept in {out}/; run the same command with "
            "--resume to complete it",
            err=True,
        )
        return 130
    finally:
        if bar is not None:
            bar.close()
    for run in outcome.runs:
        if run.result is None:
            echo(f"error: {run.name}: {run.error}", err=True)
            continue
        r = run.result
        if not quiet:
            if len(r.compounds) <= table_limit:
                echo(render_terminal(r))
            n_fail = r.n_failed
            n_warn = sum(c.status == "warning" for c in r.compounds)
            reused = f", {run.reused} reused" if run.reused else ""
            echo(
                f"{run.name}: {len(r.compounds)} compound(s), {n_fail} failed, {n_warn} with "
                f"warnings{reused}; written to {run.out}/ (series.csv, properties.csv, "
                "results.json, report.md, report.html)"
            )
        if quiet or len(r.compounds) > table_limit:
            for c in r.compounds:
                if c.status == "failed":
                    echo(f"failed: {c.compound}: {c.message}", err=True)
        for c in getattr(getattr(r, "recoil", None), "compounds", ()):  # photon recoil
            if c.status == "failed":
                echo(f"failed (recoil): {c.compound}: {c.message}", err=True)
    if not quiet:
        echo(f"{outcome.n_compounds} compound(s) in {outcome.seconds:.1f} s")
    return outcome.exit_code
