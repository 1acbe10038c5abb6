"""Quantum-chemistry dipoles of a conformer ensemble, Boltzmann-averaged: ⟨μ²⟩(T).

:func:`compute_conformer_dipoles` embeds ``n`` ETKDG (v3) conformers (fixed seed), minimises them
with MMFF94, keeps the distinct minima within :data:`ENERGY_WINDOW_KCAL` of the lowest (above it
a conformer's Boltzmann weight at 300 K is below 0.7 %), runs one SCF per conformer (PySCF, RHF
or RKS) for its energy and dipole, caches each conformer on its own (a rerun costs nothing), and
Boltzmann-averages μ² with the SCF energies (or the MMFF94 energies).  The result,
:class:`ConformerDipoles`, gives ⟨μ²⟩ at any temperature -- the curve set against the measured
Debye slope.
"""

from __future__ import annotations

import hashlib
import json
import math
import time
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal

import numpy as np
from scipy import constants as _sc

from polarbeam._util.atomic import write_text_atomic
from polarbeam._util.optional import lazy, require
from polarbeam.chemistry.conformers import (
    CONFORMER_TIME_BUDGET_S,
    DEFAULT_SEED,
    check_conformer_size,
    check_temperature,
    distinct_minima,
)
from polarbeam.chemistry.molecules import as_mol
from polarbeam.chemistry.qchem.cache import default_cache_dir
from polarbeam.chemistry.qchem.compute import ProgressCallback
from polarbeam.chemistry.qchem.cost import (
    DEFAULT_MAX_SECONDS,
    PYTHON_WAYS_OUT,
    estimate_cost,
    format_duration,
)
from polarbeam.chemistry.qchem.geometry import Geometry
from polarbeam.chemistry.qchem.response import AU_DIPOLE_SI
from polarbeam.chemistry.qchem.scf import run_scf_dipole
from polarbeam.constants import BOLTZMANN, DEBYE_SI
from polarbeam.errors import CalculationTooBigError, CompoundError, InputError

Chem = lazy("rdkit.Chem", "reading molecules (SMILES, SDF)")
rdBase = lazy("rdkit.rdBase", "reading molecules (SMILES, SDF)")
AllChem = lazy("rdkit.Chem.AllChem", "reading molecules (SMILES, SDF)")

__all__ = [
    "ENERGY_WINDOW_KCAL",
    "ConformerDipoles",
    "EnergySource",
    "compute_conformer_dipoles",
    "conformer_geometries",
]

EnergySource = Literal["scf", "mmff"]

#: Conformers more than this above the lowest MMFF94 minimum are not computed (kcal/mol).
ENERGY_WINDOW_KCAL = 3.0

_HARTREE_J = _sc.physical_constants["Hartree energy"][0]
_KCAL_MOL_J = 4184.0 / _sc.Avogadro
_CACHE_SCHEMA = 1


@dataclass(frozen=True)
class ConformerDipoles:
    """SCF energies and dipoles of the distinct low-energy conformers of one molecule."""

    name: str
    smiles: str
    method: str
    basis: str
    n_embedded: int
    mmff_energies_kcal_mol: tuple[float, ...]
    scf_energies_hartree: tuple[float, ...]
    dipoles_D: tuple[float, ...]
    n_cached: int = 0
    elapsed_s: float = 0.0
    software: str = ""
    geometries: tuple[Geometry, ...] = ()

    def _energies_J(self, energies: EnergySource) -> np.ndarray:
        if energies == "scf":
            return np.asarray(self.scf_energies_hartree) * _HARTREE_J
        if energies == "mmff":
            return np.asarray(self.mmff_energies_kcal_mol) * _KCAL_MOL_J
        raise InputError(f"energies: expected 'scf' or 'mmff', found {energies!r}")

    def boltzmann_weights(self, temperature_K: float, energies: EnergySource = "scf") -> np.ndarray:
        """Normalised Boltzmann weights of the conformers at ``temperature_K``."""
        check_temperature(temperature_K)
        e = self._energies_J(energies)
        w = np.exp(-(e - e.min()) / (BOLTZMANN * temperature_K))
        return w / w.sum()

    def mean_square_dipole_si(self, temperature_K: float, energies: EnergySource = "scf") -> float:
        """Boltzmann-weighted ⟨μ²⟩ in C² m²."""
        mu = np.asarray(self.dipoles_D) * DEBYE_SI
        return float(self.boltzmann_weights(temperature_K, energies) @ mu**2)

    def rms_dipole_D(self, temperature_K: float, energies: EnergySource = "scf") -> float:
        """sqrt⟨μ²⟩ in debye."""
        return math.sqrt(self.mean_square_dipole_si(temperature_K, energies)) / DEBYE_SI

    def mu2_curve_si(self, temperatures_K, energies: EnergySource = "scf") -> np.ndarray:
        """⟨μ²⟩(T) in C² m² at each temperature (the predicted Debye curve)."""
        return np.array([self.mean_square_dipole_si(float(t), energies) for t in temperatures_K])

    def summary(self) -> dict[str, Any]:
        """Plain dict for JSON."""
        return {
            "name": self.name,
            "smiles": self.smiles,
            "method": self.method,
            "basis": self.basis,
            "n_embedded": self.n_embedded,
            "n_conformers": len(self.dipoles_D),
            "mmff_energies_kcal_mol": list(self.mmff_energies_kcal_mol),
            "scf_energies_hartree": list(self.scf_energies_hartree),
            "dipoles_D": list(self.dipoles_D),
            "n_cached": self.n_cached,
            "elapsed_s": self.elapsed_s,
            "software": self.software,
        }


def conformer_geometries(
    structure: str | Chem.Mol,
    compound: str = "?",
    *,
    n_conformers: int = 5,
    seed: int = DEFAULT_SEED,
    window_kcal: float = ENERGY_WINDOW_KCAL,
) -> tuple[list[Geometry], list[float], int]:
    """Distinct MMFF94 minima within ``window_kcal`` of the lowest: (geometries, energies, n).

    Energies are kcal/mol relative to the lowest minimum, lowest first.  Mirror-image minima
    (gauche+ / gauche−) count separately, so each carries its own Boltzmann weight.
    """
    if not (isinstance(n_conformers, int) and n_conformers >= 1):
        raise InputError(f"--conformers: expected an integer >= 1, found {n_conformers!r}")
    mol = as_mol(structure, compound)
    check_conformer_size(mol, compound)
    mh = Chem.AddHs(mol)
    params = AllChem.ETKDGv3()
    params.randomSeed = int(seed)
    params.numThreads = 1
    params.timeout = math.ceil(CONFORMER_TIME_BUDGET_S)
    with rdBase.BlockLogs():
        cids = [c for c in AllChem.EmbedMultipleConfs(mh, n_conformers, params=params) if c >= 0]
        if not cids:
            raise CompoundError(f"compound {compound!r}: RDKit could not embed a 3-D conformer")
        if not AllChem.MMFFHasAllMoleculeParams(mh):
            raise CompoundError(
                f"compound {compound!r}: expected MMFF94 parameters for the conformer search, "
                "found none (give a 3-D structure file to compute a single geometry)"
            )
        props = AllChem.MMFFGetMoleculeProperties(mh, mmffVariant="MMFF94")
        res = AllChem.MMFFOptimizeMoleculeConfs(mh, numThreads=1, maxIters=2000)
    energies = np.array([e for _, e in res])
    q = np.array([props.GetMMFFPartialCharge(i) for i in range(mh.GetNumAtoms())])
    vecs = np.array([q @ mh.GetConformer(c).GetPositions() for c in cids])
    keep = [
        i
        for i in distinct_minima(mh, cids, energies, vecs, 0.1)
        if energies[i] - energies.min() <= window_kcal
    ]
    symbols = tuple(a.GetSymbol() for a in mh.GetAtoms())
    label = Chem.MolToSmiles(Chem.RemoveHs(mh))
    geoms = [
        Geometry(
            symbols=symbols,
            coords_angstrom=tuple(
                tuple(float(x) for x in p) for p in mh.GetConformer(cids[i]).GetPositions()
            ),
            charge=Chem.GetFormalCharge(mh),
            label=label,
            source=f"ETKDGv3 seed {seed} conformer {cids[i]}, MMFF94",
        )
        for i in keep
    ]
    rel = [float(energies[i] - energies[keep].min()) for i in keep]
    return geoms, rel, len(cids)


def _cache_path(cache_dir: Path, geom: Geometry, method: str, basis: str) -> Path:
    payload = {
        "schema": _CACHE_SCHEMA,
        "kind": "scf-dipole",
        "structure": geom.fingerprint(),
        "method": method.strip().lower(),
        "basis": basis.strip().lower(),
    }
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"))
    return cache_dir / f"dip-{hashlib.sha256(text.encode()).hexdigest()[:32]}.json"


def _read(path: Path) -> dict | None:
    try:
        d = json.loads(path.read_text())
        float(d["energy_hartree"])
        if len(d["dipole_au"]) != 3:
            return None
        return d
    except (OSError, ValueError, KeyError, TypeError):
        return None  # unreadable or stale entry: recompute and overwrite


def compute_conformer_dipoles(
    structure: str | Chem.Mol,
    method: str = "b3lyp",
    basis: str = "def2-svpd",
    *,
    n_conformers: int = 5,
    name: str | None = None,
    seed: int = DEFAULT_SEED,
    window_kcal: float = ENERGY_WINDOW_KCAL,
    cache_dir=None,
    use_cache: bool = True,
    max_seconds: float | None = DEFAULT_MAX_SECONDS,
    progress: ProgressCallback | None = None,
    ways_out: Mapping[str, str] = PYTHON_WAYS_OUT,
) -> ConformerDipoles:
    """SCF dipole and energy of every distinct low-energy conformer (PySCF; cached per conformer).

    Parameters
    ----------
    structure
        SMILES or RDKit molecule (closed shell).
    method, basis
        As for :func:`~polarbeam.chemistry.qchem.compute_properties`; dipoles need diffuse
        functions (``def2-svpd`` is the small default).
    n_conformers
        ETKDG embeddings; the distinct MMFF94 minima within ``window_kcal`` are computed.
    max_seconds
        Refuse (before any SCF) when the estimated time of all conformers is above this (the
        polarizability cost model, an upper bound for an SCF alone); ``None`` = no limit.
    progress
        ``progress(step, total, message)`` once per conformer.
    ways_out
        How a refusal names the ways out (Python names by default; the command line passes
        :data:`~polarbeam.chemistry.qchem.cost.CLI_WAYS_OUT`).

    Raises
    ------
    CalculationTooBigError
        The estimated time is above ``max_seconds``.
    CompoundError
        Unparsable SMILES, open shell, no MMFF94 parameters, SCF not converged.
    MissingExtraError
        PySCF is not installed.
    """
    require("pyscf", "computing dipoles with PySCF")
    label = name or (structure if isinstance(structure, str) else "?")
    geoms, mmff, n_emb = conformer_geometries(
        structure, label, n_conformers=n_conformers, seed=seed, window_kcal=window_kcal
    )
    if geoms[0].n_electrons % 2:
        raise CompoundError(
            f"{label}: expected a closed-shell molecule (even electron count) for RHF/RKS, "
            f"found {geoms[0].n_electrons} electrons"
        )
    if max_seconds is not None:
        cost = estimate_cost(geoms[0], method, basis)
        if cost.seconds * len(geoms) > max_seconds:
            raise CalculationTooBigError(
                f"{label}: refusing {len(geoms)} conformer SCFs {method}/{basis}: "
                f"{format_duration(cost.seconds * len(geoms))} estimated, limit "
                f"{format_duration(max_seconds)}; use {ways_out['conformers']}, "
                f"{ways_out['basis']}, or {ways_out['limit']}"
            )
    folder = Path(cache_dir or default_cache_dir())
    energies, dipoles = [], []
    n_cached = 0
    software = ""
    t0 = time.perf_counter()
    for k, geom in enumerate(geoms, start=1):
        path = _cache_path(folder, geom, method, basis)
        raw = _read(path) if use_cache and path.is_file() else None
        if progress is not None:
            state = "cached" if raw is not None else f"SCF {method}/{basis}"
            progress(k, len(geoms), f"conformer {k} ({mmff[k - 1]:.2f} kcal/mol): {state}")
        if raw is None:
            raw = run_scf_dipole(geom, method, basis)
            if use_cache:
                write_text_atomic(path, json.dumps(raw, indent=1, sort_keys=True))
        else:
            n_cached += 1
        software = raw.get("software", software)
        energies.append(float(raw["energy_hartree"]))
        dip = np.asarray(raw["dipole_au"], dtype=float) * AU_DIPOLE_SI
        dipoles.append(float(np.linalg.norm(dip)) / DEBYE_SI)
    return ConformerDipoles(
        name=label,
        smiles=geoms[0].label,
        method=method.strip().lower(),
        basis=basis.strip().lower(),
        n_embedded=n_emb,
        mmff_energies_kcal_mol=tuple(mmff),
        scf_energies_hartree=tuple(energies),
        dipoles_D=tuple(dipoles),
        n_cached=n_cached,
        elapsed_s=time.perf_counter() - t0,
        software=software,
        geometries=tuple(geoms),
    )
