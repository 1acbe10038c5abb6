"""Batches: many campaigns, thousands of compounds, several processes or a Dask cluster.

Work is split per compound.  A worker rebuilds the campaign itself from the campaign path
(:func:`~polarbeam.contract.campaign.load_campaign` and
:func:`~polarbeam.extraction.context.build_context`, cached per process;
:mod:`polarbeam.batch.workers`) and sends back each compound's result as a plain, JSON-ready
*record* (:func:`~polarbeam.batch.records.encode_compound`).  Records carry every
correlated :mod:`uncertainties` value exactly: the nominal value, the derivative with respect to
each independent input and that input's tag and σ, so
:func:`~polarbeam.batch.records.decode_compound` rebuilds values with the same errors, budgets and
correlations.  Inputs stated for the whole campaign (geometry, field) are shared between the
compounds decoded together, as they are in an in-process run.

The main process writes each record as soon as it arrives to ``out/compounds/<name>.json``
(atomically) together with the content hash of that compound's inputs, so an interrupted batch
keeps its finished work and ``resume=True`` only analyses what is missing or changed.  The final
``series.csv``, ``properties.csv``, ``results.json``, ``report.md`` and ``report.html`` are
assembled from the records, in input order: the same inputs give the same bytes whatever the
number of processes or the scheduler.

Every route (in-process, local processes, Dask) goes through the same encode → decode step.
This module holds the orchestration: :func:`run_batch` and the ``polarbeam analyze`` command
(:func:`run_cli`).
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import Any

from polarbeam._util.atomic import write_text_atomic
from polarbeam._util.outfolder import held_folder, output_folder, written_files
from polarbeam._util.text import safe_name
from polarbeam.batch.inputs import campaign_key, compound_hashes, discover_campaigns
from polarbeam.batch.progress import ProgressEvent, TerminalProgress
from polarbeam.batch.records import decode_compound
from polarbeam.batch.state import (
    COMPOUND_DIR,
    BatchOutcome,
    CampaignRun,
    load_record,
    record_text,
    result_compounds,
    write_index,
    write_state,
)
from polarbeam.batch.workers import (
    InlineRunner,
    chunks,
    failed_record,
    make_runner,
    one_line,
    prime_worker_cache,
    render_chunk,
)
from polarbeam.calibration.calibrate import calibration_required
from polarbeam.contract.campaign import load_campaign
from polarbeam.errors import InputError, PolarbeamError
from polarbeam.pipeline.analysis import (
    analyze_campaign,
    build_context,
    computed_comparison,
    make_result,
)
from polarbeam.pipeline.outputs import write_outputs
from polarbeam.report.figure_cache import figures_unchanged
from polarbeam.report.files import render_terminal
from polarbeam.report.html import detail_indices
from polarbeam.results.objects import CompoundResult

__all__ = ["run_batch", "run_cli"]


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
    pdf: bool = False,
) -> CampaignRun:
    c = load_campaign(path)
    if (
        c.model == "none"
        or c.recoil is not None
        or c.visibility is not None
        or calibration_required(c)
    ):
        # campaign-level fits (reference calibration, photon recoil) tie the compounds
        # together: analyse the campaign in one piece
        return _run_whole_campaign(
            name, path, out, c, html=html, report_details=report_details, pdf=pdf
        )
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
            rec = load_record(files[n], n, hashes[n])
            if rec is not None:
                try:
                    take(n, rec)
                except (KeyError, TypeError, ValueError, IndexError):
                    done.pop(n, None)  # unreadable record: analyse again
    reused = len(done)
    todo = [n for n in names if n not in done]
    held = held_folder(out)  # run_batch holds ``out`` for this run
    if held is not None:
        held.keep(files[n] for n in names if n in done)  # reused records stay polarbeam's
        held.expect(files[n] for n in todo)  # listed before they are written: one update
    total = len(names)
    out.mkdir(parents=True, exist_ok=True)
    write_state(
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
        if isinstance(runner, InlineRunner):  # share the already loaded campaign
            by_name = {cd.name: cd for cd in c.compounds}
            prime_worker_cache(str(path), key, (c, ctx, hashes, by_name))
        tasks = [(str(path), key, chunk, dict(settings)) for chunk in chunks(todo, runner.workers)]
        saved: set[str] = set()  # records on disk from this run (counted before decoding)
        try:
            for task, got in runner.run(tasks):
                if isinstance(got, BaseException):
                    msg = f"the worker stopped ({type(got).__name__}: {got})"
                    got = [failed_record(n, msg, None) for n in task[2]]
                for cname, h, rec in got:
                    write_text_atomic(files[cname], record_text(cname, h, rec))
                    saved.add(cname)
                    r = take(cname, rec)
                    if progress:
                        progress(ProgressEvent(name, len(done), total, cname, r.status, r.message))
        except KeyboardInterrupt:
            # a Ctrl-C while a record was being decoded still counts the record on disk
            write_state(
                out,
                complete=False,
                campaign=str(path),
                compounds_total=total,
                compounds_done=reused + len(saved),
                note="interrupted: run again with --resume to finish",
            )
            raise
    compounds = tuple(done[n] for n in names)
    result = computed_comparison(c, make_result(c, compounds, ctx))
    rendered: dict[int, dict] = {}
    if html and not pdf:  # PDFs are drawn with the report, in this process
        idx = [i for i, n in enumerate(names) if n in kept and compounds[i].status != "failed"]
        idx = [i for i in idx if not figures_unchanged(out, result.compounds[i])]
        if idx and not isinstance(runner, InlineRunner):
            items = [(i, kept[names[i]]) for i in idx]
            step = max(1, math.ceil(len(items) / (2 * runner.workers)))
            magnetic = result.deflector_field == "magnetic"  # χ and moment figures
            tasks = [(items[k : k + step], magnetic) for k in range(0, len(items), step)]
            for _, got in runner.run(tasks, render_chunk):
                if not isinstance(got, BaseException):
                    rendered.update(dict(got))
    write_outputs(
        result,
        out,
        reduction=c.reduction,
        html=html,
        details=report_details,
        rendered=rendered,
        pdf=pdf,
    )
    # records of compounds no longer in the campaign go with the other files of the previous run
    # that were not written again (only files polarbeam listed: polarbeam._util.outfolder)
    write_state(
        out,
        complete=True,
        campaign=str(path),
        compounds_total=total,
        compounds_done=total,
        reused=reused,
        finished_utc=time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
    )
    return CampaignRun(name, path, out, result, None, reused, len(todo))


def _run_whole_campaign(
    name, path, out, c, *, html: bool, report_details, pdf: bool = False
) -> CampaignRun:
    """Analyse a campaign whose compounds are coupled (calibration, recoil) in one process."""
    out.mkdir(parents=True, exist_ok=True)
    result = computed_comparison(c, analyze_campaign(c))
    write_outputs(result, out, reduction=c.reduction, html=html, details=report_details, pdf=pdf)
    write_state(
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
    pdf: bool = False,
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
    pdf
        Also write every figure as PDF in ``figures/`` (drawn with the report, in this process).
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
    # one run at a time in ``out`` (FolderInUseError for a second one), before any work starts
    with output_folder(out, resume=resume):
        runner = make_runner(jobs, scheduler, dashboard)
        if on_runner:
            on_runner(runner)
        runs = []
        try:
            single = len(campaigns) == 1
            for name, path in campaigns:
                dest = out if single else out / name
                try:
                    with output_folder(dest, resume=resume):
                        run = _run_campaign(
                            name,
                            path,
                            dest,
                            runner,
                            resume=resume,
                            progress=progress,
                            settings=settings,
                            html=html,
                            report_details=report_details,
                            pdf=pdf,
                        )
                    runs.append(run)
                except PolarbeamError as exc:
                    if single:
                        raise
                    runs.append(CampaignRun(name, path, dest, None, one_line(str(exc))))
        finally:
            runner.close()
        outcome = BatchOutcome(tuple(runs), time.perf_counter() - t0)
        if len(campaigns) > 1:
            write_index(out, outcome)
    return outcome


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
    pdf: bool = False,
    echo: Callable[..., None] = print,
    table_limit: int = 40,
) -> int:
    """The ``polarbeam analyze`` command: run the batch, print the outcome, return the exit code.

    Ctrl-C stops handing out work; what is done stays in ``out`` for ``--resume``.
    """
    if dashboard and scheduler != "local":
        raise InputError("--dashboard: only with --scheduler local")
    if Path(out).exists() and not Path(out).is_dir():
        raise InputError(f"{out}: --out expected a folder, found a file")
    if report_details is not None and report_details < -1:
        raise InputError(
            "--report-details: expected -1 (every compound) or a count >= 0, "
            f"found {report_details}"
        )
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
            pdf=pdf,
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
        where = f"{run.name}: " if len(outcome.runs) > 1 else ""
        for w in r.input_warnings:  # implausible inputs: likely unit slips
            echo(f"warning: {where}{w}", err=True)
        if not quiet:
            if len(r.compounds) <= table_limit:
                echo(render_terminal(r))
            n_fail = r.n_failed
            n_warn = sum(c.status == "warning" for c in r.compounds)
            reused = f", {run.reused} reused" if run.reused else ""
            echo(
                f"{run.name}: {len(result_compounds(r))} compound(s), {n_fail} failed, "
                f"{n_warn} with "
                f"warnings{reused}; written to {run.out}/ "
                f"({', '.join(written_files(run.out)) or 'no files'})"
            )
        if quiet or len(r.compounds) > table_limit:
            for c in r.compounds:
                if c.status == "failed":
                    echo(f"failed: {c.compound}: {c.message}", err=True)
        for c in getattr(getattr(r, "recoil", None), "compounds", ()):  # photon recoil
            if c.status == "failed":
                echo(f"failed (recoil): {c.compound}: {c.message}", err=True)
        for c in getattr(getattr(r, "optical", None), "compounds", ()):  # fringe visibilities
            if c.status == "failed":
                echo(f"failed (visibility): {c.compound}: {c.message}", err=True)
    if not quiet:
        rate = outcome.n_compounds / outcome.seconds if outcome.seconds > 0 else 0.0
        echo(f"{outcome.n_compounds} compound(s) in {outcome.seconds:.1f} s ({rate:.1f}/s)")
    return outcome.exit_code
