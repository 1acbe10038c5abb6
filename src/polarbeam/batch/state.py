"""State of a batch on disk and in memory: the per-compound record files, ``batch-state.json``,
the ``campaigns.csv`` index and the outcome of each campaign.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

from polarbeam._util.atomic import write_text_atomic
from polarbeam.batch.records import RECORD_FORMAT
from polarbeam.results.objects import CampaignResult

__all__ = [
    "COMPOUND_DIR",
    "STATE_FILE",
    "BatchOutcome",
    "CampaignRun",
    "load_record",
    "record_text",
    "result_compounds",
    "write_index",
    "write_state",
]

STATE_FILE = "batch-state.json"
COMPOUND_DIR = "compounds"


@dataclass(frozen=True)
class CampaignRun:
    """One campaign of a batch: where it was written and what came out (or why it stopped)."""

    name: str
    path: Path
    out: Path
    result: CampaignResult | None = None
    error: str | None = None
    reused: int = 0
    analysed: int = 0

    @property
    def exit_code(self) -> int:
        return 2 if self.result is None else self.result.exit_code


@dataclass(frozen=True)
class BatchOutcome:
    """Every campaign of a batch, in input order."""

    runs: tuple[CampaignRun, ...]
    seconds: float = 0.0

    @property
    def exit_code(self) -> int:
        """0 when nothing failed, 2 when nothing could be analysed, else 1."""
        codes = [r.exit_code for r in self.runs]
        if not codes or all(c == 2 for c in codes):
            return 2
        return 0 if all(c == 0 for c in codes) else 1

    @property
    def n_compounds(self) -> int:
        return sum(len(result_compounds(r.result)) for r in self.runs if r.result is not None)


def result_compounds(result) -> list[str]:
    """The distinct compounds a campaign result holds, over every part (deflection, photon
    recoil, visibility …; a compound measured two ways counts once)."""
    return result.compound_names()


def write_state(out: Path, **state) -> None:
    write_text_atomic(out / STATE_FILE, json.dumps(state, indent=1, ensure_ascii=False) + "\n")


def load_record(path: Path, name: str, want_hash: str) -> dict | None:
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if (
        isinstance(doc, dict)
        and doc.get("format") == RECORD_FORMAT
        and doc.get("compound") == name
        and doc.get("input_hash") == want_hash
        and isinstance(doc.get("record"), dict)
    ):
        return doc["record"]
    return None


def record_text(name: str, input_hash: str | None, record: dict) -> str:
    value = record["value"]["fields"]
    doc = {
        "format": RECORD_FORMAT,
        "compound": name,
        "input_hash": input_hash,
        "status": value.get("status"),
        "message": value.get("message"),
        "record": record,
    }
    return json.dumps(doc, ensure_ascii=False, allow_nan=False, separators=(",", ":")) + "\n"


def write_index(out: Path, outcome: BatchOutcome) -> None:
    import csv
    import io

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["campaign", "source", "folder", "compounds", "ok", "warning", "failed", "error"])
    for r in outcome.runs:
        counts = {"ok": 0, "warning": 0, "failed": 0}
        if r.result is not None:
            for c in r.result.compounds:
                counts[c.status] += 1
        w.writerow(
            [
                r.name,
                str(r.path),
                r.out.name,
                len(r.result.compounds) if r.result is not None else 0,
                counts["ok"],
                counts["warning"],
                counts["failed"],
                r.error or "",
            ]
        )
    write_text_atomic(out / "campaigns.csv", buf.getvalue())
