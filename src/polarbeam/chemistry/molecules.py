"""Molecules in: SMILES and SDF parsing, and the masses a campaign is checked against.

Every other structure module starts from what this one returns: an RDKit molecule (or a
:class:`StructureRecord` per SDF record, so one unreadable record never hides the others), the
average mass of the natural isotopologue mixture and the monoisotopic mass.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from polarbeam._util.optional import lazy
from polarbeam.errors import CompoundError, InputError

Chem = lazy("rdkit.Chem", "reading molecules (SMILES, SDF)")
rdBase = lazy("rdkit.rdBase", "reading molecules (SMILES, SDF)")
Descriptors = lazy("rdkit.Chem.Descriptors", "reading molecules (SMILES, SDF)")
rdMolDescriptors = lazy("rdkit.Chem.rdMolDescriptors", "reading molecules (SMILES, SDF)")

__all__ = [
    "StructureRecord",
    "as_mol",
    "check_mass",
    "mass_average_u",
    "mass_monoisotopic_u",
    "parse_smiles",
    "read_sdf",
]


# --------------------------------------------------------------------------------------------
# Parsing
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class StructureRecord:
    """One input structure: name, SMILES, parsed molecule (None on error), error, extra columns."""

    compound: str
    smiles: str
    mol: Any = field(repr=False, compare=False)
    error: str = ""
    extra: tuple[tuple[str, str], ...] = ()


def parse_smiles(smiles: str, compound: str = "?") -> Chem.Mol:
    """Parse and sanitise a SMILES string with RDKit.

    Raises
    ------
    CompoundError
        One line naming the compound and the SMILES when RDKit rejects it.
    """
    if not isinstance(smiles, str) or not smiles.strip():
        raise CompoundError(f"compound {compound!r}: expected a SMILES string, found {smiles!r}")
    with rdBase.BlockLogs():
        mol = Chem.MolFromSmiles(smiles.strip())
    if mol is None:
        raise CompoundError(
            f"compound {compound!r}: RDKit cannot parse SMILES {smiles!r} "
            "(check valences, brackets and ring-closure digits)"
        )
    return mol


def read_sdf(path: str | os.PathLike) -> list[StructureRecord]:
    """Read every record of an SDF file.

    The compound name is the ``compound`` property when present, else the title line (``_Name``),
    else ``record N``.  A record RDKit cannot read becomes a :class:`StructureRecord` with ``mol``
    None and ``error`` set, so one bad record never hides the others.

    Raises
    ------
    InputError
        When the file does not exist or cannot be opened.
    """
    p = Path(path)
    if not p.is_file():
        raise InputError(f"{p}: SDF file not found")
    try:
        empty = not p.read_bytes().strip()
    except OSError as exc:
        raise InputError(f"{p}: cannot read SDF file ({exc.strerror})") from None
    if empty:
        raise InputError(f"{p}: expected SDF structure records, found an empty file")
    with rdBase.BlockLogs():
        try:
            supplier = Chem.SDMolSupplier(str(p), sanitize=True, removeHs=False)
        except OSError as exc:
            raise InputError(f"{p}: cannot read SDF file ({exc})") from None
        out: list[StructureRecord] = []
        for i in range(len(supplier)):
            mol = supplier[i]
            if mol is None:
                first = supplier.GetItemText(i).splitlines()
                name = first[0].strip() if first and first[0].strip() else f"record {i + 1}"
                out.append(
                    StructureRecord(
                        compound=name,
                        smiles="",
                        mol=None,
                        error=f"{p} record {i + 1} ({name!r}): RDKit cannot read this molecule",
                    )
                )
                continue
            if mol.HasProp("compound") and mol.GetProp("compound").strip():
                name = mol.GetProp("compound").strip()
            elif mol.GetProp("_Name").strip():
                name = mol.GetProp("_Name").strip()
            else:
                name = f"record {i + 1}"
            props = tuple(
                (k, str(v))
                for k, v in mol.GetPropsAsDict(includePrivate=False).items()
                if k != "compound"
            )
            out.append(
                StructureRecord(
                    compound=name,
                    smiles=Chem.MolToSmiles(Chem.RemoveHs(mol)),
                    mol=mol,
                    extra=props,
                )
            )
    return out


def as_mol(structure: str | Chem.Mol, compound: str) -> Chem.Mol:
    """``structure`` itself when it is an RDKit molecule, else :func:`parse_smiles` of it."""
    if isinstance(structure, Chem.Mol):
        return structure
    return parse_smiles(structure, compound)


# --------------------------------------------------------------------------------------------
# Mass
# --------------------------------------------------------------------------------------------


def mass_average_u(mol: Chem.Mol) -> float:
    """Average molecular mass in u (natural isotopic mixture), all hydrogens counted."""
    return float(Descriptors.MolWt(mol))


def mass_monoisotopic_u(mol: Chem.Mol) -> float:
    """Monoisotopic mass in u (most abundant isotope of every atom), all hydrogens counted."""
    return float(rdMolDescriptors.CalcExactMolWt(mol))


def check_mass(
    stated_u: float, structure_u: float, compound: str, tolerance_u: float = 0.5
) -> tuple[float, str | None]:
    """Compare a stated mass with the structure's and choose the one to use.

    Parameters
    ----------
    stated_u
        Mass given by the user (u).
    structure_u
        Mass computed from the structure (u), e.g. :func:`mass_average_u`.
    compound
        Name for the warning.
    tolerance_u
        Largest difference accepted silently (default 0.5 u).

    Returns
    -------
    (mass_to_use, warning)
        The stated mass is always used when it is valid; ``warning`` is a one-line message when the
        two differ by more than ``tolerance_u``, else None.
    """
    if not (math.isfinite(stated_u) and stated_u > 0):
        raise CompoundError(f"compound {compound!r}: stated mass must be > 0 u, found {stated_u!r}")
    diff = stated_u - structure_u
    if abs(diff) > tolerance_u:
        return float(stated_u), (
            f"compound {compound!r}: stated mass {stated_u:.3f} u differs from the structure's "
            f"{structure_u:.3f} u by {diff:+.3f} u (> {tolerance_u} u); using the stated mass"
        )
    return float(stated_u), None
