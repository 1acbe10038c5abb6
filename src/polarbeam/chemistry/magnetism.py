"""What a structure says about magnetism: Pascal's additive diamagnetic susceptibility and the
spin of its radical electrons.

Pascal's scheme adds one constant per atom (by element and kind: aromatic carbon, ring nitrogen,
carbonyl or carboxyl oxygen …) and one constitutive correction per multiple bond of the listed
kinds; the table (``data/pascal_constants.csv``) carries its citation, G. A. Bain and
J. F. Berry, J. Chem. Educ. 85 (2008) 532.  The sum is a molar susceptibility in CGS-emu
cm³/mol; the scheme typically agrees with measured values of organic molecules to a few per cent
(``PASCAL_RELATIVE_ERROR`` is the 1σ used in comparisons).

The spin S of a structure is half its number of unpaired (radical) electrons as RDKit counts
them (``Descriptors.NumRadicalElectrons``): the high-spin assumption, which is what a spin-only
moment comparison needs.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from functools import lru_cache
from importlib import resources

from polarbeam._util.optional import lazy
from polarbeam.errors import CompoundError

# RDKit loads on first use (loading a campaign never needs it)
Descriptors = lazy("rdkit.Chem.Descriptors", "radical electrons from structures")

__all__ = [
    "PASCAL_RELATIVE_ERROR",
    "PascalEstimate",
    "pascal_chi_dia",
    "pascal_table",
    "radical_spin",
]

#: 1σ relative scatter of Pascal's sums against measured molar susceptibilities of organic
#: molecules (tests/chemistry/test_chemistry_magnetism.py measures it on its reference set)
PASCAL_RELATIVE_ERROR = 0.05


@dataclass(frozen=True)
class PascalEstimate:
    """χ_dia (cm³/mol) from Pascal's constants and the terms that were added."""

    chi_cgs: float
    terms: tuple[tuple[str, int, float], ...]  # (key, count, constant ×10⁻⁶ cm³/mol)

    @property
    def chi_err_cgs(self) -> float:
        return abs(self.chi_cgs) * PASCAL_RELATIVE_ERROR


@lru_cache(maxsize=1)
def pascal_table() -> dict[str, tuple[str, float, str]]:
    """key → (kind, constant in 10⁻⁶ cm³/mol, source) of ``data/pascal_constants.csv``."""
    text = (
        resources.files("polarbeam")
        .joinpath("data", "pascal_constants.csv")
        .read_text(encoding="utf-8")
    )
    lines = [ln for ln in text.splitlines() if ln.strip() and not ln.startswith("#")]
    return {
        r["key"]: (r["kind"], float(r["chi_1e6_cm3_mol"]), r["source"])
        for r in csv.DictReader(lines)
    }


def _oxygen_key(atom) -> str:
    carbonyl_c = [
        b.GetOtherAtom(atom) for b in atom.GetBonds() if b.GetOtherAtom(atom).GetSymbol() == "C"
    ]
    for c in carbonyl_c:
        n_o = [
            (b.GetOtherAtom(c).GetSymbol(), b.GetBondTypeAsDouble())
            for b in c.GetBonds()
            if b.GetOtherAtom(c).GetSymbol() == "O"
        ]
        has_double = any(order == 2.0 for _, order in n_o)
        if has_double and len(n_o) >= 2:
            return "O_carboxyl"
    for b in atom.GetBonds():
        if b.GetBondTypeAsDouble() == 2.0 and b.GetOtherAtom(atom).GetSymbol() == "C":
            return "O_carbonyl"
    return "O"


def _atom_key(atom) -> str:
    sym = atom.GetSymbol()
    if sym == "C":
        return "C_ar" if atom.GetIsAromatic() else "C"
    if sym == "N":
        return "N_ring" if atom.IsInRing() else "N_open"
    if sym == "O":
        return _oxygen_key(atom)
    return sym


def _bond_key(bond) -> str | None:
    if bond.GetIsAromatic():
        return None
    a, b = sorted((bond.GetBeginAtom().GetSymbol(), bond.GetEndAtom().GetSymbol()))
    order = bond.GetBondTypeAsDouble()
    sym = {2.0: "=", 3.0: "#"}.get(order)
    if sym is None:
        return None
    return f"{a}{sym}{b}" if (a, b) != ("C", "N") else f"C{sym}N"


def pascal_chi_dia(mol, name: str = "structure") -> PascalEstimate:
    """Pascal's additive χ_dia (cm³/mol) of an RDKit molecule.

    Raises :class:`CompoundError` for an element without a constant in the table (or a charged
    structure, which the table does not cover)."""
    table = pascal_table()
    counts: dict[str, int] = {}
    n_h = 0
    for atom in mol.GetAtoms():
        if atom.GetFormalCharge() != 0:
            raise CompoundError(
                f"{name}: Pascal's constants: expected a neutral structure, found a charged "
                f"{atom.GetSymbol()} atom"
            )
        if atom.GetSymbol() == "H":
            n_h += 1
            continue
        key = _atom_key(atom)
        if key not in table:
            raise CompoundError(
                f"{name}: Pascal's constants: expected one of the tabulated elements, found "
                f"{atom.GetSymbol()!r}"
            )
        counts[key] = counts.get(key, 0) + 1
        n_h += atom.GetTotalNumHs()
    if n_h:
        counts["H"] = n_h
    for bond in mol.GetBonds():
        key = _bond_key(bond)
        if key is not None and key in table:
            counts[key] = counts.get(key, 0) + 1
    terms = tuple((k, n, table[k][1]) for k, n in sorted(counts.items()))
    return PascalEstimate(sum(n * v for _, n, v in terms) * 1e-6, terms)


def radical_spin(mol) -> float:
    """S = (number of radical electrons)/2 of an RDKit molecule (high spin)."""
    return Descriptors.NumRadicalElectrons(mol) / 2.0
