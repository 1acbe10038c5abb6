"""On-the-spot quantum chemistry: static polarizability and dipole of one molecule with PySCF.

Pipeline of :func:`compute_properties` (:mod:`.compute`):

1. geometry -- from SMILES (RDKit ETKDGv3 embedding + MMFF94 optimisation, fixed seed) or from an
   XYZ/SDF/MOL file (:mod:`.geometry`);
2. cache look-up -- a JSON file named by a hash of (canonical structure, geometry, charge, method,
   basis, response scheme), so a rerun costs nothing (:mod:`.cache`);
3. cost estimate -- basis-function count N and a time model t ≈ t_water·(N/N_water)^p,
   p = 3…4, calibrated on water; a calculation over the limit is refused with
   :class:`CalculationTooBigError` before any SCF starts (:mod:`.cost`);
4. SCF -- RHF for ``method="hf"``, RKS with the named exchange-correlation functional otherwise
   (:mod:`.scf`);
5. static dipole polarizability by coupled-perturbed SCF (CPHF/CPKS, solved here with PySCF's
   ``scf.cphf`` Krylov solver and the SCF object's response function), or by finite field
   (central differences of the dipole under ±F along x, y, z) as fallback and cross-check
   (:mod:`.response`);
6. dipole moment of the field-free SCF density.

:func:`compute_conformer_dipoles` (:mod:`.ensemble`) is the accurate dipole route: one SCF per
distinct low-energy MMFF94 conformer (cached per conformer) and the Boltzmann average ⟨μ²⟩(T).

:func:`d4_polarizability` gives the D4 model's static polarizability (dftd4) as a fast estimate
for molecules too big for SCF.  All of this needs the extra ``polarbeam[qc]``; PySCF and dftd4
are imported only when a calculation runs.

Values in a :class:`ComputedResult` (:mod:`.result`) are SI (C·m²/V, C·m); Å³ and debye are
properties for tables.  Computed values are electronic only (fixed nuclei): see
:data:`polarbeam.chemistry.parity.ELECTRONIC_VS_VIBRATIONAL_NOTE`.
"""

from __future__ import annotations

from polarbeam.chemistry.qchem.cache import default_cache_dir
from polarbeam.chemistry.qchem.compute import (
    ProgressCallback,
    compute_properties,
    d4_polarizability,
)
from polarbeam.chemistry.qchem.cost import (
    CLI_WAYS_OUT,
    DEFAULT_COST_MODELS,
    DEFAULT_MAX_SECONDS,
    CostEstimate,
    CostModel,
    calibrate_cost_model,
    estimate_cost,
)
from polarbeam.chemistry.qchem.ensemble import (
    ENERGY_WINDOW_KCAL,
    ConformerDipoles,
    compute_conformer_dipoles,
    conformer_geometries,
)
from polarbeam.chemistry.qchem.geometry import (
    DEFAULT_SEED,
    Geometry,
    geometry_from_file,
    geometry_from_smiles,
    load_geometry,
)
from polarbeam.chemistry.qchem.library import (
    POLARIZABILITY_SCHEMES,
    check_conformer_options,
    check_scheme,
    compute_jobs,
    compute_library,
    describe_run,
    write_computed,
)
from polarbeam.chemistry.qchem.response import (
    AU_DIPOLE_SI,
    DEFAULT_FIELD_AU,
    PolarizabilityScheme,
    cpscf_polarizability,
    dipole_au,
    finite_field_polarizability,
)
from polarbeam.chemistry.qchem.result import ComputedResult, results_table
from polarbeam.chemistry.qchem.scf import run_pyscf
from polarbeam.errors import CalculationTooBigError

__all__ = [
    "AU_DIPOLE_SI",
    "CLI_WAYS_OUT",
    "DEFAULT_COST_MODELS",
    "DEFAULT_FIELD_AU",
    "DEFAULT_MAX_SECONDS",
    "DEFAULT_SEED",
    "ENERGY_WINDOW_KCAL",
    "POLARIZABILITY_SCHEMES",
    "CalculationTooBigError",
    "ComputedResult",
    "ConformerDipoles",
    "CostEstimate",
    "CostModel",
    "Geometry",
    "PolarizabilityScheme",
    "ProgressCallback",
    "calibrate_cost_model",
    "check_conformer_options",
    "check_scheme",
    "compute_conformer_dipoles",
    "compute_jobs",
    "compute_library",
    "compute_properties",
    "conformer_geometries",
    "cpscf_polarizability",
    "d4_polarizability",
    "default_cache_dir",
    "describe_run",
    "dipole_au",
    "estimate_cost",
    "finite_field_polarizability",
    "geometry_from_file",
    "geometry_from_smiles",
    "load_geometry",
    "results_table",
    "run_pyscf",
    "write_computed",
]
