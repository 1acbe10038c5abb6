"""Molecular geometries for the quantum-chemistry stage: SMILES, XYZ, SDF or MOL in, Å out.

From SMILES: RDKit adds hydrogens, embeds with ETKDGv3 (fixed seed, one thread) and optimises
with MMFF94 (UFF when MMFF94 has no parameters).  A 3D SDF/MOL is used as it is (missing
hydrogens added at computed positions); a 2D one is embedded like a SMILES; XYZ coordinates are
read in Å.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from polarbeam._util.optional import lazy
from polarbeam.errors import CompoundError, InputError

Chem = lazy("rdkit.Chem", "reading molecules (SMILES, SDF)")
rdBase = lazy("rdkit.rdBase", "reading molecules (SMILES, SDF)")
AllChem = lazy("rdkit.Chem.AllChem", "reading molecules (SMILES, SDF)")

__all__ = [
    "DEFAULT_SEED",
    "Geometry",
    "default_name",
    "geometry_from_file",
    "geometry_from_smiles",
    "load_geometry",
]

#: Seed of the RDKit ETKDG embedding (any fixed value; fixed so geometries and hashes repeat).
DEFAULT_SEED = 0xF00D


@dataclass(frozen=True)
class Geometry:
    """A molecular geometry: element symbols, Cartesian coordinates in Å, total charge.

    ``label`` is the canonical SMILES when the structure is known as a graph (SMILES, SDF) and
    empty for a bare XYZ file; ``source`` says where the coordinates came from.
    """

    symbols: tuple[str, ...]
    coords_angstrom: tuple[tuple[float, float, float], ...]
    charge: int = 0
    label: str = ""
    source: str = ""

    def __post_init__(self):
        if not self.symbols:
            raise InputError("geometry: expected at least one atom, found none")
        if len(self.symbols) != len(self.coords_angstrom):
            raise InputError(
                f"geometry: expected one coordinate triple per atom ({len(self.symbols)}), "
                f"found {len(self.coords_angstrom)}"
            )
        xyz = np.asarray(self.coords_angstrom, dtype=float)
        if xyz.shape != (len(self.symbols), 3) or not np.all(np.isfinite(xyz)):
            raise InputError("geometry: expected finite x, y, z coordinates for every atom")

    @property
    def atomic_numbers(self) -> tuple[int, ...]:
        table = Chem.GetPeriodicTable()
        return tuple(int(table.GetAtomicNumber(s)) for s in self.symbols)

    @property
    def n_electrons(self) -> int:
        return sum(self.atomic_numbers) - self.charge

    def fingerprint(self) -> dict:
        """Canonical, JSON-ready description used for the cache hash (coordinates to 1e-6 Å)."""
        return {
            "label": self.label,
            "symbols": list(self.symbols),
            "coords": [[round(float(c), 6) + 0.0 for c in xyz] for xyz in self.coords_angstrom],
            "charge": int(self.charge),
        }

    def summary(self) -> dict:
        return {
            "symbols": list(self.symbols),
            "coords_angstrom": [list(map(float, xyz)) for xyz in self.coords_angstrom],
            "charge": self.charge,
            "label": self.label,
            "source": self.source,
        }

    @classmethod
    def from_summary(cls, d: dict) -> Geometry:
        return cls(
            symbols=tuple(d["symbols"]),
            coords_angstrom=tuple(tuple(float(c) for c in xyz) for xyz in d["coords_angstrom"]),
            charge=int(d["charge"]),
            label=d.get("label", ""),
            source=d.get("source", ""),
        )


def _rdkit_quiet():
    return rdBase.BlockLogs()


def _embed(mol, seed: int, where: str):
    """ETKDGv3 embedding + MMFF94 (UFF if MMFF lacks parameters); returns the force-field name."""
    params = AllChem.ETKDGv3()
    params.randomSeed = int(seed)
    params.numThreads = 1
    if AllChem.EmbedMolecule(mol, params) != 0:
        params.useRandomCoords = True
        if AllChem.EmbedMolecule(mol, params) != 0:
            raise CompoundError(f"{where}: RDKit could not embed a 3D geometry (ETKDGv3)")
    if AllChem.MMFFHasAllMoleculeParams(mol):
        AllChem.MMFFOptimizeMolecule(mol, maxIters=5000)
        return "MMFF94"
    if AllChem.UFFHasAllMoleculeParams(mol):
        AllChem.UFFOptimizeMolecule(mol, maxIters=5000)
        return "UFF (no MMFF94 parameters)"
    return "none (no force-field parameters)"


def _geometry_from_rdkit(mol, label: str, source: str) -> Geometry:
    conf = mol.GetConformer()
    symbols = tuple(a.GetSymbol() for a in mol.GetAtoms())
    coords = tuple(tuple(float(v) for v in conf.GetAtomPosition(i)) for i in range(len(symbols)))
    return Geometry(symbols, coords, int(Chem.GetFormalCharge(mol)), label, source)


def geometry_from_smiles(smiles: str, *, seed: int = DEFAULT_SEED) -> Geometry:
    """3D geometry from SMILES: add hydrogens, ETKDGv3 embed (fixed seed), MMFF94 optimise.

    Raises
    ------
    CompoundError
        If RDKit cannot parse or embed the SMILES.
    """
    with _rdkit_quiet():
        mol = Chem.MolFromSmiles(smiles)
    if mol is None or mol.GetNumAtoms() == 0:
        raise CompoundError(f"SMILES {smiles!r}: expected a valid SMILES, RDKit could not parse it")
    canonical = Chem.MolToSmiles(mol)
    mh = Chem.AddHs(mol)
    with _rdkit_quiet():
        ff = _embed(mh, seed, f"SMILES {smiles!r}")
    return _geometry_from_rdkit(mh, canonical, f"RDKit ETKDGv3 (seed {seed}) + {ff}")


def _read_xyz(path: Path, charge: int) -> Geometry:
    table = Chem.GetPeriodicTable()
    lines = path.read_text(encoding="utf-8").splitlines()
    if not lines or not lines[0].strip():
        raise InputError(f"{path}: line 1: expected the atom count of an XYZ file, found nothing")
    try:
        n = int(lines[0].split()[0])
    except ValueError:
        raise InputError(
            f"{path}: line 1: expected the atom count of an XYZ file, found {lines[0].strip()!r}"
        ) from None
    if n <= 0 or len(lines) < n + 2:
        raise InputError(
            f"{path}: expected {n} atom lines after the comment line, "
            f"found {max(len(lines) - 2, 0)}"
        )
    symbols, coords = [], []
    for i in range(2, n + 2):
        parts = lines[i].split()
        if len(parts) < 4:
            raise InputError(f"{path}: line {i + 1}: expected 'symbol x y z', found {lines[i]!r}")
        sym = parts[0]
        if sym.isdigit():
            sym = table.GetElementSymbol(int(sym))
        sym = sym.capitalize()
        try:
            table.GetAtomicNumber(sym)
        except RuntimeError:
            raise InputError(
                f"{path}: line {i + 1}: expected an element symbol, found {parts[0]!r}"
            ) from None
        try:
            coords.append(tuple(float(v) for v in parts[1:4]))
        except ValueError:
            raise InputError(
                f"{path}: line {i + 1}: expected three coordinates in Å, found {parts[1:4]!r}"
            ) from None
        symbols.append(sym)
    return Geometry(tuple(symbols), tuple(coords), charge, "", f"{path.name} (XYZ)")


def geometry_from_file(path, *, charge: int | None = None, seed: int = DEFAULT_SEED) -> Geometry:
    """Geometry from an XYZ (Å), SDF or MOL file.

    An SDF/MOL without 3D coordinates is embedded and optimised as for SMILES; missing
    hydrogens are added (at computed positions).  Only the first molecule of an SDF is used.
    ``charge`` overrides the formal charge (XYZ files carry none: default 0).
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(f"{path}: structure file not found")
    suffix = path.suffix.lower()
    if suffix == ".xyz":
        return _read_xyz(path, 0 if charge is None else int(charge))
    if suffix not in (".sdf", ".mol"):
        raise InputError(f"{path}: expected a .xyz, .sdf or .mol structure file, found {suffix!r}")
    with _rdkit_quiet():
        supplier = Chem.SDMolSupplier(str(path), removeHs=False)
        mol = next(iter(supplier), None) if len(supplier) else None
    if mol is None:
        raise InputError(f"{path}: expected a molecule RDKit can read, found none (first record)")
    label = Chem.MolToSmiles(Chem.RemoveHs(mol))
    three_d = mol.GetNumConformers() > 0 and mol.GetConformer().Is3D()
    if three_d:
        mh = Chem.AddHs(mol, addCoords=True)
        source = f"{path.name} (3D coordinates)"
    else:
        mh = Chem.AddHs(mol)
        with _rdkit_quiet():
            ff = _embed(mh, seed, str(path))
        source = f"{path.name} (2D) → RDKit ETKDGv3 (seed {seed}) + {ff}"
    geom = _geometry_from_rdkit(mh, label, source)
    if charge is not None:
        geom = Geometry(geom.symbols, geom.coords_angstrom, int(charge), geom.label, geom.source)
    return geom


def load_geometry(structure, *, charge: int | None = None, seed: int = DEFAULT_SEED) -> Geometry:
    """A :class:`Geometry` from a Geometry, a structure file (.xyz/.sdf/.mol) or a SMILES string."""
    if isinstance(structure, Geometry):
        return structure
    if isinstance(structure, os.PathLike) or (
        isinstance(structure, str) and Path(structure).suffix.lower() in (".xyz", ".sdf", ".mol")
    ):
        return geometry_from_file(structure, charge=charge, seed=seed)
    if not isinstance(structure, str) or not structure.strip():
        raise InputError(
            f"structure: expected a SMILES string, a .xyz/.sdf/.mol path or a Geometry, "
            f"found {structure!r}"
        )
    geom = geometry_from_smiles(structure.strip(), seed=seed)
    if charge is not None and charge != geom.charge:
        geom = Geometry(geom.symbols, geom.coords_angstrom, int(charge), geom.label, geom.source)
    return geom


def default_name(structure, geom: Geometry) -> str:
    """Name of a compound in tables: the canonical SMILES, else the source or the file stem."""
    if geom.label:
        return geom.label
    if isinstance(structure, Geometry):
        return geom.source or "molecule"
    return Path(structure).stem
