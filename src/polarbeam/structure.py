"""Structure-based predictions: mass, additive polarizability and the thermal dipole ensemble.

This stage turns a structure (SMILES or an SDF record) into the numbers a deflection campaign is
compared against:

* masses -- average (isotopologue mixture) and monoisotopic, from RDKit;
* the static electronic polarizability from published additive schemes, each with the accuracy
  its paper documents and a domain flag when the molecule lies outside what the scheme was fitted
  on:

  ``ahp``   Miller (1990) atomic hybrid polarizabilities, α = Σ α_A
  ``ahc``   Miller (1990) atomic hybrid components, α = (4/N) (Σ τ_A)²
  ``bs``    Bosque & Sales (2002) element contributions, α = 0.32 + Σ n_i c_i
  ``llmr``  Lorentz–Lorenz from the Wildman–Crippen molar refractivity, α = 3 MR / (4π N_A)
  ``d4``    optional: sum of the D4 atom-in-molecule static polarizabilities (``dftd4`` package)

* the dipole moment of the thermal ensemble: ETKDG conformers, MMFF94 minimisation, force-field
  partial charges, dipole per conformer, Boltzmann-weighted ⟨μ²⟩ and the effective polarizability
  α_eff = α + ⟨μ²⟩/(3kT).

Functions returning Å³ say so in their names (``_A3``); ⟨μ²⟩ and α_eff are SI (C² m², C m²/V).
"""

from __future__ import annotations

import csv
import math
import os
import tempfile
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from functools import lru_cache
from importlib import resources
from pathlib import Path
from typing import Any, Literal

import numpy as np
from rdkit import Chem, rdBase
from rdkit.Chem import AllChem, Crippen, Descriptors, rdMolAlign, rdMolDescriptors
from scipy import constants as _sc

from .constants import ANGSTROM3_SI, AU_POLARIZABILITY_SI, BOLTZMANN, DEBYE_SI
from .errors import CompoundError, InputError

__all__ = [
    "CHARGE_MODELS",
    "DEFAULT_CHARGE_MODEL",
    "DEFAULT_SCHEME",
    "DEFAULT_SEED",
    "DIPOLE_SCALE",
    "LL_MR_FACTOR_A3",
    "SCHEMES",
    "ConformerEnsemble",
    "SchemeAccuracy",
    "StructureEstimate",
    "StructureRecord",
    "alpha_ahc_A3",
    "alpha_ahp_A3",
    "alpha_bs_A3",
    "alpha_d4_A3",
    "alpha_llmr_A3",
    "check_mass",
    "conformer_ensemble",
    "dftd4_available",
    "domain_flags",
    "estimate",
    "estimate_table",
    "lorentz_lorenz_factor_A3",
    "mass_average_u",
    "mass_monoisotopic_u",
    "mean_square_dipole",
    "miller_types",
    "n_electrons",
    "parse_smiles",
    "predicted_alpha_eff_si",
    "read_sdf",
]

Scheme = Literal["ahp", "ahc", "bs", "llmr"]
ChargeModel = Literal["mmff", "gasteiger"]
CHARGE_MODELS: tuple[str, ...] = ("mmff", "gasteiger")

#: Default random seed of the conformer embedding (any fixed integer makes runs reproducible).
DEFAULT_SEED = 61453


# --------------------------------------------------------------------------------------------
# Constants as data
# --------------------------------------------------------------------------------------------


def lorentz_lorenz_factor_A3() -> float:
    """Å³ of polarizability volume per cm³/mol of molar refractivity: 3 / (4π N_A).

    Lorentz–Lorenz: MR = (4π/3) N_A α' with α' the polarizability volume, so
    α'(Å³) = 3 MR / (4π N_A) = 3 · 1e-6 m³ / (4π N_A) / 1e-30 m³ per (cm³/mol).
    N_A from CODATA via :mod:`scipy.constants`.
    """
    return 3.0 * 1e-6 / (4.0 * math.pi * _sc.Avogadro) / 1e-30


#: 0.3964245 Å³ per cm³/mol (see :func:`lorentz_lorenz_factor_A3`).
LL_MR_FACTOR_A3 = lorentz_lorenz_factor_A3()


@dataclass(frozen=True)
class SchemeAccuracy:
    """One additive scheme as data: what it is, where it comes from, how accurate it claims to be.

    The 1σ uncertainty attached to an estimate is ``hypot(rel_err * alpha, abs_err_A3)``.
    """

    key: str
    name: str
    citation: str
    rel_err: float
    abs_err_A3: float
    accuracy_source: str
    domain: str

    def error_A3(self, alpha_A3: float) -> float:
        """1σ uncertainty (Å³) of an estimate ``alpha_A3`` from the documented accuracy."""
        return math.hypot(self.rel_err * alpha_A3, self.abs_err_A3)


SCHEMES: dict[str, SchemeAccuracy] = {
    s.key: s
    for s in (
        SchemeAccuracy(
            key="ahc",
            name="Miller atomic hybrid components",
            citation="K. J. Miller, J. Am. Chem. Soc. 112, 8533-8542 (1990), Table I",
            rel_err=0.022,
            abs_err_A3=0.0,
            accuracy_source="Miller 1990 abstract: average error 2.2 % over ~400 compounds",
            domain="H, C, N, O, S, P, F, Cl, Br, I in the hybrid states of Table I",
        ),
        SchemeAccuracy(
            key="ahp",
            name="Miller atomic hybrid polarizabilities",
            citation="K. J. Miller, J. Am. Chem. Soc. 112, 8533-8542 (1990), Table I",
            rel_err=0.028,
            abs_err_A3=0.0,
            accuracy_source="Miller 1990 abstract: average error 2.8 % over ~400 compounds",
            domain="H, C, N, O, S, P, F, Cl, Br, I in the hybrid states of Table I",
        ),
        SchemeAccuracy(
            key="bs",
            name="Bosque-Sales element contributions",
            citation="R. Bosque, J. Sales, J. Chem. Inf. Comput. Sci. 42, 1154-1163 (2002)",
            rel_err=0.0231,
            abs_err_A3=0.0,
            accuracy_source=(
                "Bosque & Sales 2002 abstract: average error 2.31 % (working set, 340 solvents), "
                "1.93 % (prediction set, 86)"
            ),
            domain="organic solvents of C, H, O, N, S, P, F, Cl, Br, I",
        ),
        SchemeAccuracy(
            key="llmr",
            name="Lorentz-Lorenz from Wildman-Crippen molar refractivity",
            citation=(
                "S. A. Wildman, G. M. Crippen, J. Chem. Inf. Comput. Sci. 39, 868-873 (1999); "
                "RDKit Crippen.MolMR"
            ),
            rel_err=0.0,
            abs_err_A3=1.27 * LL_MR_FACTOR_A3,
            accuracy_source=(
                "Wildman & Crippen 1999: MR fit standard deviation about 1.27 cm^3/mol "
                "(from memory), i.e. 0.50 A^3; MR is an optical (Na D line) liquid-phase quantity"
            ),
            domain="drug-like organics; MR includes optical dispersion (a few % above static)",
        ),
        SchemeAccuracy(
            key="d4",
            name="D4 atom-in-molecule static polarizabilities (sum)",
            citation="E. Caldeweyher et al., J. Chem. Phys. 150, 154122 (2019); dftd4 package",
            rel_err=0.053,
            abs_err_A3=0.0,
            accuracy_source=(
                "no molecular-polarizability accuracy figure from the D4 paper is used; 5.3 % is "
                "the mean absolute relative error measured on reference_values/polarizabilities.csv"
                " (organic rows, this work)"
            ),
            domain="elements up to Rn; geometry from an MMFF94 conformer",
        ),
    )
}

#: Scheme used for ``alpha_additive_A3``: the one with the smallest mean absolute relative error on
#: the organic rows of ``reference_values/polarizabilities.csv`` (llmr 2.8 %, ahp 3.1 %, ahc 3.1 %,
#: bs 4.2 %; table in docs/structure.md).  A test re-checks that it is still the best there.
DEFAULT_SCHEME: Scheme = "llmr"

#: Multiplicative factor applied to force-field dipoles, per charge model (1.0 = none adopted).
#: Measured against reference_values/dipoles.csv (rigid rows); see docs/structure.md.
DIPOLE_SCALE: dict[str, float] = {"mmff": 0.766, "gasteiger": 1.0}

#: Charge model used by default for the conformer dipoles; see docs/structure.md for why.
DEFAULT_CHARGE_MODEL: ChargeModel = "mmff"


# --------------------------------------------------------------------------------------------
# Tables
# --------------------------------------------------------------------------------------------


def _read_data_csv(name: str) -> list[dict[str, str]]:
    text = resources.files("polarbeam").joinpath("data", name).read_text(encoding="utf-8")
    lines = [ln for ln in text.splitlines() if ln.strip() and not ln.startswith("#")]
    return list(csv.DictReader(lines))


# Miller hybrid types in a fixed order; index into the parameter vectors below.
_MILLER_KEYS: tuple[str, ...] = (
    "H",
    "F",
    "Cl",
    "Br",
    "I",
    "C.te",
    "C.tr",
    "C.br",
    "C.di",
    "N.te",
    "N.tr2",
    "N.pi2",
    "N.di",
    "O.te",
    "O.tr4",
    "O.pi2",
    "S.te",
    "S.tr4",
    "S.pi2",
    "P.te",
)
_MI = {k: i for i, k in enumerate(_MILLER_KEYS)}
_I_H = _MI["H"]
_I_C_TE, _I_C_TR, _I_C_BR, _I_C_DI = (_MI[k] for k in ("C.te", "C.tr", "C.br", "C.di"))
_I_N_TE, _I_N_TR2, _I_N_PI2, _I_N_DI = (_MI[k] for k in ("N.te", "N.tr2", "N.pi2", "N.di"))
_I_O_TE, _I_O_TR4, _I_O_PI2 = (_MI[k] for k in ("O.te", "O.tr4", "O.pi2"))
_I_S_TE, _I_S_TR4, _I_S_PI2 = (_MI[k] for k in ("S.te", "S.tr4", "S.pi2"))
_I_P_TE = _MI["P.te"]


@lru_cache(maxsize=1)
def _miller_params() -> tuple[tuple[float, ...], tuple[float, ...]]:
    """(tau, alpha_ahp) per hybrid type, in the order of ``_MILLER_KEYS``, from Table I."""
    rows = _read_data_csv("miller1990_table1.csv")
    tau = [math.nan] * len(_MILLER_KEYS)
    ahp = [math.nan] * len(_MILLER_KEYS)
    for r in rows:
        el, hyb = r["element"], r["hybrid_type"]
        key = el if hyb == "sigma" else f"{el}.{hyb}"
        if key in _MI:
            tau[_MI[key]] = float(r["tau_A3half"])
            ahp[_MI[key]] = float(r["alpha_ahp_A3"])
    missing = [k for k in _MILLER_KEYS if not math.isfinite(tau[_MI[k]])]
    if missing:  # pragma: no cover - packaging error
        raise InputError(f"miller1990_table1.csv: missing hybrid types {missing}")
    return tuple(tau), tuple(ahp)


@lru_cache(maxsize=1)
def _bosque_sales_params() -> tuple[float, dict[int, float]]:
    rows = _read_data_csv("bosque_sales2002.csv")
    pt = Chem.GetPeriodicTable()
    return 0.32, {pt.GetAtomicNumber(r["element"]): float(r["c_A3"]) for r in rows}


_METALS = frozenset(
    [3, 4, 11, 12, 13, 19, 20, *range(21, 32), *range(37, 51), *range(55, 85), *range(87, 119)]
)
_CRIPPEN_ELEMENTS = frozenset([1, 5, 6, 7, 8, 9, 14, 15, 16, 17, 34, 35, 53])
_HALOGENS = {9: "F", 17: "Cl", 35: "Br", 53: "I"}
_HALOGEN_INDEX = {z: _MI[sym] for z, sym in _HALOGENS.items()}
_SP = Chem.HybridizationType.SP
#: Carbon without H in two or more SSSR rings (cage / fused-sheet carbon), for the domain flag.
_BARE_RING_CARBON = Chem.MolFromSmarts("[#6;H0;!R0;!R1]")


# --------------------------------------------------------------------------------------------
# Parsing
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class StructureRecord:
    """One input structure: name, SMILES, parsed molecule (None on error), error, extra columns."""

    compound: str
    smiles: str
    mol: Any = field(repr=False, compare=False)
    error: str = ""
    extra: tuple[tuple[str, str], ...] = ()


def parse_smiles(smiles: str, compound: str = "?") -> Chem.Mol:
    """Parse and sanitise a SMILES string with RDKit.

    Raises
    ------
    CompoundError
        One line naming the compound and the SMILES when RDKit rejects it.
    """
    if not isinstance(smiles, str) or not smiles.strip():
        raise CompoundError(f"compound {compound!r}: expected a SMILES string, found {smiles!r}")
    with rdBase.BlockLogs():
        mol = Chem.MolFromSmiles(smiles.strip())
    if mol is None:
        raise CompoundError(
            f"compound {compound!r}: RDKit cannot parse SMILES {smiles!r} "
            "(check valences, brackets and ring-closure digits)"
        )
    return mol


def read_sdf(path: str | os.PathLike) -> list[StructureRecord]:
    """Read every record of an SDF file.

    The compound name is the ``compound`` property when present, else the title line (``_Name``),
    else ``record N``.  A record RDKit cannot read becomes a :class:`StructureRecord` with ``mol``
    None and ``error`` set, so one bad record never hides the others.

    Raises
    ------
    InputError
        When the file does not exist or cannot be opened.
    """
    p = Path(path)
    if not p.is_file():
        raise InputError(f"{p}: SDF file not found")
    with rdBase.BlockLogs():
        supplier = Chem.SDMolSupplier(str(p), sanitize=True, removeHs=False)
        out: list[StructureRecord] = []
        for i in range(len(supplier)):
            mol = supplier[i]
            if mol is None:
                first = supplier.GetItemText(i).splitlines()
                name = first[0].strip() if first and first[0].strip() else f"record {i + 1}"
                out.append(
                    StructureRecord(
                        compound=name,
                        smiles="",
                        mol=None,
                        error=f"{p} record {i + 1} ({name!r}): RDKit cannot read this molecule",
                    )
                )
                continue
            if mol.HasProp("compound") and mol.GetProp("compound").strip():
                name = mol.GetProp("compound").strip()
            elif mol.GetProp("_Name").strip():
                name = mol.GetProp("_Name").strip()
            else:
                name = f"record {i + 1}"
            props = tuple(
                (k, str(v))
                for k, v in mol.GetPropsAsDict(includePrivate=False).items()
                if k != "compound"
            )
            out.append(
                StructureRecord(
                    compound=name,
                    smiles=Chem.MolToSmiles(Chem.RemoveHs(mol)),
                    mol=mol,
                    extra=props,
                )
            )
    return out


def _as_mol(structure: str | Chem.Mol, compound: str) -> Chem.Mol:
    if isinstance(structure, Chem.Mol):
        return structure
    return parse_smiles(structure, compound)


# --------------------------------------------------------------------------------------------
# Mass
# --------------------------------------------------------------------------------------------


def mass_average_u(mol: Chem.Mol) -> float:
    """Average molecular mass in u (natural isotopic mixture), all hydrogens counted."""
    return float(Descriptors.MolWt(mol))


def mass_monoisotopic_u(mol: Chem.Mol) -> float:
    """Monoisotopic mass in u (most abundant isotope of every atom), all hydrogens counted."""
    return float(rdMolDescriptors.CalcExactMolWt(mol))


def check_mass(
    stated_u: float, structure_u: float, compound: str, tolerance_u: float = 0.5
) -> tuple[float, str | None]:
    """Compare a stated mass with the structure's and choose the one to use.

    Parameters
    ----------
    stated_u
        Mass given by the user (u).
    structure_u
        Mass computed from the structure (u), e.g. :func:`mass_average_u`.
    compound
        Name for the warning.
    tolerance_u
        Largest difference accepted silently (default 0.5 u).

    Returns
    -------
    (mass_to_use, warning)
        The stated mass is always used when it is valid; ``warning`` is a one-line message when the
        two differ by more than ``tolerance_u``, else None.
    """
    if not (math.isfinite(stated_u) and stated_u > 0):
        raise CompoundError(f"compound {compound!r}: stated mass must be > 0 u, found {stated_u!r}")
    diff = stated_u - structure_u
    if abs(diff) > tolerance_u:
        return float(stated_u), (
            f"compound {compound!r}: stated mass {stated_u:.3f} u differs from the structure's "
            f"{structure_u:.3f} u by {diff:+.3f} u (> {tolerance_u} u); using the stated mass"
        )
    return float(stated_u), None


# --------------------------------------------------------------------------------------------
# Atom typing and additive schemes
# --------------------------------------------------------------------------------------------


def _analyse(mol: Chem.Mol) -> tuple[list[int], int, dict[int, int], list[str], list[str]]:
    """One pass over bonds and atoms: Miller type counts, N electrons, element counts, flags.

    Returns ``(miller_counts, n_electrons, element_counts, miller_flags, general_flags)`` with
    ``miller_counts`` indexed like ``_MILLER_KEYS``.  A heavy atom with no Miller parameter is
    reported as ``miller:no-parameter:<El>`` and makes the Miller estimates NaN.

    This is the batch hot path: atoms and bonds are fetched by index (RDKit's Python sequence
    wrappers cost twice as much) and each atom costs five RDKit calls.
    """
    n_atoms = mol.GetNumAtoms()
    # unsat[i]: atom i carries a double, triple or aromatic bond (it is part of a pi system).
    unsat = bytearray(n_atoms)
    n_arom = bytearray(n_atoms)
    pairs = []
    get_bond = mol.GetBondWithIdx
    for k in range(mol.GetNumBonds()):
        b = get_bond(k)
        i, j = b.GetBeginAtomIdx(), b.GetEndAtomIdx()
        order = b.GetBondTypeAsDouble()
        if order != 1.0:
            unsat[i] = unsat[j] = 1
            if order == 1.5:
                n_arom[i] += 1
                n_arom[j] += 1
        pairs.append((i, j))
    # nbr_unsat[i]: some neighbour of atom i is part of a pi system (conjugation of a lone pair).
    nbr_unsat = bytearray(n_atoms)
    for i, j in pairs:
        if unsat[j]:
            nbr_unsat[i] = 1
        if unsat[i]:
            nbr_unsat[j] = 1

    counts = [0] * len(_MILLER_KEYS)
    elements: dict[int, int] = {}
    n_h = 0
    n_el = 0
    mflags: list[str] = []
    gflags: list[str] = []
    get_atom = mol.GetAtomWithIdx
    for i in range(n_atoms):
        a = get_atom(i)
        z = a.GetAtomicNum()
        if a.GetNumRadicalElectrons() and "radical" not in gflags:
            gflags.append("radical")
        if z == 1:
            n_h += 1
            continue
        h = a.GetTotalNumHs()
        nconn = a.GetTotalDegree()
        n_h += h
        n_el += z
        elements[z] = elements.get(z, 0) + 1
        if z == 6:
            if nconn == 4:
                idx = _I_C_TE
            elif nconn == 3:
                idx = _I_C_BR if n_arom[i] == 3 else _I_C_TR
            else:
                idx = _I_C_DI
        elif z == 7:
            if nconn == 1:
                idx = _I_N_DI
            elif nconn == 2:
                idx = _I_N_DI if a.GetHybridization() == _SP else _I_N_TR2
            elif nconn == 3:
                idx = _I_N_PI2 if (unsat[i] or nbr_unsat[i]) else _I_N_TE
            else:
                idx = _I_N_TE
        elif z == 8:
            if nconn == 1:
                idx = _I_O_TR4
            elif nconn == 2:
                idx = _I_O_PI2 if (unsat[i] or nbr_unsat[i]) else _I_O_TE
            else:
                idx = _I_O_TE
                mflags.append("miller:hypervalent-O-typed-te")
        elif z == 16:
            if nconn == 1:
                idx = _I_S_TR4
            elif nconn == 2:
                idx = _I_S_PI2 if (unsat[i] or nbr_unsat[i]) else _I_S_TE
            else:
                idx = _I_S_TE
                mflags.append("miller:hypervalent-S-typed-te")
        elif z in _HALOGEN_INDEX:
            idx = _HALOGEN_INDEX[z]
            if nconn != 1:
                mflags.append(f"miller:hypervalent-{_HALOGENS[z]}")
        elif z == 15:
            idx = _I_P_TE
        else:
            idx = -1
            mflags.append(f"miller:no-parameter:{a.GetSymbol()}")
            if z in _METALS and "metal" not in gflags:
                gflags.append("metal")
        if idx >= 0:
            counts[idx] += 1
    counts[_I_H] = n_h
    if n_h:
        elements[1] = n_h
    n_el += n_h
    if len(mflags) > 1:
        mflags = sorted(set(mflags))
    return counts, n_el, elements, mflags, gflags


def miller_types(structure: str | Chem.Mol, compound: str = "?") -> dict[str, int]:
    """Count of atoms per Miller (1990) hybrid type, e.g. ``{'C.tr': 6, 'H': 6}`` for benzene.

    Typing rules: C te (4 σ bonds) / tr (3, incl. aromatic and carbonyl C) / br (aromatic C with
    three aromatic bonds, i.e. shared by two aromatic rings) / di (sp); N di (nitrile, sp) / tr2
    (two σ bonds: imine, pyridine) / pi2 (three σ bonds and a neighbour in a π system: amide,
    aniline, pyrrole; also N⁺ of nitro groups) / te (amine); O and S tr4 (one σ bond: carbonyl,
    thiocarbonyl, N-oxide) / pi2 (two σ bonds, aromatic or next to a π system: furan, thiophene,
    ester and acid -O-, phenol) / te (ethers, alcohols, thioethers); P te; halogens; H.
    """
    counts = _analyse(_as_mol(structure, compound))[0]
    return {k: c for k, c in zip(_MILLER_KEYS, counts, strict=True) if c}


def n_electrons(structure: str | Chem.Mol, compound: str = "?") -> int:
    """Number of electrons of the *neutral* molecule, hydrogens included (Σ Z)."""
    return int(_analyse(_as_mol(structure, compound))[1])


def _no_miller(mflags: Sequence[str]) -> bool:
    return any(f.startswith("miller:no-parameter") for f in mflags)


def _ahp(counts: Sequence[int], mflags: Sequence[str]) -> float:
    if _no_miller(mflags):
        return math.nan
    return math.fsum(c * a for c, a in zip(counts, _miller_params()[1], strict=True) if c)


def _ahc(counts: Sequence[int], n_el: int, mflags: Sequence[str]) -> float:
    if _no_miller(mflags) or n_el <= 0:
        return math.nan
    s = math.fsum(c * t for c, t in zip(counts, _miller_params()[0], strict=True) if c)
    return 4.0 / n_el * s * s


def _bs(elements: dict[int, int]) -> tuple[float, list[str]]:
    a0, c = _bosque_sales_params()
    total = a0
    missing = []
    for z, n in elements.items():
        if z in c:
            total += n * c[z]
        else:
            missing.append(Chem.GetPeriodicTable().GetElementSymbol(z))
    if missing:
        return math.nan, [f"bs:no-parameter:{s}" for s in sorted(missing)]
    return total, []


def alpha_ahp_A3(structure: str | Chem.Mol, compound: str = "?") -> float:
    """Miller (1990) ahp polarizability volume, Å³: α = Σ α_A(ahp) (NaN if an atom is untyped)."""
    counts, _, _, mflags, _ = _analyse(_as_mol(structure, compound))
    return _ahp(counts, mflags)


def alpha_ahc_A3(structure: str | Chem.Mol, compound: str = "?") -> float:
    """Miller (1990) ahc polarizability volume, Å³: α = (4/N)(Σ τ_A)², N = electrons (neutral)."""
    counts, n_el, _, mflags, _ = _analyse(_as_mol(structure, compound))
    return _ahc(counts, n_el, mflags)


def alpha_bs_A3(structure: str | Chem.Mol, compound: str = "?") -> float:
    """Bosque & Sales (2002) polarizability volume, Å³: α = 0.32 + Σ n_i c_i (NaN: no parameter)."""
    return _bs(_analyse(_as_mol(structure, compound))[2])[0]


def alpha_llmr_A3(structure: str | Chem.Mol, compound: str = "?") -> float:
    """Lorentz–Lorenz polarizability volume from RDKit's Wildman–Crippen MR, Å³: 3 MR/(4π N_A)."""
    mol = _as_mol(structure, compound)
    return LL_MR_FACTOR_A3 * float(Crippen.MolMR(mol))


def domain_flags(structure: str | Chem.Mol, compound: str = "?") -> tuple[str, ...]:
    """Reasons the molecule may lie outside the additive schemes' domain (empty when none).

    ``charged`` (net formal charge), ``radical``, ``metal``, ``no-carbon`` (schemes are fitted on
    organics), ``perfluorinated`` (carbon, fluorine and no hydrogen), ``cage-carbon`` (at least 12
    carbons, and at least half of all carbons, carry no H and sit in two or more rings: closed
    carbon cages and large fused carbon sheets from coronene up, where additivity fails), plus
    scheme-specific ``miller:``, ``bs:`` and ``llmr:`` flags.
    """
    mol = _as_mol(structure, compound)
    _, _, elements, mflags, gflags = _analyse(mol)
    return _flags(mol, elements, mflags, gflags)


def _flags(
    mol: Chem.Mol, elements: dict[int, int], mflags: list[str], gflags: list[str]
) -> tuple[str, ...]:
    flags = list(gflags)
    if Chem.GetFormalCharge(mol) != 0:
        flags.append("charged")
    n_c = elements.get(6, 0)
    if n_c == 0:
        flags.append("no-carbon")
    elif elements.get(9, 0) and not elements.get(1, 0):
        flags.append("perfluorinated")
    if n_c >= 12:
        bare = len(mol.GetSubstructMatches(_BARE_RING_CARBON, maxMatches=100000))
        if bare >= 12 and 2 * bare >= n_c:
            flags.append("cage-carbon")
    flags.extend(mflags)
    flags.extend(_bs(elements)[1])
    outside = sorted(
        Chem.GetPeriodicTable().GetElementSymbol(z) for z in elements if z not in _CRIPPEN_ELEMENTS
    )
    flags.extend(f"llmr:outside-domain:{s}" for s in outside)
    return tuple(flags)


# --------------------------------------------------------------------------------------------
# Optional D4 polarizability
# --------------------------------------------------------------------------------------------


def dftd4_available() -> bool:
    """True when the optional ``dftd4`` package imports (needed by :func:`alpha_d4_A3`)."""
    try:
        from dftd4.interface import DispersionModel  # noqa: F401
    except Exception:
        return False
    return True


def _embed_one(mol: Chem.Mol, seed: int, compound: str) -> Chem.Mol:
    mh = Chem.AddHs(mol)
    params = AllChem.ETKDGv3()
    params.randomSeed = int(seed)
    if AllChem.EmbedMolecule(mh, params) != 0:
        raise CompoundError(f"compound {compound!r}: RDKit could not embed a 3-D conformer")
    if AllChem.MMFFHasAllMoleculeParams(mh):
        AllChem.MMFFOptimizeMolecule(mh, maxIters=2000)
    else:
        AllChem.UFFOptimizeMolecule(mh, maxIters=2000)
    return mh


def alpha_d4_A3(structure: str | Chem.Mol, compound: str = "?", seed: int = DEFAULT_SEED) -> float:
    """Sum of the D4 static atom-in-molecule polarizabilities (Å³) on an MMFF94 conformer.

    Requires the optional ``dftd4`` package (CPU only).

    Raises
    ------
    InputError
        When ``dftd4`` is not installed.
    """
    if not dftd4_available():
        raise InputError("alpha_d4_A3 needs the optional 'dftd4' package (pip install dftd4)")
    from dftd4.interface import DispersionModel

    mh = _embed_one(_as_mol(structure, compound), seed, compound)
    numbers = np.array([a.GetAtomicNum() for a in mh.GetAtoms()])
    bohr_A = _sc.physical_constants["Bohr radius"][0] * 1e10
    pos = mh.GetConformer().GetPositions() / bohr_A
    model = DispersionModel(numbers, pos, charge=float(Chem.GetFormalCharge(mh)))
    alpha_au = float(np.sum(model.get_properties()["polarizabilities"]))
    return alpha_au * AU_POLARIZABILITY_SI / ANGSTROM3_SI


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
        _check_temperature(temperature_K)
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


def _check_temperature(temperature_K: float) -> None:
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

    Raises
    ------
    CompoundError
        Unparsable SMILES, or no conformer could be embedded.
    """
    if charge_model not in CHARGE_MODELS:
        raise InputError(
            f"charge_model must be one of {', '.join(CHARGE_MODELS)}, found {charge_model!r}"
        )
    if not (isinstance(n_conformers, int) and n_conformers >= 1):
        raise InputError(f"n_conformers must be an integer >= 1, found {n_conformers!r}")
    mol = _as_mol(structure, compound)
    smiles = Chem.MolToSmiles(Chem.RemoveHs(mol))
    mh = Chem.AddHs(mol)
    params = AllChem.ETKDGv3()
    params.randomSeed = int(seed)
    params.numThreads = 1
    with rdBase.BlockLogs():
        cids = list(AllChem.EmbedMultipleConfs(mh, numConfs=n_conformers, params=params))
        if not cids:
            params.useRandomCoords = True
            cids = list(AllChem.EmbedMultipleConfs(mh, numConfs=n_conformers, params=params))
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

    keep = _dedupe(mh, cids, energies, vecs_arr, dedupe_rms_A)
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


def _dedupe(
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
    _check_temperature(temperature_K)
    return alpha_additive_si + mu2_si / (3.0 * BOLTZMANN * temperature_K)


# --------------------------------------------------------------------------------------------
# The estimate of one molecule
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class StructureEstimate:
    """Everything the structure predicts for one compound (polarizability volumes in Å³).

    ``*_err_A3`` are 1σ uncertainties from each scheme's documented accuracy (:data:`SCHEMES`).
    ``flags`` lists why the molecule may be outside a scheme's domain.
    """

    compound: str
    smiles: str
    mass_avg_u: float
    mass_mono_u: float
    n_electrons: int
    alpha_ahp_A3: float
    alpha_ahp_err_A3: float
    alpha_ahc_A3: float
    alpha_ahc_err_A3: float
    alpha_bs_A3: float
    alpha_bs_err_A3: float
    alpha_llmr_A3: float
    alpha_llmr_err_A3: float
    default_scheme: str
    alpha_additive_A3: float
    alpha_additive_err_A3: float
    flags: tuple[str, ...] = ()
    alpha_d4_A3: float | None = None
    alpha_d4_err_A3: float | None = None
    ensemble: ConformerEnsemble | None = None
    temperature_K: float | None = None

    @property
    def alpha_additive_si(self) -> float:
        """Default additive polarizability in C m²/V."""
        return self.alpha_additive_A3 * ANGSTROM3_SI

    @property
    def alpha_additive_err_si(self) -> float:
        """Its 1σ uncertainty in C m²/V."""
        return self.alpha_additive_err_A3 * ANGSTROM3_SI

    @property
    def mu2_si(self) -> float | None:
        """Boltzmann ⟨μ²⟩ (C² m²) at ``temperature_K``, when an ensemble was computed."""
        if self.ensemble is None or self.temperature_K is None:
            return None
        return self.ensemble.mean_square_dipole_si(self.temperature_K)

    @property
    def dipole_rms_D(self) -> float | None:
        """sqrt⟨μ²⟩ in debye at ``temperature_K``, when an ensemble was computed."""
        mu2 = self.mu2_si
        return None if mu2 is None else math.sqrt(mu2) / DEBYE_SI

    @property
    def alpha_eff_si(self) -> float | None:
        """α_additive + ⟨μ²⟩/(3kT) in C m²/V, when an ensemble was computed."""
        mu2 = self.mu2_si
        if mu2 is None or self.temperature_K is None:
            return None
        return predicted_alpha_eff_si(self.alpha_additive_si, mu2, self.temperature_K)

    def summary(self) -> dict[str, Any]:
        """Plain dict (JSON-ready)."""
        out: dict[str, Any] = {
            "compound": self.compound,
            "smiles": self.smiles,
            "mass_avg_u": self.mass_avg_u,
            "mass_mono_u": self.mass_mono_u,
            "n_electrons": self.n_electrons,
        }
        for k in ("ahp", "ahc", "bs", "llmr"):
            out[f"alpha_{k}_A3"] = getattr(self, f"alpha_{k}_A3")
            out[f"alpha_{k}_err_A3"] = getattr(self, f"alpha_{k}_err_A3")
        out["alpha_d4_A3"] = self.alpha_d4_A3
        out["alpha_d4_err_A3"] = self.alpha_d4_err_A3
        out["default_scheme"] = self.default_scheme
        out["alpha_additive_A3"] = self.alpha_additive_A3
        out["alpha_additive_err_A3"] = self.alpha_additive_err_A3
        out["flags"] = list(self.flags)
        out["temperature_K"] = self.temperature_K
        out["dipole_rms_D"] = self.dipole_rms_D
        out["ensemble"] = None if self.ensemble is None else self.ensemble.summary()
        return out

    def to_markdown(self) -> str:
        """Short markdown table of the estimate."""
        lines = [
            f"**{self.compound}** `{self.smiles}` — M = {self.mass_avg_u:.3f} u "
            f"(monoisotopic {self.mass_mono_u:.4f} u), N = {self.n_electrons} electrons",
            "",
            "| scheme | α (Å³) | ±1σ |",
            "| --- | --- | --- |",
        ]
        for k in ("ahp", "ahc", "bs", "llmr"):
            lines.append(
                f"| {k} | {getattr(self, f'alpha_{k}_A3'):.3f} "
                f"| {getattr(self, f'alpha_{k}_err_A3'):.3f} |"
            )
        if self.alpha_d4_A3 is not None:
            lines.append(f"| d4 | {self.alpha_d4_A3:.3f} | {self.alpha_d4_err_A3:.3f} |")
        lines.append(
            f"| **default ({self.default_scheme})** | **{self.alpha_additive_A3:.3f}** "
            f"| {self.alpha_additive_err_A3:.3f} |"
        )
        if self.dipole_rms_D is not None:
            lines += ["", f"sqrt<mu^2> = {self.dipole_rms_D:.3f} D at {self.temperature_K} K"]
        if self.flags:
            lines += ["", "flags: " + ", ".join(self.flags)]
        return "\n".join(lines)

    def _repr_html_(self) -> str:
        import html

        return "<pre>" + html.escape(self.to_markdown()) + "</pre>"


def _fast(mol: Chem.Mol) -> tuple[float, float, int, float, float, float, float, tuple[str, ...]]:
    """Masses, N and the four additive estimates of one parsed molecule (the batch hot path)."""
    counts, n_el, elements, mflags, gflags = _analyse(mol)
    ahp = _ahp(counts, mflags)
    ahc = _ahc(counts, n_el, mflags)
    bs, _ = _bs(elements)
    llmr = LL_MR_FACTOR_A3 * rdMolDescriptors.CalcCrippenDescriptors(mol)[1]
    return (
        float(Descriptors.MolWt(mol)),
        float(rdMolDescriptors.CalcExactMolWt(mol)),
        int(n_el),
        ahp,
        ahc,
        bs,
        llmr,
        _flags(mol, elements, mflags, gflags),
    )


def estimate(
    structure: str | Chem.Mol,
    compound: str = "?",
    *,
    dipoles: bool = False,
    conformers: int = 10,
    seed: int = DEFAULT_SEED,
    temperature_K: float = 300.0,
    charge_model: ChargeModel = DEFAULT_CHARGE_MODEL,
    d4: bool = False,
    scheme: Scheme = DEFAULT_SCHEME,
) -> StructureEstimate:
    """All structure-based predictions for one molecule.

    Parameters
    ----------
    structure
        SMILES or RDKit molecule.
    compound
        Name used in messages.
    dipoles
        Also build the conformer ensemble (slow: seconds per molecule).
    conformers, seed, charge_model
        Passed to :func:`conformer_ensemble`.
    temperature_K
        Temperature of the Boltzmann average.
    d4
        Also compute the D4 polarizability (needs ``dftd4``).
    scheme
        Scheme used for ``alpha_additive_A3`` (default :data:`DEFAULT_SCHEME`).
    """
    if scheme not in ("ahp", "ahc", "bs", "llmr"):
        raise InputError(f"scheme must be one of ahp, ahc, bs, llmr; found {scheme!r}")
    mol = _as_mol(structure, compound)
    smiles = structure if isinstance(structure, str) else Chem.MolToSmiles(Chem.RemoveHs(mol))
    m_avg, m_mono, n_el, ahp, ahc, bs, llmr, flags = _fast(mol)
    vals = {"ahp": ahp, "ahc": ahc, "bs": bs, "llmr": llmr}
    errs = {k: SCHEMES[k].error_A3(v) if math.isfinite(v) else math.nan for k, v in vals.items()}
    d4_val = d4_err = None
    if d4:
        d4_val = alpha_d4_A3(mol, compound, seed=seed)
        d4_err = SCHEMES["d4"].error_A3(d4_val)
    ens = None
    if dipoles:
        _check_temperature(temperature_K)
        ens = conformer_ensemble(
            mol, compound, n_conformers=conformers, seed=seed, charge_model=charge_model
        )
    return StructureEstimate(
        compound=compound,
        smiles=smiles,
        mass_avg_u=m_avg,
        mass_mono_u=m_mono,
        n_electrons=n_el,
        alpha_ahp_A3=ahp,
        alpha_ahp_err_A3=errs["ahp"],
        alpha_ahc_A3=ahc,
        alpha_ahc_err_A3=errs["ahc"],
        alpha_bs_A3=bs,
        alpha_bs_err_A3=errs["bs"],
        alpha_llmr_A3=llmr,
        alpha_llmr_err_A3=errs["llmr"],
        default_scheme=scheme,
        alpha_additive_A3=vals[scheme],
        alpha_additive_err_A3=errs[scheme],
        flags=flags,
        alpha_d4_A3=d4_val,
        alpha_d4_err_A3=d4_err,
        ensemble=ens,
        temperature_K=float(temperature_K) if dipoles else None,
    )


# --------------------------------------------------------------------------------------------
# Batch table
# --------------------------------------------------------------------------------------------

_OUT_COLUMNS = [
    "compound",
    "smiles",
    "mass_u",
    "mass_mono_u",
    "n_electrons",
    "alpha_additive_A3",
    "alpha_additive_err_A3",
    "default_scheme",
    "alpha_ahp_A3",
    "alpha_ahp_err_A3",
    "alpha_ahc_A3",
    "alpha_ahc_err_A3",
    "alpha_bs_A3",
    "alpha_bs_err_A3",
    "alpha_llmr_A3",
    "alpha_llmr_err_A3",
    "flags",
]
_DIPOLE_COLUMNS = ["dipole_rms_D", "n_conformers", "charge_model", "temperature_K"]


def _fmt(x: float) -> str:
    return "" if x is None or (isinstance(x, float) and not math.isfinite(x)) else f"{x:.6g}"


def _read_csv_records(path: Path) -> tuple[list[str], list[StructureRecord]]:
    try:
        with path.open(newline="", encoding="utf-8") as fh:
            lines = [ln for ln in fh if not ln.startswith("#")]
    except OSError as exc:
        raise InputError(f"{path}: cannot read the file ({exc.strerror})") from exc
    reader = csv.DictReader(lines)
    header = [h.strip() for h in (reader.fieldnames or [])]
    missing = [c for c in ("compound", "smiles") if c not in header]
    if missing:
        raise InputError(
            f"{path}: expected columns 'compound' and 'smiles', missing {missing}; found {header}"
        )
    reader.fieldnames = header
    extra_cols = [h for h in header if h not in ("compound", "smiles")]
    recs = []
    with rdBase.BlockLogs():
        for lineno, row in enumerate(reader, start=2):
            name = (row.get("compound") or "").strip() or f"row {lineno}"
            smi = (row.get("smiles") or "").strip()
            extra = tuple((c, row.get(c) or "") for c in extra_cols)
            mol = Chem.MolFromSmiles(smi) if smi else None
            err = ""
            if mol is None:
                err = f"{path.name} row {lineno}, compound {name!r}: " + (
                    f"RDKit cannot parse SMILES {smi!r}" if smi else "empty SMILES"
                )
            recs.append(StructureRecord(name, smi, mol, err, extra))
    return extra_cols, recs


def estimate_table(
    input_path: str | os.PathLike,
    out_path: str | os.PathLike,
    *,
    dipoles: bool = False,
    conformers: int = 10,
    seed: int = DEFAULT_SEED,
    temperature_K: float = 300.0,
    charge_model: ChargeModel = DEFAULT_CHARGE_MODEL,
) -> dict[str, int]:
    """Estimate every structure of a CSV (``compound, smiles, ...``) or SDF file into a CSV.

    One output row per input row: the input's other columns are carried through after the
    estimate columns; ``status`` is ``ok`` or ``failed`` and ``message`` says why a row failed
    (a bad row never stops the others).  The file is written atomically (temporary file in the
    output directory, then :func:`os.replace`).

    Returns
    -------
    dict
        ``{"rows": n, "ok": n_ok, "failed": n_failed}``.

    Raises
    ------
    InputError
        Missing/unreadable input, missing ``compound``/``smiles`` columns, unknown suffix.
    """
    inp = Path(input_path)
    out = Path(out_path)
    if not inp.is_file():
        raise InputError(f"{inp}: input file not found")
    if dipoles:
        _check_temperature(temperature_K)
    suffix = inp.suffix.lower()
    if suffix in (".sdf", ".sd", ".mol"):
        recs = read_sdf(inp)
        extra_cols = sorted({k for r in recs for k, _ in r.extra})
    elif suffix in (".csv", ".txt", ""):
        extra_cols, recs = _read_csv_records(inp)
    else:
        raise InputError(f"{inp}: expected a .csv or .sdf file, found suffix {inp.suffix!r}")

    base = list(_OUT_COLUMNS) + (_DIPOLE_COLUMNS if dipoles else [])
    n_out = len(base)
    reserved = set(base) | {"status", "message"}
    header = [*base, "status", "message"]
    header += [f"input_{c}" if c in reserved else c for c in extra_cols]
    scheme_acc = [SCHEMES[k] for k in ("ahp", "ahc", "bs", "llmr")]
    default_idx = ("ahp", "ahc", "bs", "llmr").index(DEFAULT_SCHEME)

    rows: list[list[str]] = []
    n_ok = 0
    with rdBase.BlockLogs():
        for rec in recs:
            extra = dict(rec.extra)
            tail = [extra.get(c, "") for c in extra_cols]
            failed = [rec.compound, rec.smiles] + [""] * (n_out - 2)
            if rec.mol is None:
                rows.append([*failed, "failed", rec.error, *tail])
                continue
            try:
                m_avg, m_mono, n_el, ahp, ahc, bs, llmr, flags = _fast(rec.mol)
                vals = (ahp, ahc, bs, llmr)
                errs = [
                    s.error_A3(v) if math.isfinite(v) else math.nan
                    for s, v in zip(scheme_acc, vals, strict=True)
                ]
                row = [
                    rec.compound,
                    rec.smiles,
                    _fmt(m_avg),
                    _fmt(m_mono),
                    str(n_el),
                    _fmt(vals[default_idx]),
                    _fmt(errs[default_idx]),
                    DEFAULT_SCHEME,
                ]
                for v, e in zip(vals, errs, strict=True):
                    row += [_fmt(v), _fmt(e)]
                row.append(";".join(flags))
                if dipoles:
                    ens = conformer_ensemble(
                        rec.mol,
                        rec.compound,
                        n_conformers=conformers,
                        seed=seed,
                        charge_model=charge_model,
                    )
                    row += [
                        _fmt(ens.rms_dipole_D(temperature_K)),
                        str(len(ens.energies_kcal_mol)),
                        ens.charge_model,
                        _fmt(float(temperature_K)),
                    ]
                rows.append([*row, "ok", "", *tail])
                n_ok += 1
            except (CompoundError, ValueError, RuntimeError) as exc:
                msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
                rows.append([*failed, "failed", f"compound {rec.compound!r}: {msg}", *tail])

    _write_csv_atomic(out, header, rows)
    return {"rows": len(rows), "ok": n_ok, "failed": len(rows) - n_ok}


def _write_csv_atomic(out: Path, header: list[str], rows: Iterable[list[str]]) -> None:
    directory = out.parent if str(out.parent) else Path(".")
    if not directory.is_dir():
        raise InputError(f"{out}: output directory {directory} does not exist")
    fd, tmp = tempfile.mkstemp(prefix=f".{out.name}.", suffix=".tmp", dir=directory)
    try:
        with os.fdopen(fd, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(header)
            w.writerows(rows)
        os.replace(tmp, out)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
