"""Writing a results folder: the one sequence every entry point (analyze, batch) follows."""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path

from polarbeam._util.outfolder import output_folder
from polarbeam.reduction import write_phases
from polarbeam.report.folder import write_report
from polarbeam.results.objects import CampaignResult

__all__ = ["write_outputs"]


def write_outputs(
    result: CampaignResult,
    out: str | Path,
    *,
    reduction=None,
    html: bool = True,
    details: int | None = None,
    rendered: Mapping[int, Mapping[str, tuple[str, bytes]]] | None = None,
    pdf: bool = False,
) -> None:
    """:func:`write_report`, then ``phases.csv`` when the campaign was reduced from raw scans."""
    with output_folder(out):  # one run at a time; only polarbeam's own files are replaced
        write_report(result, out, html=html, details=details, rendered=rendered, pdf=pdf)
        if reduction is not None:  # the reduced phases, reusable as a shifts file
            write_phases(reduction, Path(out) / "phases.csv")
