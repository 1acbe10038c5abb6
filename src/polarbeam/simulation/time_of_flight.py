"""Time-of-flight traces with known truth: Poisson counts of the gate-convolved forward model
(:mod:`polarbeam.beam.time_of_flight`) for chosen flux shapes, and the ``[data] time_of_flight``
table and ``[beam]`` keys that carry them into a campaign.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from polarbeam._util.atomic import write_text_atomic
from polarbeam.beam.time_of_flight import FluxShape, TraceSetup, expected_counts

__all__ = ["TraceTruth", "beam_toml", "simulate_trace", "traces_csv", "write_traces"]


@dataclass(frozen=True)
class TraceTruth:
    """One simulated trace: the series, the true shape and set-up, bin starts and counts."""

    compound: str
    temperature_K: float
    shape: FluxShape
    setup: TraceSetup
    starts: np.ndarray
    width: float
    counts: np.ndarray


def simulate_trace(
    compound: str,
    temperature_K: float,
    shape: FluxShape,
    setup: TraceSetup,
    starts: np.ndarray,
    width: float,
    rng: np.random.Generator,
    *,
    total: float = 2e4,
    background: float = 1.0,
) -> TraceTruth:
    """Poisson counts of ``total`` molecules through the gate plus ``background`` per bin."""
    mu = expected_counts(shape, setup, np.asarray(starts, dtype=float), width, total, background)
    return TraceTruth(
        compound, float(temperature_K), shape, setup, np.asarray(starts), width, rng.poisson(mu)
    )


def traces_csv(traces: list[TraceTruth]) -> str:
    """The text of a ``[data] time_of_flight`` table (compound, temperature_K, time_s, counts)."""
    lines = ["compound,temperature_K,time_s,counts"]
    for tr in traces:
        lines += [
            f"{tr.compound},{tr.temperature_K:g},{t:.9g},{int(n)}"
            for t, n in zip(tr.starts, tr.counts, strict=True)
        ]
    return "\n".join(lines) + "\n"


def beam_toml(length: float, length_err: float, gate: float, offset_err: float) -> str:
    """The ``[beam]`` table of the stated time-of-flight set-up (nominal offset 0)."""
    return (
        "\n[beam]\n"
        f'flight_length = "{length:.6g} ± {length_err:.3g} m"\n'
        f'gate = "{gate * 1e6:.6g} us"\n'
        f'time_offset = "0 ± {offset_err * 1e6:.4g} us"\n'
    )


def write_traces(
    campaign: str | Path,
    traces: list[TraceTruth],
    *,
    length: float,
    length_err: float,
    gate: float,
    offset_err: float,
    name: str = "tof.csv",
) -> Path:
    """Add the traces to a campaign folder: ``tof.csv`` and its ``[data]``/``[beam]`` keys."""
    campaign = Path(campaign)
    write_text_atomic(campaign.parent / name, traces_csv(traces))
    text = campaign.read_text(encoding="utf-8")
    text = text.replace("[data]\n", f'[data]\ntime_of_flight = "{name}"\n', 1)
    write_text_atomic(campaign, text + beam_toml(length, length_err, gate, offset_err))
    return campaign.parent / name
