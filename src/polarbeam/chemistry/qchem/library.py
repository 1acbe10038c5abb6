"""Several molecules at once: the jobs of ``polarbeam compute`` and the ``computed.csv`` it writes.

The input is one SMILES, one structure file (.xyz, .sdf, .mol) or a CSV ``compound, smiles``;
each molecule is computed (or taken from the cache) and a failure is reported without stopping
the others. :func:`write_computed` writes the results in the ``[data] computed`` input contract.
"""

from __future__ import annotations

import dataclasses
import io
import math
from collections.abc import Callable, Mapping
from pathlib import Path

from polarbeam._util.atomic import write_text_atomic
from polarbeam._util.tables import read_table
from polarbeam.chemistry.computed import COMPUTED_CSV_COLUMNS
from polarbeam.chemistry.qchem.compute import (
    ProgressCallback,
    compute_properties,
    d4_polarizability,
)
from polarbeam.chemistry.qchem.cost import PYTHON_WAYS_OUT
from polarbeam.chemistry.qchem.ensemble import compute_conformer_dipoles
from polarbeam.chemistry.qchem.result import ComputedResult, results_table
from polarbeam.constants import DEBYE_SI
from polarbeam.errors import InputError, PolarbeamError

__all__ = [
    "POLARIZABILITY_SCHEMES",
    "check_conformer_options",
    "check_scheme",
    "compute_jobs",
    "compute_library",
    "describe_run",
    "write_computed",
]

#: Response schemes of the polarizability a library run accepts.
POLARIZABILITY_SCHEMES = ("analytic", "finite-field")


def check_conformer_options(conformers: int, temperature_K: float) -> None:
    """Raise :class:`~polarbeam.errors.InputError` for a negative count or a bad temperature."""
    if not isinstance(conformers, int) or conformers < 0:
        raise InputError(f"--conformers: expected an integer >= 0, found {conformers!r}")
    if conformers and not (math.isfinite(temperature_K) and temperature_K > 0):
        raise InputError(f"--temperature: expected a temperature > 0 K, found {temperature_K!r}")


def check_scheme(polarizability: str) -> None:
    """Raise :class:`~polarbeam.errors.InputError` unless ``polarizability`` is a known scheme."""
    if polarizability not in POLARIZABILITY_SCHEMES:
        raise InputError(
            f"--polarizability: expected one of {', '.join(POLARIZABILITY_SCHEMES)}, "
            f"found {polarizability!r}"
        )


def compute_jobs(source: str, name: str | None = None) -> list[tuple[str, str]]:
    """(name, structure) pairs: the rows of a CSV ``compound, smiles``, or one molecule named
    ``name`` (``--name``), else by its file stem (a structure file) or by the SMILES itself.

    A ``name`` with a CSV is an :class:`~polarbeam.errors.InputError`: the CSV names its rows.
    """
    path = Path(source)
    if name is not None and not name.strip():
        raise InputError("--name: expected a compound name, found an empty string")
    if path.suffix.lower() == ".csv":
        if name is not None:
            raise InputError(
                f"--name: expected one molecule (a SMILES or a structure file), found the CSV "
                f"{path.name} (its compound column names the rows)"
            )
        t = read_table(path, ("compound", "smiles"), "structures")
        return [(r["compound"], r["smiles"]) for r in t.rows]
    if name is not None:
        return [(name.strip(), source)]
    return [(path.stem if path.is_file() else source, source)]


def describe_run(
    method: str = "b3lyp",
    basis: str = "def2-svpd",
    *,
    polarizability: str = "analytic",
    d4: bool = False,
    conformers: int = 0,
    temperature_K: float = 300.0,
) -> str:
    """What a library run computes, in one line (the header ``polarbeam compute`` prints).

    ``--d4`` runs no SCF, so the method, basis and scheme are not named then.
    """
    if d4:
        return "D4 model polarizability (dftd4; no SCF, no dipole)"
    text = f"{method}/{basis}, {polarizability} polarizability"
    if conformers > 0:
        text += (
            f" on the lowest conformer; dipole sqrt<mu^2> at {temperature_K:g} K over the "
            f"distinct conformers of {conformers} embedding(s)"
        )
    return text


def compute_library(
    jobs: list[tuple[str, str]],
    method: str = "b3lyp",
    basis: str = "def2-svpd",
    *,
    polarizability: str = "analytic",
    max_seconds: float = 1800.0,
    d4: bool = False,
    conformers: int = 0,
    temperature_K: float = 300.0,
    progress: ProgressCallback | None = None,
    on_start: Callable[[str], None] | None = None,
    on_failure: Callable[[str, str], None] | None = None,
    ways_out: Mapping[str, str] = PYTHON_WAYS_OUT,
) -> tuple[list[ComputedResult], list[tuple[str, str]]]:
    """Compute every job; returns (results, [(name, one-line error), …] of the failures).

    ``conformers > 0``: the polarizability of the lowest MMFF94 conformer and the dipole
    sqrt⟨μ²⟩(``temperature_K``) Boltzmann-averaged over the SCF dipoles of the distinct
    low-energy conformers of ``conformers`` embeddings (:func:`compute_conformer_dipoles`); the
    ``source`` of the row says so.  ``on_start(name)`` and ``on_failure(name, message)`` report
    each molecule as it goes; ``ways_out`` words the refusals (the command line passes
    :data:`~polarbeam.chemistry.qchem.cost.CLI_WAYS_OUT`).
    """
    check_scheme(polarizability)
    results: list[ComputedResult] = []
    failures: list[tuple[str, str]] = []
    for name, structure in jobs:
        if on_start is not None:
            on_start(name)
        try:
            if d4:
                r = d4_polarizability(structure, name=name)
            elif conformers > 0:
                r = _conformer_result(
                    structure, name, method, basis, conformers, temperature_K,
                    polarizability, max_seconds, progress, ways_out,
                )  # fmt: skip
            else:
                r = compute_properties(
                    structure,
                    method,
                    basis,
                    name=name,
                    polarizability=polarizability,
                    max_seconds=max_seconds,
                    progress=progress,
                    ways_out=ways_out,
                )
            results.append(r)
        except PolarbeamError as exc:
            failures.append((name, str(exc)))
            if on_failure is not None:
                on_failure(name, str(exc))
    return results, failures


def _conformer_result(
    structure, name, method, basis, conformers, temperature_K, polarizability, max_seconds,
    progress, ways_out,
) -> ComputedResult:  # fmt: skip
    ens = compute_conformer_dipoles(
        structure,
        method,
        basis,
        n_conformers=conformers,
        name=name,
        max_seconds=max_seconds,
        progress=progress,
        ways_out=ways_out,
    )
    lowest = compute_properties(
        ens.geometries[0],
        method,
        basis,
        name=name,
        polarizability=polarizability,
        max_seconds=max_seconds,
        progress=progress,
        ways_out=ways_out,
    )
    mu = ens.rms_dipole_D(temperature_K)
    return dataclasses.replace(
        lowest,
        dipole_si=mu * DEBYE_SI,
        dipole_vector_si=None,
        polarizability_method=(
            f"{lowest.polarizability_method} on the lowest conformer; dipole sqrt<mu^2> at "
            f"{temperature_K:g} K over {len(ens.dipoles_D)} conformers"
        ),
    )


def write_computed(results: list[ComputedResult], out: str | Path) -> None:
    """Write ``computed.csv`` atomically, units in the column names (:data:`COMPUTED_CSV_COLUMNS`:
    ``compound, qc_method, alpha_A3, dipole_D, alpha_xx_A3 …, source``), the layout
    :func:`~polarbeam.chemistry.read_computed` reads."""
    table = results_table(results).rename(
        columns={"alpha_computed_A3": "alpha_A3", "dipole_computed_D": "dipole_D"}
    )
    buf = io.StringIO()
    table[list(COMPUTED_CSV_COLUMNS)].to_csv(buf, index=False, lineterminator="\n")
    write_text_atomic(out, buf.getvalue())
