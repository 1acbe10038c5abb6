"""How good the structure estimates are, measured: classes, per-class scatter, default choice.

A molecule falls in one **structure class** (:func:`structure_class`):

``atom``         a single neutral atom (no bonds): the Schwerdtfeger–Nagle table (:mod:`.atoms`)
``halogenated``  an organic molecule with F, Cl, Br or I
``aromatic``     an organic molecule with an aromatic ring (and no halogen)
``nos``          an organic molecule with N, O, S or P (no halogen, no aromatic ring)
``aliphatic``    hydrocarbons without an aromatic ring (alkanes, alkenes, alkynes)
``inorganic``    everything else: no carbon, or carbon without hydrogen, Cl, Br or I
                 (CO₂, CS₂, CF₄, N₂, hydrides)

For each class the additive scheme with the smallest mean absolute relative error on the
experimental polarizabilities of ``reference_values/polarizabilities.csv`` is the default
(:data:`CLASS_SCHEME`), and an estimate carries the **measured** root-mean-square relative error
of that scheme on that class (:data:`ALPHA_CLASS_SCATTER`) as its 1σ.  The force-field dipole
carries ``f_class × max(μ, 0.5 D)`` with ``f_class`` the 68.3 % quantile of
``|μ_exp − μ_est| / max(μ_est, 0.5 D)`` measured on the NIST CCCBDB experimental dipoles
(:data:`DIPOLE_CLASS_FACTOR`).  The numbers are data measured by
``benchmarks/measure_structure_accuracy.py`` (docs/structure.md); the tests re-measure them.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass

from polarbeam._util.optional import lazy

Chem = lazy("rdkit.Chem", "reading molecules (SMILES, SDF)")


__all__ = [
    "ALPHA_CLASS_SCATTER",
    "CLASSES",
    "CLASS_SCHEME",
    "DIPOLE_CLASS_FACTOR",
    "DIPOLE_FLOOR_D",
    "SCHEME_KEYS",
    "ClassStats",
    "alpha_class_stats",
    "alpha_rel_scatter",
    "choose_class_schemes",
    "dipole_error_D",
    "dipole_factor_from_pairs",
    "structure_class",
]

#: The structure classes, in the order of the tables.
CLASSES: tuple[str, ...] = ("aliphatic", "aromatic", "halogenated", "nos", "inorganic", "atom")
#: The additive schemes every estimate computes.
SCHEME_KEYS: tuple[str, ...] = ("ahp", "ahc", "bs", "llmr")

_HALOGEN_Z = frozenset((9, 17, 35, 53))
_HETERO_Z = frozenset((7, 8, 15, 16))


def structure_class(mol: Chem.Mol) -> str:
    """The structure class of a parsed molecule (see the module docstring)."""
    heavy = [a for a in mol.GetAtoms() if a.GetAtomicNum() != 1]
    if len(heavy) == 1 and mol.GetNumAtoms() == 1 and heavy[0].GetTotalNumHs() == 0:
        return "atom"
    z = {a.GetAtomicNum() for a in heavy}
    has_h = any(a.GetTotalNumHs() for a in heavy) or len(heavy) < mol.GetNumAtoms()
    if 6 not in z or not (has_h or z & {17, 35, 53}):
        return "inorganic"
    if z & _HALOGEN_Z:
        return "halogenated"
    if any(a.GetIsAromatic() for a in heavy):
        return "aromatic"
    if z & _HETERO_Z:
        return "nos"
    return "aliphatic"


# --------------------------------------------------------------------------------------------
# Polarizabilities: per-class scatter of every scheme, measured
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ClassStats:
    """Errors of one scheme on one class: count, mean absolute and RMS relative error."""

    n: int
    mare: float
    rms_rel: float


def alpha_class_stats(
    rows: Iterable[tuple[str, float, dict[str, float]]],
) -> dict[str, dict[str, ClassStats]]:
    """Per class and scheme: n, MARE and RMS relative error of ``(class, α_exp, {scheme: α})``."""
    rel: dict[str, dict[str, list[float]]] = {}
    for cls, exp, vals in rows:
        for k, v in vals.items():
            if math.isfinite(v):
                rel.setdefault(cls, {}).setdefault(k, []).append(v / exp - 1.0)
    out: dict[str, dict[str, ClassStats]] = {}
    for cls, per in rel.items():
        out[cls] = {
            k: ClassStats(
                len(r),
                math.fsum(abs(x) for x in r) / len(r),
                math.sqrt(math.fsum(x * x for x in r) / len(r)),
            )
            for k, r in per.items()
        }
    return out


def choose_class_schemes(stats: dict[str, dict[str, ClassStats]]) -> dict[str, str]:
    """The scheme of smallest MARE per class (ties: the order of :data:`SCHEME_KEYS`)."""
    return {
        cls: min((k for k in SCHEME_KEYS if k in per), key=lambda k: per[k].mare)
        for cls, per in stats.items()
    }


#: RMS relative error (1σ) of each scheme per class, measured on the experimental rows of
#: reference_values/polarizabilities.csv (values from the printed CRC table, see its header);
#: ``(n, MARE, RMS)``.  Re-measured by tests/chemistry/test_chemistry_accuracy.py.
ALPHA_CLASS_SCATTER: dict[str, dict[str, ClassStats]] = {
    "aliphatic": {
        "ahp": ClassStats(13, 0.0158, 0.0315),
        "ahc": ClassStats(13, 0.0157, 0.0316),
        "bs": ClassStats(13, 0.0430, 0.0584),
        "llmr": ClassStats(13, 0.0294, 0.0554),
    },
    "aromatic": {
        "ahp": ClassStats(3, 0.0413, 0.0484),
        "ahc": ClassStats(3, 0.0439, 0.0512),
        "bs": ClassStats(3, 0.0210, 0.0245),
        "llmr": ClassStats(3, 0.0397, 0.0433),
    },
    "halogenated": {
        "ahp": ClassStats(7, 0.0631, 0.0799),
        "ahc": ClassStats(7, 0.0610, 0.0789),
        "bs": ClassStats(7, 0.0493, 0.0639),
        "llmr": ClassStats(7, 0.0286, 0.0388),
    },
    "nos": {
        "ahp": ClassStats(8, 0.0233, 0.0295),
        "ahc": ClassStats(8, 0.0244, 0.0294),
        "bs": ClassStats(8, 0.0414, 0.0545),
        "llmr": ClassStats(8, 0.0197, 0.0216),
    },
    "inorganic": {
        "ahp": ClassStats(8, 0.0997, 0.1641),
        "ahc": ClassStats(8, 0.0665, 0.0927),
        "bs": ClassStats(8, 0.1466, 0.1947),
        "llmr": ClassStats(8, 0.1486, 0.1777),
    },
}

#: Default scheme per class: the smallest MARE in :data:`ALPHA_CLASS_SCATTER`.
CLASS_SCHEME: dict[str, str] = {
    "aliphatic": "ahc",
    "aromatic": "bs",
    "halogenated": "llmr",
    "nos": "llmr",
    "inorganic": "ahc",
}


def alpha_rel_scatter(cls: str, scheme: str) -> float:
    """Measured 1σ relative scatter of ``scheme`` on class ``cls`` (NaN when not measured)."""
    stats = ALPHA_CLASS_SCATTER.get(cls, {}).get(scheme)
    return math.nan if stats is None else stats.rms_rel


# --------------------------------------------------------------------------------------------
# Dipoles: per-class scatter of the force-field estimate, measured
# --------------------------------------------------------------------------------------------

#: Below this the dipole error is not taken proportional to the estimate (a near-zero estimate
#: of a polar molecule is the classic failure of point charges).
DIPOLE_FLOOR_D = 0.5

#: ``f_class``: 68.3 % quantile of ``|μ_exp − μ_est| / max(μ_est, DIPOLE_FLOOR_D)`` over the NIST
#: CCCBDB experimental dipoles above 0.5 D of that class (chemicals.dipole, CAS → SMILES by
#: chemicals.identifiers; 10 conformers, seed 61453, 300 K, scaled MMFF94 charges; n = 12, 17, 60,
#: 102 and 48).
DIPOLE_CLASS_FACTOR: dict[str, float] = {
    "aliphatic": 0.883,
    "aromatic": 0.459,
    "halogenated": 0.231,
    "nos": 0.196,
    "inorganic": 0.602,
}


def dipole_factor_from_pairs(
    pairs: Iterable[tuple[float, float]], quantile: float = 0.6827
) -> float:
    """``f`` with a fraction ``quantile`` of ``(μ_exp, μ_est)`` in |Δμ| ≤ f·max(μ_est, floor)."""
    r = sorted(abs(e - c) / max(c, DIPOLE_FLOOR_D) for e, c in pairs)
    if not r:
        return math.nan
    # linear interpolation between order statistics (numpy's default quantile)
    pos = quantile * (len(r) - 1)
    lo = math.floor(pos)
    hi = min(lo + 1, len(r) - 1)
    return r[lo] + (r[hi] - r[lo]) * (pos - lo)


def dipole_error_D(mu_D: float, cls: str) -> float:
    """1σ (debye) of a force-field dipole ``mu_D`` of class ``cls``: its measured scatter."""
    if cls == "atom":
        return 0.0
    f = DIPOLE_CLASS_FACTOR.get(cls, max(DIPOLE_CLASS_FACTOR.values()))  # unknown: the widest
    return f * max(mu_D, DIPOLE_FLOOR_D)
