"""Single atoms: static dipole polarizabilities from the Schwerdtfeger–Nagle table.

Noble-gas, alkali and alkaline-earth atoms are common in beam work and no additive scheme covers
them.  Their static dipole polarizability and its uncertainty come from the table of
P. Schwerdtfeger and J. K. Nagle, "2018 Table of static dipole polarizabilities of the neutral
elements in the periodic table", Mol. Phys. 117, 1200–1225 (2019), as carried by the
``mendeleev`` package (``Element.dipole_polarizability`` and ``dipole_polarizability_unc`` in
atomic units; mendeleev's metadata cites the table's 2023 update).  ``mendeleev`` is the optional
extra ``polarbeam[atoms]``; it is imported only when an atom is estimated.
"""

from __future__ import annotations

import math
from functools import lru_cache

from polarbeam._util.optional import lazy, require
from polarbeam.constants import ANGSTROM3_SI, AU_POLARIZABILITY_SI
from polarbeam.errors import CompoundError

Chem = lazy("rdkit.Chem", "reading molecules (SMILES, SDF)")

__all__ = ["ATOM_METHOD", "ATOM_SOURCE", "atom_polarizability_A3", "single_atom_symbol"]

#: Name of the method in the ``alpha_method`` column.
ATOM_METHOD = "atom-table"
#: Citation of the table (also in docs/structure.md).
ATOM_SOURCE = (
    "P. Schwerdtfeger, J. K. Nagle, Mol. Phys. 117, 1200 (2019) (2018 table of static dipole "
    "polarizabilities), via the mendeleev package"
)
_AU_A3 = AU_POLARIZABILITY_SI / ANGSTROM3_SI


def single_atom_symbol(mol: Chem.Mol) -> str | None:
    """Element symbol when ``mol`` is one neutral atom without hydrogens, else None."""
    if mol.GetNumAtoms() != 1:
        return None
    a = mol.GetAtomWithIdx(0)
    if a.GetTotalNumHs() or a.GetFormalCharge():
        return None
    return a.GetSymbol()


@lru_cache(maxsize=128)
def atom_polarizability_A3(symbol: str, compound: str = "?") -> tuple[float, float]:
    """(α, 1σ) in Å³ of the neutral atom ``symbol`` from the Schwerdtfeger–Nagle table.

    Raises
    ------
    MissingExtraError
        ``mendeleev`` is not installed (one line naming ``polarbeam[atoms]``).
    CompoundError
        The table has no value for the element.
    """
    mendeleev = require("mendeleev", "the polarizability of a single atom")
    el = mendeleev.element(symbol)
    value, unc = el.dipole_polarizability, el.dipole_polarizability_unc
    if value is None or not math.isfinite(value):
        raise CompoundError(
            f"compound {compound!r}: expected a static polarizability for the atom {symbol} in "
            "the Schwerdtfeger-Nagle table, found none"
        )
    unc = 0.0 if unc is None or not math.isfinite(unc) else float(unc)
    return float(value) * _AU_A3, unc * _AU_A3
