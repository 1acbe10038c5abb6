"""Published reference tables carried by packages, read where they live (never copied).

The ``chemicals`` package (Chemical Engineering Design Library; extra ``polarbeam[test]``)
carries

* the NIST CCCBDB table of experimental gas-phase dipole moments (``chemicals.dipole``, source
  ``CCCBDB``, 424 rows keyed by CAS number) -- :func:`cccbdb_dipoles`;
* CAS → SMILES and names (``chemicals.identifiers``) -- :func:`cas_for_smiles`;
* the CRC Handbook refractive indices of organic liquids at the sodium D line
  (``chemicals.refractivity``) and the Perry's Handbook (8th ed., table 2-32, DIPPR equation 105)
  liquid densities (``chemicals.volume``): their Lorentz–Lorenz polarizability,
  :func:`lorentz_lorenz_A3`, is an *optical* (589 nm), liquid-phase value -- a consistency
  check of a static gas-phase polarizability for nonpolar liquids, not a replacement.

The tests and ``benchmarks/measure_structure_accuracy.py`` use these to check
``reference_values/`` and to measure the estimates; nothing at run time needs them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

from polarbeam._util.optional import lazy, require

Chem = lazy("rdkit.Chem", "reading molecules (SMILES, SDF)")
rdBase = lazy("rdkit.rdBase", "reading molecules (SMILES, SDF)")

__all__ = [
    "CCCBDB_MAX_HEAVY_ATOMS",
    "CCCBDB_SOURCE",
    "LL_SOURCE",
    "CccbdbDipole",
    "cas_for_smiles",
    "cccbdb_dipoles",
    "lorentz_lorenz_A3",
]

CCCBDB_SOURCE = "NIST CCCBDB experimental dipoles via chemicals.dipole (method 'CCCBDB')"
LL_SOURCE = (
    "Lorentz-Lorenz from CRC n_D (chemicals.refractivity) and Perry DIPPR-105 liquid density "
    "(chemicals.volume)"
)
_PURPOSE = "reading published reference tables"


@dataclass(frozen=True)
class CccbdbDipole:
    """One row of the CCCBDB dipole table with the structure ``chemicals.identifiers`` gives."""

    cas: str
    name: str
    smiles: str
    dipole_D: float


def _canonical(smiles: str) -> str | None:
    with rdBase.BlockLogs():
        mol = Chem.MolFromSmiles(smiles)
    return None if mol is None else Chem.MolToSmiles(mol)


#: CCCBDB is a table of small molecules (its largest have 10 heavy atoms); a structure above this
#: is a wrong CAS → SMILES mapping (``chemicals.identifiers`` maps 14989-30-1, "Monochlorine
#: monoxide", to a 24-heavy-atom drug) and is left out.
CCCBDB_MAX_HEAVY_ATOMS = 12


@lru_cache(maxsize=1)
def cccbdb_dipoles() -> tuple[CccbdbDipole, ...]:
    """Every CCCBDB dipole whose CAS number ``chemicals.identifiers`` maps to a parsable SMILES
    of a small molecule (at most :data:`CCCBDB_MAX_HEAVY_ATOMS` heavy atoms)."""
    dipole = require("chemicals.dipole", _PURPOSE)
    ident = require("chemicals.identifiers", _PURPOSE)
    table = dipole.dipole_data_CCDB
    out = []
    for cas, row in table.iterrows():
        try:
            smiles = ident.search_chemical(cas).smiles
        except Exception:  # radicals and diatomics the identifier database does not carry
            continue
        canon = _canonical(smiles) if smiles else None
        mu = float(row["dipole_moment"])
        if canon and math.isfinite(mu) and _heavy_atoms(canon) <= CCCBDB_MAX_HEAVY_ATOMS:
            out.append(CccbdbDipole(str(cas), str(row["Chemical"]), canon, mu))
    return tuple(out)


def _heavy_atoms(smiles: str) -> int:
    with rdBase.BlockLogs():
        return Chem.MolFromSmiles(smiles).GetNumHeavyAtoms()


@lru_cache(maxsize=1)
def _cas_by_smiles() -> dict[str, str]:
    return {r.smiles: r.cas for r in cccbdb_dipoles()}


def cas_for_smiles(smiles: str) -> str | None:
    """CAS number of a structure that is in the CCCBDB dipole table (None otherwise)."""
    canon = _canonical(smiles)
    return None if canon is None else _cas_by_smiles().get(canon)


def lorentz_lorenz_A3(name: str, smiles: str) -> tuple[float, float] | None:
    """(α_LL in Å³, temperature K) of a liquid from its CRC n_D and Perry density, or None.

    The compound is found by ``name`` in ``chemicals.identifiers`` and must have the same
    structure as ``smiles``; None when the name is unknown, the structure differs, or the
    refractive index, the density or its temperature range is missing.
    """
    ident = require("chemicals.identifiers", _PURPOSE)
    refr = require("chemicals.refractivity", _PURPOSE)
    volume = require("chemicals.volume", _PURPOSE)
    dippr = require("chemicals.dippr", _PURPOSE)
    try:
        chem = ident.search_chemical(name)
    except Exception:
        return None
    if _canonical(chem.smiles or "") != _canonical(smiles):
        return None
    n_d, temp = refr.RI(chem.CASs)
    perry = volume.rho_data_Perry_8E_105_l
    if n_d is None or chem.CASs not in perry.index:
        return None
    p = perry.loc[chem.CASs]
    temp = float(temp) if temp else 293.15
    if not p.Tmin <= temp <= p.Tmax:
        return None
    rho_mol_m3 = dippr.EQ105(temp, p.C1, p.C2, p.C3, p.C4)
    return float(refr.polarizability_from_RI(n_d, 1.0 / rho_mol_m3)) * 1e30, temp
