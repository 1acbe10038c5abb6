"""Command-line interface: typer commands over the public Python API (``polarbeam.<name>``).

Each command reaches the stage it needs through the package's lazy façade, so ``--help`` and
argument errors cost no scientific imports.

Exit codes: 0 all compounds analysed, 1 some compounds failed, 2 every compound failed or the
input is structurally wrong (the error is printed as one line, never a traceback).
"""

from __future__ import annotations

import sys
from pathlib import Path

import typer

import polarbeam as pb  # the public API, loaded on first use (a fast `--help`)
from polarbeam._util.text import terminal_safe
from polarbeam.errors import PolarbeamError

__all__ = ["app", "main"]

app = typer.Typer(
    add_completion=False,
    pretty_exceptions_enable=False,
    no_args_is_help=True,
    # plain help: Rich markup would swallow the bracketed words of the contract ([data], [qc])
    rich_markup_mode=None,
    help="polarbeam: polarizabilities and dipole moments from beam-deflection campaigns.",
)


def _print_version(value: bool) -> None:
    if value:
        typer.echo(f"polarbeam {pb.__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: bool = typer.Option(
        False,
        "--version",
        help="Print the polarbeam version and exit.",
        is_eager=True,
        callback=_print_version,
    ),
) -> None:
    """polarbeam: polarizabilities and dipole moments from beam-deflection campaigns."""


def _fail(exc: Exception, code: int = 2):
    typer.echo(f"error: {exc}", err=True)
    raise typer.Exit(code)


@app.command()
def analyze(
    campaigns: list[Path] = typer.Argument(
        ..., help="campaign.toml file(s), or folder(s) of campaigns"
    ),
    out: Path = typer.Option(..., "--out", "-o", help="folder to write the results into"),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="no terminal table or progress"),
    jobs: int = typer.Option(
        None,
        "--jobs",
        "-j",
        help="worker processes (default 1: in this process; 0: one per core; with "
        "--scheduler local: Dask workers, default one per core)",
    ),
    scheduler: str = typer.Option(
        None,
        "--scheduler",
        help="run on Dask: 'local' starts a cluster on 127.0.0.1, or tcp://host:port of a "
        "running scheduler (its workers must see the campaign files at the same paths)",
    ),
    dashboard: bool = typer.Option(
        False, "--dashboard", help="with --scheduler local: serve Dask's dashboard on 127.0.0.1"
    ),
    resume: bool = typer.Option(
        False, "--resume", help="keep compounds already done whose inputs are unchanged"
    ),
    report_details: int = typer.Option(
        None,
        "--report-details",
        help="compounds given figures in report.html and figures/ (default 20; -1: all)",
    ),
    pdf: bool = typer.Option(
        False, "--pdf", help="also write every figure as PDF in figures/ (SVG and PNG always)"
    ),
):
    """Analyse campaigns: α_eff per series, α and μ per compound, report and budgets."""
    try:
        code = pb.run_cli(
            campaigns,
            out,
            quiet=quiet,
            jobs=jobs,
            scheduler=scheduler,
            dashboard=dashboard,
            resume=resume,
            report_details=report_details,
            pdf=pdf,
            echo=typer.echo,
        )
    except PolarbeamError as exc:
        _fail(exc)
    raise typer.Exit(code)


@app.command()
def reduce(
    campaign: Path = typer.Argument(..., help="campaign.toml with [data] scans"),
    out: Path = typer.Option(..., "--out", "-o", help="file to write the phases to (.csv)"),
):
    """Reduce raw fringe scans to drift-corrected phases (one row per non-reference scan)."""
    try:
        camp = pb.load_campaign(campaign)
        if camp.reduction is None:
            raise PolarbeamError(
                f"{campaign.name} [data] scans: expected a raw-scan file to reduce, found none"
            )
    except PolarbeamError as exc:
        _fail(exc)
    for w in camp.warnings:
        typer.echo(f"warning: {w}", err=True)
    pb.write_phases(camp.reduction, out)
    t = camp.reduction.table
    kept = int(t["phase_rad"].notna().sum())
    typer.echo(
        f"{kept} of {len(t)} scans reduced ({len(t) - kept} dropped, flagged); written to {out}"
    )
    for msg in camp.reduction.messages:
        typer.echo(f"note: {msg}", err=True)


@app.command()
def plan(
    campaign: Path = typer.Argument(..., help="campaign.toml with a [plan] table and no data"),
    out: Path = typer.Option(..., "--out", "-o", help="folder to write the plan into"),
    rehearsal: bool = typer.Option(True, help="write rehearsal/ (simulated raw scans)"),
):
    """Plan a campaign: predicted phases, voltage ladders, expected precision, beam time."""
    try:
        result = pb.make_plan(campaign)
        pb.write_plan(result, out, rehearsal=rehearsal and result.settings.rehearsal)
    except PolarbeamError as exc:
        _fail(exc)
    table = result.table()
    if len(table):
        cols = [
            "compound",
            "temperature_K",
            "alpha_eff_pred_A3",
            "alpha_eff_expected_err_A3",
            "voltage_max_V",
            "beam_time_h",
        ]
        typer.echo(table[cols].to_string(index=False, float_format=lambda x: f"{x:.4g}"))
    typer.echo(f"plan written to {out}/ (plan.csv, plan.json, plan.md, plots, rehearsal/)")
    for c in result.compounds:
        if c.status == "failed":
            typer.echo(f"failed: {terminal_safe(c.compound)}: {terminal_safe(c.message)}", err=True)
    raise typer.Exit(result.exit_code)


@app.command()
def estimate(
    input: Path = typer.Argument(..., help="CSV with compound, smiles (+ any columns) or an SDF"),
    out: Path = typer.Option(..., "--out", "-o", help="file to write the estimates to (.csv)"),
    dipoles: bool = typer.Option(False, "--dipoles", help="conformer dipoles (slower)"),
    conformers: int = typer.Option(10, help="conformers per molecule for --dipoles"),
    seed: int = typer.Option(61453, help="random seed of the conformer embedding"),
    temperature: str = typer.Option(
        "300 K",
        help='temperature of the Boltzmann average, "300 K" (a bare number is in K)',
    ),
    jobs: int = typer.Option(
        1, "--jobs", "-j", min=0, help="processes for --dipoles (default 1; 0: one per core)"
    ),
):
    """Structure-based estimates (additive α, mass, dipoles) for a library without measurements."""
    try:
        counts = pb.estimate_table(
            input,
            out,
            dipoles=dipoles,
            conformers=conformers,
            seed=seed,
            temperature_K=pb.parse_temperature(temperature),
            jobs=jobs,
        )
    except PolarbeamError as exc:
        _fail(exc)
    typer.echo(
        f"{counts['ok']} of {counts['rows']} rows estimated, {counts['failed']} failed; "
        f"written to {out}"
    )
    raise typer.Exit(0 if counts["failed"] == 0 else (2 if counts["ok"] == 0 else 1))


@app.command()
def compute(
    input: str = typer.Argument(
        ..., help="SMILES, a .xyz/.sdf/.mol file, or a CSV compound,smiles"
    ),
    method: str = typer.Option("b3lyp", help="hf or a DFT functional known to PySCF"),
    basis: str = typer.Option("def2-svpd", help="basis set"),
    out: Path = typer.Option(
        ..., "--out", "-o", help="file to write the results to (computed.csv)"
    ),
    name: str | None = typer.Option(
        None,
        "--name",
        help="compound name of a single SMILES or structure file (default: the SMILES or the "
        "file stem; a CSV names its rows)",
    ),
    polarizability: str = typer.Option("analytic", help="analytic (CPHF/CPKS) or finite-field"),
    max_seconds: str = typer.Option(
        "1800 s",
        "--max-seconds",
        help='refuse calculations estimated to take longer, "30 min" (a bare number is in s)',
    ),
    d4: bool = typer.Option(False, "--d4", help="fast D4-model polarizability instead of SCF"),
    conformers: int = typer.Option(
        0,
        "--conformers",
        help="N > 0: dipole sqrt<mu^2>(T) Boltzmann-averaged over the SCF dipoles of the "
        "distinct low-energy conformers of N embeddings (alpha from the lowest)",
    ),
    temperature: str = typer.Option(
        "300 K",
        help='temperature of the conformer average, "300 K" (a bare number is in K)',
    ),
):
    """Compute static polarizabilities and dipoles with PySCF (extra polarbeam[qc]); cached."""
    try:
        temperature_K = pb.parse_temperature(temperature, positive=False)  # checked below
        seconds = pb.parse_duration(max_seconds)
        pb.qchem.check_conformer_options(conformers, temperature_K)
        pb.qchem.check_scheme(polarizability)
        jobs = pb.qchem.compute_jobs(input, name)
    except PolarbeamError as exc:
        _fail(exc)
    what = pb.qchem.describe_run(
        method,
        basis,
        polarizability=polarizability,
        d4=d4,
        conformers=conformers,
        temperature_K=temperature_K,
    )

    def progress(step, total, message):
        typer.echo(f"  [{step}/{total}] {message}", err=True)

    typer.echo(f"compute: {what}; {len(jobs)} molecule(s) -> {out}", err=True)
    results, failures = pb.qchem.compute_library(
        jobs,
        method,
        basis,
        polarizability=polarizability,
        max_seconds=seconds,
        d4=d4,
        conformers=conformers,
        temperature_K=temperature_K,
        progress=progress,
        on_start=lambda job: typer.echo(f"{terminal_safe(job)}:", err=True),
        on_failure=lambda job, message: typer.echo(
            f"failed: {terminal_safe(job)}: {terminal_safe(message)}", err=True
        ),
        ways_out=pb.qchem.CLI_WAYS_OUT,
    )
    if results:
        pb.qchem.write_computed(results, out)
        typer.echo(f"{len(results)} result(s) written to {out}")
    raise typer.Exit(0 if not failures else (2 if not results else 1))


@app.command()
def simulate(
    out: Path = typer.Option(..., "--out", "-o", help="folder to write the campaign into"),
    seed: int = typer.Option(0, help="random seed"),
    layout: str = typer.Option("talbot-lau", help="talbot-lau, beam-profile or time-domain"),
):
    """Write a simulated campaign (random compound) in the input contract, its truth.json beside."""
    import json

    try:
        truth, comp = pb.simulate_random_campaign(out, seed, layout)
    except PolarbeamError as exc:
        _fail(exc)
    typer.echo(
        json.dumps(
            {
                "alpha_A3": comp.alpha_A3,
                "dipole_D": comp.dipole_D,
                "campaign": str(truth.path / "campaign.toml"),
                "truth": str(truth.path / "truth.json"),
            }
        )
    )


@app.command()
def field(
    campaign: Path = typer.Argument(..., help="campaign.toml"),
    voltage: str = typer.Option(..., "--voltage", help='voltage between the electrodes, "10 kV"'),
    as_json: bool = typer.Option(False, "--json", help="print one JSON object (SI units)"),
    plot: Path | None = typer.Option(
        None, "--plot", help="file to save the equipotentials and the beam to (.png, .svg, .pdf)"
    ),
):
    """Deflector field at the beam: E, ∂E/∂x, E·∂E/∂x, g, its variation and numerical error."""
    import json

    try:
        report = pb.deflector_field(campaign, voltage)
        if plot is not None:
            pb.plot_deflector_field(campaign, plot, voltage)
    except PolarbeamError as exc:
        _fail(exc)
    typer.echo(json.dumps(report.summary(), ensure_ascii=False) if as_json else report.to_text())
    if plot is not None and not as_json:
        typer.echo(f"cross-section plot written to {plot}")


@app.command()
def demo(
    out: Path = typer.Option(..., "--out", "-o", help="folder to write the demo campaign into"),
    scans: bool = typer.Option(False, "--scans", help="the raw-scan variant instead"),
):
    """Rewrite the invented demo campaign (deterministic)."""
    try:
        (pb.write_demo_scans if scans else pb.write_demo)(out)
    except PolarbeamError as exc:
        _fail(exc)
    typer.echo(f"demo campaign written to {out}/campaign.toml")


def main() -> None:  # pragma: no cover - entry point
    try:
        app()
    except KeyboardInterrupt:
        typer.echo("interrupted", err=True)
        sys.exit(130)
    except PolarbeamError as exc:
        typer.echo(f"error: {exc}", err=True)
        sys.exit(2)
    except Exception as exc:  # a bug, not bad input: still one line, and say so
        typer.echo(
            f"error: internal error ({type(exc).__name__}: {exc}); please report it", err=True
        )
        sys.exit(2)
