"""The bad-input and fault catalogue: one table-driven harness for every case.

A case writes its inputs into a fresh folder, runs one ``polarbeam`` command the way a user does
(the command-line app, in this process), and states what must come out: the exit code, the one
line on stderr (a regular expression; never a traceback, never "internal error") and what is left
on disk. Each area of the catalogue (``test_catalogue_<area>.py``) is a list of :class:`Case`.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from typer.testing import CliRunner

from polarbeam.cli.commands import app
from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign

__all__ = ["Case", "edit", "run_case", "small_campaign"]


@dataclass(frozen=True)
class Case:
    """One catalogue entry.

    ``build(folder)`` writes the inputs and returns the command's arguments; ``exit_code`` and
    ``message`` (a regular expression searched in stderr; None: no error line expected) state the
    outcome; ``check(folder)`` asserts what is left on disk (outputs kept, user files untouched,
    no temporaries).
    """

    id: str
    build: Callable[[Path], list[str]]
    exit_code: int
    message: str | None = None
    check: Callable[[Path], None] | None = None
    tags: tuple[str, ...] = field(default_factory=tuple)


def small_campaign(folder: Path, n: int = 2, seed: int = 11) -> Path:
    """A clean two-compound Talbot–Lau campaign (simulated, known truth); returns campaign.toml."""
    comps = [
        CompoundTruth(f"cmp-{i + 1}", 150.0 + 40 * i, 15.0 + 5 * i, 1.0 * i, (300.0, 450.0, 600.0))
        for i in range(n)
    ]
    truth = simulate_campaign(
        folder / "camp", comps, spec=InstrumentSpec.talbot_lau(), seed=np.random.default_rng(seed)
    )
    return truth.path / "campaign.toml"


def edit(path: Path, old: str, new: str) -> None:
    """Replace the first ``old`` in a text file (the case fails loudly when it is not there)."""
    text = path.read_text(encoding="utf-8")
    assert old in text, f"{path.name}: {old!r} not found"
    path.write_text(text.replace(old, new, 1), encoding="utf-8")


def run_case(case: Case, folder: Path):
    """Run ``case`` in ``folder``; assert exit code, the one-line message and what is left."""
    args = case.build(folder)
    result = CliRunner().invoke(app, args)
    if result.exception is not None and not isinstance(result.exception, SystemExit):
        raise AssertionError(
            f"{case.id}: {type(result.exception).__name__}: {result.exception} escaped"
        ) from result.exception
    stderr = result.stderr if hasattr(result, "stderr") else result.output
    errors = [ln for ln in stderr.splitlines() if ln.startswith("error:")]
    assert result.exit_code == case.exit_code, (
        f"{case.id}: exit {result.exit_code}, expected {case.exit_code}\n{result.output}"
    )
    assert "Traceback" not in result.output and "internal error" not in result.output, (
        f"{case.id}: {result.output}"
    )
    if case.message is not None:
        assert len(errors) == 1, f"{case.id}: expected one error line, found {errors!r}"
        assert re.search(case.message, errors[0]), f"{case.id}: {errors[0]!r} !~ {case.message!r}"
    if case.check is not None:
        case.check(folder)
    return result
