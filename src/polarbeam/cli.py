"""Command-line interface: a thin typer layer over the Python API.

Exit codes: 0 all compounds analysed, 1 some compounds failed, 2 every compound failed or the
input is structurally wrong (the error is printed as one line, never a traceback).
"""

from __future__ import annotations

import sys
from pathlib import Path

import typer

from .errors import PolarbeamError

__all__ = ["app", "main"]

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    help="polarbeam: polarizabilities and dipole moments from beam-deflection campaigns.",
)


def _fail(exc: Exception, code: int = 2):
    typer.echo(f"error: {exc}", err=True)
    raise typer.Exit(code)


@app.command()
def analyze(
    campaigns: list[Path] = typer.Argument(
        ..., help="campaign.toml file(s), or folder(s) of campaigns"
    ),
    out: Path = typer.Option(Path("results"), "--out", "-o", help="results folder"),
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
):
    """Analyse campaigns: α_eff per series, α and μ per compound, report and budgets."""
    from .batch import run_cli

    try:
        code = run_cli(
            campaigns,
            out,
            quiet=quiet,
            jobs=jobs,
            scheduler=scheduler,
            dashboard=dashboard,
            resume=resume,
            report_details=report_details,
            echo=typer.echo,
        )
    except PolarbeamError as exc:
        _fail(exc)
    raise typer.Exit(code)


@app.command()
def simulate(
    out: Path = typer.Option(..., "--out", "-o", help="folder to write the campaign into"),
    seed: int = typer.Option(0, help="random seed"),
    layout: str = typer.Option("talbot-lau", help="talbot-lau, beam-profile or time-domain"),
):
    """Write a simulated campaign (random compound, known truth) in the input contract."""
    import json

    import numpy as np

    from .simulate import CompoundTruth, InstrumentSpec, simulate_campaign

    specs = {
        "talbot-lau": InstrumentSpec.talbot_lau,
        "beam-profile": InstrumentSpec.beam_profile,
        "time-domain": InstrumentSpec.time_domain,
    }
    if layout not in specs:
        _fail(PolarbeamError(f"--layout: expected one of {', '.join(specs)}, found {layout!r}"))
    rng = np.random.default_rng(seed)
    comp = CompoundTruth(
        "sample-1",
        float(rng.uniform(80, 600)),
        float(rng.uniform(10, 80)),
        float(rng.uniform(0, 3)),
        (300.0, 400.0, 500.0, 600.0),
    )
    truth = simulate_campaign(out, [comp], spec=specs[layout](), seed=rng)
    typer.echo(
        json.dumps(
            {
                "alpha_A3": comp.alpha_A3,
                "dipole_D": comp.dipole_D,
                "campaign": str(truth.path / "campaign.toml"),
            }
        )
    )


@app.command()
def demo(out: Path = typer.Option(Path("examples/demo"), "--out", "-o")):
    """Rewrite the invented demo campaign (deterministic)."""
    from .demo import write_demo

    write_demo(out)
    typer.echo(f"demo campaign written to {out}/campaign.toml")


def main() -> None:  # pragma: no cover - entry point
    try:
        app()
    except KeyboardInterrupt:
        typer.echo("interrupted", err=True)
        sys.exit(130)
