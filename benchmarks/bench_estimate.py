"""Benchmark: additive polarizability estimates over 10,000 generated SMILES.

Run on demand (not part of the test suite)::

    PYTHONPATH=src python benchmarks/bench_estimate.py [N]

Prints the wall time of :func:`polarbeam.chemistry.estimate_table` (CSV in, CSV out, no
conformers) and of the in-memory hot path, each as a ratio to RDKit's own ``Crippen.MolMR``
timed over the same molecules in the same run.  Two baselines are timed: parse SMILES +
``Crippen.MolMR`` (the like-for-like one: both start from SMILES text), and ``Crippen.MolMR`` alone
on molecules parsed beforehand.  Target: estimate_table <= 3x the parse + MolMR baseline.
"""

from __future__ import annotations

import csv
import random
import sys
import tempfile
import time
from pathlib import Path

from rdkit import Chem, rdBase
from rdkit.Chem import Crippen

from polarbeam.chemistry import estimate_table, fast_estimates

# Fragments combined into R1-L-R2(-S) molecules.  Plain organic building blocks.
_R = [
    "C",
    "CC",
    "CCC",
    "CC(C)",
    "CCCC",
    "CC(C)(C)",
    "C1CC1",
    "C1CCCC1",
    "C1CCCCC1",
    "c1ccccc1",
    "c1ccc(C)cc1",
    "c1ccc(Cl)cc1",
    "c1ccc(F)cc1",
    "c1ccc(Br)cc1",
    "c1ccncc1",
    "c1ccoc1",
    "c1ccsc1",
    "c1ccc2ccccc2c1",
    "c1cc[nH]c1",
    "C=C",
    "C#C",
    "CC=C",
    "C(F)(F)F",
    "CCl",
    "CI",
    "COC",
    "CCOC",
    "c1cnccn1",
    "C1CCOC1",
    "C1CCNCC1",
]
_L = [
    "",
    "O",
    "S",
    "N",
    "N(C)",
    "C(=O)",
    "C(=O)O",
    "OC(=O)",
    "C(=O)N",
    "NC(=O)",
    "C=C",
    "C#C",
    "CC",
    "S(=O)(=O)",
    "C(=O)C",
    "OCCO",
]
_S = ["", "", "", "O", "Cl", "F", "C#N", "[N+](=O)[O-]", "C(=O)C", "OC"]

_BANNED = [
    Chem.MolFromSmarts("[NX3][CX4][CX3](=O)[OX2H1,OX1-]"),  # alpha-amino acid motif
    Chem.MolFromSmiles("c1ccc2cc3ccccc3cc2c1"),  # linear three-ring acene core (excluded list)
]


def generate(n: int, seed: int = 12345) -> list[str]:
    """``n`` distinct, valid, canonical SMILES from fragment combinations (reproducible)."""
    rng = random.Random(seed)
    seen: set[str] = set()
    out: list[str] = []
    with rdBase.BlockLogs():
        while len(out) < n:
            r1, r2 = rng.choice(_R), rng.choice(_R)
            smi = r1 + rng.choice(_L) + r2 + rng.choice(_S)
            if rng.random() < 0.3:
                smi = rng.choice(_R) + rng.choice(_L) + smi
            mol = Chem.MolFromSmiles(smi)
            if mol is None:
                continue
            if any(mol.HasSubstructMatch(p) for p in _BANNED):
                continue
            can = Chem.MolToSmiles(mol)
            if can in seen:
                continue
            seen.add(can)
            out.append(can)
    return out


def main(n: int = 10_000) -> None:
    smiles = generate(n)
    with tempfile.TemporaryDirectory() as td:
        inp = Path(td) / "in.csv"
        with inp.open("w", newline="") as fh:
            w = csv.writer(fh)
            w.writerow(["compound", "smiles"])
            w.writerows((f"m{i}", s) for i, s in enumerate(smiles))

        # Baseline 1: parse + Crippen.MolMR.
        t0 = time.perf_counter()
        for s in smiles:
            Crippen.MolMR(Chem.MolFromSmiles(s))
        t_base = time.perf_counter() - t0

        # Baseline 2: Crippen.MolMR alone, molecules parsed beforehand (fresh, uncached).
        mols = [Chem.MolFromSmiles(s) for s in smiles]
        t0 = time.perf_counter()
        for m in mols:
            Crippen.MolMR(m)
        t_mr = time.perf_counter() - t0

        # polarbeam hot path in memory: parse + masses + 4 schemes + flags.
        t0 = time.perf_counter()
        for s in smiles:
            fast_estimates(Chem.MolFromSmiles(s))
        t_fast = time.perf_counter() - t0

        # polarbeam estimate_table: CSV in -> CSV out (atomic write).
        t0 = time.perf_counter()
        stats = estimate_table(inp, Path(td) / "out.csv")
        t_table = time.perf_counter() - t0

    print(f"molecules: {n}  (ok {stats['ok']}, failed {stats['failed']})")
    print(f"baseline parse + Crippen.MolMR      : {t_base:7.3f} s")
    print(f"baseline Crippen.MolMR (pre-parsed) : {t_mr:7.3f} s")
    print(
        f"polarbeam hot path (parse+estimate) : {t_fast:7.3f} s   "
        f"ratio {t_fast / t_base:5.2f}x vs parse+MolMR, {t_fast / t_mr:5.2f}x vs MolMR alone"
    )
    print(
        f"polarbeam estimate_table (CSV->CSV) : {t_table:7.3f} s   "
        f"ratio {t_table / t_base:5.2f}x vs parse+MolMR, {t_table / t_mr:5.2f}x vs MolMR alone"
    )
    verdict = "met" if t_table <= 3 * t_base else "NOT met"
    print(f"target: estimate_table <= 3x parse+MolMR: {verdict}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 10_000)
