"""On-the-spot quantum chemistry: static polarizability and dipole of one molecule with PySCF.

Pipeline of :func:`compute_properties`:

1. geometry -- from SMILES (RDKit ETKDGv3 embedding + MMFF94 optimisation, fixed seed) or from an
   XYZ/SDF/MOL file;
2. cache look-up -- a JSON file named by a hash of (canonical structure, geometry, charge, method,
   basis, response scheme), so a rerun costs nothing;
3. cost estimate -- basis-function count N and a time model t ≈ t_water·(N/N_water)^p,
   p = 3…4, calibrated on water; a calculation over the limit is refused with
   :class:`CalculationTooBigError` before any SCF starts;
4. SCF -- RHF for ``method="hf"``, RKS with the named exchange-correlation functional otherwise;
5. static dipole polarizability by coupled-perturbed SCF (CPHF/CPKS, solved here with PySCF's
   ``scf.cphf`` Krylov solver and the SCF object's response function), or by finite field
   (central differences of the dipole under ±F along x, y, z) as fallback and cross-check;
6. dipole moment of the field-free SCF density.

:func:`d4_polarizability` gives the D4 model's static polarizability (dftd4) as a fast estimate
for molecules too big for SCF.  All of this needs the extra ``polarbeam[qc]``.

Values in a :class:`ComputedResult` are SI (C·m²/V, C·m); Å³ and debye are properties for
tables.  Computed values are electronic only (fixed nuclei): see
:data:`polarbeam.computed.ELECTRONIC_VS_VIBRATIONAL_NOTE`.
"""

from __future__ import annotations

import hashlib
import html
import json
import math
import os
import time
import warnings
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Literal

import numpy as np
import pandas as pd
from scipy import constants as _sc

from ._util.optional import MissingExtraError, require
from .computed import COMPUTED_COLUMNS, anisotropy, isotropic_average
from .constants import (
    AU_POLARIZABILITY_SI,
    alpha_a3_from_si,
    debye_from_si,
)
from .errors import CompoundError, InputError

__all__ = [
    "DEFAULT_COST_MODELS",
    "DEFAULT_MAX_SECONDS",
    "DEFAULT_SEED",
    "CalculationTooBigError",
    "ComputedResult",
    "CostEstimate",
    "CostModel",
    "Geometry",
    "MissingExtraError",
    "ProgressCallback",
    "calibrate_cost_model",
    "compute_properties",
    "cpscf_polarizability",
    "d4_polarizability",
    "default_cache_dir",
    "dipole_au",
    "estimate_cost",
    "finite_field_polarizability",
    "geometry_from_file",
    "geometry_from_smiles",
    "load_geometry",
    "results_table",
]

#: Atomic unit of electric dipole moment e·a0 in C·m (CODATA via scipy.constants).
AU_DIPOLE_SI = _sc.physical_constants["atomic unit of electric dipole mom."][0]
#: Seed of the RDKit ETKDG embedding (any fixed value; fixed so geometries and hashes repeat).
DEFAULT_SEED = 0xF00D
#: Default refusal limit for one calculation, seconds (estimated, see :class:`CostModel`).
DEFAULT_MAX_SECONDS = 1800.0
#: Finite-field strength in atomic units (5.14e8 V/m): small enough that the hyperpolarizability
#: error of a central difference (∝ F²) stays below 1e-5 relative for small molecules.
DEFAULT_FIELD_AU = 1.0e-3
_SCHEMA = 1
_HF_NAMES = frozenset({"hf", "rhf"})

#: Callback ``progress(step, total, message)`` called at the start of each step.
ProgressCallback = Callable[[int, int, str], None]
PolarizabilityScheme = Literal["analytic", "finite-field"]


class CalculationTooBigError(CompoundError):
    """The estimated run time of a calculation exceeds the configured limit."""


# --------------------------------------------------------------------------------------------
# geometry
# --------------------------------------------------------------------------------------------


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
        from rdkit import Chem

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
    from rdkit import rdBase

    return rdBase.BlockLogs()


def _embed(mol, seed: int, where: str):
    """ETKDGv3 embedding + MMFF94 (UFF if MMFF lacks parameters); returns the force-field name."""
    from rdkit.Chem import AllChem

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
    from rdkit import Chem

    return Geometry(symbols, coords, int(Chem.GetFormalCharge(mol)), label, source)


def geometry_from_smiles(smiles: str, *, seed: int = DEFAULT_SEED) -> Geometry:
    """3D geometry from SMILES: add hydrogens, ETKDGv3 embed (fixed seed), MMFF94 optimise.

    Raises
    ------
    CompoundError
        If RDKit cannot parse or embed the SMILES.
    """
    from rdkit import Chem

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
    from rdkit import Chem

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
    from rdkit import Chem

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


def _default_name(structure, geom: Geometry) -> str:
    if geom.label:
        return geom.label
    if isinstance(structure, Geometry):
        return geom.source or "molecule"
    return Path(structure).stem


# --------------------------------------------------------------------------------------------
# cost model and refusal
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class CostModel:
    """Run-time model t(N) = t_ref·(N/N_ref)^p for SCF + analytic polarizability.

    ``p`` spans ``exponent_low`` … ``exponent_high`` (≈N³ for the diagonalisation/DFT-grid
    dominated regime, ≈N⁴ for exact exchange without screening); the decision uses the
    geometric mean of the two bounds.  Water is small enough that fixed overheads dominate, so
    extrapolations are conservative (overestimates) for large N.
    """

    reference_seconds: float
    reference_n_basis: int
    exponent_low: float = 3.0
    exponent_high: float = 4.0
    measured_on: str = ""

    def __post_init__(self):
        if not (self.reference_seconds > 0 and self.reference_n_basis > 0):
            raise InputError("cost model: expected reference time and basis size > 0")
        if not (0 < self.exponent_low <= self.exponent_high):
            raise InputError("cost model: expected 0 < exponent_low <= exponent_high")

    def estimate(self, n_basis: int) -> tuple[float, float]:
        """(optimistic, pessimistic) seconds for ``n_basis`` basis functions."""
        ratio = n_basis / self.reference_n_basis
        return (
            self.reference_seconds * ratio**self.exponent_low,
            self.reference_seconds * ratio**self.exponent_high,
        )


#: Measured with benchmarks/qchem_water.py on the 2-core development machine: water
#: (RDKit/MMFF geometry), def2-SVPD (39 basis functions), SCF + CPHF/CPKS, wall time.
DEFAULT_COST_MODELS: dict[str, CostModel] = {
    "hf": CostModel(0.25, 39, measured_on="water HF/def2-SVPD, 2-core development machine"),
    "dft": CostModel(1.2, 39, measured_on="water B3LYP/def2-SVPD, 2-core development machine"),
}
#: Finite field runs 7 SCFs (the last six start from the field-free density).
_FINITE_FIELD_FACTOR = 4.0


@dataclass(frozen=True)
class CostEstimate:
    """Estimated wall time of one calculation."""

    n_basis: int
    seconds_low: float
    seconds_high: float
    method: str
    basis: str

    @property
    def seconds(self) -> float:
        """Geometric mean of the bounds: the number used for the refusal decision."""
        return math.sqrt(self.seconds_low * self.seconds_high)

    def describe(self) -> str:
        return f"{self.n_basis} basis functions, {_fmt_time(self.seconds_low)}–" + _fmt_time(
            self.seconds_high
        )


def _fmt_time(s: float) -> str:
    if s < 90:
        return f"{s:.3g} s"
    if s < 5400:
        return f"{s / 60:.3g} min"
    if s < 2 * 86400:
        return f"{s / 3600:.3g} h"
    return f"{s / 86400:.3g} d"


def _is_hf(method: str) -> bool:
    return method.strip().lower() in _HF_NAMES


def _build_mol(geometry: Geometry, basis: str):
    gto = require("pyscf.gto", "computing polarizabilities with PySCF")
    atoms = [(s, xyz) for s, xyz in zip(geometry.symbols, geometry.coords_angstrom, strict=True)]
    try:
        with warnings.catch_warnings():  # PySCF suggests basis-set-exchange for unknown names
            warnings.simplefilter("ignore", UserWarning)
            return gto.M(
                atom=atoms,
                basis=basis,
                charge=geometry.charge,
                spin=geometry.n_electrons % 2,
                unit="Angstrom",
                verbose=0,
            )
    except Exception as exc:  # PySCF raises KeyError/RuntimeError/... for unknown basis names
        elements = ", ".join(sorted(set(geometry.symbols)))
        raise InputError(
            f"basis {basis!r}: expected a basis PySCF knows for {elements}, found it unusable "
            f"({type(exc).__name__}: {str(exc).splitlines()[0] if str(exc) else ''})"
        ) from None


def estimate_cost(
    geometry: Geometry,
    method: str = "b3lyp",
    basis: str = "def2-svpd",
    *,
    polarizability: PolarizabilityScheme = "analytic",
    cost_model: CostModel | None = None,
) -> CostEstimate:
    """Estimate the wall time of :func:`compute_properties` from the basis-function count."""
    mol = _build_mol(geometry, basis)
    n = int(mol.nao_nr())
    model = cost_model or DEFAULT_COST_MODELS["hf" if _is_hf(method) else "dft"]
    low, high = model.estimate(n)
    if polarizability == "finite-field":
        low, high = low * _FINITE_FIELD_FACTOR, high * _FINITE_FIELD_FACTOR
    return CostEstimate(n, low, high, method, basis)


def calibrate_cost_model(method: str = "b3lyp", basis: str = "def2-svpd") -> CostModel:
    """Measure a :class:`CostModel` on this machine: one water calculation (a few seconds)."""
    geom = geometry_from_smiles("O")
    t0 = time.perf_counter()
    raw = _run_pyscf(geom, method, basis, "analytic", DEFAULT_FIELD_AU, None)
    seconds = time.perf_counter() - t0
    return CostModel(seconds, raw["n_basis"], measured_on=f"water {method}/{basis}, this machine")


# --------------------------------------------------------------------------------------------
# the response calculations (functions of a converged PySCF SCF object)
# --------------------------------------------------------------------------------------------


def _charge_centre(mol) -> np.ndarray:
    charges = mol.atom_charges()
    return charges @ mol.atom_coords() / charges.sum()


def cpscf_polarizability(mf, *, tol: float = 1e-9, max_cycle: int = 100) -> np.ndarray:
    """Static dipole polarizability tensor (atomic units) of a closed-shell RHF/RKS solution.

    Solves the coupled-perturbed equations (ε_a − ε_i) U_ai + [K U]_ai = −h_ai for the three
    field directions, h = ⟨a|r|i⟩, with the SCF object's own response function (Coulomb,
    exact exchange and the XC kernel), and returns α_xy = −4 Σ_ai h^x_ai U^y_ai (symmetrised):
    the factor 2 counts both spins, the other 2 the U + Uᵀ density response.
    """
    lib = require("pyscf.lib", "computing polarizabilities with PySCF")
    cphf = require("pyscf.scf.cphf", "computing polarizabilities with PySCF")
    mol = mf.mol
    occ = np.asarray(mf.mo_occ)
    if not np.all(np.isin(occ, (0.0, 2.0))):
        raise CompoundError("CPSCF polarizability: expected a closed-shell RHF/RKS solution")
    coeff = np.asarray(mf.mo_coeff)
    orbo, orbv = coeff[:, occ > 0], coeff[:, occ == 0]
    with mol.with_common_orig(_charge_centre(mol)):
        r = mol.intor_symmetric("int1e_r", comp=3)
    h1 = lib.einsum("xpq,pa,qi->xai", r, orbv, orbo)
    vresp = mf.gen_response(hermi=1)
    nvir, nocc = orbv.shape[1], orbo.shape[1]

    def fvind(u):
        u = u.reshape(-1, nvir, nocc)
        dm1 = lib.einsum("xai,pa,qi->xpq", u, orbv, orbo)
        dm1 = dm1 + dm1.transpose(0, 2, 1)
        # ×2: the closed-shell density response is 2(C_v U C_oᵀ + h.c.)
        v1 = vresp(dm1) * 2.0
        return lib.einsum("xpq,pa,qi->xai", v1, orbv, orbo).ravel()

    u = cphf.solve(fvind, mf.mo_energy, occ, h1, None, max_cycle=max_cycle, tol=tol)[0]
    e2 = np.einsum("xai,yai->xy", h1, u)
    return -2.0 * (e2 + e2.T)


def _field_scf(mf, field_au: np.ndarray, r_ints: np.ndarray, dm0):
    """Copy of ``mf`` re-converged with the term +F·r added to the one-electron Hamiltonian.

    The interaction of an electron (charge −e) with a uniform field F is −(−r)·F = +F·r;
    the nuclear term is a constant and does not change the density.
    """
    h0 = mf.get_hcore()
    pert = mf.copy()
    h = h0 + np.einsum("x,xij->ij", field_au, r_ints)
    pert.get_hcore = lambda *args, **kwargs: h
    pert.kernel(dm0=dm0)
    if not pert.converged:
        raise CompoundError(f"finite field {field_au.tolist()} au: SCF did not converge")
    return pert


def finite_field_polarizability(mf, field_au: float = DEFAULT_FIELD_AU) -> np.ndarray:
    """Static polarizability tensor (atomic units) by central differences of the dipole.

    α_ij = [μ_i(+F e_j) − μ_i(−F e_j)] / (2F), six SCFs started from the field-free density.
    The truncation error is of order γF²/6 relative to α (γ the second hyperpolarizability).
    """
    if not (field_au > 0):
        raise InputError(f"finite field: expected a field strength > 0 au, found {field_au!r}")
    mol = mf.mol
    with mol.with_common_orig(_charge_centre(mol)):
        r = mol.intor_symmetric("int1e_r", comp=3)
    dm0 = mf.make_rdm1()
    alpha = np.zeros((3, 3))
    for j in range(3):
        f = np.zeros(3)
        f[j] = field_au
        mu_p = _field_scf(mf, f, r, dm0).dip_moment(unit="au", verbose=0)
        mu_m = _field_scf(mf, -f, r, dm0).dip_moment(unit="au", verbose=0)
        alpha[:, j] = (np.asarray(mu_p) - np.asarray(mu_m)) / (2.0 * field_au)
    return 0.5 * (alpha + alpha.T)


def dipole_au(mf) -> np.ndarray:
    """Dipole vector (atomic units) of an SCF solution about the centre of mass.

    μ = Σ_A Z_A (R_A − R_cm) − tr(D r_cm).  For a neutral molecule the origin does not matter;
    for an ion the centre of mass is the point the molecule rotates about in a beam.
    """
    mol = mf.mol
    masses = np.asarray(mol.atom_mass_list(isotope_avg=True), dtype=float)
    coords = mol.atom_coords()
    com = masses @ coords / masses.sum()
    with mol.with_common_orig(com):
        r = mol.intor_symmetric("int1e_r", comp=3)
    dm = mf.make_rdm1()
    electronic = np.einsum("xij,ji->x", r, dm).real
    nuclear = mol.atom_charges() @ (coords - com)
    return nuclear - electronic


def _make_scf(mol, method: str):
    scf = require("pyscf.scf", "computing polarizabilities with PySCF")
    dft = require("pyscf.dft", "computing polarizabilities with PySCF")
    if _is_hf(method):
        mf = scf.RHF(mol)
    else:
        try:
            dft.libxc.parse_xc(method)
        except Exception:
            raise InputError(
                f"method {method!r}: expected 'hf' or an exchange-correlation functional known "
                "to PySCF/libxc (b3lyp, pbe0, pbe, wb97x, cam-b3lyp, ...)"
            ) from None
        mf = dft.RKS(mol)
        mf.xc = method
    mf.conv_tol = 1e-10
    mf.max_cycle = 100
    mf.verbose = 0
    return mf


def _run_pyscf(
    geometry: Geometry,
    method: str,
    basis: str,
    polarizability: PolarizabilityScheme,
    field_au: float,
    report: Callable[[str], None] | None,
) -> dict:
    """Run SCF + response; return raw atomic-unit results (a plain dict, JSON-ready)."""
    pyscf = require("pyscf", "computing polarizabilities with PySCF")
    say = report or (lambda _msg: None)
    mol = _build_mol(geometry, basis)
    t0 = time.perf_counter()
    say(f"SCF ({'RHF' if _is_hf(method) else 'RKS ' + method}/{basis}, {mol.nao_nr()} functions)")
    mf = _make_scf(mol, method)
    mf.kernel()
    if not mf.converged:
        mf = mf.newton()
        mf.kernel()
        if not mf.converged:
            raise CompoundError(
                f"{geometry.label or geometry.source}: SCF {method}/{basis} did not converge"
            )
    t1 = time.perf_counter()
    scheme = "CPHF" if _is_hf(method) else "CPKS"
    if polarizability == "finite-field":
        say(f"polarizability (finite field, F = {field_au:g} au, 6 SCFs)")
        alpha = finite_field_polarizability(mf, field_au)
        scheme = f"finite field (F = {field_au:g} au)"
    else:
        say(f"polarizability ({scheme})")
        alpha = cpscf_polarizability(mf)
    t2 = time.perf_counter()
    dip = dipole_au(mf)
    return {
        "energy_hartree": float(mf.e_tot),
        "dipole_au": dip.tolist(),
        "alpha_au": np.asarray(alpha, dtype=float).tolist(),
        "n_basis": int(mol.nao_nr()),
        "scheme": scheme,
        "scf_seconds": t1 - t0,
        "response_seconds": t2 - t1,
        "software": f"pyscf {pyscf.__version__}",
    }


# --------------------------------------------------------------------------------------------
# result object and cache
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ComputedResult:
    """Computed static polarizability and dipole of one molecule (SI inside).

    ``alpha_tensor_si`` / ``dipole_vector_si`` are ``None`` for models that give only an
    isotropic value (D4); ``dipole_si`` is NaN then.
    """

    name: str
    method: str
    basis: str
    polarizability_method: str
    alpha_si: float
    dipole_si: float
    geometry: Geometry
    alpha_tensor_si: tuple[tuple[float, float, float], ...] | None = None
    dipole_vector_si: tuple[float, float, float] | None = None
    energy_hartree: float = math.nan
    n_basis: int = 0
    elapsed_s: float = math.nan
    software: str = ""
    cache_key: str = ""
    from_cache: bool = field(default=False, compare=False)

    @property
    def label(self) -> str:
        """Method label used in tables: ``"b3lyp/def2-svpd"``, ``"D4"``."""
        return f"{self.method}/{self.basis}" if self.basis else self.method

    @property
    def alpha_A3(self) -> float:
        return float(alpha_a3_from_si(self.alpha_si))

    @property
    def dipole_D(self) -> float:
        return float(debye_from_si(self.dipole_si))

    @property
    def alpha_tensor_A3(self) -> np.ndarray | None:
        if self.alpha_tensor_si is None:
            return None
        return alpha_a3_from_si(np.asarray(self.alpha_tensor_si, dtype=float))

    @property
    def principal_A3(self) -> tuple[float, float, float] | None:
        t = self.alpha_tensor_A3
        return None if t is None else tuple(float(v) for v in np.sort(np.linalg.eigvalsh(t)))

    @property
    def anisotropy_A3(self) -> float:
        t = self.alpha_tensor_A3
        return math.nan if t is None else anisotropy(t)

    def summary(self) -> dict:
        """Plain, JSON-ready dict (SI values plus Å³/debye for reading); inverse: from_summary."""
        return {
            "schema": _SCHEMA,
            "name": self.name,
            "method": self.method,
            "basis": self.basis,
            "polarizability_method": self.polarizability_method,
            "alpha_si": self.alpha_si,
            "dipole_si": None if math.isnan(self.dipole_si) else self.dipole_si,
            "alpha_tensor_si": None
            if self.alpha_tensor_si is None
            else [list(r) for r in self.alpha_tensor_si],
            "dipole_vector_si": None
            if self.dipole_vector_si is None
            else list(self.dipole_vector_si),
            "energy_hartree": None if math.isnan(self.energy_hartree) else self.energy_hartree,
            "n_basis": self.n_basis,
            "elapsed_s": None if math.isnan(self.elapsed_s) else self.elapsed_s,
            "software": self.software,
            "cache_key": self.cache_key,
            "geometry": self.geometry.summary(),
            "alpha_A3": self.alpha_A3,
            "anisotropy_A3": None if math.isnan(self.anisotropy_A3) else self.anisotropy_A3,
            "dipole_D": None if math.isnan(self.dipole_si) else self.dipole_D,
        }

    @classmethod
    def from_summary(cls, d: dict, *, from_cache: bool = False) -> ComputedResult:
        def num(v):
            return math.nan if v is None else float(v)

        if d.get("schema") != _SCHEMA:
            raise InputError(f"computed result: expected schema {_SCHEMA}, found {d.get('schema')}")
        tensor = d.get("alpha_tensor_si")
        vec = d.get("dipole_vector_si")
        return cls(
            name=d["name"],
            method=d["method"],
            basis=d["basis"],
            polarizability_method=d["polarizability_method"],
            alpha_si=float(d["alpha_si"]),
            dipole_si=num(d.get("dipole_si")),
            geometry=Geometry.from_summary(d["geometry"]),
            alpha_tensor_si=None if tensor is None else tuple(tuple(map(float, r)) for r in tensor),
            dipole_vector_si=None if vec is None else tuple(map(float, vec)),
            energy_hartree=num(d.get("energy_hartree")),
            n_basis=int(d.get("n_basis", 0)),
            elapsed_s=num(d.get("elapsed_s")),
            software=d.get("software", ""),
            cache_key=d.get("cache_key", ""),
            from_cache=from_cache,
        )

    def _rows(self) -> list[tuple[str, str]]:
        rows = [
            ("compound", self.name),
            ("method", f"{self.label} ({self.polarizability_method})"),
            ("α (isotropic)", f"{self.alpha_A3:.4f} Å³"),
        ]
        if self.principal_A3 is not None:
            p = self.principal_A3
            rows.append(("principal α", f"{p[0]:.4f}, {p[1]:.4f}, {p[2]:.4f} Å³"))
            rows.append(("Δα", f"{self.anisotropy_A3:.4f} Å³"))
        if not math.isnan(self.dipole_si):
            rows.append(("μ", f"{self.dipole_D:.4f} D"))
        if self.n_basis:
            rows.append(("basis functions", str(self.n_basis)))
        rows.append(("geometry", self.geometry.source))
        cost = "from cache" if self.from_cache else f"{self.elapsed_s:.2f} s"
        rows.append(("time", f"{cost} ({self.software})"))
        return rows

    def to_markdown(self) -> str:
        lines = ["| quantity | value |", "| --- | --- |"]
        lines += [f"| {k} | {v} |" for k, v in self._rows()]
        return "\n".join(lines)

    def __str__(self) -> str:
        return "\n".join(f"{k:>16}: {v}" for k, v in self._rows())

    def _repr_html_(self) -> str:
        body = "".join(
            f"<tr><th style='text-align:left'>{html.escape(k)}</th><td>{html.escape(v)}</td></tr>"
            for k, v in self._rows()
        )
        return f"<table>{body}</table>"


def default_cache_dir() -> Path:
    """``$POLARBEAM_CACHE_DIR``, else ``$XDG_CACHE_HOME/polarbeam/qchem``, else ~/.cache/…."""
    env = os.environ.get("POLARBEAM_CACHE_DIR")
    if env:
        return Path(env)
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "polarbeam" / "qchem"


def _cache_key(geometry: Geometry, method: str, basis: str, scheme: str, field_au: float) -> str:
    payload = {
        "schema": _SCHEMA,
        "structure": geometry.fingerprint(),
        "method": method.strip().lower(),
        "basis": basis.strip().lower(),
        "polarizability": scheme,
    }
    if scheme == "finite-field":
        payload["field_au"] = float(field_au)
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()[:32]


def _cache_read(path: Path) -> ComputedResult | None:
    try:
        return ComputedResult.from_summary(json.loads(path.read_text()), from_cache=True)
    except (OSError, ValueError, KeyError, TypeError, InputError):
        return None  # unreadable or stale entry: recompute and overwrite


def _cache_write(path: Path, result: ComputedResult) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_suffix(f".tmp{os.getpid()}")
    tmp.write_text(json.dumps(result.summary(), indent=1, sort_keys=True))
    os.replace(tmp, path)


def compute_properties(
    structure,
    method: str = "b3lyp",
    basis: str = "def2-svpd",
    *,
    name: str | None = None,
    charge: int | None = None,
    polarizability: PolarizabilityScheme = "analytic",
    field_au: float = DEFAULT_FIELD_AU,
    cache_dir=None,
    use_cache: bool = True,
    max_seconds: float | None = DEFAULT_MAX_SECONDS,
    cost_model: CostModel | None = None,
    seed: int = DEFAULT_SEED,
    progress: ProgressCallback | None = None,
) -> ComputedResult:
    """Static polarizability tensor and dipole moment of one closed-shell molecule with PySCF.

    Parameters
    ----------
    structure
        SMILES string, path to a .xyz/.sdf/.mol file, or a :class:`Geometry`.
    method
        ``"hf"`` (RHF) or an exchange-correlation functional name for RKS (``"b3lyp"``, ``"pbe0"``,
        ``"cam-b3lyp"`` …).  Polarizabilities need diffuse functions: prefer ``def2-svpd``,
        ``def2-tzvpd``, ``aug-cc-pvdz``.
    basis
        Any basis-set name PySCF knows.
    name
        Compound name in tables; default the canonical SMILES or the file stem.
    charge
        Total charge; default the formal charge of the SMILES/SDF (0 for XYZ).
    polarizability
        ``"analytic"`` (CPHF/CPKS, default) or ``"finite-field"`` (central differences, ±F).
    field_au
        Finite-field strength in atomic units.
    cache_dir, use_cache
        Where result JSON files live (default :func:`default_cache_dir`); ``use_cache=False``
        neither reads nor writes.
    max_seconds
        Refuse when the estimated time (:func:`estimate_cost`) is above this; ``None`` = no limit.
    cost_model
        Override the calibration (see :func:`calibrate_cost_model`).
    seed
        RDKit embedding seed.
    progress
        ``progress(step, total, message)`` called at each step.

    Raises
    ------
    CalculationTooBigError
        The estimate exceeds ``max_seconds`` (raised before any SCF; the message gives the
        estimate and the way out).
    CompoundError
        Unparseable SMILES, open-shell molecule, SCF not converged.
    InputError
        Unknown method or basis, unreadable structure file.
    MissingExtraError
        PySCF is not installed.
    """
    if polarizability not in ("analytic", "finite-field"):
        raise InputError(
            f"polarizability: expected 'analytic' or 'finite-field', found {polarizability!r}"
        )
    require("pyscf", "computing polarizabilities with PySCF")
    total = 6
    step = [0]

    def say(msg: str) -> None:
        step[0] += 1
        if progress is not None:
            progress(min(step[0], total), total, msg)

    say("geometry")
    geom = load_geometry(structure, charge=charge, seed=seed)
    label = name or _default_name(structure, geom)
    if geom.n_electrons % 2:
        raise CompoundError(
            f"{label}: expected a closed-shell molecule (even electron count) for RHF/RKS, "
            f"found {geom.n_electrons} electrons"
        )
    key = _cache_key(geom, method, basis, polarizability, field_au)
    cache_path = Path(cache_dir or default_cache_dir()) / f"{key}.json"
    say("cache look-up")
    if use_cache and cache_path.is_file():
        cached = _cache_read(cache_path)
        if cached is not None:
            if progress is not None:
                progress(total, total, f"cache hit ({cache_path.name})")
            return cached if cached.name == label else _renamed(cached, label)
    say("cost estimate")
    estimate = estimate_cost(
        geom, method, basis, polarizability=polarizability, cost_model=cost_model
    )
    if max_seconds is not None and estimate.seconds > max_seconds:
        raise CalculationTooBigError(
            f"{label}: refusing {method}/{basis}: {estimate.describe()} estimated "
            f"(~N^3–N^4 from a water calibration), limit {_fmt_time(max_seconds)}; use "
            "d4_polarizability() for a fast estimate, a smaller basis, or raise max_seconds"
        )
    t0 = time.perf_counter()
    raw = _run_pyscf(geom, method, basis, polarizability, field_au, say)
    elapsed = time.perf_counter() - t0
    tensor = np.asarray(raw["alpha_au"]) * AU_POLARIZABILITY_SI
    dip = np.asarray(raw["dipole_au"]) * AU_DIPOLE_SI
    result = ComputedResult(
        name=label,
        method=method.strip().lower(),
        basis=basis.strip().lower(),
        polarizability_method=raw["scheme"],
        alpha_si=isotropic_average(tensor),
        dipole_si=float(np.linalg.norm(dip)),
        geometry=geom,
        alpha_tensor_si=tuple(tuple(float(v) for v in row) for row in tensor),
        dipole_vector_si=tuple(float(v) for v in dip),
        energy_hartree=raw["energy_hartree"],
        n_basis=raw["n_basis"],
        elapsed_s=elapsed,
        software=raw["software"],
        cache_key=key,
    )
    say("save")
    if use_cache:
        _cache_write(cache_path, result)
    return result


def _renamed(result: ComputedResult, name: str) -> ComputedResult:
    d = result.summary()
    d["name"] = name
    return ComputedResult.from_summary(d, from_cache=result.from_cache)


def d4_polarizability(
    structure,
    *,
    name: str | None = None,
    charge: int | None = None,
    seed: int = DEFAULT_SEED,
) -> ComputedResult:
    """Static isotropic polarizability from the D4 dispersion model (dftd4), in milliseconds.

    D4 sums charge- and coordination-dependent atomic static polarizabilities (fitted to
    TD-DFT reference values); it gives no tensor and no dipole.  A fast first estimate for
    molecules too big for :func:`compute_properties`; its accuracy depends on the class of
    molecule, so check it on your set with :func:`polarbeam.computed.parity_table`.
    """
    iface = require("dftd4.interface", "the D4 polarizability estimate")
    geom = load_geometry(structure, charge=charge, seed=seed)
    label = name or _default_name(structure, geom)
    bohr = _sc.physical_constants["Bohr radius"][0] * 1e10
    pos = np.asarray(geom.coords_angstrom, dtype=float) / bohr
    t0 = time.perf_counter()
    model = iface.DispersionModel(np.asarray(geom.atomic_numbers), pos, charge=float(geom.charge))
    atomic = np.asarray(model.get_properties()["polarizabilities"], dtype=float)
    elapsed = time.perf_counter() - t0
    import dftd4

    return ComputedResult(
        name=label,
        method="D4",
        basis="",
        polarizability_method="D4 model (sum of atomic static polarizabilities)",
        alpha_si=float(atomic.sum() * AU_POLARIZABILITY_SI),
        dipole_si=math.nan,
        geometry=geom,
        elapsed_s=elapsed,
        software=f"dftd4 {getattr(dftd4, '__version__', '?')}",
    )


def results_table(results: Iterable[ComputedResult]) -> pd.DataFrame:
    """Computed results as a table in the layout of :func:`polarbeam.computed.read_computed`.

    ``alpha_xx_A3`` … hold the principal values (ascending); the method is ``result.label``.
    """
    rows = []
    for r in results:
        p = r.principal_A3 or (math.nan, math.nan, math.nan)
        rows.append(
            {
                "compound": r.name,
                "method": r.label,
                "alpha_computed_A3": r.alpha_A3,
                "dipole_computed_D": r.dipole_D,
                "alpha_xx_A3": p[0],
                "alpha_yy_A3": p[1],
                "alpha_zz_A3": p[2],
                "anisotropy_A3": r.anisotropy_A3,
                "source": f"{r.software} ({r.polarizability_method})",
            }
        )
    return pd.DataFrame(rows, columns=COMPUTED_COLUMNS)
