"""Measure the structure-stage schemes against reference_values/ (run on demand).

    PYTHONPATH=src python benchmarks/measure_structure_accuracy.py

Prints the per-molecule table and, for each polarizability scheme, the mean absolute relative
error (MARE) on the organic rows of reference_values/polarizabilities.csv; then, for the dipoles
of the rigid rows of reference_values/dipoles.csv, the MARE of each charge model raw and with a
least-squares scale factor (in-sample and leave-one-out).  Then the per-class tables behind
polarbeam.chemistry.accuracy: every scheme's MARE and RMS relative error per structure class,
the per-class default and its leave-one-out error, and the force-field dipole error model on
the NIST CCCBDB experimental dipoles (read from the ``chemicals`` package: coverage of the 1σ,
MARE, two-fold cross-validation).  These are the numbers quoted in docs/structure.md and in the
comments of tests/chemistry/test_chemistry_additive.py, test_chemistry_conformers.py and
test_chemistry_accuracy.py.
"""

from __future__ import annotations

import csv
import zlib
from pathlib import Path

import numpy as np
from rdkit import Chem

from polarbeam import chemistry as chem
from polarbeam.chemistry.accuracy import SCHEME_KEYS

REF = Path(__file__).resolve().parents[1] / "reference_values"


def _rows(name: str) -> list[dict[str, str]]:
    with (REF / name).open(encoding="utf-8") as fh:
        return list(csv.DictReader(ln for ln in fh if not ln.startswith("#")))


def polarizabilities() -> None:
    keys = ["ahp", "ahc", "bs", "llmr"] + (["d4"] if chem.dftd4_available() else [])
    rel: dict[str, list[float]] = {k: [] for k in keys}
    print(f"{'compound':22s} {'exp':>6s} " + " ".join(f"{k:>6s}" for k in keys) + "  class")
    for r in _rows("polarizabilities.csv"):
        e = chem.estimate(r["smiles"], r["compound"], d4="d4" in keys)
        exp = float(r["alpha_A3"])
        vals = {k: getattr(e, f"alpha_{k}_A3") for k in keys}
        print(
            f"{r['compound']:22s} {exp:6.2f} "
            + " ".join(f"{vals[k]:6.2f}" for k in keys)
            + f"  {r['class']} {' '.join(e.flags)}"
        )
        if r["class"] == "organic":
            for k in keys:
                rel[k].append(abs(vals[k] / exp - 1.0))
    print("\nscheme  MARE(organic)  max  n")
    for k in keys:
        a = np.array(rel[k])
        print(f"{k:6s}  {100 * a.mean():6.2f} %  {100 * a.max():5.1f} %  {a.size}")
    if "d4" not in keys:
        print("d4: skipped (the optional 'dftd4' package is not installed)")


def dipoles(n_conformers: int = 10) -> None:
    rows = [r for r in _rows("dipoles.csv") if r["rigid"] == "yes"]
    exp = np.array([float(r["dipole_D"]) for r in rows])
    for cm in chem.CHARGE_MODELS:
        calc = np.array(
            [
                chem.conformer_ensemble(
                    r["smiles"], r["compound"], n_conformers=n_conformers, charge_model=cm,
                    dipole_scale=1.0,
                ).rms_dipole_D(300.0)
                for r in rows
            ]
        )  # fmt: skip
        raw = np.mean(np.abs(calc / exp - 1))
        s = float(exp @ calc / (calc @ calc))
        ins = np.mean(np.abs(s * calc / exp - 1))
        loo = []
        for i in range(len(rows)):
            m = np.arange(len(rows)) != i
            si = float(exp[m] @ calc[m] / (calc[m] @ calc[m]))
            loo.append(abs(si * calc[i] / exp[i] - 1))
        print(
            f"{cm:9s} n={len(rows)}  raw MARE {100 * raw:5.1f} %  mean calc/exp "
            f"{np.mean(calc / exp):.3f}  LS scale {s:.3f} -> MARE {100 * ins:5.1f} % "
            f"(leave-one-out {100 * np.mean(loo):5.1f} %)"
        )


ORGANIC = ("aliphatic", "aromatic", "halogenated", "nos")


def per_class() -> None:
    rows = []
    for r in _rows("polarizabilities.csv"):
        mol = chem.parse_smiles(r["smiles"])
        vals = dict(zip(SCHEME_KEYS, chem.fast_estimates(mol)[3:7], strict=True))
        rows.append((chem.structure_class(mol), float(r["alpha_A3"]), vals))
    stats = chem.alpha_class_stats(rows)
    best = chem.choose_class_schemes(stats)
    print("class        n  " + "  ".join(f"{k:>13s}" for k in SCHEME_KEYS) + "   (MARE / RMS, %)")
    for cls, per in stats.items():
        cells = "  ".join(
            f"{100 * per[k].mare:5.2f} / {100 * per[k].rms_rel:5.2f}" for k in SCHEME_KEYS
        )
        print(f"{cls:11s} {per['ahc'].n:2d}  {cells}   default {best[cls]}")
    org = [x for x in rows if x[0] in ORGANIC]
    ins = np.mean([abs(v[best[c]] / a - 1) for c, a, v in org])
    loo = []
    for j, (c, a, v) in enumerate(org):
        rest = [x for i, x in enumerate(org) if i != j and x[0] == c]
        loo.append(abs(v[chem.choose_class_schemes(chem.alpha_class_stats(rest))[c]] / a - 1))
    print(f"per-class default on {len(org)} organic rows: MARE {100 * ins:.2f} % in-sample, "
          f"{100 * np.mean(loo):.2f} % leave-one-out")  # fmt: skip


def cccbdb_dipoles(n_conformers: int = 10) -> None:
    from polarbeam.chemistry.refdata import cccbdb_dipoles as table

    allowed = {1, 6, 7, 8, 9, 15, 16, 17, 35, 53}
    pairs = []
    for r in table():
        if r.dipole_D <= 0.5 or "." in r.smiles:
            continue
        mol = chem.parse_smiles(r.smiles)
        if Chem.GetFormalCharge(mol) or any(a.GetNumRadicalElectrons() for a in mol.GetAtoms()):
            continue
        elements = {a.GetAtomicNum() for a in Chem.AddHs(mol).GetAtoms()}
        if not elements <= allowed or len(elements) < 2:
            continue
        mu = chem.conformer_ensemble(mol, r.name, n_conformers=n_conformers).rms_dipole_D(300.0)
        pairs.append((chem.structure_class(mol), r.dipole_D, mu, r.name))
    print("CCCBDB dipoles > 0.5 D (chemicals.dipole), scaled MMFF94 conformer estimate at 300 K")
    for cls in (*ORGANIC, "inorganic"):
        sub = [(e, c) for k, e, c, _ in pairs if k == cls]
        f = chem.dipole_factor_from_pairs(sub)
        mare = np.mean([abs(c / e - 1) for e, c in sub])
        print(f"{cls:11s} n={len(sub):3d}  MARE {100 * mare:5.1f} %  factor f = {f:.3f}")
    org = [p for p in pairs if p[0] in ORGANIC]
    cover = np.mean([abs(e - c) < chem.dipole_error_D(c, k) for k, e, c, _ in org])
    mare = np.mean([abs(c / e - 1) for _, e, c, _ in org])
    print(f"organics n={len(org)}: MARE {100 * mare:.1f} %, fraction inside 1σ {cover:.3f}")
    fold = [zlib.crc32(p[3].encode()) % 2 for p in org]
    for k in (0, 1):
        fit = {
            c: chem.dipole_factor_from_pairs(
                [(e, m) for (c0, e, m, _), f in zip(org, fold, strict=True) if f == k and c0 == c]
            )
            for c in ORGANIC
        }
        test = [(c, e, m) for (c, e, m, _), f in zip(org, fold, strict=True) if f != k]
        cov = np.mean([abs(e - m) < fit[c] * max(m, 0.5) for c, e, m in test])
        print(f"  fitted on half {k}: coverage on the other half {cov:.3f}")


if __name__ == "__main__":
    polarizabilities()
    print()
    dipoles()
    print()
    per_class()
    print()
    cccbdb_dipoles()
