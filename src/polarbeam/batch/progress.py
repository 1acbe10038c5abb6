"""Progress of a batch: the events it reports and their display on a terminal."""

from __future__ import annotations

import math
import sys
import time
from dataclasses import dataclass

from polarbeam._util.optional import has

__all__ = ["ProgressEvent", "TerminalProgress"]


@dataclass(frozen=True)
class ProgressEvent:
    """A step of a batch: a campaign starts (``compound`` None) or a compound is done."""

    campaign: str
    done: int
    total: int
    compound: str | None = None
    status: str | None = None
    message: str | None = None


class TerminalProgress:
    """Progress on stderr: a rich bar with ETA on a terminal, plain lines otherwise."""

    def __init__(self, stream=None, *, plain: bool | None = None, every_s: float = 5.0):
        self.stream = stream or sys.stderr
        tty = getattr(self.stream, "isatty", lambda: False)()
        self.plain = (not tty) if plain is None else plain
        self.every_s = every_s
        self._bar = None
        self._task = None
        self._last = 0.0
        # rates count from the start of the run, as the closing "N compound(s) in T s" does
        self._t0 = time.perf_counter()
        self._first: tuple[float, int] | None = None
        self._prior = 0  # compounds of the campaigns already finished in this run
        self._seen = 0
        if not self.plain and not has("rich"):  # optional extra polarbeam[batch]
            self.plain = True
        if not self.plain:
            from rich.console import Console
            from rich.progress import (
                BarColumn,
                MofNCompleteColumn,
                Progress,
                TextColumn,
                TimeElapsedColumn,
                TimeRemainingColumn,
            )

            self._bar = Progress(
                TextColumn("{task.description}"),
                BarColumn(),
                MofNCompleteColumn(),
                TimeElapsedColumn(),
                TextColumn("ETA"),
                TimeRemainingColumn(),
                console=Console(file=self.stream),
                transient=False,
            )
            self._bar.start()

    def _line(self, text: str) -> None:
        print(text, file=self.stream, flush=True)

    def __call__(self, ev: ProgressEvent) -> None:
        now = time.perf_counter()
        if ev.compound is None:
            self._prior += self._seen
            self._seen = ev.done
            self._first, self._last = (self._t0, -self._prior), now
            if self._bar is not None:
                if self._task is not None:
                    self._bar.stop_task(self._task)
                self._task = self._bar.add_task(ev.campaign, total=ev.total, completed=ev.done)
            else:
                extra = f" ({ev.done} reused)" if ev.done else ""
                self._line(f"{ev.campaign}: {ev.total} compound(s){extra}")
            return
        if ev.status == "failed":
            msg = f"failed: {ev.compound}: {ev.message}"
            if self._bar is not None:
                self._bar.console.print(msg, markup=False, highlight=False)
            else:
                self._line(f"{ev.campaign}: {msg}")
        if self._bar is not None:
            self._bar.update(self._task, completed=ev.done)
            return
        self._seen = ev.done
        if ev.done == ev.total or now - self._last >= self.every_s:
            self._last = now
            t1, d1 = self._first
            rate = (ev.done - d1) / (now - t1) if now > t1 else 0.0
            left = (ev.total - ev.done) / rate if rate > 0 else math.inf
            eta = f", ETA {left:.0f} s" if math.isfinite(left) and ev.done < ev.total else ""
            speed = f" ({rate:.1f}/s{eta})" if rate > 0 else ""
            self._line(f"{ev.campaign}: {ev.done}/{ev.total} compounds{speed}")

    def close(self) -> None:
        if self._bar is not None:
            self._bar.stop()
            self._bar = None
