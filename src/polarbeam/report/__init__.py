"""Renderers only: CSV/JSON/Markdown files, the terminal table, the self-contained HTML report and
its figures. They read result objects and compute no physics.
"""

from polarbeam.report.figures import (
    OKABE_ITO,
    budget_figure,
    comparison_figure,
    compound_figures,
    debye_figure,
    have_matplotlib,
    parity_figure,
    series_figure,
    to_png,
    to_svg,
    visibility_figure,
)
from polarbeam.report.files import (
    render_markdown,
    render_terminal,
    write_results,
)
from polarbeam.report.folder import (
    write_report,
)
from polarbeam.report.html import (
    DEFAULT_DETAILS,
    compound_figure_files,
    detail_indices,
    render_html,
    write_html,
)
from polarbeam.report.recoil import (
    SPECTRUM_PLOT,
    recoil_markdown,
    recoil_markdown_lines,
    recoil_terminal_lines,
    render_recoil_only,
    write_recoil_results,
)
from polarbeam.report.text import (
    md_escape,
)

__all__ = [
    "DEFAULT_DETAILS",
    "OKABE_ITO",
    "SPECTRUM_PLOT",
    "budget_figure",
    "comparison_figure",
    "compound_figure_files",
    "compound_figures",
    "debye_figure",
    "detail_indices",
    "have_matplotlib",
    "md_escape",
    "parity_figure",
    "recoil_markdown",
    "recoil_markdown_lines",
    "recoil_terminal_lines",
    "render_html",
    "render_markdown",
    "render_recoil_only",
    "render_terminal",
    "series_figure",
    "to_png",
    "to_svg",
    "visibility_figure",
    "write_html",
    "write_recoil_results",
    "write_report",
    "write_results",
]
