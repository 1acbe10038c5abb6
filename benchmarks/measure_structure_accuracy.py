"""Measure the structure-stage schemes against reference_values/ (run on demand).

    PYTHONPATH=src python benchmarks/measure_structure_accuracy.py

Prints the per-molecule table and, for each polarizability scheme, the mean absolute relative
error (MARE) on the organic rows of reference_values/polarizabilities.csv; then, for the dipoles
of the rigid rows of reference_values/dipoles.csv, the MARE of each charge model raw and with a
least-squares scale factor (in-sample and leave-one-out).  These are the numbers quoted in
docs/structure.md and in the comments of tests/chemistry/test_chemistry_additive.py and
tests/chemistry/test_chemistry_conformers.py.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

from polarbeam import chemistry as chem

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


if __name__ == "__main__":
    polarizabilities()
    print()
    dipoles()
