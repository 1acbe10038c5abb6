"""One calculation end to end: :func:`compute_properties` (PySCF) and :func:`d4_polarizability`.

Steps of :func:`compute_properties`, each reported to ``progress(step, total, message)``:
geometry, cache look-up, cost estimate (refusal before any SCF), SCF, static polarizability,
save.  :func:`d4_polarizability` is the fast D4 estimate for molecules too big for SCF.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable, Mapping
from pathlib import Path

import numpy as np
from scipy import constants as _sc

from polarbeam._util.optional import require
from polarbeam.chemistry.computed import isotropic_average
from polarbeam.chemistry.qchem.cache import cache_key, default_cache_dir, read_cached, write_cached
from polarbeam.chemistry.qchem.cost import (
    DEFAULT_MAX_SECONDS,
    PYTHON_WAYS_OUT,
    CostModel,
    estimate_cost,
    format_duration,
)
from polarbeam.chemistry.qchem.geometry import DEFAULT_SEED, default_name, load_geometry
from polarbeam.chemistry.qchem.response import AU_DIPOLE_SI, DEFAULT_FIELD_AU, PolarizabilityScheme
from polarbeam.chemistry.qchem.result import ComputedResult
from polarbeam.chemistry.qchem.scf import run_pyscf
from polarbeam.constants import AU_POLARIZABILITY_SI
from polarbeam.errors import CalculationTooBigError, CompoundError, InputError

__all__ = ["ProgressCallback", "compute_properties", "d4_polarizability"]

#: Callback ``progress(step, total, message)`` called at the start of each step.
ProgressCallback = Callable[[int, int, str], None]


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
    ways_out: Mapping[str, str] = PYTHON_WAYS_OUT,
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
    ways_out
        How a refusal names the ways out (:data:`PYTHON_WAYS_OUT`; the command line passes
        :data:`~polarbeam.chemistry.qchem.cost.CLI_WAYS_OUT`, its option names).

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
    label = name or default_name(structure, geom)
    if geom.n_electrons % 2:
        raise CompoundError(
            f"{label}: expected a closed-shell molecule (even electron count) for RHF/RKS, "
            f"found {geom.n_electrons} electrons"
        )
    key = cache_key(geom, method, basis, polarizability, field_au)
    cache_path = Path(cache_dir or default_cache_dir()) / f"{key}.json"
    say("cache look-up")
    if use_cache and cache_path.is_file():
        cached = read_cached(cache_path)
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
            f"(~N^3–N^4 from a water calibration), limit {format_duration(max_seconds)}; use "
            f"{ways_out['d4']}, {ways_out['basis']}, or {ways_out['limit']}"
        )
    t0 = time.perf_counter()
    raw = run_pyscf(geom, method, basis, polarizability, field_au, say)
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
        write_cached(cache_path, result)
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
    molecule, so check it on your set with :func:`polarbeam.chemistry.parity.parity_table`.
    """
    iface = require("dftd4.interface", "the D4 polarizability estimate")
    geom = load_geometry(structure, charge=charge, seed=seed)
    label = name or default_name(structure, geom)
    bohr = _sc.physical_constants["Bohr radius"][0] * 1e10
    pos = np.asarray(geom.coords_angstrom, dtype=float) / bohr
    t0 = time.perf_counter()
    model = iface.DispersionModel(np.asarray(geom.atomic_numbers), pos, charge=float(geom.charge))
    atomic = np.asarray(model.get_properties()["polarizabilities"], dtype=float)
    elapsed = time.perf_counter() - t0
    dftd4 = require("dftd4", "the D4 polarizability estimate")
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
