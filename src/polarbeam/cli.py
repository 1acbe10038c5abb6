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
    campaign: Path = typer.Argument(..., help="campaign.toml"),
    out: Path = typer.Option(Path("results"), "--out", "-o", help="results folder"),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="no terminal table"),
):
    """Analyse a campaign: α_eff per series, α and μ per compound, report and budgets."""
    from .pipeline import analyze as run
    from .report import render_terminal

    try:
        result = run(campaign, out)
    except PolarbeamError as exc:
        _fail(exc)
    if not quiet:
        typer.echo(render_terminal(result))
        typer.echo(
            f"results written to {out}/ (series.csv, properties.csv, results.json, report.md)"
        )
    for c in result.compounds:
        if c.status == "failed":
            typer.echo(f"failed: {c.compound}: {c.message}", err=True)
    raise typer.Exit(result.exit_code)


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
def field(
    campaign: Path = typer.Argument(..., help="campaign.toml"),
    voltage: str = typer.Option(..., "--voltage", help='voltage between the electrodes, "10 kV"'),
    as_json: bool = typer.Option(False, "--json", help="print one JSON object (SI units)"),
    plot: Path | None = typer.Option(None, "--plot", help="save equipotentials and the beam"),
):
    """Deflector field at the beam: E, ∂E/∂x, E·∂E/∂x, g, its variation and numerical error."""
    import json

    from .fieldmodel import deflector_field, plot_deflector_field

    try:
        report = deflector_field(campaign, voltage)
        if plot is not None:
            plot_deflector_field(campaign, plot, voltage)
    except PolarbeamError as exc:
        _fail(exc)
    typer.echo(json.dumps(report.summary(), ensure_ascii=False) if as_json else report.to_text())
    if plot is not None and not as_json:
        typer.echo(f"cross-section plot written to {plot}")


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
