"""A results folder: the renderers in their order, and their registration with the results.

:mod:`polarbeam.results` never imports the renderers; importing :mod:`polarbeam.report` registers
them (the pattern of a reader/writer registry), so ``CampaignResult.to_markdown()`` and
``to_report(path)`` work once the report stage is loaded — which every entry point that makes a
result (``polarbeam.analyze``, the pipeline, the batch) does.
"""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path

from polarbeam._util.outfolder import output_folder
from polarbeam.report.files import render_markdown, write_results
from polarbeam.report.html import write_html
from polarbeam.report.velocities import write_velocities
from polarbeam.results.objects import CampaignResult, register_writer, writer

__all__ = ["write_report"]


def write_report(
    result: CampaignResult,
    out: str | Path,
    *,
    html: bool = True,
    details: int | None = None,
    rendered: Mapping[int, Mapping[str, tuple[str, bytes]]] | None = None,
    pdf: bool = False,
) -> None:
    """Write the results folder of ``result``: CSV, JSON, Markdown and (unless ``html=False``)
    ``report.html`` with ``figures/``; ``details`` limits the compounds with figure sections and
    ``rendered`` holds figures already drawn elsewhere (by compound index, as
    :func:`~polarbeam.report.html.write_html` takes them).

    The folder is held for this run (:func:`~polarbeam._util.outfolder.output_folder`): files of
    the previous run that are not written again are removed, the user's own files are not, and a
    second run into the same folder at the same time gets
    :class:`~polarbeam.errors.FolderInUseError`."""
    with output_folder(out):
        write_results(result, out)
        writer("velocities")(result, out)  # velocities.csv of time-of-flight fits, when any
        if html:
            write_html(result, out, details=details, rendered=rendered, pdf=pdf)


register_writer("markdown", render_markdown)
register_writer("folder", write_report)
register_writer("velocities", write_velocities)
