"""Chemistry: what a structure or a calculation predicts, and how it compares with a measurement.

This stage knows nothing about beams.  It starts from a molecule and ends with numbers in Å³,
debye and SI that the deflection stages are compared against:

* :mod:`.molecules` -- SMILES and SDF in (:func:`parse_smiles`, :func:`read_sdf`), average and
  monoisotopic masses, and :func:`check_mass` against a stated mass;
* :mod:`.additive` -- the published additive polarizability schemes (Miller ahp/ahc,
  Bosque–Sales, Lorentz–Lorenz on the Wildman–Crippen MR, optional D4), each with its documented
  accuracy and domain flags; the scheme tables are package data;
* :mod:`.accuracy` -- structure classes and the measured per-class scatter of every scheme and
  of the force-field dipole; the per-class default scheme chosen by measurement;
* :mod:`.atoms` -- single atoms from the Schwerdtfeger–Nagle table (``mendeleev``, optional);
* :mod:`.conformers` -- the thermal dipole ensemble (ETKDG conformers, MMFF94 minima, force-field
  charges), the Boltzmann ⟨μ²⟩ and α_eff = α + ⟨μ²⟩/(3kT);
* :mod:`.estimates` -- :func:`estimate`, everything the structure predicts for one molecule;
* :mod:`.library` -- :func:`estimate_table`, a whole CSV or SDF library into one CSV;
* :mod:`.computed` -- computed values in: a CSV (:func:`read_computed`) or quantum-chemistry
  outputs through cclib (:func:`read_outputs`);
* :mod:`.parity` -- computed against measured (:func:`compare`, :func:`compare_series`,
  :func:`parity_table`) with :data:`ELECTRONIC_VS_VIBRATIONAL_NOTE`;
* :mod:`.qchem` -- an on-the-spot PySCF calculation (:func:`compute_properties`) or a D4
  estimate (:func:`d4_polarizability`).

It imports only :mod:`polarbeam.errors`, :mod:`polarbeam.constants` and
:mod:`polarbeam._util`; optional packages (PySCF, cclib, dftd4) come in through
:mod:`polarbeam._util.optional` when a function needs them.
"""

from __future__ import annotations

from polarbeam.chemistry import qchem
from polarbeam.chemistry.accuracy import (
    ALPHA_CLASS_SCATTER,
    CLASS_SCHEME,
    CLASSES,
    DIPOLE_CLASS_FACTOR,
    ClassStats,
    alpha_class_stats,
    choose_class_schemes,
    dipole_error_D,
    dipole_factor_from_pairs,
    structure_class,
)
from polarbeam.chemistry.additive import (
    DEFAULT_SCHEME,
    LL_MR_FACTOR_A3,
    SCHEMES,
    SchemeAccuracy,
    alpha_ahc_A3,
    alpha_ahp_A3,
    alpha_bs_A3,
    alpha_d4_A3,
    alpha_llmr_A3,
    dftd4_available,
    domain_flags,
    fast_estimates,
    lorentz_lorenz_factor_A3,
    miller_types,
    n_electrons,
)
from polarbeam.chemistry.atoms import atom_polarizability_A3
from polarbeam.chemistry.computed import (
    ALPHA_UNITS,
    COMPUTED_COLUMNS,
    COMPUTED_CSV_COLUMNS,
    alpha_a3_from_unit,
    anisotropy,
    isotropic_average,
    read_computed,
    read_outputs,
)
from polarbeam.chemistry.conformers import (
    CHARGE_MODELS,
    DEFAULT_CHARGE_MODEL,
    DEFAULT_SEED,
    DIPOLE_SCALE,
    ConformerEnsemble,
    conformer_ensemble,
    mean_square_dipole,
    predicted_alpha_eff_si,
)
from polarbeam.chemistry.estimates import (
    DefaultPolarizability,
    StructureEstimate,
    default_polarizability,
    estimate,
)
from polarbeam.chemistry.library import estimate_table
from polarbeam.chemistry.molecules import (
    StructureRecord,
    check_mass,
    mass_average_u,
    mass_monoisotopic_u,
    parse_smiles,
    read_sdf,
)
from polarbeam.chemistry.parity import (
    COMPARISON_COLUMNS,
    ELECTRONIC_VS_VIBRATIONAL_NOTE,
    PARITY_COLUMNS,
    SERIES_COMPARISON_COLUMNS,
    compare,
    compare_series,
    orientational_a3,
    parity_table,
)
from polarbeam.chemistry.qchem import (
    AU_DIPOLE_SI,
    DEFAULT_COST_MODELS,
    DEFAULT_FIELD_AU,
    DEFAULT_MAX_SECONDS,
    CalculationTooBigError,
    ComputedResult,
    CostEstimate,
    CostModel,
    Geometry,
    ProgressCallback,
    calibrate_cost_model,
    compute_properties,
    cpscf_polarizability,
    d4_polarizability,
    default_cache_dir,
    dipole_au,
    estimate_cost,
    finite_field_polarizability,
    geometry_from_file,
    geometry_from_smiles,
    load_geometry,
    results_table,
)

__all__ = [
    "ALPHA_CLASS_SCATTER",
    "ALPHA_UNITS",
    "AU_DIPOLE_SI",
    "CHARGE_MODELS",
    "CLASSES",
    "CLASS_SCHEME",
    "COMPARISON_COLUMNS",
    "COMPUTED_COLUMNS",
    "COMPUTED_CSV_COLUMNS",
    "DEFAULT_CHARGE_MODEL",
    "DEFAULT_COST_MODELS",
    "DEFAULT_FIELD_AU",
    "DEFAULT_MAX_SECONDS",
    "DEFAULT_SCHEME",
    "DEFAULT_SEED",
    "DIPOLE_CLASS_FACTOR",
    "DIPOLE_SCALE",
    "ELECTRONIC_VS_VIBRATIONAL_NOTE",
    "LL_MR_FACTOR_A3",
    "PARITY_COLUMNS",
    "SCHEMES",
    "SERIES_COMPARISON_COLUMNS",
    "CalculationTooBigError",
    "ClassStats",
    "ComputedResult",
    "ConformerEnsemble",
    "CostEstimate",
    "CostModel",
    "DefaultPolarizability",
    "Geometry",
    "ProgressCallback",
    "SchemeAccuracy",
    "StructureEstimate",
    "StructureRecord",
    "alpha_a3_from_unit",
    "alpha_ahc_A3",
    "alpha_ahp_A3",
    "alpha_bs_A3",
    "alpha_class_stats",
    "alpha_d4_A3",
    "alpha_llmr_A3",
    "anisotropy",
    "atom_polarizability_A3",
    "calibrate_cost_model",
    "check_mass",
    "choose_class_schemes",
    "compare",
    "compare_series",
    "compute_properties",
    "conformer_ensemble",
    "cpscf_polarizability",
    "d4_polarizability",
    "default_cache_dir",
    "default_polarizability",
    "dftd4_available",
    "dipole_au",
    "dipole_error_D",
    "dipole_factor_from_pairs",
    "domain_flags",
    "estimate",
    "estimate_cost",
    "estimate_table",
    "fast_estimates",
    "finite_field_polarizability",
    "geometry_from_file",
    "geometry_from_smiles",
    "isotropic_average",
    "load_geometry",
    "lorentz_lorenz_factor_A3",
    "mass_average_u",
    "mass_monoisotopic_u",
    "mean_square_dipole",
    "miller_types",
    "n_electrons",
    "orientational_a3",
    "parity_table",
    "parse_smiles",
    "predicted_alpha_eff_si",
    "qchem",
    "read_computed",
    "read_outputs",
    "read_sdf",
    "results_table",
    "structure_class",
]
