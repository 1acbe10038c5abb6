"""Drawing a solved cross-section: equipotentials, electrodes and the beam.

matplotlib is optional (``polarbeam[plots]``) and loaded only when a plot is asked for.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from polarbeam._util.optional import has, require
from polarbeam.errors import InputError
from polarbeam.instrument.fields.checks import MM
from polarbeam.instrument.fields.geometry import Beam
from polarbeam.instrument.fields.grid import FieldSolution
from polarbeam.instrument.fields.result import DeflectorSolution

__all__ = ["format_potential", "plot_cross_section"]


#: Vermillion of the Okabe–Ito palette (the report's colour-blind-safe palette) for the beam.
BEAM_COLOUR = "#D55E00"


def format_potential(volts: float) -> str:
    """A potential for a label: ``"10 kV"``, ``"-250 V"``, ``"0 V"`` (4 significant digits)."""
    if abs(volts) >= 1e3:
        return f"{volts / 1e3:.4g} kV"
    return f"{0.0 if abs(volts) < 1e-9 else volts:.4g} V"


def plot_cross_section(
    solution: FieldSolution | DeflectorSolution,
    path: str | Path,
    *,
    beam: Beam | None = None,
    levels: int = 40,
    dpi: int = 150,
    offset: float = 0.0,
    title: str | None = None,
) -> Path:
    """Save equipotentials, electrodes and the beam rectangle to ``path`` (PNG, PDF, SVG...).

    ``offset`` (V) is subtracted from every potential shown (labels and contours): the
    line-charge offset of the analytic two-wire potentials, so that the electrodes are labelled
    with the applied potentials (trough 0, convex V) whatever constant the solve used; the field
    does not change.  The axes are named in the beam frame: x is the deflection direction (the
    cross-section's vertical axis), y the height across it; z, the beam axis, points out of the
    page.  matplotlib is imported here only (optional dependency ``polarbeam[plots]``).
    """
    if not has("matplotlib"):
        raise InputError("plot_cross_section: matplotlib is not installed (pip install matplotlib)")
    Figure = require("matplotlib.figure", "plot_cross_section").Figure
    Rectangle = require("matplotlib.patches", "plot_cross_section").Rectangle
    if isinstance(solution, DeflectorSolution):
        beam = beam or solution.beam
        solution = solution.finest
    cs = solution.cross_section
    box = cs.box
    fig = Figure(figsize=(6, 6 * box.height / box.width + 0.6))
    ax = fig.add_subplot()
    X, Y = np.meshgrid(solution.x * MM, solution.y * MM)
    phi = np.where(solution.free, solution.phi - offset, np.nan)
    cset = ax.contour(X, Y, phi, levels=levels, linewidths=0.6, cmap="viridis")
    label = "potential (V)" if not offset else "potential, lowest electrode at 0 (V)"
    fig.colorbar(cset, ax=ax, label=label, shrink=0.8)
    for e in cs.electrodes:
        out = e.outline(box)
        if len(out) == 3:
            ax.contourf(out[0] * MM, out[1] * MM, out[2], levels=[-np.inf, 0], colors=["0.6"])
            ax.contour(out[0] * MM, out[1] * MM, out[2], levels=[0], colors="k", linewidths=1)
        else:
            ax.fill(out[0] * MM, out[1] * MM, color="0.6", ec="k", lw=1)
        bx0, bx1, by0, by1 = e.bounds()
        cx = np.clip(0.5 * (bx0 + bx1) if e.bounded else 0.0, box.xmin, box.xmax)
        cy = np.clip(0.5 * (by0 + by1) if e.bounded else box.ymax, box.ymin, box.ymax)
        ax.annotate(
            f"{e.name}\n{format_potential(e.potential - offset)}",
            (cx * MM, cy * MM),
            fontsize=7,
            ha="center",
            va="top" if not e.bounded else "center",
        )
    if beam is not None:
        x0, x1, y0, y1 = beam.corners()
        ax.add_patch(
            Rectangle(
                (x0 * MM, y0 * MM),
                max(x1 - x0, 1e-9) * MM,
                max(y1 - y0, 1e-9) * MM,
                fill=False,
                ec=BEAM_COLOUR,
                lw=1.5,
            )
        )
        ax.plot([beam.x0 * MM], [beam.y0 * MM], "+", color=BEAM_COLOUR)
    ax.set_xlim(box.xmin * MM, box.xmax * MM)
    ax.set_ylim(box.ymin * MM, box.ymax * MM)
    ax.set_aspect("equal")
    ax.set_xlabel("y, height across the deflection (mm)")
    ax.set_ylabel("x, deflection direction (mm)")
    if title:
        ax.set_title(title, fontsize=9)
    p = Path(path)
    fig.savefig(p, dpi=dpi, bbox_inches="tight")
    return p
