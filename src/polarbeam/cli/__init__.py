"""Command-line interface: typer commands over the public Python API."""

from polarbeam.cli.commands import main

__all__ = ["main"]
