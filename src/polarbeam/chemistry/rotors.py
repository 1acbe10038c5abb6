"""Rotor description of a molecule from its structure (``rotor = "auto"`` in compounds.csv).

The lowest of a few MMFF94-optimised ETKDG conformers (UFF when MMFF94 has no parameters) gives:

* the principal moments of inertia I_a ≤ I_b ≤ I_c (atomic masses of RDKit, Å² u) and the
  rotational constants A = h/(8π² I_a) ≥ B ≥ C (Gordy & Cook, *Microwave Molecular Spectra*,
  3rd ed., ch. 2; textbook);
* the dipole direction: Σ q_i r_i of the partial charges (MMFF94, else Gasteiger) about the
  centre of mass, in the principal-axis frame (a, b, c).

The kind of response follows from the structure:

* a molecule with a rotatable bond (RDKit's strict count, terminal groups such as CH₃ excluded) is
  floppy: its orientation stays thermal in the field, the Langevin–Debye (``ergodic``) reading;
* a rigid molecule is ``linear`` (I_a < 10⁻³ I_c), a ``symmetric`` top (two moments within
  :data:`SYMMETRIC_TOLERANCE`; prolate B = C, oblate A = B, constants averaged) or an
  ``asymmetric`` top. A rigid model is not restricted to cold beams: it returns to
  Langevin–Debye by itself where that limit holds (a hot linear rotor, an asymmetric top in a weak
  field), while a rigid symmetric top keeps R < 1 however hot (docs/rotors.md).

Nothing here knows about beams or fields: the description is plain numbers and a reason.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.constants as sc

from polarbeam._util.optional import lazy
from polarbeam.chemistry.conformers import check_conformer_size
from polarbeam.chemistry.molecules import as_mol
from polarbeam.errors import CompoundError

# RDKit loads on first use (a campaign without ``rotor = "auto"`` never needs it)
Chem = lazy("rdkit.Chem", "rotor models from structures")
rdBase = lazy("rdkit.rdBase", "rotor models from structures")
AllChem = lazy("rdkit.Chem.AllChem", "rotor models from structures")
rdMolDescriptors = lazy("rdkit.Chem.rdMolDescriptors", "rotor models from structures")

__all__ = ["SYMMETRIC_TOLERANCE", "RotorDescription", "principal_axes", "rotor_description"]

#: relative difference of two principal moments below which the top is taken as symmetric
SYMMETRIC_TOLERANCE = 0.02
_AMU_A2 = sc.atomic_mass * 1e-20  # kg m² for 1 u Å²


@dataclass(frozen=True)
class RotorDescription:
    """Kind (``ergodic``, ``linear``, ``symmetric``, ``asymmetric``), rotational constants
    (A, B, C) in Hz (None entries not used), dipole direction along (a, b, c) and the reason."""

    kind: str
    constants_hz: tuple[float | None, float | None, float | None]
    direction: tuple[float, float, float] | None
    rotatable_bonds: int
    reason: str


def _lowest_conformer(mol: Chem.Mol, compound: str, seed: int, n: int):
    mh = Chem.AddHs(mol)
    params = AllChem.ETKDGv3()
    params.randomSeed = int(seed)
    params.numThreads = 1
    with rdBase.BlockLogs():
        cids = [c for c in AllChem.EmbedMultipleConfs(mh, n, params=params) if c >= 0]
        if not cids:
            raise CompoundError(f"compound {compound!r}: RDKit could not embed a 3-D conformer")
        if AllChem.MMFFHasAllMoleculeParams(mh):
            props = AllChem.MMFFGetMoleculeProperties(mh, mmffVariant="MMFF94")
            res = AllChem.MMFFOptimizeMoleculeConfs(mh, numThreads=1, maxIters=2000)
            q = np.array([props.GetMMFFPartialCharge(i) for i in range(mh.GetNumAtoms())])
        else:
            res = AllChem.UFFOptimizeMoleculeConfs(mh, numThreads=1, maxIters=2000)
            AllChem.ComputeGasteigerCharges(mh)
            q = np.nan_to_num([a.GetDoubleProp("_GasteigerCharge") for a in mh.GetAtoms()])
    energies = [e for _, e in res]
    best = cids[int(np.argmin(energies))]
    return mh, mh.GetConformer(best).GetPositions(), np.asarray(q, dtype=float)


def principal_axes(masses: np.ndarray, positions: np.ndarray):
    """(moments I_a ≤ I_b ≤ I_c in u Å², axes as columns, centre of mass) of point masses."""
    com = masses @ positions / masses.sum()
    r = positions - com
    inertia = np.sum(masses * np.sum(r * r, axis=1)) * np.eye(3) - (masses[:, None] * r).T @ r
    moments, axes = np.linalg.eigh(inertia)
    return moments, axes, com


def _hz(moment_u_a2: float) -> float:
    return sc.h / (8.0 * math.pi**2 * moment_u_a2 * _AMU_A2)


def rotor_description(
    structure, compound: str = "?", *, seed: int = 0xB0B, n_conformers: int = 6
) -> RotorDescription:
    """The rotor description of a SMILES or RDKit molecule (see the module docstring)."""
    mol = as_mol(structure, compound)
    check_conformer_size(mol, compound)
    n_rot = int(rdMolDescriptors.CalcNumRotatableBonds(mol, strict=True))
    if mol.GetNumAtoms() == 1 and Chem.AddHs(mol).GetNumAtoms() == 1:
        return RotorDescription("ergodic", (None, None, None), None, 0, "an atom: no rotation")
    if n_rot > 0:
        return RotorDescription(
            "ergodic",
            (None, None, None),
            None,
            n_rot,
            f"floppy: {n_rot} rotatable bond(s) in the structure, orientations stay thermal "
            "(Langevin–Debye)",
        )
    mh, pos, q = _lowest_conformer(mol, compound, seed, n_conformers)
    masses = np.array([a.GetMass() for a in mh.GetAtoms()])
    moments, axes, com = principal_axes(masses, pos)
    dip = (q @ (pos - com)) @ axes  # e·Å along (a, b, c)
    norm = float(np.linalg.norm(dip))
    direction = tuple(float(x) for x in dip / norm) if norm > 1e-6 else None
    i_a, i_b, i_c = (float(x) for x in moments)
    if i_a < 1e-3 * i_c:
        b = _hz(0.5 * (i_b + i_c))
        return RotorDescription(
            "linear",
            (None, b, None),
            (1.0, 0.0, 0.0),
            0,
            f"rigid linear rotor (I_a/I_c = {i_a / i_c:.1e}); B = {b / 1e6:.5g} MHz from the "
            "lowest conformer",
        )
    a, b, c = _hz(i_a), _hz(i_b), _hz(i_c)
    prolate = (i_c - i_b) / i_c < SYMMETRIC_TOLERANCE
    oblate = (i_b - i_a) / i_b < SYMMETRIC_TOLERANCE
    consts = f"A, B, C = {a / 1e6:.5g}, {b / 1e6:.5g}, {c / 1e6:.5g} MHz from the lowest conformer"
    if prolate and not oblate:
        bc = 0.5 * (b + c)
        return RotorDescription(
            "symmetric",
            (a, bc, bc),
            (1.0, 0.0, 0.0),
            0,
            f"rigid prolate symmetric top (I_b ≈ I_c), {consts}; dipole along a",
        )
    if oblate and not prolate:
        ab = 0.5 * (a + b)
        return RotorDescription(
            "symmetric",
            (ab, ab, c),
            (0.0, 0.0, 1.0),
            0,
            f"rigid oblate symmetric top (I_a ≈ I_b), {consts}; dipole along c",
        )
    if prolate and oblate:
        m = (a + b + c) / 3.0
        return RotorDescription(
            "symmetric",
            (m, m, m),
            (1.0, 0.0, 0.0),
            0,
            f"rigid spherical top, {consts}",
        )
    if direction is None:
        direction = (1.0, 0.0, 0.0)
    axis_txt = ", ".join(f"{ax}:{v:.2f}" for ax, v in zip("abc", direction, strict=True))
    return RotorDescription(
        "asymmetric",
        (a, b, c),
        direction,
        0,
        f"rigid asymmetric top, {consts}; dipole direction {axis_txt} from the partial charges",
    )
