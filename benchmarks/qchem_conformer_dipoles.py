"""Benchmark: conformer-averaged quantum-chemistry dipoles against NIST CCCBDB (run on demand).

    OMP_NUM_THREADS=1 PYTHONPATH=src python benchmarks/qchem_conformer_dipoles.py [method basis]

For 26 small molecules of the CCCBDB experimental dipole table (read from the ``chemicals``
package at run time: ``chemicals.dipole``, method "CCCBDB"), runs
``polarbeam.chemistry.qchem.compute_conformer_dipoles`` (default B3LYP/def2-SVPD, 10 ETKDG
embeddings, distinct MMFF94 minima within 3 kcal/mol, one SCF each, cached) and prints per
molecule the experimental dipole, sqrt⟨μ²⟩ at 300 K, the relative error, the number of conformers
and the time; then the mean absolute relative error (MARE), its median and the same numbers for
the force-field estimate (scaled MMFF94 charges) on the same molecules.  These are the figures
of docs/structure.md ("Quantum-chemistry dipoles").  Needs polarbeam[qc] and chemicals.
"""

from __future__ import annotations

import sys
import time

import numpy as np

from polarbeam.chemistry import conformer_ensemble
from polarbeam.chemistry.qchem import compute_conformer_dipoles
from polarbeam.chemistry.refdata import cas_for_smiles, cccbdb_dipoles

#: Small molecules (≤ 4 heavy atoms, H C N O F Cl S), rigid and flexible, all in CCCBDB.
MOLECULES = [
    ("water", "O"),
    ("ammonia", "N"),
    ("hydrogen cyanide", "C#N"),
    ("formaldehyde", "C=O"),
    ("acetaldehyde", "CC=O"),
    ("propanal", "CCC=O"),
    ("acetone", "CC(C)=O"),
    ("acetonitrile", "CC#N"),
    ("propyne", "CC#C"),
    ("methanol", "CO"),
    ("ethanol", "CCO"),
    ("dimethyl ether", "COC"),
    ("methylamine", "CN"),
    ("formic acid", "OC=O"),
    ("acetic acid", "CC(=O)O"),
    ("methyl formate", "COC=O"),
    ("formamide", "NC=O"),
    ("ethylene oxide", "C1CO1"),
    ("nitromethane", "C[N+](=O)[O-]"),
    ("methanethiol", "CS"),
    ("fluoromethane", "CF"),
    ("fluoroethane", "CCF"),
    ("chloromethane", "CCl"),
    ("dichloromethane", "ClCCl"),
    ("chloroform", "ClC(Cl)Cl"),
    ("furan", "c1ccoc1"),
]


def main(method: str = "b3lyp", basis: str = "def2-svpd", n_conformers: int = 10) -> None:
    table = {r.cas: r.dipole_D for r in cccbdb_dipoles()}
    print(f"method {method}/{basis}, {n_conformers} embeddings, 300 K, SCF energies")
    print(f"{'compound':18s} {'exp':>6s} {'qc':>6s} {'err':>7s} {'ff':>6s} {'n':>2s} {'s':>6s}")
    rel_qc, rel_ff = [], []
    t_all = time.perf_counter()
    for name, smiles in MOLECULES:
        cas = cas_for_smiles(smiles)
        if cas is None:
            print(f"{name:18s} not in CCCBDB, skipped")
            continue
        exp = table[cas]
        t0 = time.perf_counter()
        r = compute_conformer_dipoles(smiles, method, basis, n_conformers=n_conformers, name=name)
        mu = r.rms_dipole_D(300.0)
        ff = conformer_ensemble(smiles, name, n_conformers=n_conformers).rms_dipole_D(300.0)
        rel_qc.append(mu / exp - 1)
        rel_ff.append(ff / exp - 1)
        print(
            f"{name:18s} {exp:6.2f} {mu:6.2f} {100 * rel_qc[-1]:+6.1f}% {ff:6.2f} "
            f"{len(r.dipoles_D):2d} {time.perf_counter() - t0:6.1f}"
        )
    a, b = np.abs(rel_qc), np.abs(rel_ff)
    print(f"\nn = {a.size} molecules, {time.perf_counter() - t_all:.0f} s")
    print(f"quantum chemistry : MARE {100 * a.mean():.1f} %  median {100 * np.median(a):.1f} %")
    print(f"  mean signed {100 * np.mean(rel_qc):+.1f} %  max {100 * a.max():.1f} %")
    print(f"force field (MMFF): MARE {100 * b.mean():.1f} %  median {100 * np.median(b):.1f} %")


if __name__ == "__main__":
    args = sys.argv[1:]
    main(*args[:2]) if len(args) >= 2 else main()
