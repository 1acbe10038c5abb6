"""docs/troubleshooting.md keeps up with the messages the code emits.

Each phrase below is a distinctive piece of a warning, flag or note. It must appear in a string
literal of ``src/polarbeam`` (so rewording a message fails here, and the table gets updated) and
in ``docs/troubleshooting.md`` (so the table explains it). String literals are read with
:mod:`ast`, so a message split over several source lines (implicit concatenation) is matched as
one piece; the ``{…}`` fields of an f-string are never matched across.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

from polarbeam.reduction.flags import FLAG_NAMES

ROOT = Path(__file__).resolve().parents[2]
DOC = ROOT / "docs" / "troubleshooting.md"
SRC = ROOT / "src" / "polarbeam"

#: (stage, phrase): distinctive phrases of the messages users see, by stage.
PHRASES = [
    # loading: plausibility of the inputs (contract/plausibility.py), table notes
    ("load", "expected 10 nm–100 µm"),
    ("load", "longer than the layout"),
    ("load", "a unit slip (kg for u?)"),
    (
        "load",
        "breakdown of vacuum gaps; check the units of the voltages and of the electrode geometry",
    ),
    ("load", "comment line(s) above the header"),
    ("load", "compound(s) listed but not measured"),
    ("load", "the fringe shift does not depend on velocity"),
    # raw scans (reduction)
    ("reduce", "positions do not span a full grating period"),
    ("reduce", "normal equations singular: no phase coverage"),
    ("reduce", "-- not used for drift correction"),
    ("reduce", "excess phase noise taken from all series pooled"),
    ("reduce", "scans flagged (see messages)"),
    # fits and the separation
    ("separation", "the stated point errors may be too small"),
    ("separation", "the velocity spread washes the fringe out to"),
    ("separation", "contrast at the largest voltage; the phase there is poorly defined"),
    ("separation", "rotational cooling cannot heat"),
    ("separation", "α_eff does not follow α + ⟨μ²⟩/3kT; likely causes"),
    (
        "separation",
        "α and μ cannot be separated (α_eff is in series.csv); measure at more temperatures or "
        "give alpha_known_A3",
    ),
    ("separation", "a polarizability pulls into the field"),
    ("separation", "is x the way the field magnitude grows?"),
    ("separation", "implausible for a molecule"),
    ("separation", "check the temperature range and the systematics"),
    ("separation", "the weak-field Langevin–Debye limit is not well satisfied"),
    ("separation", "the Debye slope disagrees with the stated dipole_known_D"),
    ("separation", "two temperatures: α and μ determined exactly, no consistency check"),
    ("separation", "if the molecule is nonpolar by symmetry, state dipole_known_D = 0"),
    ("separation", "μE/kT check skipped: the field magnitude is unknown for the"),
    ("separation", "check units and geometry"),
    # calibration
    ("calibration", "inconsistent references: their calibrations"),
    ("calibration", "check their known α and μ and the field model"),
    ("calibration", "it cannot calibrate the field"),
    ("calibration", "calibration not possible"),
    # structure cross-check and estimates
    ("structure", "differs from the structure's average mass"),
    ("structure", "outside the additive schemes' domain"),
    ("structure", "structure cross-check skipped"),
    ("structure", "measured below prediction — check mass, fragmentation, velocity"),
    ("structure", "check for clusters or vibrational contributions"),
    ("structure", "no MMFF94 parameters: UFF geometry and Gasteiger charges"),
    ("structure", "some conformers did not converge"),
    ("structure", "above the conformer limit of"),
    ("structure", "used the whole time budget of"),
    # computed chemistry
    ("computed", "no file matched (relative to"),
    ("computed", "cclib could not parse it"),
    ("computed", "no polarizability in the file (cclib found none); skipped"),
    ("computed", "check it is static"),
    ("computed", "no computed values could be read"),
    # photon recoil
    ("recoil", "σ is not significant (less than 2 standard errors)"),
    ("recoil", "of laser-off at the largest pulse energy"),
    ("recoil", "lies outside 0..1 (unconstrained fit; the data barely determine it)"),
    ("recoil", "the area error from it is second order and is not propagated"),
    # field report
    ("field", "the two-wire model evaluates g on the axis at beam_height (a point beam)"),
    ("field", "E and dE/dx need field_per_volt (E/V) in [deflector]"),
    # planning
    ("plan", "plan at least two temperatures"),
    ("plan", "lower the voltage or raise T"),
    ("plan", "2π branch tracking is not safe"),
    ("plan", "allowed by the phase limit and visibility floor"),
    ("plan", "is below the systematic floor"),
    ("plan", "planned as non-polar"),
    ("plan", "plots skipped: matplotlib is not installed"),
    # batches and reports
    ("batch", "run again with --resume to finish"),
    ("batch", "the worker stopped"),
    ("report", "Figures need matplotlib"),
]


def source_literals() -> list[str]:
    """Every string literal of the package; the fields of an f-string become a NUL."""
    out = []
    for path in sorted(SRC.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        for node in ast.walk(tree):
            if isinstance(node, ast.JoinedStr):
                out.append(
                    "".join(
                        v.value
                        if isinstance(v, ast.Constant) and isinstance(v.value, str)
                        else "\0"
                        for v in node.values
                    )
                )
            elif isinstance(node, ast.Constant) and isinstance(node.value, str):
                out.append(node.value)
    return out


@pytest.fixture(scope="module")
def literals() -> list[str]:
    return source_literals()


@pytest.fixture(scope="module")
def doc() -> str:
    return DOC.read_text(encoding="utf-8")


def test_troubleshooting_phrase_list_is_large_and_distinct():
    phrases = [p for _, p in PHRASES]
    assert len(phrases) >= 25
    assert len(set(phrases)) == len(phrases)


@pytest.mark.parametrize(("stage", "phrase"), PHRASES, ids=[p[:40] for _, p in PHRASES])
def test_troubleshooting_phrase_is_emitted_by_the_code(literals, stage, phrase):
    assert any(phrase in s for s in literals), (
        f"[{stage}] {phrase!r} is no longer in any string literal of src/polarbeam: the message "
        "was reworded; update docs/troubleshooting.md and this list"
    )


@pytest.mark.parametrize(("stage", "phrase"), PHRASES, ids=[p[:40] for _, p in PHRASES])
def test_troubleshooting_phrase_is_explained_in_the_docs(doc, stage, phrase):
    assert phrase in doc, f"[{stage}] {phrase!r} is missing from docs/troubleshooting.md"


def test_troubleshooting_lists_every_scan_flag(doc):
    # the flag names of phases.csv and their meanings, straight from the reduction
    for name, meaning in FLAG_NAMES.values():
        assert f"`{name}`" in doc
        assert meaning in doc


def test_troubleshooting_is_in_the_site_navigation():
    nav = (ROOT / "mkdocs.yml").read_text(encoding="utf-8")
    assert "troubleshooting.md" in nav
    assert "preparing.md" in nav
