"""The thermal dipole ensemble: ETKDG conformers, force-field minima and their dipoles.

ETKDG (v3) embeddings with a fixed seed, MMFF94 minimisation (UFF when MMFF94 has no
parameters), force-field partial charges, one dipole per distinct minimum, the Boltzmann-weighted
⟨μ²⟩ and the effective polarizability α_eff = α + ⟨μ²⟩/(3kT).  ⟨μ²⟩ and α_eff are SI
(C² m², C m²/V); dipoles of single conformers are in debye.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
from scipy import constants as _sc

from polarbeam._util.optional import lazy
from polarbeam.chemistry.molecules import as_mol
from polarbeam.constants import BOLTZMANN, DEBYE_SI
from polarbeam.errors import CalculationTooBigError, CompoundError, InputError

Chem = lazy("rdkit.Chem", "reading molecules (SMILES, SDF)")
rdBase = lazy("rdkit.rdBase", "reading molecules (SMILES, SDF)")
AllChem = lazy("rdkit.Chem.AllChem", "reading molecules (SMILES, SDF)")
rdMolAlign = lazy("rdkit.Chem.rdMolAlign", "reading molecules (SMILES, SDF)")

__all__ = [
    "CHARGE_MODELS",
    "CONFORMER_TIME_BUDGET_S",
    "DEFAULT_CHARGE_MODEL",
    "DEFAULT_SEED",
    "DIPOLE_SCALE",
    "MAX_CONFORMER_HEAVY_ATOMS",
    "ChargeModel",
    "ConformerEnsemble",
    "check_conformer_size",
    "check_temperature",
    "conformer_ensemble",
    "distinct_minima",
    "embed_one",
    "mean_square_dipole",
    "predicted_alpha_eff_si",
]

ChargeModel = Literal["mmff", "gasteiger"]
CHARGE_MODELS: tuple[str, ...] = ("mmff", "gasteiger")

#: Default random seed of the conformer embedding (any fixed integer makes runs reproducible).
DEFAULT_SEED = 61453

#: Multiplicative factor applied to force-field dipoles, per charge model (1.0 = none adopted).
#: Measured against reference_values/dipoles.csv (rigid rows); see docs/structure.md.
DIPOLE_SCALE: dict[str, float] = {"mmff": 0.766, "gasteiger": 1.0}

#: Charge model used by default for the conformer dipoles; see docs/structure.md for why.
DEFAULT_CHARGE_MODEL: ChargeModel = "mmff"

#: Largest molecule (heavy atoms) whose conformers are searched.  ETKDG embedding and MMFF94
#: minimisation grow steeply with size (10 conformers of a 60-carbon chain take about 20 s, a
#: 100-carbon chain minutes); beyond this the dipole ensemble is refused with a one-line
#: :class:`~polarbeam.errors.CalculationTooBigError` and callers keep the additive estimates.
MAX_CONFORMER_HEAVY_ATOMS = 60

#: Time budget (s) of one compound's conformer search: it is the ETKDG embedding's timeout, and
#: the search is abandoned (CalculationTooBigError) when the embedding used it up.  MMFF94
#: minimisation is capped by ``max_iters`` per conformer (and by the size limit above).
CONFORMER_TIME_BUDGET_S = 60.0


def embed_one(mol: Chem.Mol, seed: int, compound: str) -> Chem.Mol:
    """One ETKDG (v3) conformer with hydrogens, MMFF94-optimised (UFF when MMFF94 lacks them).

    Bounded like :func:`conformer_ensemble`: molecules above :data:`MAX_CONFORMER_HEAVY_ATOMS`
    are refused (:class:`CalculationTooBigError`) and the embedding times out after
    :data:`CONFORMER_TIME_BUDGET_S`.
    """
    check_conformer_size(mol, compound)
    mh = Chem.AddHs(mol)
    params = AllChem.ETKDGv3()
    params.randomSeed = int(seed)
    params.timeout = math.ceil(CONFORMER_TIME_BUDGET_S)
    if AllChem.EmbedMolecule(mh, params) != 0:
        raise CompoundError(f"compound {compound!r}: RDKit could not embed a 3-D conformer")
    if AllChem.MMFFHasAllMoleculeParams(mh):
        AllChem.MMFFOptimizeMolecule(mh, maxIters=2000)
    else:
        AllChem.UFFOptimizeMolecule(mh, maxIters=2000)
    return mh


# --------------------------------------------------------------------------------------------
# Conformer ensemble and dipoles
# --------------------------------------------------------------------------------------------

_KCAL_MOL_J = 4184.0 / _sc.Avogadro  # J per molecule for 1 kcal/mol (thermochemical calorie)
_E_ANGSTROM_SI = _sc.e * 1e-10  # C m for 1 e·Å


@dataclass(frozen=True)
class ConformerEnsemble:
    """Optimised conformers of one molecule with their force-field energies and dipoles.

    Energies are relative to the lowest conformer.  ``dipoles_D`` already include
    ``dipole_scale``.  Duplicates (same minimum reached from different embeddings) are merged.
    """

    smiles: str
    seed: int
    n_embedded: int
    force_field: str
    charge_model: str
    dipole_scale: float
    energies_kcal_mol: tuple[float, ...]
    dipoles_D: tuple[float, ...]
    flags: tuple[str, ...] = ()

    @property
    def energies_J(self) -> np.ndarray:
        """Relative energies, J per molecule (SI)."""
        return np.asarray(self.energies_kcal_mol) * _KCAL_MOL_J

    @property
    def dipoles_si(self) -> np.ndarray:
        """Dipole magnitudes, C m (SI)."""
        return np.asarray(self.dipoles_D) * DEBYE_SI

    def boltzmann_weights(self, temperature_K: float) -> np.ndarray:
        """Normalised Boltzmann weights exp(-ΔE/kT) of the conformers."""
        check_temperature(temperature_K)
        e = self.energies_J
        w = np.exp(-(e - e.min()) / (BOLTZMANN * temperature_K))
        return w / w.sum()

    def mean_square_dipole_si(self, temperature_K: float) -> float:
        """Boltzmann-weighted ⟨μ²⟩ in C² m²."""
        return float(self.boltzmann_weights(temperature_K) @ self.dipoles_si**2)

    def rms_dipole_D(self, temperature_K: float) -> float:
        """sqrt⟨μ²⟩ in debye."""
        return math.sqrt(self.mean_square_dipole_si(temperature_K)) / DEBYE_SI

    def summary(self) -> dict[str, Any]:
        """Plain dict for JSON."""
        return {
            "smiles": self.smiles,
            "seed": self.seed,
            "n_embedded": self.n_embedded,
            "n_unique": len(self.energies_kcal_mol),
            "force_field": self.force_field,
            "charge_model": self.charge_model,
            "dipole_scale": self.dipole_scale,
            "energies_kcal_mol": list(self.energies_kcal_mol),
            "dipoles_D": list(self.dipoles_D),
            "flags": list(self.flags),
        }


def check_conformer_size(
    mol: Chem.Mol, compound: str = "?", max_heavy_atoms: int = MAX_CONFORMER_HEAVY_ATOMS
) -> None:
    """Raise :class:`CalculationTooBigError` when ``mol`` has more heavy atoms than the limit."""
    n_heavy = mol.GetNumHeavyAtoms()
    if n_heavy > max_heavy_atoms:
        raise CalculationTooBigError(
            f"compound {compound!r}: {n_heavy} heavy atoms, above the conformer limit of "
            f"{max_heavy_atoms}; no conformer dipole, additive estimates only"
        )


def check_temperature(temperature_K: float) -> None:
    """Raise :class:`InputError` unless ``temperature_K`` is a finite number > 0."""
    if not (isinstance(temperature_K, int | float) and math.isfinite(temperature_K)):
        raise InputError(f"temperature_K must be a finite number (K), found {temperature_K!r}")
    if temperature_K <= 0:
        raise InputError(f"temperature_K must be > 0 K, found {temperature_K!r}")


def _charges(mh: Chem.Mol, model: str, mmff_props: Any) -> np.ndarray:
    if model == "mmff" and mmff_props is not None:
        return np.array([mmff_props.GetMMFFPartialCharge(i) for i in range(mh.GetNumAtoms())])
    AllChem.ComputeGasteigerCharges(mh)
    q = np.array([a.GetDoubleProp("_GasteigerCharge") for a in mh.GetAtoms()])
    return np.nan_to_num(q)


def conformer_ensemble(
    structure: str | Chem.Mol,
    compound: str = "?",
    *,
    n_conformers: int = 10,
    seed: int = DEFAULT_SEED,
    charge_model: ChargeModel = DEFAULT_CHARGE_MODEL,
    dipole_scale: float | None = None,
    max_iters: int = 2000,
    dedupe_rms_A: float = 0.1,
    max_heavy_atoms: int = MAX_CONFORMER_HEAVY_ATOMS,
    time_budget_s: float = CONFORMER_TIME_BUDGET_S,
) -> ConformerEnsemble:
    """Embed, optimise and take the dipole of every conformer.

    Parameters
    ----------
    structure
        SMILES or RDKit molecule.
    n_conformers
        Number of ETKDG (v3) embeddings.
    seed
        Random seed of the embedding; the same seed gives the same ensemble (single thread).
    charge_model
        ``"mmff"`` (MMFF94 partial charges; Gasteiger when MMFF has no parameters) or
        ``"gasteiger"``.
    dipole_scale
        Factor applied to the force-field dipoles; default :data:`DIPOLE_SCALE` of the model.
    dedupe_rms_A
        Conformers whose heavy-atom RMSD after symmetry-aware alignment is below this, whose
        energies agree within 0.01 kcal/mol and whose aligned dipole vectors agree within 0.05 D
        are the same minimum and are counted once.
    max_heavy_atoms
        Size limit (:data:`MAX_CONFORMER_HEAVY_ATOMS`): larger molecules are refused.
    time_budget_s
        Time budget of the search (:data:`CONFORMER_TIME_BUDGET_S`): the ETKDG embedding times
        out after it, and the search is refused when the embedding used it all.

    Raises
    ------
    CompoundError
        Unparsable SMILES, or no conformer could be embedded.
    CalculationTooBigError
        The molecule is above the size limit, or the embedding used the whole time budget.
    """
    if charge_model not in CHARGE_MODELS:
        raise InputError(
            f"charge_model must be one of {', '.join(CHARGE_MODELS)}, found {charge_model!r}"
        )
    if not (isinstance(n_conformers, int) and n_conformers >= 1):
        raise InputError(f"n_conformers must be an integer >= 1, found {n_conformers!r}")
    mol = as_mol(structure, compound)
    check_conformer_size(mol, compound, max_heavy_atoms)
    start = time.monotonic()
    smiles = Chem.MolToSmiles(Chem.RemoveHs(mol))
    mh = Chem.AddHs(mol)
    params = AllChem.ETKDGv3()
    params.randomSeed = int(seed)
    params.numThreads = 1
    params.timeout = max(1, math.ceil(time_budget_s))
    with rdBase.BlockLogs():
        # a timed-out embedding returns [-1]: only ids >= 0 are conformers
        cids = [c for c in AllChem.EmbedMultipleConfs(mh, n_conformers, params=params) if c >= 0]
        left = time_budget_s - (time.monotonic() - start)
        if not cids and left >= 1.0:
            params.useRandomCoords = True
            params.timeout = math.ceil(left)
            cids = [
                c for c in AllChem.EmbedMultipleConfs(mh, n_conformers, params=params) if c >= 0
            ]
    if time.monotonic() - start >= 0.95 * time_budget_s:
        raise CalculationTooBigError(
            f"compound {compound!r}: the conformer embedding used the whole time budget of "
            f"{time_budget_s:g} s; no conformer dipole, additive estimates only"
        )
    if not cids:
        raise CompoundError(f"compound {compound!r}: RDKit could not embed a 3-D conformer")
    flags: list[str] = []
    if Chem.GetFormalCharge(mh) != 0:
        flags.append("charged: dipole taken about the centre of mass")
    mmff_props = None
    with rdBase.BlockLogs():
        if AllChem.MMFFHasAllMoleculeParams(mh):
            mmff_props = AllChem.MMFFGetMoleculeProperties(mh, mmffVariant="MMFF94")
            res = AllChem.MMFFOptimizeMoleculeConfs(mh, numThreads=1, maxIters=max_iters)
            ff = "MMFF94"
        else:
            res = AllChem.UFFOptimizeMoleculeConfs(mh, numThreads=1, maxIters=max_iters)
            ff = "UFF"
            flags.append("no MMFF94 parameters: UFF geometry and Gasteiger charges")
    if any(not_conv for not_conv, _ in res):
        flags.append("some conformers did not converge")
    used_model = charge_model if mmff_props is not None else "gasteiger"
    q = _charges(mh, used_model, mmff_props)
    masses = np.array([a.GetMass() for a in mh.GetAtoms()])
    scale = DIPOLE_SCALE[used_model] if dipole_scale is None else float(dipole_scale)

    energies = np.array([e for _, e in res])
    vecs = []
    for cid in cids:
        pos = mh.GetConformer(cid).GetPositions()
        if Chem.GetFormalCharge(mh) != 0:
            pos = pos - masses @ pos / masses.sum()
        vecs.append(q @ pos)  # e·Å
    vecs_arr = np.array(vecs)

    keep = distinct_minima(mh, cids, energies, vecs_arr, dedupe_rms_A)
    e = energies[keep] - energies[keep].min()
    mu_D = np.linalg.norm(vecs_arr[keep], axis=1) * _E_ANGSTROM_SI / DEBYE_SI * scale
    return ConformerEnsemble(
        smiles=smiles,
        seed=int(seed),
        n_embedded=len(cids),
        force_field=ff,
        charge_model=used_model,
        dipole_scale=scale,
        energies_kcal_mol=tuple(float(x) for x in e),
        dipoles_D=tuple(float(x) for x in mu_D),
        flags=tuple(flags),
    )


def distinct_minima(
    mh: Chem.Mol, cids: list[int], energies: np.ndarray, vecs: np.ndarray, rms_tol: float
) -> list[int]:
    """Indices (into ``cids``) of the distinct minima, lowest energy first.

    Two conformers are one minimum when their energies agree within 0.01 kcal/mol, their
    symmetry-aware best-alignment RMSD is below ``rms_tol`` and their dipole vectors agree within
    0.05 D after that alignment (so mirror-image minima such as gauche+/gauche- both count).
    The alignment uses the heavy atoms, or all atoms when there are fewer than three heavy atoms.
    """
    order = [int(i) for i in np.argsort(energies, kind="stable")]
    if len(order) == 1 or rms_tol <= 0:
        return order
    n_heavy = mh.GetNumHeavyAtoms()
    ref = Chem.RemoveHs(mh) if n_heavy >= 3 else mh
    tol_e_A = 0.05 * DEBYE_SI / _E_ANGSTROM_SI  # 0.05 D in e·Å
    kept: list[int] = []
    for i in order:
        for j in kept:
            if abs(energies[i] - energies[j]) > 0.01:
                continue
            rms, tf, _ = rdMolAlign.GetBestAlignmentTransform(
                ref, ref, prbCid=cids[i], refCid=cids[j], maxMatches=1000
            )
            rot = np.asarray(tf)[:3, :3]
            if rms < rms_tol and np.linalg.norm(rot @ vecs[i] - vecs[j]) < tol_e_A:
                break
        else:
            kept.append(i)
    return kept


def mean_square_dipole(conformer_set: ConformerEnsemble, temperature_K: float) -> float:
    """Boltzmann-weighted ⟨μ²⟩ (C² m²) of an ensemble at ``temperature_K`` (MMFF/UFF energies)."""
    return conformer_set.mean_square_dipole_si(temperature_K)


def predicted_alpha_eff_si(alpha_additive_si: float, mu2_si: float, temperature_K: float) -> float:
    """Effective polarizability α + ⟨μ²⟩/(3kT), C m²/V (Langevin–Debye, high-temperature limit)."""
    check_temperature(temperature_K)
    return alpha_additive_si + mu2_si / (3.0 * BOLTZMANN * temperature_K)
