"""Cost model and refusal: estimate the wall time of a calculation before any SCF starts.

The basis-function count N comes from PySCF; the time is t ≈ t_water·(N/N_water)^p with
p = 3 (optimistic) … 4 (pessimistic), calibrated on water.  A calculation whose estimate is over
the limit is refused with :class:`CalculationTooBigError`.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

from polarbeam.chemistry.qchem.geometry import Geometry, geometry_from_smiles
from polarbeam.chemistry.qchem.response import DEFAULT_FIELD_AU, PolarizabilityScheme
from polarbeam.chemistry.qchem.scf import build_mol, is_hf, run_pyscf
from polarbeam.errors import InputError

__all__ = [
    "CLI_WAYS_OUT",
    "DEFAULT_COST_MODELS",
    "DEFAULT_MAX_SECONDS",
    "PYTHON_WAYS_OUT",
    "CostEstimate",
    "CostModel",
    "calibrate_cost_model",
    "estimate_cost",
    "format_duration",
]

#: Default refusal limit for one calculation, seconds (estimated, see :class:`CostModel`).
DEFAULT_MAX_SECONDS = 1800.0

#: How a refusal names its ways out when called from Python (the function and parameter names).
PYTHON_WAYS_OUT: dict[str, str] = {
    "d4": "d4_polarizability() for a fast estimate",
    "basis": "a smaller basis",
    "conformers": "fewer conformers",
    "limit": "raise max_seconds",
}
#: The same ways out as ``polarbeam compute`` options (what a command-line user can type).
CLI_WAYS_OUT: dict[str, str] = {
    "d4": "--d4 for a fast estimate",
    "basis": "a smaller --basis",
    "conformers": "a smaller --conformers",
    "limit": "raise --max-seconds",
}


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
        return (
            f"{self.n_basis} basis functions, {format_duration(self.seconds_low)}–"
            + format_duration(self.seconds_high)
        )


def format_duration(s: float) -> str:
    """``s`` seconds as a short text in s, min, h or d (3 significant digits)."""
    if s < 90:
        return f"{s:.3g} s"
    if s < 5400:
        return f"{s / 60:.3g} min"
    if s < 2 * 86400:
        return f"{s / 3600:.3g} h"
    return f"{s / 86400:.3g} d"


def estimate_cost(
    geometry: Geometry,
    method: str = "b3lyp",
    basis: str = "def2-svpd",
    *,
    polarizability: PolarizabilityScheme = "analytic",
    cost_model: CostModel | None = None,
) -> CostEstimate:
    """Estimate the wall time of :func:`compute_properties` from the basis-function count."""
    mol = build_mol(geometry, basis)
    n = int(mol.nao_nr())
    model = cost_model or DEFAULT_COST_MODELS["hf" if is_hf(method) else "dft"]
    low, high = model.estimate(n)
    if polarizability == "finite-field":
        low, high = low * _FINITE_FIELD_FACTOR, high * _FINITE_FIELD_FACTOR
    return CostEstimate(n, low, high, method, basis)


def calibrate_cost_model(method: str = "b3lyp", basis: str = "def2-svpd") -> CostModel:
    """Measure a :class:`CostModel` on this machine: one water calculation (a few seconds)."""
    geom = geometry_from_smiles("O")
    t0 = time.perf_counter()
    raw = run_pyscf(geom, method, basis, "analytic", DEFAULT_FIELD_AU, None)
    seconds = time.perf_counter() - t0
    return CostModel(seconds, raw["n_basis"], measured_on=f"water {method}/{basis}, this machine")
