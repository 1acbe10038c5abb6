"""``velocities.csv``: the distributions polarbeam made from time-of-flight traces, one row per
velocity class, in the columns of the input table of ``[data] velocities`` (so the file can be
given back as that table). Reads result objects; computes no physics.
"""

from __future__ import annotations

import io
from pathlib import Path

import pandas as pd

from polarbeam._util.atomic import write_text_atomic
from polarbeam.report.text import guarded_frame
from polarbeam.results.objects import CampaignResult
from polarbeam.results.velocity import VELOCITY_TABLE_COLUMNS

__all__ = ["VELOCITIES_FILE", "velocities_csv", "write_velocities"]

VELOCITIES_FILE = "velocities.csv"


def velocities_csv(result: CampaignResult) -> str | None:
    """The text of ``velocities.csv`` (None when no series has a fitted trace)."""
    rows = [
        row
        for c in result.compounds
        for s in c.series
        if s.time_of_flight is not None
        for row in s.time_of_flight.rows()
    ]
    if not rows:
        return None
    buf = io.StringIO()
    frame = guarded_frame(pd.DataFrame(rows, columns=list(VELOCITY_TABLE_COLUMNS)))
    frame.to_csv(buf, index=False, float_format="%.10g", lineterminator="\n")
    return buf.getvalue()


def write_velocities(result: CampaignResult, out: str | Path) -> Path | None:
    """Write ``out/velocities.csv`` atomically when any series has a fitted trace."""
    text = velocities_csv(result)
    if text is None:
        return None
    target = Path(out) / VELOCITIES_FILE
    write_text_atomic(target, text)
    return target
