"""Writing a results folder: the one sequence every entry point (analyze, batch) follows."""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path

from polarbeam.reduction import write_phases
from polarbeam.report.files import write_results
from polarbeam.report.html import write_html
from polarbeam.results.objects import CampaignResult

__all__ = ["write_outputs", "write_report"]


def write_report(
    result: CampaignResult,
    out: str | Path,
    *,
    html: bool = True,
    details: int | None = None,
    rendered: Mapping[int, Mapping[str, tuple[str, bytes]]] | None = None,
) -> None:
    """Write the results folder of ``result``: CSV, JSON, Markdown and (unless ``html=False``)
    ``report.html`` with ``figures/``; ``details`` limits the compounds with figure sections and
    ``rendered`` holds figures already drawn elsewhere (by compound index, as
    :func:`~polarbeam.report.html.write_html` takes them)."""
    write_results(result, out)
    if html:
        write_html(result, out, details=details, rendered=rendered)


def write_outputs(
    result: CampaignResult,
    out: str | Path,
    *,
    reduction=None,
    html: bool = True,
    details: int | None = None,
    rendered: Mapping[int, Mapping[str, tuple[str, bytes]]] | None = None,
) -> None:
    """:func:`write_report`, then ``phases.csv`` when the campaign was reduced from raw scans."""
    write_report(result, out, html=html, details=details, rendered=rendered)
    if reduction is not None:  # the reduced phases, reusable as a shifts file
        write_phases(reduction, Path(out) / "phases.csv")
