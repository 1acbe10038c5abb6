"""Additive polarizability schemes: published atom and element contributions, as data.

The static electronic polarizability of a molecule from published additive schemes, each with
the accuracy its paper documents and a domain flag when the molecule lies outside what the
scheme was fitted on:

``ahp``   Miller (1990) atomic hybrid polarizabilities, α = Σ α_A
``ahc``   Miller (1990) atomic hybrid components, α = (4/N) (Σ τ_A)²
``bs``    Bosque & Sales (2002) element contributions, α = 0.32 + Σ n_i c_i
``llmr``  Lorentz–Lorenz from the Wildman–Crippen molar refractivity, α = 3 MR / (4π N_A)
``d4``    optional: sum of the D4 atom-in-molecule static polarizabilities (``dftd4`` package)

The Miller and Bosque–Sales tables are package data (``polarbeam/data/*.csv``) with their
citation.  Functions returning Å³ say so in their names (``_A3``).
"""

from __future__ import annotations

import csv
import functools
import math
from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache
from importlib import resources
from typing import Literal

import numpy as np
from scipy import constants as _sc

from polarbeam._util.optional import lazy, require
from polarbeam.chemistry.conformers import DEFAULT_SEED, embed_one
from polarbeam.chemistry.molecules import as_mol
from polarbeam.constants import ANGSTROM3_SI, AU_POLARIZABILITY_SI
from polarbeam.errors import InputError

Chem = lazy("rdkit.Chem", "reading molecules (SMILES, SDF)")
Crippen = lazy("rdkit.Chem.Crippen", "reading molecules (SMILES, SDF)")
Descriptors = lazy("rdkit.Chem.Descriptors", "reading molecules (SMILES, SDF)")
rdMolDescriptors = lazy("rdkit.Chem.rdMolDescriptors", "reading molecules (SMILES, SDF)")

__all__ = [
    "CRIPPEN_MAX_ATOMS",
    "DEFAULT_SCHEME",
    "LL_MR_FACTOR_A3",
    "MILLER_KEYS",
    "SCHEMES",
    "Scheme",
    "SchemeAccuracy",
    "alpha_ahc_A3",
    "alpha_ahp_A3",
    "alpha_bs_A3",
    "alpha_d4_A3",
    "alpha_llmr_A3",
    "dftd4_available",
    "domain_flags",
    "fast_estimates",
    "lorentz_lorenz_factor_A3",
    "miller_params",
    "miller_types",
    "n_electrons",
]

Scheme = Literal["ahp", "ahc", "bs", "llmr"]


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

#: Largest molecule (atoms as parsed) for the llmr scheme.  RDKit's Wildman–Crippen typing stops
#: after 1000 matches of one SMARTS pattern, so from 1000 atoms on the molar refractivity misses
#: atoms (a 5,000-carbon chain gets the MR of about 1,000 carbons).  Above the limit llmr is NaN
#: with the flag ``llmr:too-large``; the other schemes count atoms and stay linear in size.
CRIPPEN_MAX_ATOMS = 999


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

#: The best *single* scheme: the smallest mean absolute relative error on the organic rows of
#: ``reference_values/polarizabilities.csv`` (llmr 2.8 %, ahp 3.1 %, ahc 3.1 %, bs 4.2 %; table in
#: docs/structure.md).  A test re-checks that it is still the best there.  ``alpha_additive_A3``
#: takes the best scheme *per structure class* instead
#: (:data:`polarbeam.chemistry.accuracy.CLASS_SCHEME`).
DEFAULT_SCHEME: Scheme = "llmr"


# --------------------------------------------------------------------------------------------
# Tables
# --------------------------------------------------------------------------------------------


def _read_data_csv(name: str) -> list[dict[str, str]]:
    text = resources.files("polarbeam").joinpath("data", name).read_text(encoding="utf-8")
    lines = [ln for ln in text.splitlines() if ln.strip() and not ln.startswith("#")]
    return list(csv.DictReader(lines))


#: Miller hybrid types in a fixed order; index into the parameter vectors of :func:`miller_params`.
MILLER_KEYS: tuple[str, ...] = (
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
_MI = {k: i for i, k in enumerate(MILLER_KEYS)}
_I_H = _MI["H"]
_I_C_TE, _I_C_TR, _I_C_BR, _I_C_DI = (_MI[k] for k in ("C.te", "C.tr", "C.br", "C.di"))
_I_N_TE, _I_N_TR2, _I_N_PI2, _I_N_DI = (_MI[k] for k in ("N.te", "N.tr2", "N.pi2", "N.di"))
_I_O_TE, _I_O_TR4, _I_O_PI2 = (_MI[k] for k in ("O.te", "O.tr4", "O.pi2"))
_I_S_TE, _I_S_TR4, _I_S_PI2 = (_MI[k] for k in ("S.te", "S.tr4", "S.pi2"))
_I_P_TE = _MI["P.te"]


@lru_cache(maxsize=1)
def miller_params() -> tuple[tuple[float, ...], tuple[float, ...]]:
    """(tau, alpha_ahp) per hybrid type, in the order of ``MILLER_KEYS``, from Table I."""
    rows = _read_data_csv("miller1990_table1.csv")
    tau = [math.nan] * len(MILLER_KEYS)
    ahp = [math.nan] * len(MILLER_KEYS)
    for r in rows:
        el, hyb = r["element"], r["hybrid_type"]
        key = el if hyb == "sigma" else f"{el}.{hyb}"
        if key in _MI:
            tau[_MI[key]] = float(r["tau_A3half"])
            ahp[_MI[key]] = float(r["alpha_ahp_A3"])
    missing = [k for k in MILLER_KEYS if not math.isfinite(tau[_MI[k]])]
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


@functools.cache
def _rdkit_patterns() -> tuple:
    """RDKit objects made once, on first use (RDKit loads only when a molecule is read):
    the sp hybridization and carbon without H in two or more SSSR rings (cage / fused-sheet
    carbon, for the domain flag)."""
    return Chem.HybridizationType.SP, Chem.MolFromSmarts("[#6;H0;!R0;!R1]")


# --------------------------------------------------------------------------------------------
# Atom typing and additive schemes
# --------------------------------------------------------------------------------------------


def _analyse(mol: Chem.Mol) -> tuple[list[int], int, dict[int, int], list[str], list[str]]:
    """One pass over bonds and atoms: Miller type counts, N electrons, element counts, flags.

    Returns ``(miller_counts, n_electrons, element_counts, miller_flags, general_flags)`` with
    ``miller_counts`` indexed like ``MILLER_KEYS``.  A heavy atom with no Miller parameter is
    reported as ``miller:no-parameter:<El>`` and makes the Miller estimates NaN.

    This is the batch hot path: atoms and bonds are fetched by index (RDKit's Python sequence
    wrappers cost twice as much) and each atom costs five RDKit calls.
    """
    n_atoms = mol.GetNumAtoms()
    sp_type = _rdkit_patterns()[0]
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

    counts = [0] * len(MILLER_KEYS)
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
                idx = _I_N_DI if a.GetHybridization() == sp_type else _I_N_TR2
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
    counts = _analyse(as_mol(structure, compound))[0]
    return {k: c for k, c in zip(MILLER_KEYS, counts, strict=True) if c}


def n_electrons(structure: str | Chem.Mol, compound: str = "?") -> int:
    """Number of electrons of the *neutral* molecule, hydrogens included (Σ Z)."""
    return int(_analyse(as_mol(structure, compound))[1])


def _no_miller(mflags: Sequence[str]) -> bool:
    return any(f.startswith("miller:no-parameter") for f in mflags)


def _ahp(counts: Sequence[int], mflags: Sequence[str]) -> float:
    if _no_miller(mflags):
        return math.nan
    return math.fsum(c * a for c, a in zip(counts, miller_params()[1], strict=True) if c)


def _ahc(counts: Sequence[int], n_el: int, mflags: Sequence[str]) -> float:
    if _no_miller(mflags) or n_el <= 0:
        return math.nan
    s = math.fsum(c * t for c, t in zip(counts, miller_params()[0], strict=True) if c)
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
    counts, _, _, mflags, _ = _analyse(as_mol(structure, compound))
    return _ahp(counts, mflags)


def alpha_ahc_A3(structure: str | Chem.Mol, compound: str = "?") -> float:
    """Miller (1990) ahc polarizability volume, Å³: α = (4/N)(Σ τ_A)², N = electrons (neutral)."""
    counts, n_el, _, mflags, _ = _analyse(as_mol(structure, compound))
    return _ahc(counts, n_el, mflags)


def alpha_bs_A3(structure: str | Chem.Mol, compound: str = "?") -> float:
    """Bosque & Sales (2002) polarizability volume, Å³: α = 0.32 + Σ n_i c_i (NaN: no parameter)."""
    return _bs(_analyse(as_mol(structure, compound))[2])[0]


def alpha_llmr_A3(structure: str | Chem.Mol, compound: str = "?") -> float:
    """Lorentz–Lorenz polarizability volume from RDKit's Wildman–Crippen MR, Å³: 3 MR/(4π N_A)."""
    mol = as_mol(structure, compound)
    if mol.GetNumAtoms() > CRIPPEN_MAX_ATOMS:
        return math.nan
    return LL_MR_FACTOR_A3 * float(Crippen.MolMR(mol))


def domain_flags(structure: str | Chem.Mol, compound: str = "?") -> tuple[str, ...]:
    """Reasons the molecule may lie outside the additive schemes' domain (empty when none).

    ``charged`` (net formal charge), ``radical``, ``metal``, ``no-carbon`` (schemes are fitted on
    organics), ``perfluorinated`` (carbon, fluorine and no hydrogen), ``cage-carbon`` (at least 12
    carbons, and at least half of all carbons, carry no H and sit in two or more rings: closed
    carbon cages and large fused carbon sheets from coronene up, where additivity fails), plus
    scheme-specific ``miller:``, ``bs:`` and ``llmr:`` flags.
    """
    mol = as_mol(structure, compound)
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
        bare = len(mol.GetSubstructMatches(_rdkit_patterns()[1], maxMatches=100000))
        if bare >= 12 and 2 * bare >= n_c:
            flags.append("cage-carbon")
    flags.extend(mflags)
    flags.extend(_bs(elements)[1])
    outside = sorted(
        Chem.GetPeriodicTable().GetElementSymbol(z) for z in elements if z not in _CRIPPEN_ELEMENTS
    )
    flags.extend(f"llmr:outside-domain:{s}" for s in outside)
    if mol.GetNumAtoms() > CRIPPEN_MAX_ATOMS:
        flags.append("llmr:too-large")
    return tuple(flags)


# --------------------------------------------------------------------------------------------
# Optional D4 polarizability
# --------------------------------------------------------------------------------------------


_D4_PURPOSE = "the D4 polarizability estimate"


def dftd4_available() -> bool:
    """True when the optional ``dftd4`` package imports (needed by :func:`alpha_d4_A3`)."""
    try:
        _ = require("dftd4.interface", _D4_PURPOSE).DispersionModel
    except Exception:
        return False
    return True


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
    interface = require("dftd4.interface", _D4_PURPOSE)

    mh = embed_one(as_mol(structure, compound), seed, compound)
    numbers = np.array([a.GetAtomicNum() for a in mh.GetAtoms()])
    bohr_A = _sc.physical_constants["Bohr radius"][0] * 1e10
    pos = mh.GetConformer().GetPositions() / bohr_A
    model = interface.DispersionModel(numbers, pos, charge=float(Chem.GetFormalCharge(mh)))
    alpha_au = float(np.sum(model.get_properties()["polarizabilities"]))
    return alpha_au * AU_POLARIZABILITY_SI / ANGSTROM3_SI


# --------------------------------------------------------------------------------------------
# The batch hot path
# --------------------------------------------------------------------------------------------


def fast_estimates(
    mol: Chem.Mol,
) -> tuple[float, float, int, float, float, float, float, tuple[str, ...]]:
    """Masses, N and the four additive estimates of one parsed molecule (the batch hot path).

    Returns ``(mass_avg_u, mass_mono_u, n_electrons, ahp_A3, ahc_A3, bs_A3, llmr_A3, flags)``;
    an estimate is NaN when the scheme has no parameter for an atom of the molecule.
    """
    counts, n_el, elements, mflags, gflags = _analyse(mol)
    ahp = _ahp(counts, mflags)
    ahc = _ahc(counts, n_el, mflags)
    bs, _ = _bs(elements)
    llmr = (
        LL_MR_FACTOR_A3 * rdMolDescriptors.CalcCrippenDescriptors(mol)[1]
        if mol.GetNumAtoms() <= CRIPPEN_MAX_ATOMS
        else math.nan
    )
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
